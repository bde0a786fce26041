/**
 * The invented fleet of the tests of several worker processes judging one import: ten lift gearboxes (seed 7), thirty
 * results each, in one group whose population limits open incidents and are trusted early (12 results per band), so
 * that what the group's statistics hold as of each month decides incidents; and the incidents `wearshift replay --json`
 * finds in it, which every way of judging the same results must end with.
 */
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { expect } from 'vitest';
import { runCli } from './cli.ts';
import type { ResultEvent } from '../../src/domain/event.ts';
import { fleetCsv, inventedFleet } from './fleetCsv.ts';
import { replayVerdictRows, type VerdictRow } from './incidentVerdict.ts';

export const POPULATION_FLEET = { units: 10, samplesPerUnit: 30, seed: 7 } as const;
export const POPULATION_FLEET_RESULTS = POPULATION_FLEET.units * POPULATION_FLEET.samplesPerUnit;

/**
 * The judging part of the configuration (YAML, no `redis` section): iron and copper watched from the first hour, the
 * group's population statistics trusted at 12 results per band (opening incidents when `opens`), nothing quiet, and
 * the lift gearboxes' group with its site limits.
 */
export function liftGearboxJudging(opens: boolean): string {
  return `
detection: { measurands: [Fe, Cu], runningInHours: 0, baselineIntervals: 6 }
population: { minResults: 12, bandHours: [0, 500], ${opens ? 'opensIncidents: true, ' : ''}peers: { minComponents: 3 } }
backfill: { quietAfterDays: 100000 }
groups:
  - name: lift-gearboxes
    match: { component: gearbox, unit: "^LS" }
    sumpLitres: 40
    limits: { Fe: { caution: 45, alarm: 70 }, Si: { caution: 15, alarm: 25 } }
`;
}

/** The configuration (YAML) under `prefix`, in `partitions` key partitions (default 1), population limits opening incidents. */
export function populationConfig(prefix: string, partitions = 1): string {
  return `redis: { prefix: "${prefix}", partitions: ${partitions} }${liftGearboxJudging(true)}`;
}

/** Writes the fleet's file in `dir` and replays it on the Redis at `redisUrl`: the file and replay's incidents. */
export async function populationFleetReplayed(dir: string, redisUrl: string): Promise<{ file: string; verdicts: VerdictRow[] }> {
  return replayedFile(dir, redisUrl, 'fleet.csv', inventedFleet(POPULATION_FLEET));
}

/** Results in the file of `twoGroupFleetReplayed`. */
export const TWO_GROUP_FLEET_RESULTS = 2 * POPULATION_FLEET_RESULTS;

/**
 * The fleet and a second group of the same results (units "MX…" instead of "LS…": no rule of the configuration matches
 * them, so their group is the component's name, `gearbox`), whose results come three months behind the first group's
 * in the file: a process holds one group's earlier months while another holds the other group's later ones. Written in
 * `dir` and replayed as `populationFleetReplayed` does.
 */
export async function twoGroupFleetReplayed(dir: string, redisUrl: string): Promise<{ file: string; verdicts: VerdictRow[] }> {
  const behind = (e: ResultEvent) => Date.parse(e.sampledAt) + (e.unit.startsWith('MX') ? 90 * 86_400_000 : 0);
  const events = inventedFleet(POPULATION_FLEET)
    .flatMap((e) => [e, { ...e, unit: e.unit.replace(/^LS/, 'MX'), sampleId: `MX-${e.sampleId}` }])
    .sort((x, y) => behind(x) - behind(y));
  return replayedFile(dir, redisUrl, 'two-groups.csv', events);
}

async function replayedFile(dir: string, redisUrl: string, name: string, events: readonly ResultEvent[]): Promise<{ file: string; verdicts: VerdictRow[] }> {
  const file = join(dir, name);
  writeFileSync(file, fleetCsv(events));
  const replayConfig = join(dir, 'replay.yaml');
  writeFileSync(replayConfig, populationConfig('{replay}'));
  const replayed = await runCli(['replay', file, '--config', replayConfig, '--json'], { REDIS_URL: redisUrl }, 300_000);
  expect(replayed.code).toBe(0);
  const verdicts = replayVerdictRows(replayed.stdout);
  expect(verdicts.length).toBeGreaterThan(2);
  return { file, verdicts };
}
