/**
 * What `wearshift backtest` and `wearshift replay` print for people, through the real command line: the backtest's
 * summary ends with the caution (and its --json carries it), says when the history is too short for a rate per 100
 * component-years instead of printing one; replay marks the findings that open nothing — advisory ones, and held
 * ones whose sample is in doubt — so that they do not read like incident findings; a file ordered unit by unit prints
 * each finding once, as in time order, a re-judged one marked revised in the text and the JSON alike; and both --help
 * texts say what --now decides.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { BacktestSummary } from '../../src/backtest/summary.ts';
import { ADVISORY_CAUTION } from '../../src/domain/caution.ts';
import { subjectOf } from '../../src/domain/finding.ts';
import { runCli, type CliResult } from '../helpers/cli.ts';

const DAY = 86_400_000;
const T0 = Date.parse('2025-01-06T08:00:00Z');

/**
 * Six pump gearboxes sampled every 14 days with iron near 20 ppm. P1's 11th sample has 60 ppm: far above the group's
 * population levels, a finding that opens nothing by default (advisory). P2's 11th sample has water above its caution
 * level but unit hours below the previous sample's: a sampling check puts the sample in doubt, so the water findings
 * are held.
 */
function fleet(order: 'time' | 'unit' = 'time'): string {
  const lines = [];
  for (const [u, unit] of ['P1', 'P2', 'P3', 'P4', 'P5', 'P6'].entries()) {
    for (let i = 0; i < 12; i++) {
      const fe = 20 + ((i * 7 + u * 3) % 5) - 2;
      let readings: Record<string, number> = { Fe: fe, water: 100 };
      let unitHours = 1000 + i * 250;
      if (unit === 'P1' && i === 10) readings = { Fe: 60, water: 100 };
      if (unit === 'P2' && i === 10) {
        readings = { Fe: fe, water: 800 };
        unitHours = 1000 + 5 * 250;
      }
      const sampledAt = new Date(T0 + i * 14 * DAY + u * 3_600_000).toISOString();
      lines.push({ sampleId: `${unit}-${String(i).padStart(2, '0')}`, unit, component: 'gearbox', sampledAt, unitHours, oilHours: 250 * (i + 1), readings });
    }
  }
  // Ordered unit by unit: P1's results, its outlier among them, arrive before the other units' earlier ones.
  const ordered = lines.sort(order === 'time' ? (a, b) => (a.sampledAt < b.sampledAt ? -1 : 1) : (a, b) => (a.unit < b.unit ? -1 : a.unit > b.unit ? 1 : 0));
  return ordered
    .map((l) => JSON.stringify(l))
    .join('\n');
}

const CONFIG = `
detection: { measurands: [] }
population: { measurands: [Fe], minResults: 10, sigma: { caution: 3, alarm: 4 } }
groups:
  - name: pumps
    match: { component: gearbox }
    limits:
      water: { caution: 500, alarm: 1000 }
`;

/** Two samples two hours apart, the second above the water alarm level. */
const TWO = [
  { sampleId: 'S1', unit: 'U1', component: 'gearbox', sampledAt: '2026-03-01T08:00:00Z', unitHours: 1000, oilHours: 250, readings: { Fe: 5, water: 100 } },
  { sampleId: 'S2', unit: 'U1', component: 'gearbox', sampledAt: '2026-03-01T10:00:00Z', unitHours: 1002, oilHours: 252, readings: { Fe: 5, water: 1500 } },
]
  .map((l) => JSON.stringify(l))
  .join('\n');

const NOW = ['--now', '2026-06-01T00:00:00Z'];

describe('backtest and replay output', { timeout: 600_000 }, () => {
  let dir: string;
  const file = (name: string) => join(dir, name);
  let replay: CliResult;
  let text: CliResult;
  let json: CliResult;
  let help: CliResult;
  let replayHelp: CliResult;
  let replayJson: CliResult;
  let byUnitText: CliResult;
  let byUnitJson: CliResult;
  let byTimeJson: CliResult;

  beforeAll(async () => {
    dir = mkdtempSync(join(tmpdir(), 'wearshift-output-'));
    writeFileSync(file('fleet.jsonl'), `${fleet()}\n`);
    writeFileSync(file('two.jsonl'), `${TWO}\n`);
    writeFileSync(file('config.yaml'), CONFIG);
    // The fleet with one record that cannot be read, so that every kind of JSON line is printed.
    writeFileSync(file('fleet-and-one-bad.jsonl'), `${fleet()}\n{"sampleId":"BAD-1","unit":"P1"}\n`);
    writeFileSync(file('fleet-by-unit.jsonl'), `${fleet('unit')}\n`);
    [replay, text, json, help, replayHelp, replayJson, byUnitText, byUnitJson, byTimeJson] = await Promise.all([
      runCli(['replay', file('fleet.jsonl'), '--config', file('config.yaml'), ...NOW]),
      runCli(['backtest', file('two.jsonl'), '--config', file('config.yaml'), ...NOW, '--out', file('two.html')]),
      runCli(['backtest', file('two.jsonl'), '--config', file('config.yaml'), ...NOW, '--json']),
      runCli(['backtest', '--help']),
      runCli(['replay', '--help']),
      runCli(['replay', file('fleet-and-one-bad.jsonl'), '--config', file('config.yaml'), ...NOW, '--json']),
      runCli(['replay', file('fleet-by-unit.jsonl'), '--config', file('config.yaml'), ...NOW]),
      runCli(['replay', file('fleet-by-unit.jsonl'), '--config', file('config.yaml'), ...NOW, '--json']),
      runCli(['replay', file('fleet.jsonl'), '--config', file('config.yaml'), ...NOW, '--json']),
    ]);
  }, 600_000);
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('replay marks advisory and held findings, and leaves incident findings as they are', () => {
    expect(replay.code).toBe(0);
    const line = (sampleId: string, rule: string) => replay.stdout.split('\n').find((l) => l.includes(`  ${sampleId}  ${rule}  `));
    expect(line('P1-10', 'Fe population')).toMatch(/ alarm \(advisory\)/);
    expect(line('P2-10', 'water limit')).toMatch(/ caution \(held: sample in doubt\)/);
    expect(line('P2-10', 'water condition')).toMatch(/ caution \(held: sample in doubt\)/);
    // The sampling finding itself opens the sampling incident: no mark. It judges the whole sample, so the text
    // names the sample, not the metal its JSON line is filed under.
    expect(replay.stdout).not.toContain('  P2-10  Fe sampling  ');
    const sampling = line('P2-10', 'sample sampling')!;
    expect(sampling).toMatch(/ caution /);
    expect(sampling).not.toMatch(/\((advisory|held)/);
  });

  it('replay of a file ordered unit by unit prints each finding once, the same as in time order, text and JSON alike', () => {
    expect(byUnitJson.code).toBe(0);
    expect(byUnitText.code).toBe(0);
    type Line = { type: string; unit: string; component: string; sampleId: string; measurand: string; rule: string; check?: string; direction?: string; revised?: boolean };
    const findings = (r: CliResult) => r.stdout.trim().split('\n').map((l) => JSON.parse(l) as Line).filter((l) => l.type === 'finding');
    const byUnit = findings(byUnitJson);
    const byTime = findings(byTimeJson);
    const ids = byUnit.map((f) => [f.unit, f.component, f.sampleId, f.measurand, f.rule, f.check ?? '', f.direction ?? ''].join('|'));
    expect(ids.length).toBeGreaterThan(0);
    expect(new Set(ids).size).toBe(ids.length);
    const content = ({ revised: _r, ...f }: Line) => JSON.stringify(f);
    expect(byUnit.map(content).sort()).toEqual(byTime.map(content).sort());
    expect(byTime.filter((f) => f.revised)).toEqual([]);
    // P1-10 was judged before the other units' earlier results came, with no population level to compare with.
    expect(byUnit.filter((f) => f.revised).map((f) => `${f.sampleId} ${f.measurand} ${f.rule}`)).toContain('P1-10 Fe population');
    // The text prints the same findings, a revised one marked as such; a finding about the whole sample names the sample.
    const textFindings = byUnit.map((f) => byUnitText.stdout.split('\n').filter((l) => l.includes(`  ${f.unit}/${f.component}  ${f.sampleId}  ${subjectOf(f)} ${f.rule}`)));
    for (const [i, lines] of textFindings.entries()) {
      expect(lines).toHaveLength(1);
      expect(lines[0]!.includes('(revised)')).toBe(byUnit[i]!.revised === true);
    }
  });

  it('the backtest summary says the history is too short for a rate and ends with the caution', () => {
    expect(text.code).toBe(0);
    expect(text.stdout).toMatch(/^incidents: 1 \(exposure 0\.000\d+ component-years: too short for a rate per 100 component-years, which needs at least 1\)/m);
    expect(text.stdout).not.toMatch(/\d per 100 component-years/);
    expect(text.stdout.trim().split('\n').at(-1)).toBe(ADVISORY_CAUTION);
  });

  it('--json carries the caution, and a null rate beside the exposure it would be taken over', () => {
    expect(json.code).toBe(0);
    const s = JSON.parse(json.stdout) as BacktestSummary;
    expect(s.advisory).toBe(ADVISORY_CAUTION);
    expect(s.runs[0]!.incidents).toMatchObject({ total: 1, per100ComponentYears: null, minComponentYears: 1 });
    expect(s.runs[0]!.incidents.componentYears).toBe(s.fleet.componentYears);
    expect(s.runs[0]!.incidents.componentYears).toBeGreaterThan(0);
  });

  it('--help says what --now decides', () => {
    // Commander wraps the option texts: compared with the line breaks as spaces.
    const flat = (r: CliResult) => r.stdout.replace(/\s+/g, ' ');
    expect(flat(help)).toMatch(/arriving live, at its sampling time/);
    expect(flat(help)).toMatch(/--now .* nothing else depends on it/);
    expect(flat(replayHelp)).toMatch(/--now .* every record arrives at it, .* backfill\.quietAfterDays/);
  });

  it('replay --help describes every kind of JSON line replay --json prints, in the order printed', () => {
    expect(replayJson.code).toBe(1);
    const types = replayJson.stdout.trim().split('\n').map((l) => (JSON.parse(l) as { type: string }).type);
    const kinds = [...new Set(types)];
    // The fleet gives all five: the refused record, findings and incident changes, the verdicts and the readiness.
    expect(new Set(kinds)).toEqual(new Set(['rejected', 'finding', 'incident', 'verdict', 'readiness']));
    const described = [...replayHelp.stdout.matchAll(/^ {2}\{"type":"(\w+)",\.\.\.\}/gm)].map((m) => m[1]);
    expect(new Set(described)).toEqual(new Set(kinds));
    // In the order printed: each kind's first line comes after the first line of the kinds described before it
    // (finding and incident lines are interleaved by sample time, so only their first lines are compared).
    const firstAt = (kind: string) => types.indexOf(kind);
    const order = described.map((k) => firstAt(k!));
    expect(order).toEqual([...order].sort((a, b) => a - b));
    expect(replayHelp.stdout).toContain('the caution as "advisory"');
    for (const line of replayJson.stdout.trim().split('\n').map((l) => JSON.parse(l) as { type: string; advisory?: string })) {
      if (line.type === 'verdict') expect(line.advisory).toBe(ADVISORY_CAUTION);
    }
  });
});
