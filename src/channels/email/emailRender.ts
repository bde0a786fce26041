/**
 * Renders an incident message as an e-mail: a plain-text part for every reader and an HTML part with the same
 * content. Values from lab feeds are sanitised for headers and escaped for HTML.
 */
import { createHash } from 'node:crypto';
import { MEASURANDS, isMeasurand } from '../../domain/measurands.ts';
import { ADVISORY_CAUTION, FORECAST_CAUTION } from '../../domain/caution.ts';
import { asksForAcknowledgement, bySeverity, evidenceSetAside, severityWords, type IncidentMessage, type MessageFinding } from '../../notify/message.ts';
import { DEFAULT_TIME_ZONE, formatNumber, formatTime as formatTimeIn, timeZoneNote } from '../../notify/format.ts';
import { escapeHtml, headerValue, httpUrl, oneLine } from '../../domain/safeText.ts';
import { REOPENED } from '../../incidents/verdict.ts';
import { BORNE_OUT, closureText, NO_LONGER_HOLD } from '../../incidents/model.ts';
import { SAMPLE_SUBJECT, SAMPLE_WIDE_WORDS } from '../../domain/finding.ts';

export { ADVISORY_CAUTION };

export interface EmailRenderOptions {
  /** Sender, e.g. `wearshift <alerts@plant.example>`; its domain also names the Message-ID. */
  from: string;
  to: string | string[];
  /** The signed acknowledgement link; left out of messages that no longer ask for acknowledgement. */
  ackUrl?: string;
  /** When the acknowledgement link stops working, so that the reader is told. */
  ackExpiresAt?: Date;
  /** The trend chart of the incident's evidence, shown inline in the HTML part. */
  chart?: EmailChart;
  /** The site zone times are shown in (`display.timeZone`). Default UTC. */
  timeZone?: string;
}

export type { EmailChart } from '../../notify/incidentChart.ts';
import type { EmailChart } from '../../notify/incidentChart.ts';

export interface EmailAttachment {
  filename: string;
  content: Buffer;
  contentType: string;
  /** Content-ID the HTML part refers to (`cid:`), for an inline image. */
  cid: string;
}

export interface RenderedEmail {
  from: string;
  to: string | string[];
  subject: string;
  text: string;
  html: string;
  /** Message-ID, References, X-Wearshift-* and Auto-Submitted; every value is one sanitised line. */
  headers: Record<string, string>;
  attachments: EmailAttachment[];
}

const CHART_CID = 'trend-chart@wearshift';

/** Above the advisory findings of the evidence's sample (IncidentMessage.advisoryFindings). */
export const ADVISORY_HEADING = 'Also on this sample (advisory, opens no incident)';

/** Most mail clients show about this much of a subject line. */
const SUBJECT_MAX = 180;
/** More columns than this do not fit a phone screen; the findings' measurands come first. */
const TABLE_MAX_MEASURANDS = 8;

export function renderIncidentEmail(msg: IncidentMessage, options: EmailRenderOptions): RenderedEmail {
  const inc = msg.incident;
  const zone = options.timeZone ?? DEFAULT_TIME_ZONE;
  const formatTime = (iso: string) => formatTimeIn(iso, zone);
  const returned = msg.type === 'returned';
  // Closed because the history no longer gives its findings (withdrawn, or a sample verdict): the message carries none,
  // and says so rather than "no findings attached". (Messages queued before the closing was carried: by their words.)
  const setAside = evidenceSetAside(msg) || (msg.type === 'closed' && msg.incident.closed === undefined && msg.findings.length === 0 && msg.whatChanged.includes(NO_LONGER_HOLD));
  // Such a closing asks nothing: it carries no severity that a mail rule would page on, only the one last told.
  const severity = setAside ? `closed (last announced as ${inc.severity})` : severityWords(inc.severity, inc.peakSeverity);
  const subjectTag = setAside ? 'closed' : severityWords(inc.severity, inc.peakSeverity);
  const incidentUrl = httpUrl(inc.url, 'incident.url');
  const ackUrl = options.ackUrl !== undefined && asksForAcknowledgement(msg) ? httpUrl(options.ackUrl, 'ackUrl') : undefined;
  const where = `${oneLine(inc.unit)} / ${oneLine(inc.component)}`;
  const what = headline(msg);
  const whatChanged = withoutHeadline(oneLine(msg.whatChanged), what);
  const described = (f: MessageFinding) => ({
    title: `${oneLine(f.subject)}, ${oneLine(f.rule)} rule, ${oneLine(f.severity)}: ${statement(f)}`,
    since: `sample ${oneLine(f.sampleId)}, drawn ${formatTime(f.sampledAt)}`,
    explanation: oneLine(f.explanation),
  });
  const evidence = bySeverity(msg.findings).map(described);
  // Shown beside the evidence, under a heading of their own: they open nothing and set no severity.
  const advisories = bySeverity(msg.advisoryFindings).map(described);
  // As of the evidence's sample: a return to normal or a closing shows later results that it does not speak for.
  const forecasts = returned || msg.type === 'closed' ? [] : (msg.forecast?.items ?? []).map((f) => oneLine(f.text));
  const table = resultsTable(msg, formatTime);
  const expiry = options.ackExpiresAt ? ` The link works until ${formatTime(options.ackExpiresAt.toISOString())}.` : '';
  const context = `Open since ${formatTime(inc.openedAt)} · group ${oneLine(inc.group)} · state ${oneLine(inc.state)} · escalation tier ${inc.tier}. ${timeZoneNote(zone)}`;
  // A sample rejected as the sampling findings said: those findings were borne out, not found wrong.
  const borneOut = setAside && msg.whatChanged.includes(BORNE_OUT) && !msg.whatChanged.includes(NO_LONGER_HOLD);
  // A return to normal is no verdict on the cause: the evidence that raised the incident is shown as what it was.
  const standing = returned ? returnedNote(msg) : borneOut ? BORNE_OUT_NOTE : setAside ? SET_ASIDE_NOTE : undefined;
  const evidenceHeading = returned ? 'Evidence that raised it (not seen in the latest samples)' : 'Evidence';
  const noEvidence = borneOut ? '(none: the sample was judged wrong and kept out of the trend, see What changed)' : setAside ? `(none: ${NO_LONGER_HOLD}, see What changed)` : '(no findings attached)';

  const text = [
    `Incident ${oneLine(inc.id)} on ${where}: ${severity}. ${what}.`,
    ...(standing ? ['', standing] : []),
    '',
    'What changed',
    whatChanged,
    '',
    evidenceHeading,
    ...(evidence.length === 0 ? [noEvidence] : evidence.flatMap((e) => [`- ${e.title} (${e.since}).`, `  ${e.explanation}`])),
    ...(advisories.length > 0 ? ['', ADVISORY_HEADING, ...advisories.flatMap((e) => [`- ${e.title} (${e.since}).`, `  ${e.explanation}`])] : []),
    ...(forecasts.length > 0 ? ['', 'Time to limit', ...forecasts.map((f) => `- ${f}`), `  ${FORECAST_CAUTION}`] : []),
    ...(options.chart ? ['', 'Trend', oneLine(options.chart.alt)] : []),
    '',
    'Last results',
    ...textTable(table),
    '',
    'Incident on the board (sign in with your board token):',
    incidentUrl,
    // The link alone on its line, so that no mail client takes trailing words into it.
    ...(ackUrl ? ['Acknowledge (a page asks you to confirm):', ackUrl, ...(expiry ? [expiry.trim()] : [])] : []),
    '',
    context,
    '',
    ADVISORY_CAUTION,
    '',
  ].join('\n');

  const html = [
    '<!DOCTYPE html>',
    '<html lang="en"><head><meta charset="utf-8"><title>' + escapeHtml(`${where}: ${what}`) + '</title></head>',
    '<body style="font-family:sans-serif;line-height:1.4;max-width:46em">',
    `<p><strong>Incident ${escapeHtml(oneLine(inc.id))} on ${escapeHtml(where)}: ${escapeHtml(severity)}.</strong> ${escapeHtml(what)}.</p>`,
    ...(standing ? [`<p>${escapeHtml(standing)}</p>`] : []),
    '<h3>What changed</h3>',
    `<p>${escapeHtml(whatChanged)}</p>`,
    `<h3>${escapeHtml(evidenceHeading)}</h3>`,
    evidence.length === 0
      ? `<p>${escapeHtml(noEvidence)}</p>`
      : `<ul>${evidence.map((e) => `<li><strong>${escapeHtml(e.title)}</strong> (${escapeHtml(e.since)}).<br>${escapeHtml(e.explanation)}</li>`).join('')}</ul>`,
    ...(advisories.length > 0
      ? [`<h3>${escapeHtml(ADVISORY_HEADING)}</h3>`, `<ul>${advisories.map((e) => `<li>${escapeHtml(e.title)} (${escapeHtml(e.since)}).<br>${escapeHtml(e.explanation)}</li>`).join('')}</ul>`]
      : []),
    ...(forecasts.length > 0
      ? ['<h3>Time to limit</h3>', `<ul>${forecasts.map((f) => `<li>${escapeHtml(f)}</li>`).join('')}</ul>`, `<p style="color:#555"><em>${escapeHtml(FORECAST_CAUTION)}</em></p>`]
      : []),
    ...(options.chart
      ? ['<h3>Trend</h3>', `<p><img src="cid:${CHART_CID}" width="${options.chart.width}" style="max-width:100%;height:auto" alt="${escapeHtml(oneLine(options.chart.alt))}"></p>`]
      : []),
    '<h3>Last results</h3>',
    htmlTable(table),
    `<p><a href="${escapeHtml(incidentUrl)}">Open the incident on the board</a> (sign in with your board token).</p>`,
    ...(ackUrl ? [`<p><a href="${escapeHtml(ackUrl)}">Acknowledge this incident</a> (a page asks you to confirm).${escapeHtml(expiry)}</p>`] : []),
    `<p style="color:#555">${escapeHtml(context)}</p>`,
    `<p style="color:#555"><em>${escapeHtml(ADVISORY_CAUTION)}</em></p>`,
    '</body></html>',
    '',
  ].join('\n');

  const domain = mailDomain(options.from);
  return {
    from: options.from,
    to: options.to,
    subject: headerValue(`[wearshift ${subjectTag}] ${where}: ${what}${setAside ? '' : ` — ${returned ? 'earlier evidence ' : ''}${evidenceSummary(msg)}`}`, SUBJECT_MAX),
    text,
    html,
    headers: {
      // The same idempotency key gives the same Message-ID, so a resend after a lost reply is recognisable.
      'Message-ID': `<${digest(msg.idempotencyKey)}.message@${domain}>`,
      // Every message of one incident refers to one thread root, so mail clients file them together.
      References: `<${digest(inc.id)}.incident@${domain}>`,
      'X-Wearshift-Incident': headerValue(inc.id, 120),
      'X-Wearshift-Event': msg.type,
      // `none` for a closing whose evidence was set aside: it asks nothing (ISA-18.2), so nothing should page on it.
      'X-Wearshift-Severity': setAside ? 'none' : inc.severity,
      // RFC 3834: an automatic message; auto-responders should not answer it.
      'Auto-Submitted': 'auto-generated',
    },
    attachments: options.chart ? [{ filename: 'trend.png', content: options.chart.png, contentType: 'image/png', cid: CHART_CID }] : [],
  };
}

function headline(msg: IncidentMessage): string {
  const by = msg.incident.acknowledgedBy;
  switch (msg.type) {
    case 'opened':
      return 'New incident';
    case 'updated':
      // A closed incident that came back is a new alarm situation for the reader, not more of the same.
      return msg.whatChanged.startsWith(REOPENED) ? 'Reopened after it had been closed, acknowledge again' : 'New evidence';
    case 'escalated':
      return `Escalated to tier ${msg.incident.tier}, still not acknowledged`;
    case 'acknowledged':
      return by === undefined ? 'Acknowledged' : `Acknowledged by ${oneLine(by)}`;
    case 'returned':
      return by === undefined ? 'Readings back to normal, still to be acknowledged' : 'Readings back to normal';
    case 'closed': {
      const closed = msg.incident.closed;
      if (closed?.how === 'sample-verdict') {
        const word = closed.verdict === undefined ? 'judged' : oneLine(closed.verdict);
        return `Closed by a sample verdict: ${oneLine(closed.sampleId ?? '(unknown sample)')} ${word} by ${oneLine(closed.by ?? 'a responder')}`;
      }
      return closed?.how === 'withdrawn' || (closed === undefined && msg.whatChanged.startsWith(WITHDRAWN)) ? 'Withdrawn, no longer stands' : 'Closed';
    }
  }
}

/** How the closing message of an incident withdrawn by a late or corrected result begins (model.ts `closureText`). */
const WITHDRAWN = closureText({ how: 'withdrawn' });

/** Above the message of an incident closed because the history no longer gives the findings it stood on. */
const SET_ASIDE_NOTE =
  'The results as they stand now no longer give the findings this incident was raised on (named under What changed): ' +
  'none is shown as evidence, and nothing is asked of you.';

/** Above the message of an incident closed because a responder rejected its sample, as its sampling findings said. */
const BORNE_OUT_NOTE =
  'A responder judged the sample wrong, as the sampling findings named under What changed said: it is kept out of the ' +
  'trend, and nothing more is asked of you.';

/**
 * What a return to normal means for the reader. The engine tells of a return only while nobody has acknowledged the
 * incident (ISA-18.2: a returned, unacknowledged alarm still asks for acknowledgement).
 */
function returnedNote(msg: IncidentMessage): string {
  const by = msg.incident.acknowledgedBy;
  if (by !== undefined) return `The latest samples show none of the findings below; ${oneLine(by)} has acknowledged the incident.`;
  return (
    'The latest samples show none of the findings below, but nobody has acknowledged the incident yet: it stays open until ' +
    'someone does, and acknowledging it now closes it. Readings back to normal do not show that the cause is gone; ' +
    'whether to look further is for you to decide, with the lab.'
  );
}


/** "Fe: cusum, rate; Cu: limit" ("sample: duplicated bottle"): what the evidence is about, most severe first, for the subject line. */
function evidenceSummary(msg: IncidentMessage): string {
  const rules = new Map<string, string[]>();
  for (const f of bySeverity(msg.findings)) {
    const what = oneLine(f.subject === SAMPLE_SUBJECT && f.check !== undefined ? ((SAMPLE_WIDE_WORDS as Readonly<Record<string, string>>)[f.check] ?? f.check) : f.rule);
    const list = rules.get(oneLine(f.subject)) ?? [];
    if (!list.includes(what)) list.push(what);
    rules.set(oneLine(f.subject), list);
  }
  if (rules.size === 0) return 'no findings attached';
  const parts = [...rules].map(([m, r]) => `${m}: ${r.join(', ')}`);
  return parts.length <= 3 ? parts.join('; ') : `${parts.slice(0, 3).join('; ')} and ${parts.length - 3} more`;
}

/**
 * The engine's reason often starts with the headline's own words ("new incident, caution: …"); the message says
 * those once, in the headline.
 */
function withoutHeadline(reason: string, headline: string): string {
  if (reason.startsWith(REOPENED) && headline.startsWith('Reopened')) return reason.slice(REOPENED.length).replace(/^; /, '');
  const m = /^(new incident|new evidence)(, (watch|caution|alarm))?: /i.exec(reason);
  if (m !== null && headline.toLowerCase().startsWith(m[1]!.toLowerCase())) return reason.slice(m[0].length);
  return reason;
}

/**
 * A sample-wide finding's value in words: what it counts or the hours it compares; for a new-oil bottle the metal
 * its value is the reading of (the first of those that read like new oil).
 */
function sampleWideStatement(f: MessageFinding): string {
  const words = (f.check !== undefined ? (SAMPLE_WIDE_WORDS as Readonly<Record<string, string>>)[f.check] : undefined) ?? oneLine(f.check ?? f.rule);
  const value = formatNumber(f.value);
  const was = f.threshold === undefined ? undefined : formatNumber(f.threshold);
  switch (f.check) {
    case 'duplicate-bottle':
      return `${words}, all ${value} readings identical to an earlier sample`;
    case 'unit-hours-back':
      return `unit hours ${value}${was === undefined ? '' : `, lower than ${was} of the last sample`}`;
    case 'oil-hours-back':
      return `oil hours ${value}${was === undefined ? '' : `, lower than ${was} before on this charge`}`;
    case 'new-oil-mid-charge': {
      const unit = isMeasurand(f.measurand) ? ` ${MEASURANDS[f.measurand].unit}` : '';
      return `${words}, ${oneLine(f.measurand)} ${value}${unit}${was === undefined ? '' : ` after ${was}${unit}`}`;
    }
    case 'foreign-oil':
      return `${words}, ${value} additive elements unlike this charge's oil`;
    default:
      return words;
  }
}

/** The value in the words of its basis, against its limit where the rule has one, both in the same unit. */
function statement(f: MessageFinding): string {
  if (f.subject === SAMPLE_SUBJECT) return sampleWideStatement(f);
  const value = formatNumber(f.value);
  const unit = isMeasurand(f.measurand) ? MEASURANDS[f.measurand].unit : '';
  const withUnit = (x: string, u: string) => (u === '' ? x : u === '%' ? `${x} %` : `${x} ${u}`);
  // A wear rate is in the reading's unit per 100 h (ppm for the elements, index points for PQ).
  const rateUnit = `${unit === 'index' ? 'index points' : unit || 'ppm'} per 100 h`;
  const measured = (() => {
    switch (f.basis) {
      case 'reading':
        return `reading ${withUnit(value, unit)}`;
      case 'rate':
        return `wear rate ${withUnit(value, rateUnit)}`;
      case 'ewma':
        return `EWMA statistic ${value}`;
      case 'cusum':
        return `CUSUM statistic ${value}`;
      case 'change':
        // The condition rule's change from the new-oil value is in per cent of that value.
        return `change from new oil ${withUnit(value, '%')}`;
      case 'steps':
        return `${value} code steps`;
      default:
        return `${oneLine(f.basis)} ${value}`;
    }
  })();
  if (f.threshold === undefined) return measured;
  const limitUnit = f.basis === 'change' ? '%' : f.basis === 'reading' ? unit : f.basis === 'rate' ? rateUnit : '';
  return `${measured} against its limit ${withUnit(formatNumber(f.threshold), limitUnit)}`;
}

interface ResultsTable {
  header: string[];
  rows: string[][];
}

function resultsTable(msg: IncidentMessage, formatTime: (iso: string) => string): ResultsTable {
  const measurands: string[] = [];
  for (const name of [...msg.findings.filter((f) => f.subject !== SAMPLE_SUBJECT).map((f) => f.measurand), ...msg.recentResults.flatMap((r) => Object.keys(r.readings))]) {
    if (!measurands.includes(name) && measurands.length < TABLE_MAX_MEASURANDS) measurands.push(name);
  }
  return {
    header: ['Sample', 'Drawn', 'Oil h', ...measurands].map(oneLine),
    rows: msg.recentResults.map((r) =>
      [r.sampleId, formatTime(r.sampledAt), r.oilHours === undefined ? '' : formatNumber(r.oilHours), ...measurands.map((m) => r.readings[m] ?? '')].map(oneLine),
    ),
  };
}

function textTable(t: ResultsTable): string[] {
  if (t.rows.length === 0) return ['(no results attached)'];
  const widths = t.header.map((h, i) => Math.max(h.length, ...t.rows.map((r) => (r[i] ?? '').length)));
  const line = (cells: string[]) => cells.map((c, i) => c.padEnd(widths[i] ?? 0)).join('  ').trimEnd();
  return [line(t.header), ...t.rows.map(line)];
}

function htmlTable(t: ResultsTable): string {
  if (t.rows.length === 0) return '<p>(no results attached)</p>';
  const cell = (tag: 'th' | 'td', c: string) => `<${tag} style="border:1px solid #999;padding:2px 6px;text-align:left">${escapeHtml(c)}</${tag}>`;
  return [
    '<table style="border-collapse:collapse">',
    `<thead><tr>${t.header.map((h) => cell('th', h)).join('')}</tr></thead>`,
    `<tbody>${t.rows.map((r) => `<tr>${r.map((c) => cell('td', c)).join('')}</tr>`).join('')}</tbody>`,
    '</table>',
  ].join('');
}

function digest(text: string): string {
  return createHash('sha256').update(text).digest('hex').slice(0, 32);
}

/** The domain of the sender's address; RFC 5322 wants a Message-ID the sender's domain vouches for. */
export function mailDomain(from: string): string {
  const m = /@([A-Za-z0-9](?:[A-Za-z0-9-]*[A-Za-z0-9])?(?:\.[A-Za-z0-9](?:[A-Za-z0-9-]*[A-Za-z0-9])?)*)>?\s*$/.exec(from.trim());
  return m?.[1]?.toLowerCase() ?? 'wearshift.invalid';
}
