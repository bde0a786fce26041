/**
 * What the analysis cannot judge yet about a component, and what it needs (first-day behaviour): per measurand,
 * how far its own baseline, the group baseline, the comparison with peers and the population band of its latest
 * sample are from being usable. Pure: from the fold's state, the settings and the group statistics at the latest
 * sample.
 */
import type { Sample } from '../domain/event.ts';
import type { Measurand } from '../domain/measurands.ts';
import type { ComponentSettings } from '../domain/settings.ts';
import type { AnalysisState } from './fold/analysisFold.ts';
import { MIN_GROUP_COMPONENTS } from './fold/analysisFold.ts';
import type { GroupStats } from './model.ts';
import { bandFor, populationMeasurands } from './populationStats.ts';

export interface Progress {
  readonly have: number;
  readonly need: number;
}

export interface MeasurandReadiness {
  readonly measurand: Measurand;
  /** Detection measurands: stable intervals of the component's own baseline (in its current life). */
  readonly ownBaseline?: Progress;
  /** Detection measurands: other components of the group with a complete own baseline, for the group baseline. */
  readonly groupBaseline?: Progress;
  /** Detection measurands: other components with a complete own baseline, for the comparison with peers. */
  readonly peers?: Progress;
  /** Population measurands: results in the oil-hours band of the latest sample (other units, as of its sampling time). */
  readonly band?: Progress & { readonly name: string };
  /** Change detection judges against: the component's own baseline, its group's, or nothing yet. */
  readonly changeDetection?: 'own baseline' | 'group baseline' | 'waiting';
  /** One sentence: what is judged and what is still missing. */
  readonly summary: string;
}

export function readinessOf(state: AnalysisState, settings: ComponentSettings, group: GroupStats | undefined, latest: Sample | undefined): MeasurandReadiness[] {
  const out: MeasurandReadiness[] = [];
  const detection = settings.detection;
  const detecting = detection.ewma.enabled || detection.cusum.enabled;
  const population = new Set(populationMeasurands(settings.population));
  const measurands = [...new Set<Measurand>([...(detecting ? detection.measurands : []), ...population])];
  for (const m of measurands) {
    const parts: string[] = [];
    let own: Progress | undefined;
    let groupBaseline: Progress | undefined;
    let peers: Progress | undefined;
    let changeDetection: MeasurandReadiness['changeDetection'];
    if (detecting && detection.measurands.includes(m)) {
      const track = state.change[m];
      const complete = track?.own.completedAt !== undefined;
      own = { have: complete ? detection.baselineIntervals : (track?.own.sums.intervals ?? 0), need: detection.baselineIntervals };
      const components = group?.baselines[m]?.components ?? 0;
      groupBaseline = { have: Math.min(components, MIN_GROUP_COMPONENTS), need: MIN_GROUP_COMPONENTS };
      changeDetection = complete ? 'own baseline' : components >= MIN_GROUP_COMPONENTS ? 'group baseline' : 'waiting';
      if (settings.population.peers.enabled) {
        const need = settings.population.peers.minComponents;
        peers = { have: Math.min(group?.baselines[m]?.peers?.components ?? 0, need), need };
      }
      parts.push(
        changeDetection === 'own baseline'
          ? 'change detection against its own baseline'
          : changeDetection === 'group baseline'
            ? `change detection against the group baseline (own baseline ${own.have} of ${own.need} intervals)`
            : `change detection waits: own baseline ${own.have} of ${own.need} intervals, group baseline ${groupBaseline.have} of ${groupBaseline.need} components`,
      );
      if (peers !== undefined && peers.have < peers.need) parts.push(`comparison with peers ${peers.have} of ${peers.need} components`);
    }
    let band: MeasurandReadiness['band'];
    if (population.has(m) && latest?.oilHours !== undefined) {
      const b = group?.bands[m] ? bandFor(group.bands[m]!, latest.oilHours) : undefined;
      if (b !== undefined) {
        const name = b.toHours === null ? `from ${b.fromHours} h` : `${b.fromHours}–${b.toHours} h`;
        band = { name, have: Math.min(b.n, settings.population.minResults), need: settings.population.minResults };
        if (b.n < settings.population.minResults) parts.push(`population limits: band ${name} ${b.n} of ${settings.population.minResults} results`);
      }
    }
    out.push({
      measurand: m,
      ...(own && { ownBaseline: own }),
      ...(groupBaseline && { groupBaseline }),
      ...(peers && { peers }),
      ...(band && { band }),
      ...(changeDetection && { changeDetection }),
      summary: `${m}: ${parts.length === 0 ? 'judged by every rule' : parts.join('; ')}.`,
    });
  }
  return out;
}
