/**
 * The backtest summary on a simulated fleet with known injected wear-rate steps. The expectations are worked out
 * here, apart from the backtest: each component's samples judged one at a time with evaluateComponent (the worker
 * evaluates the whole history so far whenever a result arrives), then the first sample at which each rule family fired.
 */
import { describe, expect, it } from 'vitest';
import { backtest, type Backtest } from '../../src/backtest/backtest.ts';
import { renderBacktestReport } from '../../src/backtest/reportHtml.ts';
import { componentCharts } from '../../src/backtest/charts.ts';
import { detectorParameters, readBudget, withBudget } from '../../src/backtest/parameters.ts';
import type { EpisodeSummary } from '../../src/backtest/summary.ts';
import { evaluateComponent } from '../../src/analysis/evaluate.ts';
import { parseConfig } from '../../src/domain/configFile.ts';
import { InputError } from '../../src/domain/errors.ts';
import { parseResultEvent, type Sample } from '../../src/domain/event.ts';
import { RULE_FAMILIES, type Finding, type RuleFamily } from '../../src/domain/finding.ts';
import { resolveSettings } from '../../src/domain/settings.ts';
import { FLEET_CONFIG, fleetEvents, IN_CONTROL_UNITS, OTHER_CONFIG, STEP_AT_HOURS, STEPPED_UNITS } from './backtestFleet.ts';

const config = parseConfig(FLEET_CONFIG);
const events = fleetEvents();
const records = events.map((record, i) => ({ line: i + 1, record }));
const NOW = Date.parse('2026-01-01T00:00:00Z');

/** Per component: its samples in order and the findings of each sample as judged when it arrived. */
function judgedOnArrival(unit: string): { samples: Sample[]; steps: Finding[][] } {
  const samples = events
    .filter((e) => e.unit === unit)
    .map((e) => {
      const parsed = parseResultEvent(e);
      if (!parsed.ok) throw new Error(JSON.stringify(parsed.issues));
      return parsed.sample;
    })
    .sort((a, b) => a.time - b.time);
  const settings = resolveSettings(config, samples[0]!);
  const steps = samples.map((_, i) => [...evaluateComponent(samples.slice(0, i + 1), settings).steps.at(-1)!.findings]);
  return { samples, steps };
}

function firstIndex(steps: Finding[][], from: number, match: (f: Finding) => boolean): number {
  for (let i = from; i < steps.length; i++) if (steps[i]!.some(match)) return i;
  return -1;
}

const isChangeRise = (f: Finding) => (f.rule === 'ewma' || f.rule === 'cusum') && f.direction !== 'down';
const isLimit = (f: Finding) => f.rule === 'limit';

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  const m = Math.floor(s.length / 2);
  return s.length % 2 ? s[m]! : (s[m - 1]! + s[m]!) / 2;
}

describe('backtest summary on a fleet with injected wear-rate steps', async () => {
  const result: Backtest = await backtest(records, { file: 'fleet.jsonl', configurations: [{ label: 'fleet', configFile: null, config }], now: NOW });
  const run = result.summary.runs[0]!;
  const expected = new Map(STEPPED_UNITS.map((u) => [u, judgedOnArrival(u)]));

  it('finds each injected step in one incident that both sides caught, with the leads worked out sample by sample', () => {
    const leads: { samples: number; hours: number }[] = [];
    for (const unit of STEPPED_UNITS) {
      const { samples, steps } = expected.get(unit)!;
      const stepIndex = samples.findIndex((s) => s.unitHours! >= STEP_AT_HOURS);
      const episode = run.episodes.find((e) => e.unit === unit && e.caughtBy === 'both');
      expect(episode, `${unit}: an incident caught by both sides`).toBeDefined();
      const opened = samples.findIndex((s) => s.sampledAt === episode!.openedAt);
      const change = firstIndex(steps, opened, isChangeRise);
      const limit = firstIndex(steps, opened, isLimit);
      expect(change, `${unit}: the change detectors fire on or after the injected step`).toBeGreaterThanOrEqual(stepIndex);
      expect(limit).toBeGreaterThanOrEqual(change);
      expect(episode!.changeFirst!.sampleId).toBe(samples[change]!.sampleId);
      expect(episode!.limitFirst!.sampleId).toBe(samples[limit]!.sampleId);
      expect(episode!.leadVsLimit).toEqual({
        samples: limit - change,
        hours: samples[limit]!.unitHours! - samples[change]!.unitHours!,
        days: Math.round(((samples[limit]!.time - samples[change]!.time) / 86_400_000) * 1000) / 1000,
      });
      leads.push({ samples: limit - change, hours: samples[limit]!.unitHours! - samples[change]!.unitHours! });
    }
    expect(run.earliness.vsLimit.episodes).toBe(STEPPED_UNITS.length);
    expect(run.earliness.vsLimit.medianSamples).toBe(median(leads.map((l) => l.samples)));
    expect(run.earliness.vsLimit.medianHours).toBe(median(leads.map((l) => l.hours)));
    // The steps are large (×2.5): EWMA/CUSUM see them before the level reaches the fixed limit.
    expect(run.earliness.vsLimit.earlier).toBeGreaterThanOrEqual(2);
  });

  it('counts on every family the samples the worker would have flagged, as judged one sample at a time', () => {
    const counts = Object.fromEntries(RULE_FAMILIES.map((f) => [f, 0])) as Record<RuleFamily, number>;
    for (const unit of [...STEPPED_UNITS, ...IN_CONTROL_UNITS]) {
      for (const findings of judgedOnArrival(unit).steps) for (const rule of new Set(findings.map((f) => f.rule))) counts[rule] += 1;
    }
    expect(run.samplesFlagged).toEqual(counts);
    expect(counts.limit).toBeGreaterThan(0);
  });

  it('keeps the in-control components clear of the fixed limit and of incidents caught by both sides', () => {
    for (const unit of IN_CONTROL_UNITS) {
      const episodes = run.episodes.filter((e) => e.unit === unit);
      expect(episodes.filter((e) => e.caughtBy === 'both' || e.families.includes('limit')), unit).toEqual([]);
      expect(episodes.every((e) => e.caughtBy === 'change-only' || e.caughtBy === 'neither')).toBe(true);
    }
  });

  it('lists per family the incidents it took part in, and rates them per 100 component-years of history', () => {
    const years = [...STEPPED_UNITS, ...IN_CONTROL_UNITS].reduce((sum, unit) => {
      const times = events.filter((e) => e.unit === unit).map((e) => Date.parse(e.sampledAt));
      return sum + (Math.max(...times) - Math.min(...times)) / (365.25 * 86_400_000);
    }, 0);
    expect(result.summary.fleet.componentYears).toBeCloseTo(years, 3);
    expect(run.incidents.per100ComponentYears).toBeCloseTo((100 * run.episodes.length) / years, 2);
    for (const f of RULE_FAMILIES) expect(run.incidents.byFamily[f].incidents).toBe(run.episodes.filter((e: EpisodeSummary) => e.families.includes(f)).length);
    expect(run.incidents.byFamily.limit.incidents).toBe(STEPPED_UNITS.length);
    const sided = [...run.oneSided.changeOnly, ...run.oneSided.classicOnly, ...run.oneSided.neither].length;
    expect(sided + run.earliness.vsClassic.episodes).toBe(run.episodes.length);
  });

  it('embeds exactly the summary in a page that fetches nothing', () => {
    const components = result.runs[0]!.components.map((c) => ({ unit: c.unit, component: c.component, charts: componentCharts(c) }));
    const html = renderBacktestReport(result.summary, components);
    const json = /<script type="application\/json" id="summary">([\s\S]*?)<\/script>/.exec(html)?.[1];
    expect(JSON.parse(json!)).toEqual(JSON.parse(JSON.stringify(result.summary)));
    expect(html).not.toMatch(/<script(?![^>]*application\/json)/);
    expect(html).not.toMatch(/\b(src|href)="(https?:)?\/\//);
    expect(html).not.toMatch(/@import|url\(/);
    expect(html.match(/<svg /g)?.length).toBe(components.reduce((n, c) => n + c.charts.length, 0));
    // Severity by shape and word, not colour alone.
    expect(html).toContain('■</span> alarm');
  });
});

describe('backtest with a budget and a second configuration', async () => {
  const budget = readBudget('1 per component per 3 years');
  const other = parseConfig(OTHER_CONFIG);
  const result = await backtest(records, {
    file: 'fleet.jsonl',
    configurations: [
      { label: 'A', configFile: null, config },
      { label: 'B', configFile: null, config: other },
    ],
    budget,
    now: NOW,
  });

  it('designs every run for the budget and shows where the two differ', () => {
    const [a, b] = result.summary.runs;
    expect(a!.parameters[0]!.budget).toMatchObject({ alarms: 1, years: 3 });
    // Charts per component: one detection measurand × two detectors in A, × one in B.
    expect(a!.parameters[0]!.charts).toBe(2);
    expect(b!.parameters[0]!.charts).toBe(1);
    const rows = new Map(result.summary.comparison!.map((r) => [r.metric, r]));
    expect(rows.get('per-chart ARL0')!.differs).toBe(true);
    expect(rows.get('incidents with cusum')!.values[1]).toBe(0);
    expect(rows.get('incidents with cusum')!.differs).toBe(a!.incidents.byFamily.cusum.incidents > 0);
    expect(rows.get('incidents')!.values).toEqual([a!.incidents.total, b!.incidents.total]);
  });

  it('puts the budget in place wherever a group sets its own, and keeps limits given outright', () => {
    const grouped = parseConfig(`
detection: { measurands: [Fe] }
groups:
  - name: own-budget
    detection: { measurands: [Fe], budget: { alarms: 2, years: 1, sampleIntervalHours: 500 } }
  - name: fixed-h
    detection: { measurands: [Fe], cusum: { h: 4 } }
`);
    const params = detectorParameters(withBudget(grouped, budget), [
      { unit: 'U1', component: 'gearbox', group: 'own-budget' },
      { unit: 'U2', component: 'gearbox', group: 'fixed-h' },
      { unit: 'U3', component: 'gearbox' },
    ]);
    const of = (g: string) => params.find((p) => p.groups.includes(g))!;
    // The group's own sample interval stays: 3 years × 8760 h / 500 h = 52.56 samples, 1 alarm, 2 charts; the change
    // detectors get 0.8 of the budget (the comparison with peers the rest), and of that a rise 0.9 (detection.fallShare
    // 0.1 goes to a fall): 52.56 × 2 / 0.72 = 146 for the rise side, 52.56 × 2 / 0.08 = 1314 for the fall side.
    expect(of('own-budget')).toMatchObject({ budget: { alarms: 1, years: 3, sampleIntervalHours: 500 }, samplesPerComponent: 52.56, share: 0.72, arl0: 146 });
    expect(of('own-budget').fall).toMatchObject({ share: 0.08, arl0: 1314 });
    expect(of('fixed-h').cusum).toMatchObject({ h: 4, fromBudget: false });
    expect(of('fixed-h').designCommands.some((c) => c.includes('design cusum'))).toBe(false);
    expect(of('gearbox').budget).toMatchObject({ alarms: 1, years: 3, sampleIntervalHours: 250 });
  });

  it('rejects a budget it cannot read, naming what it expects', () => {
    expect(() => readBudget('one alarm now and then')).toThrow(InputError);
    expect(() => readBudget('0 per component per year')).toThrow(/more than 0/);
  });
});
