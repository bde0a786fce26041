/**
 * `wearshift replay` on an invented history (the documented noise model, tests/helpers/wearFleet.ts): the open
 * incidents come with the time-to-limit forecasts of their evidence, in the JSON verdict lines and in the readable
 * output beside the caution that a forecast assumes the present trend continues.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { ADVISORY_CAUTION, FORECAST_CAUTION } from '../../src/domain/caution.ts';
import { timeZoneNote } from '../../src/notify/format.ts';
import type { LimitForecast } from '../../src/analysis/forecast/model.ts';
import { seededRandom } from '../../src/simulation/random.ts';
import { simulateWearSeries } from '../../src/simulation/wearSeries.ts';
import { runCli } from '../helpers/cli.ts';
import { IN_CONTROL, steppedFe } from '../helpers/wearFleet.ts';

const dir = mkdtempSync(join(tmpdir(), 'wearshift-forecast-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const CONFIG = `
detection:
  measurands: [Fe]
  labNoise: { absolute: 1, relative: 0.05 }
  runningInHours: 0
  budget: { sampleIntervalHours: 120 }
groups:
  - name: sim-gearboxes
    sumpLitres: 200
    residualFraction: 0.1
    chargeHours: 1000
    limits: { Fe: { caution: 40, alarm: 60 } }
`;

describe('wearshift replay with forecasts', () => {
  it('prints and emits the forecasts of each open incident', async () => {
    const lines: string[] = [];
    for (let i = 0; i < 3; i++) {
      const sims = simulateWearSeries({ unit: `HT-${i + 1}`, component: 'gearbox', ...IN_CONTROL, intervalHours: 120, metals: i === 0 ? steppedFe(2500, 3) : IN_CONTROL.metals, samples: 34 }, seededRandom(11 + i));
      for (const s of sims) lines.push(JSON.stringify(s.event));
    }
    const file = join(dir, 'history.jsonl');
    const config = join(dir, 'config.yaml');
    writeFileSync(file, `${lines.join('\n')}\n`);
    writeFileSync(config, CONFIG);
    const json = await runCli(['replay', file, '--config', config, '--now', '2026-01-01T00:00:00Z', '--json'], {}, 300_000);
    expect(json.code).toBe(0);
    const verdicts = json.stdout
      .trim()
      .split('\n')
      .map((l) => JSON.parse(l) as { type: string; closed: string | null; forecast?: LimitForecast[]; evidence: string[] })
      .filter((l) => l.type === 'verdict' && l.closed === null);
    expect(verdicts.length).toBeGreaterThan(0);
    const forecasts = verdicts.flatMap((v) => v.forecast ?? []);
    expect(forecasts.length).toBeGreaterThan(0);
    for (const f of forecasts) {
      expect(['crossing', 'after-oil-change', 'not-enough-history']).toContain(f.outcome);
      if (f.outcome === 'crossing') {
        expect(f.central!.hoursFromNow).toBeGreaterThan(0);
        expect(f.text).toMatch(/^At the present trend, Fe (reaches|falls to) the (caution|alarm) level/);
      }
      if (f.outcome === 'not-enough-history') expect(f.text).toMatch(/not enough history to forecast \(.+\)\.$/);
    }
    const readable = await runCli(['replay', file, '--config', config, '--now', '2026-01-01T00:00:00Z'], {}, 300_000);
    expect(readable.code).toBe(0);
    for (const f of forecasts) expect(readable.stdout).toContain(f.text);
    expect(readable.stdout).toContain(FORECAST_CAUTION);
    // The one time format (ISO 8601 to the minute, the zone written: UTC by default) and the caution, once, at the end.
    expect(readable.stdout).toMatch(/^\d{4}-\d\d-\d\dT\d\d:\d\dZ {2}/m);
    expect(readable.stdout).not.toMatch(/T\d\d:\d\d:\d\d/);
    expect(readable.stdout.trimEnd().split('\n').slice(-2)).toEqual([timeZoneNote(), ADVISORY_CAUTION]);
  });
});
