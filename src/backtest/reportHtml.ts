/**
 * The backtest report as one self-contained HTML page: inline CSS and inline SVG charts, no script to run, nothing
 * fetched (the Content-Security-Policy forbids it), so it opens offline and can be mailed as one file. The summary
 * it shows is embedded verbatim as JSON (`<script type="application/json" id="summary">`) for tools and tests.
 * Severity is given by shape and word (◇ watch, ▲ caution, ■ alarm, as on the board), colour only adds to it.
 */
import { ADVISORY_CAUTION } from '../domain/caution.ts';
import { RULE_FAMILIES, RULE_FAMILY_LABELS, type RuleFamily, type Severity } from '../domain/finding.ts';
import { NEUTRAL, SEVERITY_STYLE } from '../charts/severityStyle.ts';
import { escapeHtml } from '../domain/safeText.ts';
import { alarmSection } from './alarmSection.ts';
import type { ComponentChart } from './charts.ts';
import type { DetectorParameters } from './parameters.ts';
import type { BacktestSummary, Earliness, EpisodeSummary, Firing, Lead, RunSummary } from './summary.ts';

export interface ReportComponent {
  readonly unit: string;
  readonly component: string;
  readonly charts: readonly ComponentChart[];
}

const CAUTION =
  ADVISORY_CAUTION;

const FAMILY_WORD: Record<RuleFamily, string> = RULE_FAMILY_LABELS;

export function renderBacktestReport(summary: BacktestSummary, components: readonly ReportComponent[]): string {
  const main = summary.runs[0]!;
  const title = `Backtest of ${summary.file}`;
  return [
    '<!doctype html>',
    '<html lang="en">',
    '<head>',
    '<meta charset="utf-8">',
    '<meta name="viewport" content="width=device-width, initial-scale=1">',
    `<meta http-equiv="Content-Security-Policy" content="default-src 'none'; style-src 'unsafe-inline'; img-src data:">`,
    `<title>${e(title)} — wearshift</title>`,
    `<style>${STYLE}</style>`,
    '</head>',
    '<body>',
    '<header class="page">',
    `<p class="product">wearshift · backtest</p>`,
    `<h1>${e(title)}</h1>`,
    `<p class="lede">${e(lede(summary))}</p>`,
    `<p class="caution" role="note"><strong>Caution.</strong> ${e(CAUTION)}</p>`,
    '</header>',
    '<main>',
    headline(summary, main),
    summary.comparison === null ? '' : comparison(summary),
    '<div class="pair">',
    families(summary),
    parameters(summary),
    '</div>',
    alarmSection(summary),
    earlinessSection(summary),
    oneSided(summary),
    episodesSection(main),
    componentsSection(summary, main, components),
    '</main>',
    `<footer><p>${e(CAUTION)}</p><p>The history was replayed in-process through the worker\u2019s own storing, evaluation and incident code, without Redis, every result arriving live at its sampling time (none taken as quiet backfill).</p></footer>`,
    `<script type="application/json" id="summary">${embeddedJson(summary)}</script>`,
    '</body>',
    '</html>',
    '',
  ].join('\n');
}

/** JSON that cannot end the script element early: `<` is written as its escape, which JSON.parse reads back. */
function embeddedJson(value: unknown): string {
  return JSON.stringify(value).replace(/</g, '\\u003c');
}

function lede(s: BacktestSummary): string {
  const span = s.fleet.from === null ? 'no samples' : `${day(s.fleet.from)} to ${day(s.fleet.to!)}`;
  const configs = s.runs.map((r) => r.configFile ?? 'built-in defaults').join(' vs ');
  const budget = s.runs[0]!.budget ? ` · budget ${s.runs[0]!.budget.text}` : '';
  const words = s.sampleVerdicts === null ? '' : ` · ${s.sampleVerdicts.words} responders\u2019 words on samples${s.sampleVerdicts.refused.some((n) => n > 0) ? ` (refused: ${s.sampleVerdicts.refused.join(' vs ')})` : ''}`;
  return `${s.fleet.components} components · ${s.fleet.samples} samples · ${span} · ${num(s.fleet.componentYears, 3)} component-years · ${s.records} records${s.rejected > 0 ? `, ${s.rejected} rejected` : ''}${words} · configuration ${configs}${budget}`;
}

function headline(s: BacktestSummary, r: RunSummary): string {
  const lim = r.earliness.vsLimit;
  const cls = r.earliness.vsClassic;
  const card = (value: string, label: string, note: string, id: string) =>
    `<div class="card" data-metric="${id}"><p class="value">${e(value)}</p><p class="label">${e(label)}</p><p class="note">${e(note)}</p></div>`;
  return [
    '<section aria-labelledby="h-headline" class="headline">',
    `<h2 id="h-headline">At a glance${s.runs.length > 1 ? ` (${e(r.label)})` : ''}</h2>`,
    '<div class="cards">',
    card(String(r.incidents.total), 'incidents', r.incidents.per100ComponentYears === null ? tooShort(r) : `${num(r.incidents.per100ComponentYears, 3)} per 100 component-years`, 'incidents'),
    card(String(cls.episodes), 'caught by both sides', 'EWMA/CUSUM and a classic rule in one incident', 'both'),
    card(
      lim.medianSamples === null ? '–' : `${num(lim.medianSamples, 3)} samples`,
      'median lead over the fixed limit',
      lim.episodes === 0 ? 'no incident reached a fixed limit after a detector' : `${lim.medianHours === null ? '' : `${num(lim.medianHours, 4)} operating hours, `}over ${lim.episodes} ${plural(lim.episodes, 'incident')}`,
      'lead-limit',
    ),
    card(
      cls.medianSamples === null ? '–' : `${num(cls.medianSamples, 3)} samples`,
      'median lead over classic rules',
      cls.episodes === 0 ? 'none caught by both' : `first of fixed, rate or group limit; ${cls.medianHours === null ? '' : `${num(cls.medianHours, 4)} operating hours, `}over ${cls.episodes} ${plural(cls.episodes, 'incident')}`,
      'lead-classic',
    ),
    card(`${r.oneSided.changeOnly.length} / ${r.oneSided.classicOnly.length}`, 'one side only', 'EWMA/CUSUM only / classic rules only', 'one-sided'),
    '</div>',
    '</section>',
  ].join('\n');
}

/** Why a rate per 100 component-years is not given. */
function tooShort(r: RunSummary): string {
  const x = r.incidents;
  return `exposure ${num(x.componentYears, 3)} component-years, too short for a rate (at least ${num(x.minComponentYears, 3)})`;
}

function comparison(s: BacktestSummary): string {
  const rows = s.comparison!;
  return [
    '<section aria-labelledby="h-compare" id="comparison">',
    '<h2 id="h-compare">Two configurations side by side</h2>',
    `<p>Rows marked <span class="differs-tag">≠ differs</span> change between the configurations.</p>`,
    '<table class="compare">',
    `<thead><tr><th scope="col">measure</th>${s.runs.map((r) => `<th scope="col">${e(r.label)}</th>`).join('')}<th scope="col"><span class="sr">difference</span></th></tr></thead>`,
    '<tbody>',
    ...rows.map(
      (row) =>
        `<tr${row.differs ? ' class="differs"' : ''}><th scope="row">${e(row.metric)}</th>${row.values.map((v) => `<td class="n">${e(v === null ? '–' : typeof v === 'number' ? num(v, 4) : v)}</td>`).join('')}<td>${row.differs ? '<span class="differs-tag">≠ differs</span>' : ''}</td></tr>`,
    ),
    '</tbody></table>',
    '</section>',
  ].join('\n');
}

function parameters(s: BacktestSummary): string {
  const out = ['<section aria-labelledby="h-params" id="parameters">', '<h2 id="h-params">Detector parameters</h2>'];
  for (const r of s.runs) {
    if (s.runs.length > 1) out.push(`<h3>${e(r.label)}</h3>`);
    out.push(
      r.budget
        ? `<p>From the false-alarm budget <strong>${e(r.budget.text)}</strong> (${num(r.budget.alarms, 6)} false ${plural(r.budget.alarms, 'alarm')} per component in ${num(r.budget.years, 6)} ${plural(r.budget.years, 'year')}), in place of the configured one.</p>`
        : '<p>From the configured false-alarm budget (or the limits given in the configuration).</p>',
    );
    for (const p of r.parameters) out.push(parameterBlock(p));
  }
  out.push('</section>');
  return out.join('\n');
}

function parameterBlock(p: DetectorParameters): string {
  const b = p.budget;
  const h = p.cusum.enabled ? `h = ${num(p.cusum.h, 6)}${p.cusum.fromBudget ? '' : ' (given in the configuration)'}` : 'CUSUM off';
  const L = p.ewma.enabled ? `L = ${num(p.ewma.L, 6)}${p.ewma.fromBudget ? '' : ' (given in the configuration)'}` : 'EWMA off';
  return [
    `<div class="params" data-groups="${e(p.groups.join(','))}">`,
    `<p class="groups">${e(p.groups.join(', '))} — ${e(p.measurands.join(', '))}, ${p.sided === 'two' ? 'two-sided' : 'upper side only'}</p>`,
    '<ol class="conversion">',
    `<li>${num(b.years, 6)} years × ${num(b.hoursPerYear, 6)} h / ${num(b.sampleIntervalHours, 6)} h between samples = ${num(p.samplesPerComponent, 6)} samples per component</li>`,
    `<li>/ ${num(b.alarms, 6)} false ${plural(b.alarms, 'alarm')} = component in-control ARL ${num(p.componentArl0, 6)}</li>`,
    `<li>× ${p.charts} ${plural(p.charts, 'chart')} per component (rates of false alarms add up) / ${num(p.share, 4)} (the part of the budget a rise gets: a wear incident) = per-chart ARL0 <strong>${num(p.arl0, 6)}</strong></li>`,
    `<li>CUSUM k = ${num(p.cusum.k, 4)}, headstart ${num(p.cusum.headstart, 3)}: <strong>${e(h)}</strong>; EWMA λ = ${num(p.ewma.lambda, 4)}, exact limits: <strong>${e(L)}</strong></li>`,
    p.fall === null
      ? ''
      : `<li>a fall (a sampling incident) gets ${num(p.fall.share, 4)} of the budget: per-chart ARL0 ${num(p.fall.arl0, 6)}, CUSUM h = ${num(p.fall.h, 6)}, EWMA L = ${num(p.fall.L, 6)}</li>`,
    '</ol>',
    p.designCommands.length === 0 ? '' : `<p class="cmd-note">The same numbers from the design command:</p><pre>${p.designCommands.map(e).join('\n')}</pre>`,
    '</div>',
  ].join('\n');
}

function families(s: BacktestSummary): string {
  const multi = s.runs.length > 1;
  const head = multi
    ? `<tr><th scope="col">rule family</th>${s.runs.map((r) => `<th scope="col">${e(r.label)}: incidents</th><th scope="col">per 100 component-years</th><th scope="col">samples flagged</th>`).join('')}</tr>`
    : '<tr><th scope="col">rule family</th><th scope="col">incidents</th><th scope="col">per 100 component-years</th><th scope="col">samples flagged</th></tr>';
  const cells = (r: RunSummary, f: RuleFamily) => {
    const x = r.incidents.byFamily[f];
    return `<td class="n">${x.incidents}</td><td class="n">${x.per100ComponentYears === null ? '–' : num(x.per100ComponentYears, 3)}</td><td class="n">${r.samplesFlagged[f]}</td>`;
  };
  const total = (r: RunSummary) => `<td class="n"><strong>${r.incidents.total}</strong></td><td class="n"><strong>${r.incidents.per100ComponentYears === null ? '–' : num(r.incidents.per100ComponentYears, 3)}</strong></td><td></td>`;
  return [
    '<section aria-labelledby="h-families" id="families">',
    '<h2 id="h-families">Incidents per rule family</h2>',
    '<p>An incident counts for every family that raised a finding in it, so the rows add up to more than the total. The exposure is counted in component-years, each component from its first to its last sample (a component with a single sample adds none, though its incidents count).</p>',
    s.runs[0]!.incidents.per100ComponentYears === null ? `<p class="empty" data-exposure="too-short">No rate per 100 component-years: ${e(tooShort(s.runs[0]!))}.</p>` : '',
    '<table>',
    `<thead>${head}</thead>`,
    '<tbody>',
    ...RULE_FAMILIES.map((f) => `<tr data-family="${f}"><th scope="row">${e(FAMILY_WORD[f])} <span class="code">${f}</span></th>${s.runs.map((r) => cells(r, f)).join('')}</tr>`),
    `<tr class="total"><th scope="row">all incidents</th>${s.runs.map(total).join('')}</tr>`,
    '</tbody></table>',
    '</section>',
  ].join('\n');
}

function earlinessSection(s: BacktestSummary): string {
  const out = [
    '<section aria-labelledby="h-early" id="earliness">',
    '<h2 id="h-early">How much earlier EWMA/CUSUM spoke</h2>',
    '<p>Incidents that both a change detector (its first rise) and a classic rule caught. Leads count the samples of the component from the detector\u2019s sample up to the rule\u2019s, the operating hours between them and the calendar days; a negative lead means the rule came first.</p>',
  ];
  for (const r of s.runs) {
    if (s.runs.length > 1) out.push(`<h3>${e(r.label)}</h3>`);
    out.push(`<p class="medians">${e(medianLine(r.earliness.vsLimit, 'the fixed limit'))}<br>${e(medianLine(r.earliness.vsClassic, 'the first classic rule (fixed, rate or group limit)'))}</p>`);
    const both = r.episodes.filter((x) => x.caughtBy === 'both');
    if (both.length === 0) {
      out.push('<p class="empty">No incident was caught by both sides.</p>');
      continue;
    }
    out.push(
      '<table class="episodes">',
      '<thead><tr><th scope="col">component</th><th scope="col">first EWMA/CUSUM rise</th><th scope="col">first classic rule</th><th scope="col">lead over it</th><th scope="col">fixed limit</th><th scope="col">lead over it</th></tr></thead>',
      '<tbody>',
      ...both.map(
        (x) =>
          `<tr data-incident="${e(x.incidentId)}"><th scope="row">${e(`${x.unit} / ${x.component}`)}<span class="sub">${severityTag(x.peakSeverity)} ${e(x.state)}</span></th><td>${firing(x.changeFirst)}</td><td>${firing(x.classicFirst)}</td><td class="n">${lead(x.leadVsClassic)}</td><td>${firing(x.limitFirst)}</td><td class="n">${lead(x.leadVsLimit)}</td></tr>`,
      ),
      '</tbody></table>',
    );
  }
  out.push('</section>');
  return out.join('\n');
}

function medianLine(x: Earliness, what: string): string {
  if (x.episodes === 0) return `Against ${what}: no incident caught by both.`;
  const hours = x.medianHours === null ? '' : `, ${num(x.medianHours, 4)} operating hours`;
  return `Against ${what}: median ${num(x.medianSamples!, 3)} ${plural(x.medianSamples!, 'sample')} earlier${hours}, ${num(x.medianDays!, 3)} days, over ${x.episodes} ${plural(x.episodes, 'incident')} (${x.earlier} earlier, ${x.same} at the same sample, ${x.later} later).`;
}

function oneSided(s: BacktestSummary): string {
  const out = ['<section aria-labelledby="h-one" id="one-sided">', '<h2 id="h-one">Caught by one side only</h2>'];
  for (const r of s.runs) {
    if (s.runs.length > 1) out.push(`<h3>${e(r.label)}</h3>`);
    const byId = new Map(r.episodes.map((x) => [x.incidentId, x]));
    const list = (ids: readonly string[], what: string, key: string) =>
      `<div class="side" data-side="${key}"><h4>${e(what)} (${ids.length})</h4>${
        ids.length === 0 ? '<p class="empty">none</p>' : `<ul>${ids.map((id) => episodeItem(byId.get(id)!)).join('')}</ul>`
      }</div>`;
    out.push(
      '<div class="sides">',
      list(r.oneSided.changeOnly, 'EWMA/CUSUM only', 'change-only'),
      list(r.oneSided.classicOnly, 'classic rules only', 'classic-only'),
      list(r.oneSided.neither, 'neither (oil condition, cleanliness, a fall only)', 'neither'),
      '</div>',
    );
  }
  out.push('</section>');
  return out.join('\n');
}

function episodeItem(x: EpisodeSummary): string {
  const what = x.firsts.map((f) => `${FAMILY_WORD[f.rule]}${arrow(f.direction)} ${f.measurand}`).join(', ');
  return `<li data-incident="${e(x.incidentId)}">${severityTag(x.peakSeverity)} <a href="#${anchor(x.unit, x.component)}"><strong>${e(`${x.unit} / ${x.component}`)}</strong></a> from ${day(x.openedAt)}: ${e(what)}</li>`;
}

function episodesSection(r: RunSummary): string {
  return [
    '<section aria-labelledby="h-incidents" id="incidents">',
    `<h2 id="h-incidents">Every incident (${r.episodes.length})</h2>`,
    r.episodes.length === 0
      ? '<p class="empty">The history raised no incident.</p>'
      : [
          // A long list is folded: the summary above says what it adds up to.
          `<details class="episodes-list"${r.episodes.length <= EPISODES_OPEN ? ' open' : ''}><summary>The ${r.episodes.length} ${plural(r.episodes.length, 'incident')}, oldest first</summary>`,
          '<table class="episodes">',
          '<thead><tr><th scope="col">component</th><th scope="col">peak</th><th scope="col">opened</th><th scope="col">last sample</th><th scope="col">state</th><th scope="col">rule families, first raise</th></tr></thead>',
          '<tbody>',
          ...r.episodes.map(
            (x) =>
              `<tr data-incident="${e(x.incidentId)}"><th scope="row"><a href="#${anchor(x.unit, x.component)}">${e(`${x.unit} / ${x.component}`)}</a>${x.measurand ? ` ${e(x.measurand)}` : ''}</th><td>${severityTag(x.peakSeverity)}</td><td>${day(x.openedAt)}</td><td>${day(x.lastSampledAt)}</td><td>${e(x.state)}</td><td class="firsts">${x.firsts.map((f) => `<span class="firing">${e(`${FAMILY_WORD[f.rule]}${arrow(f.direction)} ${f.measurand}`)} <span class="when">${day(f.sampledAt)}</span></span>`).join(' ')}</td></tr>`,
          ),
          '</tbody></table>',
          '</details>',
        ].join('\n'),
    '</section>',
  ].join('\n');
}

function componentsSection(s: BacktestSummary, r: RunSummary, components: readonly ReportComponent[]): string {
  const spans = new Map(s.components.map((c) => [`${c.unit}/${c.component}`, c]));
  const out = [
    '<section aria-labelledby="h-components" id="components">',
    '<h2 id="h-components">Trend charts per component</h2>',
    `<p>Marks show where each rule family fired as each sample arrived${s.runs.length > 1 ? ` under ${e(r.label)}` : ''}: ${(['watch', 'caution', 'alarm'] as const).map((x) => severityTag(x)).join(' ')}. The lines show the history as finally stored: a result corrected later, or a baseline completed later, can leave a mark where the line no longer crosses its limit. Components with an incident come first, most severe first, and are open; the others are folded (open one by its name). The caution at the top of this page applies to every chart.</p>`,
  ];
  const peakOf = (c: ReportComponent) =>
    r.episodes.filter((x) => x.unit === c.unit && x.component === c.component).reduce((p, x) => Math.max(p, SEVERITY_RANK[x.peakSeverity]), -1);
  const ordered = [...components].sort((a, b) => peakOf(b) - peakOf(a));
  for (const c of ordered) {
    const span = spans.get(`${c.unit}/${c.component}`);
    const incidents = r.episodes.filter((x) => x.unit === c.unit && x.component === c.component);
    const peak = incidents.reduce<Severity | null>((p, x) => (p === null || SEVERITY_RANK[x.peakSeverity] > SEVERITY_RANK[p] ? x.peakSeverity : p), null);
    out.push(
      `<details class="component" id="${anchor(c.unit, c.component)}"${incidents.length > 0 ? ' open' : ''}>`,
      `<summary><span class="name">${e(`${c.unit} / ${c.component}`)}</span> <span class="meta">${e(span?.group ?? '')} · ${span?.samples ?? 0} samples · ${span?.from ? `${day(span.from)} to ${day(span.to!)}` : ''}</span> <span class="status">${peak === null ? 'no incident' : `${severityTag(peak)} ${incidents.length} ${plural(incidents.length, 'incident')}`}</span></summary>`,
      ...c.charts.map((ch) => `<figure class="chart" data-measurand="${e(ch.measurand)}"><figcaption>${e(ch.measurand)} <span class="sub">${ch.marks} ${plural(ch.marks, 'finding')}</span></figcaption>${ch.svg}</figure>`),
      '</details>',
    );
  }
  out.push('</section>');
  return out.join('\n');
}

const SEVERITY_RANK: Record<Severity, number> = { watch: 0, caution: 1, alarm: 2 };

/** Up to this many incidents the list is shown open; a longer one is folded. */
const EPISODES_OPEN = 12;

function severityTag(s: Severity): string {
  const style = SEVERITY_STYLE[s];
  return `<span class="sev sev-${s}"><span class="glyph" aria-hidden="true">${style.glyph}</span> ${style.word}</span>`;
}

function firing(f: Firing | null): string {
  if (f === null) return '–';
  return `${e(`${FAMILY_WORD[f.rule]}${arrow(f.direction)} ${f.measurand}`)} <span class="when">${day(f.sampledAt)}${f.unitHours === null ? '' : ` · ${f.unitHours} h`}</span>`;
}

function lead(l: Lead | null): string {
  if (l === null) return '–';
  return `<strong>${l.samples}</strong> ${plural(l.samples, 'sample')}<span class="sub">${l.hours === null ? '' : `${num(l.hours, 5)} h · `}${num(l.days, 4)} d</span>`;
}

function arrow(direction: 'up' | 'down' | undefined): string {
  return direction === 'up' ? ' ↑' : direction === 'down' ? ' ↓' : '';
}

function anchor(unit: string, component: string): string {
  return `c-${`${unit}-${component}`.replace(/[^A-Za-z0-9_-]/g, '_')}`;
}

function day(iso: string): string {
  return iso.slice(0, 10);
}

function plural(n: number, word: string): string {
  return Math.abs(n) === 1 ? word : `${word}s`;
}

function num(x: number, digits: number): string {
  return Number.isInteger(x) ? String(x) : String(Number(x.toPrecision(digits)));
}

function e(text: string): string {
  return escapeHtml(text);
}

const STYLE = `
:root { color-scheme: light; --ground: ${NEUTRAL.background}; --panel: #f6f6f5; --line: ${NEUTRAL.grid}; --text: ${NEUTRAL.text}; --muted: ${NEUTRAL.mutedText}; }
* { box-sizing: border-box; }
body { margin: 0; background: var(--ground); color: var(--text); font: 15px/1.45 "DejaVu Sans", Verdana, system-ui, sans-serif; }
header.page { padding: 22px 32px 14px; background: #d9d9d7; border-bottom: 1px solid #c4c4c2; }
.product { margin: 0; font-size: 12px; letter-spacing: .08em; text-transform: uppercase; color: var(--muted); }
h1 { margin: 4px 0 6px; font-size: 24px; font-weight: 600; }
.lede { margin: 0; color: var(--muted); }
.caution { margin: 0.6rem 0 0; padding: 0.5rem 0.75rem; border-left: 4px solid #555; background: #f2f2f2; }
main { padding: 8px 32px 24px; max-width: 1180px; }
section { margin: 22px 0; }
.pair { display: grid; grid-template-columns: minmax(0, 1fr); gap: 0 28px; }
@media (min-width: 1100px) { .pair { grid-template-columns: 500px minmax(0, 1fr); } }
#families th[scope="row"] { white-space: nowrap; }
h2 { font-size: 18px; font-weight: 600; margin: 0 0 10px; padding-bottom: 4px; border-bottom: 1px solid #c9c9c7; }
h3 { font-size: 15px; margin: 14px 0 6px; }
h4 { font-size: 14px; margin: 0 0 6px; }
p { margin: 6px 0; }
.cards { display: grid; grid-template-columns: repeat(auto-fit, minmax(190px, 1fr)); gap: 12px; }
.card { background: var(--panel); border: 1px solid #cfcfcd; border-radius: 6px; padding: 12px 14px; }
.card .value { font-size: 26px; font-weight: 600; margin: 0; }
.card .label { margin: 2px 0 0; font-weight: 600; }
.card .note { margin: 2px 0 0; font-size: 13px; color: var(--muted); }
table { border-collapse: collapse; background: var(--panel); border: 1px solid #cfcfcd; font-size: 14px; }
th, td { padding: 6px 10px; border-bottom: 1px solid var(--line); text-align: left; vertical-align: top; }
thead th { background: #e9e9e7; font-weight: 600; font-size: 13px; color: #333; }
td.n { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
tr.total th, tr.total td { border-top: 2px solid #bdbdbb; }
.code { font-family: "DejaVu Sans Mono", monospace; font-size: 12px; color: var(--muted); }
.sub { display: block; font-size: 12px; color: var(--muted); font-weight: normal; }
.when { color: var(--muted); font-size: 12px; white-space: nowrap; }
.firing { display: inline-block; margin: 0 8px 2px 0; }
.sev { white-space: nowrap; font-weight: 600; }
.sev .glyph { font-size: 14px; }
.sev-watch .glyph { color: ${SEVERITY_STYLE.watch.colour}; }
.sev-caution .glyph { color: #9a6a00; }
.sev-alarm .glyph { color: ${SEVERITY_STYLE.alarm.colour}; }
.params { background: var(--panel); border: 1px solid #cfcfcd; border-radius: 6px; padding: 10px 14px; margin: 8px 0; }
.params .groups { font-weight: 600; margin: 0 0 4px; }
.conversion { margin: 4px 0; padding-left: 22px; }
pre { background: #ececea; border: 1px solid #d4d4d2; padding: 8px 10px; white-space: pre-wrap; overflow-wrap: anywhere; font-size: 12.5px; margin: 4px 0 0; }
.cmd-note { font-size: 13px; color: var(--muted); margin-bottom: 0; }
.medians { background: var(--panel); border-left: 4px solid #8a8a8a; padding: 8px 12px; }
.sides { display: grid; grid-template-columns: repeat(auto-fit, minmax(280px, 1fr)); gap: 12px; }
.side { background: var(--panel); border: 1px solid #cfcfcd; border-radius: 6px; padding: 10px 14px; }
.side ul { margin: 0; padding-left: 18px; }
.empty { color: var(--muted); font-style: italic; }
tr.differs { background: #ecebe3; }
tr.differs th { border-left: 4px solid #555; }
.differs-tag { font-weight: 600; white-space: nowrap; border: 1px solid #777; border-radius: 3px; padding: 0 4px; font-size: 12px; }
.sr { position: absolute; width: 1px; height: 1px; overflow: hidden; clip: rect(0 0 0 0); }
details.component { background: var(--panel); border: 1px solid #cfcfcd; border-radius: 6px; margin: 10px 0; padding: 0 14px; }
details.component > summary { cursor: pointer; padding: 10px 0; }
details.component > summary .name { font-weight: 600; }
details.component > summary .meta { color: var(--muted); font-size: 13px; margin-left: 6px; }
details.component > summary .status { float: right; font-size: 13px; }
figure.chart { margin: 6px 0 14px; }
figure.chart figcaption { font-weight: 600; margin-bottom: 2px; }
figure.chart svg { max-width: 100%; height: auto; border-radius: 4px; }
a { color: #1f3f7a; }
footer { padding: 14px 32px 28px; color: var(--muted); font-size: 13px; border-top: 1px solid #c9c9c7; }
table.bad-actors caption, table.escalation caption { text-align: left; font-weight: 600; padding: 4px 0; }
#alarm-figures details { margin-top: 10px; }
#alarm-figures .pair { align-items: start; }
#alarm-figures table { margin-bottom: 12px; }
@media print { details.component { break-inside: avoid; } }
/* On a phone: wide tables and the charts scroll sideways inside the page, which itself never does; a chart keeps a
   size at which its labels can be read. */
@media (max-width: 700px) {
  body { overflow-wrap: anywhere; }
  table { display: block; overflow-x: auto; max-width: 100%; }
  figure.chart { overflow-x: auto; }
  figure.chart svg { max-width: none; width: 640px; }
}
`;
