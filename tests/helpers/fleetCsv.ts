/**
 * An invented fleet for intake and replay tests: a few sewage-lift pump sets with gearboxes, simulated with
 * the documented noise model (src/simulation/wearSeries.ts), one of them with a doubling of its iron wear
 * rate part-way through. Written as time-ordered events and as the CSV an import reads.
 */
import { seededRandom } from '../../src/simulation/random.ts';
import { simulateWearSeries } from '../../src/simulation/wearSeries.ts';
import type { ResultEvent } from '../../src/domain/event.ts';

export interface FleetOptions {
  units?: number;
  samplesPerUnit?: number;
  seed?: number;
}

export const FLEET_CONFIG = `
detection:
  measurands: [Fe, Cu]
  runningInHours: 0
  baselineIntervals: 6
groups:
  - name: lift-gearboxes
    match: { component: gearbox, unit: "^LS" }
    sumpLitres: 40
    residualFraction: 0.1
    limits:
      Fe: { caution: 45, alarm: 70 }
      Si: { caution: 15, alarm: 25 }
`;

export function inventedFleet(options: FleetOptions = {}): ResultEvent[] {
  const units = options.units ?? 4;
  const samples = options.samplesPerUnit ?? 24;
  const rng = seededRandom(options.seed ?? 20260301);
  const all: ResultEvent[] = [];
  for (let u = 0; u < units; u++) {
    const unit = `LS${u + 1}-Marsh Lane`;
    const series = simulateWearSeries(
      {
        unit,
        component: 'gearbox',
        samples,
        metals: {
          Fe: { rate: 0.05, processVariance: 0.02, ...(u === 1 && { step: { atHours: 3500, factor: 3 } }) },
          Cu: { rate: 0.01, processVariance: 0.004 },
        },
        labNoise: { absolute: 1, relative: 0.05 },
        intervalHours: 250,
        jitter: 0.3,
        drainHours: 1000,
        residualFraction: 0.1,
        sumpLitres: 40,
        topUpPer100h: 0.4,
        startTime: Date.parse('2024-02-01T06:00:00Z') + u * 3_600_000,
        decimals: 1,
        sampleIdPrefix: `MLAB-${u + 1}`,
        extraReadings: (ctx, r) => ({ Si: ctx.index === 9 && u === 2 ? 31 : Math.round(4 + 2 * r.next()), v100: Math.round((13.5 + r.normal() * 0.2) * 100) / 100 }),
      },
      rng,
    );
    all.push(...series.map((s) => s.event));
  }
  return all.sort((a, b) => Date.parse(a.sampledAt) - Date.parse(b.sampledAt) || (a.sampleId < b.sampleId ? -1 : 1));
}

const EVENT_COLUMNS = ['sampleId', 'revision', 'unit', 'component', 'group', 'sampledAt', 'unitHours', 'oilHours', 'oilChanged', 'componentChanged', 'topUpLitres', 'lab'] as const;

/** CSV with the event field names as columns and one column per measurand; an empty cell is no reading. */
export function fleetCsv(events: readonly ResultEvent[]): string {
  const measurands = [...new Set(events.flatMap((e) => Object.keys(e.readings)))].sort();
  const fields = EVENT_COLUMNS.filter((c) => events.some((e) => e[c] !== undefined));
  const header = [...fields, ...measurands];
  const cell = (v: unknown) => {
    if (v === undefined) return '';
    const s = String(v);
    return /[",\n]/.test(s) ? `"${s.replaceAll('"', '""')}"` : s;
  };
  const rows = events.map((e) => [...fields.map((f) => cell(e[f])), ...measurands.map((m) => cell(e.readings[m]))].join(','));
  return `${header.join(',')}\n${rows.join('\n')}\n`;
}
