/**
 * What the analysis cannot judge yet about a component, and what it needs (first-day behaviour): per measurand,
 * how far its own baseline, the group baseline, the comparison with peers and the population band of its latest
 * sample are from being usable, and what the samples or the configuration lack for a rule to judge at all (oil
 * hours for the population bands, a new-oil value for TBN, TAN and viscosity, a cleanliness target for the ISO 4406
 * code). Measurands the component's samples never carried are left out (the ISO 4406 code counts as carried where it
 * can be worked out from the particle counts, as the cleanliness rule does): nothing is judged on them, and listing
 * every metal a lab does not report would bury the gaps that matter. Pure: from the fold's state, the settings, the
 * group statistics at the latest sample and the samples.
 */
import type { Sample } from '../domain/event.ts';
import type { Measurand } from '../domain/measurands.ts';
import type { ComponentSettings } from '../domain/settings.ts';
import type { AnalysisState } from './fold/analysisFold.ts';
import { MIN_GROUP_COMPONENTS } from './fold/analysisFold.ts';
import type { GroupStats } from './model.ts';
import { sampleIso4406Code } from './iso4406.ts';
import { bandFor, populationMeasurands } from './populationStats.ts';

export interface Progress {
  readonly have: number;
  readonly need: number;
}

/** What the samples or the configuration lack for a rule to judge the measurand at all. */
export type ReadinessNeed = 'oil hours' | 'oil or unit hours' | 'new-oil value' | 'cleanliness target';

export interface MeasurandReadiness {
  readonly measurand: Measurand;
  /** Detection measurands: stable intervals of the component's own baseline (in its current life). */
  readonly ownBaseline?: Progress;
  /** Detection measurands: other components of the group with a complete own baseline, for the group baseline. */
  readonly groupBaseline?: Progress;
  /**
   * Detection measurands, for the comparison with peers: `have` other components with a complete own baseline;
   * `measurable` how many of them wear measurably (a learnt rate above zero), the ones the comparison is made with:
   * it needs `need` of those; `others` how many other components the group holds at all (when known), so that a group
   * too small ever to reach `need` says so.
   */
  readonly peers?: Progress & { readonly measurable: number; readonly others?: number };
  /** Population measurands: results in the oil-hours band of the latest sample (other units, as of its sampling time). */
  readonly band?: Progress & { readonly name: string };
  /** Change detection judges against: the component's own baseline, its group's, or nothing yet. */
  readonly changeDetection?: 'own baseline' | 'group baseline' | 'waiting';
  /** What a rule needs before it can judge the measurand at all (see ReadinessNeed); absent when nothing is lacking. */
  readonly needs?: readonly ReadinessNeed[];
  /** One sentence: what is judged and what is still missing. */
  readonly summary: string;
}

/**
 * The oil-condition measurands the condition rule judges against the group's new-oil value only (rules/condition.ts:
 * TBN and viscosity need a value above zero, TAN any value); without one they stay silent.
 */
const NEW_OIL_MEASURANDS = ['tbn', 'tan', 'v40', 'v100'] as const satisfies readonly Measurand[];

function hasNewOilValue(m: (typeof NEW_OIL_MEASURANDS)[number], settings: ComponentSettings): boolean {
  const value = settings.newOil[m];
  return m === 'tan' ? value !== undefined : value !== undefined && value > 0;
}

/**
 * @param samples the component's samples in time order as the view holds them (a long history: its latest ones), the
 *   last being the latest sample; a wear metal read before them is still known from the fold's state.
 * @param others how many other components the group holds now (GroupLedger `othersIn`); undefined when not known.
 */
export function readinessOf(state: AnalysisState, settings: ComponentSettings, group: GroupStats | undefined, samples: readonly Sample[], others?: number): MeasurandReadiness[] {
  const out: MeasurandReadiness[] = [];
  const latest = samples.at(-1);
  const detection = settings.detection;
  const detecting = detection.ewma.enabled || detection.cusum.enabled;
  const population = new Set(populationMeasurands(settings.population));
  const read = new Set<Measurand>(Object.keys(state.wear) as Measurand[]);
  for (const s of samples) for (const m of Object.keys(s.readings) as Measurand[]) read.add(m);
  // The cleanliness rule judges the lab's code, else the code of the particle counts (p6 and p14).
  if (samples.some((s) => sampleIso4406Code(s) !== undefined)) read.add('iso4406');
  const candidates = new Set<Measurand>([...(detecting ? detection.measurands : []), ...population, ...NEW_OIL_MEASURANDS, 'iso4406']);
  for (const m of candidates) {
    if (!read.has(m)) continue;
    const parts: string[] = [];
    const needs: ReadinessNeed[] = [];
    let own: Progress | undefined;
    let groupBaseline: Progress | undefined;
    let peers: MeasurandReadiness['peers'];
    let changeDetection: MeasurandReadiness['changeDetection'];
    if (detecting && detection.measurands.includes(m)) {
      const track = state.change[m];
      const complete = track?.own.completedAt !== undefined;
      own = { have: complete ? detection.baselineIntervals : (track?.own.sums.intervals ?? 0), need: detection.baselineIntervals };
      const components = group?.baselines[m]?.components ?? 0;
      groupBaseline = { have: Math.min(components, MIN_GROUP_COMPONENTS), need: MIN_GROUP_COMPONENTS };
      // A life a responder's word on a usual rate restarted waits for its own new baseline (changeTrack.ts restartChange).
      const restarted = track?.restartedAt;
      changeDetection = complete ? 'own baseline' : restarted === undefined && components >= MIN_GROUP_COMPONENTS ? 'group baseline' : 'waiting';
      if (settings.population.peers.enabled) {
        const need = settings.population.peers.minComponents;
        // Only peers whose learnt rate is above zero are compared (on a log scale): a metal the group's units hardly
        // shed leaves fewer of them than have a baseline.
        const measurable = group?.baselines[m]?.peers?.components ?? 0;
        peers = { have: Math.min(components, need), need, measurable: Math.min(measurable, components), ...(others !== undefined && { others }) };
      }
      parts.push(
        changeDetection === 'own baseline'
          ? 'change detection against its own baseline'
          : changeDetection === 'group baseline'
            ? `change detection against the group baseline (own baseline ${own.have} of ${own.need} intervals)`
            : restarted !== undefined
              ? `change detection waits: own baseline ${own.have} of ${own.need} intervals, learnt again since the word at sample ${restarted.sampleId} that its rate there is usual`
              : `change detection waits: own baseline ${own.have} of ${own.need} intervals, group baseline ${groupBaseline.have} of ${groupBaseline.need} components${others !== undefined && others < groupBaseline.need ? ` (${holds(settings.group, others)})` : ''}`,
      );
      if (latest !== undefined && latest.oilHours === undefined && latest.unitHours === undefined) {
        needs.push('oil or unit hours');
        parts.push('no wear rate at the latest sample: it needs oil hours or unit hours');
      }
      if (peers !== undefined && peers.have < peers.need)
        parts.push(
          others !== undefined && others < peers.need
            ? `comparison with peers: not made, ${holds(settings.group, others)} and it needs ${peers.need} with a complete own baseline; it waits for more units in the group (population.peers.minComponents)`
            : `comparison with peers ${peers.have} of ${peers.need} components`,
        );
      else if (peers !== undefined && peers.measurable < peers.need)
        parts.push(`comparison with peers: ${peers.measurable} of the ${components} other components with a baseline wear measurably (rate above zero), it needs ${peers.need}`);
    }
    let band: MeasurandReadiness['band'];
    if (population.has(m) && latest !== undefined) {
      const minResults = settings.population.minResults;
      if (latest.oilHours === undefined) {
        needs.push('oil hours');
        parts.push('population limits need oil hours (the latest sample has none)');
      } else {
        const edges = [...settings.population.bandHours].sort((a, b) => a - b);
        const i = edges.findLastIndex((e) => latest.oilHours! >= e);
        if (i < 0) parts.push(`population limits: no oil-hours band holds the latest sample's ${latest.oilHours} h (the first starts at ${edges[0]} h)`);
        else {
          const to = edges[i + 1];
          const name = to === undefined ? `from ${edges[i]} h` : `${edges[i]}–${to} h`;
          const stats = group?.bands[m] ? bandFor(group.bands[m]!, latest.oilHours) : undefined;
          const n = stats?.n ?? 0;
          band = { name, have: Math.min(n, minResults), need: minResults };
          if (n < minResults) parts.push(`population limits: band ${name} ${n} of ${minResults} results`);
        }
      }
    }
    if ((NEW_OIL_MEASURANDS as readonly Measurand[]).includes(m) && !hasNewOilValue(m as (typeof NEW_OIL_MEASURANDS)[number], settings)) {
      needs.push('new-oil value');
      parts.push(`not judged: needs a new-oil value (set newOil.${m} for group ${settings.group}, or under defaults)`);
    }
    // The cleanliness rule compares the code with the group's target only: without one it stays silent.
    if (m === 'iso4406' && settings.cleanlinessTarget === undefined) {
      needs.push('cleanliness target');
      parts.push(`not judged: needs a cleanliness target (set cleanliness.target for group ${settings.group}, or under defaults)`);
    }
    out.push({
      measurand: m,
      ...(own && { ownBaseline: own }),
      ...(groupBaseline && { groupBaseline }),
      ...(peers && { peers }),
      ...(band && { band }),
      ...(changeDetection && { changeDetection }),
      ...(needs.length > 0 && { needs }),
      summary: `${m}: ${parts.length === 0 ? 'judged by every rule that applies to it' : parts.join('; ')}.`,
    });
  }
  return out;
}

/** "group X holds 3 other components so far". */
function holds(group: string, others: number): string {
  return `group ${group} holds ${others === 0 ? 'no' : `only ${others}`} other component${others === 1 ? '' : 's'} so far`;
}

/**
 * The lines of several measurands, those that say the same merged ("Fe, Cu, Al: …") in the order of the first, so
 * that a gap of the whole component (a group too small for the comparison with peers) reads once. The board merges
 * its lines the same way (src/board/componentPage.js).
 */
export function sharedReadinessLines(rows: readonly Pick<MeasurandReadiness, 'measurand' | 'summary'>[]): string[] {
  const byText = new Map<string, Measurand[]>();
  for (const r of rows) {
    const lead = `${r.measurand}: `;
    const rest = r.summary.startsWith(lead) ? r.summary.slice(lead.length) : r.summary;
    byText.set(rest, [...(byText.get(rest) ?? []), r.measurand]);
  }
  return [...byText].map(([rest, measurands]) => `${measurands.join(', ')}: ${rest}`);
}

/** Whether a rule cannot judge the measurand yet: change detection waits, its population band is short, or a rule lacks what it needs. */
export function notJudgedYet(r: MeasurandReadiness): boolean {
  return r.changeDetection === 'waiting' || (r.band !== undefined && r.band.have < r.band.need) || (r.needs?.length ?? 0) > 0;
}
