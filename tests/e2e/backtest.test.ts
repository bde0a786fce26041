/**
 * `wearshift backtest` as a user runs it: the real command line on a simulated fleet with injected wear-rate steps,
 * the JSON it prints against the JSON its HTML embeds, the page in a real browser (Debian's Chromium via
 * playwright-core) with every network request refused, a false-alarm budget against `wearshift design` for the same
 * target, a second configuration side by side, and the errors for bad input.
 */
import { existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { BacktestSummary } from '../../src/backtest/summary.ts';
import { runCli } from '../helpers/cli.ts';
import { FLEET_CONFIG, fleetEvents, fleetJsonl, OTHER_CONFIG, STEPPED_UNITS } from '../unit/backtestFleet.ts';

const CHROMIUM = '/usr/bin/chromium';
const HAVE_CHROMIUM = existsSync(CHROMIUM);
const NOW = ['--now', '2026-01-01T00:00:00Z'];
const BUDGET = '1 per component per 3 years';

function embedded(html: string): unknown {
  const json = /<script type="application\/json" id="summary">([\s\S]*?)<\/script>/.exec(html)?.[1];
  if (json === undefined) throw new Error('no embedded summary');
  return JSON.parse(json);
}

/** Splits a command line shown to users into arguments (double quotes group words). */
function words(command: string): string[] {
  return [...command.matchAll(/"([^"]*)"|(\S+)/g)].map((m) => m[1] ?? m[2]!);
}

// Each case starts the real command line (a Node process through tsx): on a busy shared machine that alone can take
// a minute, so the bound is generous; nothing here measures speed.
describe('wearshift backtest', { timeout: 600_000 }, () => {
  let dir: string;
  const file = (name: string) => join(dir, name);

  beforeAll(() => {
    dir = mkdtempSync(join(tmpdir(), 'wearshift-backtest-'));
    writeFileSync(file('fleet.jsonl'), fleetJsonl());
    writeFileSync(file('config.yaml'), FLEET_CONFIG);
    writeFileSync(file('other.yaml'), OTHER_CONFIG);
  });
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  describe('report and JSON', () => {
    let summary: BacktestSummary;
    let html: string;

    beforeAll(async () => {
      const r = await runCli(['backtest', file('fleet.jsonl'), '--config', file('config.yaml'), '--out', file('report.html'), '--json', ...NOW]);
      expect(r.stderr).toBe('');
      expect(r.code).toBe(0);
      const lines = r.stdout.trim().split('\n');
      expect(lines).toHaveLength(1);
      summary = JSON.parse(lines[0]!) as BacktestSummary;
      html = readFileSync(file('report.html'), 'utf8');
    });

    it('prints the summary the page embeds', () => {
      expect(embedded(html)).toEqual(summary);
      // Every key names something: no "undefined" slipped in from an absent field.
      expect(JSON.stringify(summary)).not.toMatch(/"undefined"\s*:/);
      expect(summary.records).toBe(fleetEvents().length);
      expect(summary.runs[0]!.episodes.filter((e) => e.caughtBy === 'both').map((e) => e.unit).sort()).toEqual(STEPPED_UNITS);
    });

    it('lists the incidents wearshift replay reports for the same history and configuration', async () => {
      const replay = await runCli(['replay', file('fleet.jsonl'), '--config', file('config.yaml'), '--json', ...NOW]);
      expect(replay.code).toBe(0);
      const lines = replay.stdout.trim().split('\n').map((l) => JSON.parse(l) as { type: string; incidentId?: string; change?: string; sampleId?: string; rule?: string });
      // Every line says what it is by `type`, as README's Replay section lists them.
      expect(new Set(lines.map((l) => l.type))).toEqual(new Set(['finding', 'incident', 'verdict', 'readiness']));
      const opened = lines.filter((l) => l.type === 'incident' && l.change === 'opened').map((l) => l.incidentId).sort();
      expect(summary.runs[0]!.episodes.map((e) => e.incidentId).sort()).toEqual(opened);
      const flagged = new Map<string, Set<string>>();
      for (const l of lines.filter((x) => x.type === 'finding')) flagged.set(l.rule!, (flagged.get(l.rule!) ?? new Set()).add(l.sampleId!));
      for (const [rule, count] of Object.entries(summary.runs[0]!.samplesFlagged)) expect(count, rule).toBe(flagged.get(rule)?.size ?? 0);
    });

    it.skipIf(!HAVE_CHROMIUM)('opens offline in Chromium without a console error and asks the network for nothing', async () => {
      const profile = mkdtempSync(join(tmpdir(), 'wearshift-chromium-'));
      const context = await chromium.launchPersistentContext(profile, {
        executablePath: CHROMIUM,
        args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-quic', '--no-first-run', '--disable-component-update', '--disable-sync'],
      });
      const requested: string[] = [];
      const problems: string[] = [];
      try {
        await context.route('**/*', (route) => {
          const url = route.request().url();
          if (url === `file://${file('report.html')}`) return route.continue();
          requested.push(url);
          return route.abort();
        });
        const page = await context.newPage();
        page.on('console', (m) => {
          if (m.type() === 'error' || m.type() === 'warning') problems.push(`${m.type()}: ${m.text()}`);
        });
        page.on('pageerror', (e) => problems.push(`page error: ${e.message}`));
        await page.goto(`file://${file('report.html')}`, { waitUntil: 'load' });
        const both = summary.runs[0]!.episodes.filter((e) => e.caughtBy === 'both');
        await expect.poll(() => page.locator('#earliness tr[data-incident]').count()).toBe(both.length);
        const text = await page.locator(`#earliness tr[data-incident="${both[0]!.incidentId}"]`).innerText();
        expect(text).toContain(`${both[0]!.leadVsLimit!.samples} sample`);
        expect(await page.locator('details.component').count()).toBe(summary.fleet.components);
        // The caution and the summary come first, before any list or chart.
        expect(await page.locator('header.page .caution').innerText()).toContain('wearshift advises');
        expect(summary.advisory).toContain('wearshift advises');
        // The history is long enough for a rate (at least the stated minimum of component-years).
        expect(summary.runs[0]!.incidents.componentYears).toBeGreaterThanOrEqual(summary.runs[0]!.incidents.minComponentYears);
        expect(await page.locator('.card[data-metric="incidents"] .note').innerText()).toMatch(/per 100 component-years$/);
        expect(await page.locator('main > section').first().getAttribute('class')).toBe('headline');
        // Long sections fold: components without an incident are folded, and a click folds an open one.
        const withIncident = new Set(summary.runs[0]!.episodes.map((x) => `${x.unit}/${x.component}`)).size;
        expect(await page.locator('details.component[open]').count()).toBe(withIncident);
        expect(await page.locator('details.component[open] svg').first().isVisible()).toBe(true);
        await page.locator('details.component[open] > summary').first().click();
        await expect.poll(() => page.locator('details.component[open]').count(), { timeout: 120_000 }).toBe(withIncident - 1);
        expect(JSON.parse((await page.locator('#summary').textContent())!)).toEqual(summary);
        // On a phone the page itself never scrolls sideways (wide tables and charts scroll inside it), and a chart
        // keeps a size at which its labels can be read.
        await page.setViewportSize({ width: 390, height: 844 });
        await page.locator('details.component:not([open]) > summary').first().click();
        expect(await page.evaluate('document.documentElement.scrollWidth')).toBeLessThanOrEqual(390);
        expect((await page.locator('details.component[open] figure.chart svg').first().boundingBox())!.width).toBeGreaterThanOrEqual(600);
      } finally {
        await context.close();
        rmSync(profile, { recursive: true, force: true });
      }
      expect(requested).toEqual([]);
      expect(problems).toEqual([]);
    });
  });

  if (!HAVE_CHROMIUM) console.warn(`backtest browser check skipped: no Chromium at ${CHROMIUM} (apt-get install -y chromium)`);
  if (!HAVE_CHROMIUM) it.skip(`browser check skipped: no Chromium at ${CHROMIUM} (apt-get install -y chromium)`, () => {});

  it('designs h and L from a budget as wearshift design does for the same target', async () => {
    // Fe watched by EWMA and CUSUM: two charts share the change detectors' part of the component's budget (0.8: the
    // comparison with peers takes the rest), the rise side 0.9 of it (0.72; a fall the other 0.08), each side designed
    // one-sided; samples every 250 h (the configured default).
    const common = ['--budget', BUDGET, '--every', '250', '--charts', '2', '--share', '0.72', '--sided', 'one', '--json'];
    const [bt, plain, cusumRun, ewmaRun] = await Promise.all([
      runCli(['backtest', file('fleet.jsonl'), '--config', file('config.yaml'), '--budget', BUDGET, '--json', ...NOW]),
      runCli(['backtest', file('fleet.jsonl'), '--config', file('config.yaml'), '--json', ...NOW]),
      runCli(['design', 'cusum', '--k', '0.5', ...common]),
      runCli(['design', 'ewma', '--lambda', '0.2', '--exact-limits', ...common]),
    ]);
    expect(bt.code).toBe(0);
    const p = (JSON.parse(bt.stdout) as BacktestSummary).runs[0]!.parameters[0]!;
    const cusum = JSON.parse(cusumRun.stdout);
    const ewma = JSON.parse(ewmaRun.stdout);
    expect(p.cusum.h).toBe(cusum.h);
    expect(p.ewma.L).toBe(ewma.L);
    expect(p.arl0).toBe(cusum.arl0);
    expect({ alarms: p.budget.alarms, years: p.budget.years, samplesPerComponent: p.samplesPerComponent, componentArl0: p.componentArl0, charts: p.charts }).toEqual({
      alarms: cusum.budget.alarms,
      years: cusum.budget.years,
      samplesPerComponent: cusum.budget.samplesPerComponent,
      componentArl0: cusum.budget.componentArl0,
      charts: cusum.budget.charts,
    });
    // The commands the report shows print the same numbers.
    const shown = await Promise.all(p.designCommands.map((c) => runCli([...words(c).slice(1), '--json'])));
    expect(shown.map((r) => JSON.parse(r.stdout)).map((j) => j.h ?? j.L)).toEqual([p.cusum.h, p.ewma.L, p.fall!.h, p.fall!.L]);
    // One false alarm in 3 years allows more per sample than the configured one in 5 years: a lower h.
    expect((JSON.parse(plain.stdout) as BacktestSummary).runs[0]!.parameters[0]!.cusum.h).toBeGreaterThan(p.cusum.h);
  }, 180_000);

  it('shows two configurations side by side and marks what differs', async () => {
    const r = await runCli(['backtest', file('fleet.jsonl'), '--config', file('config.yaml'), '--compare', file('other.yaml'), '--out', file('compare.html'), ...NOW]);
    expect(r.code).toBe(0);
    expect(r.stdout).toContain(`differs: incidents with cusum`);
    const html = readFileSync(file('compare.html'), 'utf8');
    const summary = embedded(html) as BacktestSummary;
    expect(summary.runs.map((x) => x.configFile)).toEqual([file('config.yaml'), file('other.yaml')]);
    const differing = summary.comparison!.filter((row) => row.differs).map((row) => row.metric);
    expect(differing).toContain('incidents with cusum');
    expect(html.match(/<tr class="differs">/g)?.length).toBe(differing.length);
  });

  it('reports a bad record by line and field, and backtests the rest', async () => {
    const lines = fleetJsonl().trim().split('\n');
    const bad = JSON.parse(lines[3]!);
    bad.readings.Fe = 'lots';
    lines[3] = JSON.stringify(bad);
    lines.splice(7, 0, '{not json');
    writeFileSync(file('bad.jsonl'), lines.join('\n') + '\n');
    const r = await runCli(['backtest', file('bad.jsonl'), '--config', file('config.yaml'), '--json', ...NOW]);
    expect(r.code).toBe(1);
    expect(r.stderr).toMatch(new RegExp(`^line 4 \\(sampleId ${bad.sampleId}\\): readings\\.Fe: `, 'm'));
    expect(r.stderr).toMatch(/^line 8: \(record\): not valid JSON/m);
    const summary = JSON.parse(r.stdout) as BacktestSummary;
    expect([summary.records, summary.rejected, summary.fleet.samples]).toEqual([lines.length, 2, lines.length - 2]);
  });

  it('refuses a missing file, an unreadable budget and a run without an output', async () => {
    const [missing, budget, none, format] = await Promise.all([
      runCli(['backtest', file('nowhere.jsonl'), '--out', file('x.html')]),
      runCli(['backtest', file('fleet.jsonl'), '--budget', 'rarely', '--json']),
      runCli(['backtest', file('fleet.jsonl')]),
      runCli(['backtest', file('config.yaml'), '--json']),
    ]);
    expect(missing.code).toBe(2);
    expect(missing.stderr).toContain(`${file('nowhere.jsonl')}: ENOENT`);
    expect(budget.code).toBe(2);
    expect(budget.stderr).toContain('false-alarm budget "rarely" not understood');
    expect(none.code).toBe(2);
    expect(none.stderr).toContain('give --out report.html, --json, or both');
    expect(format.code).toBe(2);
    expect(format.stderr).toContain('cannot tell the format');
  }, 120_000);
});
