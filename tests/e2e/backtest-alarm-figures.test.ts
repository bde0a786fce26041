/**
 * `wearshift backtest --json` and the HTML page carry the alarm-management key figures (ISA-18.2 / IEC 62682, EEMUA
 * 191; definitions in src/incidents/alarmFigures.ts) of each configuration, on the simulated fleet with three injected
 * wear-rate steps (tests/unit/backtestFleet.ts). The expectations come from the scenario and from the summary's own
 * per-incident record, not from the figure code: a step that is never repaired keeps its incident active to the end of
 * the history, so it stands; nobody acknowledges in a backtest, so an open incident goes stale.
 */
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { BacktestSummary } from '../../src/backtest/summary.ts';
import { RULE_FAMILIES } from '../../src/domain/finding.ts';
import { runCli } from '../helpers/cli.ts';
import { FLEET_CONFIG, fleetJsonl, STEPPED_UNITS } from '../unit/backtestFleet.ts';

const NOW = ['--now', '2026-01-01T00:00:00Z'];
const DAY = 86_400_000;

/** The fleet's configuration with escalation policies: the first two stepped units to one engineer, the rest to another, sampling faults to the lab. */
const ROUTED = `${FLEET_CONFIG}
channels:
  email:
    from: "wearshift <alerts@plant.example>"
    smtp: { host: localhost }
escalation:
  policies:
    - name: north
      match: { groups: [bt-BT-1, bt-BT-2] }
      tiers: [{ afterMinutes: 0, email: [north@plant.example] }, { afterMinutes: 120, email: [lead@plant.example] }]
    - name: rest
      tiers: [{ afterMinutes: 0, email: [rest@plant.example] }]
    - name: samples
      match: { kinds: [sampling] }
      tiers: [{ afterMinutes: 0, email: [lab@plant.example] }]
alarmFigures:
  standingAfterDays: 30
  staleAfterDays: 7
  topBadActors: 2
`;

/** The same, with thresholds no incident of this history reaches. */
const PATIENT = ROUTED.replace('standingAfterDays: 30', 'standingAfterDays: 5000').replace('staleAfterDays: 7', 'staleAfterDays: 5000');

function embedded(html: string): unknown {
  const json = /<script type="application\/json" id="summary">([\s\S]*?)<\/script>/.exec(html)?.[1];
  if (json === undefined) throw new Error('no embedded summary');
  return JSON.parse(json);
}

describe('wearshift backtest: alarm-management key figures', () => {
  let dir: string;
  let summary: BacktestSummary;
  let html: string;
  const file = (name: string) => join(dir, name);

  beforeAll(async () => {
    dir = mkdtempSync(join(tmpdir(), 'wearshift-alarm-figures-'));
    writeFileSync(file('fleet.jsonl'), fleetJsonl());
    writeFileSync(file('routed.yaml'), ROUTED);
    writeFileSync(file('patient.yaml'), PATIENT);
    const r = await runCli(['backtest', file('fleet.jsonl'), '--config', file('routed.yaml'), '--compare', file('patient.yaml'), '--out', file('report.html'), '--json', ...NOW], {}, 180_000);
    expect(r.stderr).toBe('');
    expect(r.code).toBe(0);
    summary = JSON.parse(r.stdout.trim()) as BacktestSummary;
    html = readFileSync(file('report.html'), 'utf8');
  }, 240_000);
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('counts the same incidents per rule family and per 100 component-years as the per-incident summary', () => {
    const run = summary.runs[0]!;
    const f = run.alarmFigures;
    expect(f.period).toMatchObject({ from: summary.fleet.from, to: summary.fleet.to });
    expect(f.incidents).toBe(run.episodes.length);
    expect(f.incidents).toBeGreaterThanOrEqual(STEPPED_UNITS.length);
    expect(f.per100ComponentYears).toBeCloseTo((100 * run.episodes.length) / summary.fleet.componentYears, 2);
    for (const family of RULE_FAMILIES) expect(f.byFamily[family].incidents, family).toBe(run.episodes.filter((e) => e.families.includes(family)).length);
  });

  it('splits the load between the tier-0 responders of the escalation policies; the second tier is no responder of its own', () => {
    const f = summary.runs[0]!.alarmFigures;
    expect(f.responders.map((r) => r.responder).sort()).toEqual(['email:lab@plant.example', 'email:north@plant.example', 'email:rest@plant.example']);
    expect(f.unrouted).toBe(0);
    const lab = f.responders.find((r) => r.responder === 'email:lab@plant.example')!;
    expect(lab.annunciations).toBeGreaterThanOrEqual(summary.runs[0]!.episodes.filter((e) => e.families.length === 1 && e.families[0] === 'sampling').length);
    expect(f.responders.reduce((s, r) => s + r.annunciations, 0)).toBe(f.annunciations);
    const north = f.responders.find((r) => r.responder === 'email:north@plant.example')!;
    const northEpisodes = summary.runs[0]!.episodes.filter((e) => e.unit === 'BT-1' || e.unit === 'BT-2').length;
    expect(north.annunciations).toBeGreaterThanOrEqual(northEpisodes);
    expect(north.perDay.average).toBeCloseTo(north.annunciations / f.period.days, 3);
    expect(north.perWeek.peak).toBeGreaterThanOrEqual(north.perDay.peak);
    expect(f.annunciations).toBeGreaterThanOrEqual(f.incidents);
    // Nobody acknowledges in a backtest: the lead, two hours behind north, would hear of every north annunciation
    // (each stays active for weeks, until samples come back clean), listed apart from the tier-0 load.
    expect(summary.runs[0]!.escalation).toEqual({ annunciations: north.annunciations, responders: [{ responder: 'email:lead@plant.example', annunciations: north.annunciations }] });
  });

  it('the injected steps are never repaired, so their incidents stand at the end; only active incidents stand', () => {
    const run = summary.runs[0]!;
    const f = run.alarmFigures;
    const end = Date.parse(summary.fleet.to!);
    for (const unit of STEPPED_UNITS) {
      const last = run.episodes.filter((e) => e.unit === unit).at(-1)!;
      expect(last.state, unit).toMatch(/^active/);
      if (end - Date.parse(last.openedAt) > 30 * DAY) expect(f.standing.ids, unit).toContain(last.incidentId);
    }
    expect(f.standing.atEnd).toBeGreaterThanOrEqual(1);
    for (const id of f.standing.ids) expect(run.episodes.find((e) => e.incidentId === id)!.state).toMatch(/^active/);
    expect(f.standing.peak).toBeGreaterThanOrEqual(f.standing.atEnd);
    // Nobody acknowledges in a backtest: every incident open at the end for more than a week is stale.
    const openLong = run.episodes.filter((e) => !e.state.startsWith('closed') && end - Date.parse(e.openedAt) > 7 * DAY);
    expect(f.stale.atEnd).toBeGreaterThanOrEqual(openLong.filter((e) => e.state.includes('unacknowledged')).length);
    expect(f.badActors.components.length).toBeLessThanOrEqual(2);
    expect(f.badActors.pairs.length).toBeLessThanOrEqual(2);
    expect(f.badActors.pairs[0]!.measurand).toBe('Fe');
  });

  it('takes the thresholds from the configuration: nothing stands or goes stale with 5000 days, and the comparison says so', () => {
    const patient = summary.runs[1]!.alarmFigures;
    expect(patient.standing).toMatchObject({ afterDays: 5000, atEnd: 0, peak: 0, incidents: 0 });
    expect(patient.stale).toMatchObject({ afterDays: 5000, atEnd: 0, peak: 0 });
    expect(patient.incidents).toBe(summary.runs[0]!.alarmFigures.incidents);
    const row = summary.comparison!.find((r) => r.metric === 'standing incidents at most at once')!;
    expect(row.differs).toBe(true);
  });

  it('the page shows the figures and embeds the same JSON', () => {
    expect(embedded(html)).toEqual(summary);
    expect(html).toContain('id="alarm-figures"');
    expect(html).toContain('email:north@plant.example');
    expect(html).toMatch(/<table class="escalation">[\s\S]*email:lead@plant\.example/);
    expect(html).toMatch(/ISA-18\.2/);
    expect(html).toContain('the equipment maker&#39;s limits');
  });
});
