/**
 * The backtest report's section on the alarm-management key figures (ISA-18.2 / IEC 62682, EEMUA 191): load per
 * responder, standing, stale and chattering incidents, and the bad actors, beside the published reference figures.
 */
import { RULE_FAMILY_LABELS } from '../domain/finding.ts';
import { ALARM_BENCHMARKS } from '../incidents/alarmBenchmarks.ts';
import type { AlarmFigures } from '../incidents/alarmFigures.ts';
import { escapeHtml } from '../domain/safeText.ts';
import type { BacktestSummary, EscalationIfUnanswered } from './summary.ts';

export function alarmSection(s: BacktestSummary): string {
  const out = [
    '<section aria-labelledby="h-alarm" id="alarm-figures">',
    '<h2 id="h-alarm">Expected noise: alarm-management key figures</h2>',
    '<p>What the incidents of this history would ask of people, in the terms of ISA-18.2 / IEC 62682 and EEMUA 191, with every result arriving live at its sampling time. An annunciation is an incident opening or becoming active again; the tier-0 targets of the escalation chain running at that point hear of it (the policy matching the incident\u2019s severity when it was announced, and any policy a rise in severity brings in before it returns to normal), counted on the day of the annunciation. Nobody acknowledges in a backtest, so the stale figure shows what would go stale if nobody answered, and the later tiers are listed apart with what they would hear of if nobody acknowledged within their delay. Reminders (repeatMinutes) are not counted.</p>',
  ];
  for (const r of s.runs) {
    if (s.runs.length > 1) out.push(`<h3>${e(r.label)}</h3>`);
    out.push(figuresBlock(r.alarmFigures), escalationBlock(r.escalation));
  }
  out.push(
    '<details><summary>Published reference figures (control rooms of process plants; recalled from memory)</summary>',
    '<table class="benchmarks"><thead><tr><th scope="col">figure</th><th scope="col">reference</th><th scope="col">source</th></tr></thead><tbody>',
    ...ALARM_BENCHMARKS.map((b) => `<tr><th scope="row">${e(b.figure)}</th><td>${e(b.value)}</td><td>${e(b.source)}</td></tr>`),
    '</tbody></table></details>',
    '</section>',
  );
  return out.join('\n');
}

function figuresBlock(f: AlarmFigures): string {
  const busiest = f.busiest;
  const rows: Array<[string, string, string]> = [
    ['annunciations', String(f.annunciations), `${f.incidents} incidents opened${f.per100ComponentYears === null ? '' : `, ${num(f.per100ComponentYears)} per 100 component-years`}`],
    [
      'busiest responder, per day',
      busiest === null ? '–' : `${num(busiest.perDay.average)} average, ${busiest.perDay.peak} peak`,
      busiest === null ? 'no escalation policy names anybody' : `${busiest.responder}${busiest.perDay.peakAt === null ? '' : `, peak on ${busiest.perDay.peakAt}`}`,
    ],
    ['busiest responder, per week', busiest === null ? '–' : `${num(busiest.perWeek.average)} average, ${busiest.perWeek.peak} peak`, busiest?.perWeek.peakAt ? `peak in the week of ${busiest.perWeek.peakAt}` : ''],
    ['heard by nobody', String(f.unrouted + f.quiet), `annunciations no escalation policy matches${f.quiet > 0 ? `, or only seen in quiet backfill (${f.quiet})` : ''}`],
    ['standing', `${f.standing.peak} at most at once`, `active longer than ${num(f.standing.afterDays)} days; ${f.standing.incidents} incidents in all, ${f.standing.atEnd} at the end`],
    ['stale', `${f.stale.peak} at most at once`, `open and unacknowledged longer than ${num(f.stale.afterDays)} days; ${f.stale.incidents} incidents in all, ${f.stale.atEnd} at the end`],
    ['chattering', `${f.chattering.incidents} incidents`, `${f.chattering.annunciations} annunciations within ${num(f.chattering.withinDays)} days of a return to normal`],
    ['top components\u2019 share', f.badActors.topComponentsShare === null ? '–' : `${num(100 * f.badActors.topComponentsShare)} %`, `of all annunciations, by the ${f.badActors.components.length} listed below`],
  ];
  return [
    `<div class="alarm-figures" data-period="${e(f.period.from)}/${e(f.period.to)}">`,
    '<table class="key-figures"><thead><tr><th scope="col">figure</th><th scope="col">value</th><th scope="col">what it counts</th></tr></thead><tbody>',
    ...rows.map(([k, v, note]) => `<tr data-figure="${e(k)}"><th scope="row">${e(k)}</th><td class="n">${e(v)}</td><td>${e(note)}</td></tr>`),
    '</tbody></table>',
    f.responders.length === 0
      ? '<p class="empty">The configuration names no responder (no escalation policy): every incident is recorded and listed, nobody is told.</p>'
      : [
          '<table class="responders"><thead><tr><th scope="col">responder (tier 0)</th><th scope="col">annunciations</th><th scope="col">per day: average</th><th scope="col">peak</th><th scope="col">per week: average</th><th scope="col">peak</th></tr></thead><tbody>',
          ...f.responders.map(
            (r) =>
              `<tr><th scope="row">${e(r.responder)}</th><td class="n">${r.annunciations}</td><td class="n">${num(r.perDay.average)}</td><td class="n">${r.perDay.peak}</td><td class="n">${num(r.perWeek.average)}</td><td class="n">${r.perWeek.peak}</td></tr>`,
          ),
          '</tbody></table>',
        ].join('\n'),
    '<div class="pair">',
    listTable('bad-actor components', ['component', 'annunciations', 'incidents'], f.badActors.components.map((c) => [`${c.unit} / ${c.component}`, String(c.annunciations), String(c.incidents)])),
    listTable('bad-actor rule and measurand pairs', ['rule', 'measurand', 'incidents'], f.badActors.pairs.map((p) => [RULE_FAMILY_LABELS[p.rule], p.measurand, String(p.incidents)])),
    '</div>',
    '</div>',
  ].join('\n');
}

function escalationBlock(x: EscalationIfUnanswered): string {
  if (x.responders.length === 0) return '<p class="empty" data-escalation="none">No escalation policy has a tier after the first: nobody else would be told if nobody acknowledged.</p>';
  return [
    `<table class="escalation"><caption>Later tiers if nobody acknowledges: ${x.annunciations} ${x.annunciations === 1 ? 'annunciation' : 'annunciations'} would go beyond tier 0</caption>`,
    '<thead><tr><th scope="col">responder (later tier)</th><th scope="col">annunciations</th></tr></thead><tbody>',
    ...x.responders.map((r) => `<tr><th scope="row">${e(r.responder)}</th><td class="n">${r.annunciations}</td></tr>`),
    '</tbody></table>',
  ].join('\n');
}

function listTable(caption: string, head: readonly string[], rows: readonly (readonly string[])[]): string {
  if (rows.length === 0) return `<p class="empty">${e(caption)}: none.</p>`;
  return [
    `<table class="bad-actors"><caption>${e(caption)}</caption><thead><tr>${head.map((h) => `<th scope="col">${e(h)}</th>`).join('')}</tr></thead><tbody>`,
    ...rows.map(([first, ...rest]) => `<tr><th scope="row">${e(first ?? '')}</th>${rest.map((c) => `<td${/^[\d.]+$/.test(c) ? ' class="n"' : ''}>${e(c)}</td>`).join('')}</tr>`),
    '</tbody></table>',
  ].join('\n');
}

function num(x: number): string {
  return Number.isInteger(x) ? String(x) : String(Number(x.toPrecision(3)));
}

function e(text: string): string {
  return escapeHtml(text);
}
