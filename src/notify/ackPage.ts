/** The small HTML pages behind an acknowledgement link: confirm, done, and the refusals. */
import { escapeHtml, oneLine } from '../domain/safeText.ts';
import { ADVISORY_CAUTION, severityWords } from './message.ts';
import { formatTime, timeZoneNote } from './format.ts';
import { SEVERITY_STYLE } from '../charts/severityStyle.ts';

/** What the confirmation page tells about an incident; supplied by whoever stores incidents. */
export interface AckIncidentSummary {
  id: string;
  unit: string;
  component: string;
  severity: 'watch' | 'caution' | 'alarm';
  peakSeverity?: 'watch' | 'caution' | 'alarm';
  /** The zone times are shown in (`display.timeZone`). Default UTC. */
  timeZone?: string;
  /** Shown as given. */
  state: string;
  openedAt: string;
  whatChanged?: string;
  acknowledgedBy?: string;
  closed?: boolean;
  /** Closed with its evidence set aside (withdrawn, or a sample verdict): the severity is only what was last announced. */
  setAside?: boolean;
}

export type AckRefusal = 'expired' | 'tampered' | 'malformed' | 'unknown-incident';

export type AckPageView =
  | { kind: 'confirm'; incident: AckIncidentSummary; name: string; note?: string; expiresAt: Date; problem?: string }
  | { kind: 'done'; incident: AckIncidentSummary; by: string }
  | { kind: 'already-acknowledged'; incident: AckIncidentSummary }
  | { kind: 'closed'; incident: AckIncidentSummary }
  | { kind: 'refused'; reason: AckRefusal }
  | { kind: 'failed' };

export const ACK_NAME_MAX = 80;
export const ACK_NOTE_MAX = 500;

const REFUSALS: Record<AckRefusal, { title: string; sentence: string }> = {
  expired: {
    title: 'Link expired',
    sentence: 'This acknowledgement link has expired. Use the link in a newer message, or acknowledge the incident on the board or with "wearshift incidents ack".',
  },
  tampered: {
    title: 'Link not valid',
    sentence: 'This acknowledgement link is not valid: it was changed after it was sent. Use the link exactly as it arrived in the message.',
  },
  malformed: {
    title: 'Link not valid',
    sentence: 'This acknowledgement link is not valid: it is incomplete or cut short. Use the whole link as it arrived in the message.',
  },
  'unknown-incident': {
    title: 'Incident not found',
    sentence: 'The incident this link refers to is not known here. It may have been removed; check the board.',
  },
};

export function renderAckPage(view: AckPageView): string {
  switch (view.kind) {
    case 'confirm': {
      const inc = view.incident;
      return page(`Acknowledge incident ${inc.id}`, [
        describe(inc),
        '<p>Acknowledging says that you own this incident: escalation stops. It does not close the incident, and nothing is done to the equipment.</p>',
        view.problem ? `<p role="alert"><strong>${escapeHtml(view.problem)}</strong></p>` : '',
        // No action attribute: the form posts back to the link itself, under whatever prefix it is mounted.
        '<form method="post">',
        `<p><label>Your name<br><input name="name" required maxlength="${ACK_NAME_MAX}" size="40" value="${escapeHtml(view.name)}"></label></p>`,
        `<p><label>Note (optional)<br><textarea name="note" maxlength="${ACK_NOTE_MAX}" rows="3" cols="40">${escapeHtml(view.note ?? '')}</textarea></label></p>`,
        '<p><button type="submit">Acknowledge</button></p>',
        '</form>',
        `<p class="quiet">This link works until ${escapeHtml(formatTime(view.expiresAt.toISOString(), inc.timeZone))}. ${escapeHtml(timeZoneNote(inc.timeZone))}</p>`,
      ]);
    }
    case 'done':
      return page(`Incident ${view.incident.id} acknowledged`, [
        `<p>Incident ${escapeHtml(oneLine(view.incident.id))} is acknowledged by ${escapeHtml(view.by)}. Escalation stops. The incident closes by itself once its readings have returned to normal (or when a responder resolves it with a note).</p>`,
        describe(view.incident),
      ]);
    case 'already-acknowledged':
      return page(`Incident ${view.incident.id} already acknowledged`, [
        `<p>Incident ${escapeHtml(oneLine(view.incident.id))} was already acknowledged${view.incident.acknowledgedBy ? ` by ${escapeHtml(oneLine(view.incident.acknowledgedBy))}` : ''}. Nothing was changed.</p>`,
        describe(view.incident),
      ]);
    case 'closed':
      return page(`Incident ${view.incident.id} is closed`, [
        `<p>Incident ${escapeHtml(oneLine(view.incident.id))} is closed; there is nothing left to acknowledge.</p>`,
        describe(view.incident),
      ]);
    case 'refused':
      return page(REFUSALS[view.reason].title, [`<p>${escapeHtml(REFUSALS[view.reason].sentence)}</p>`]);
    case 'failed':
      return page('Acknowledgement not recorded', [
        '<p>The acknowledgement could not be recorded, and nothing was changed. Please try again in a moment, or acknowledge the incident on the board.</p>',
      ]);
  }
}

function describe(inc: AckIncidentSummary): string {
  const rows: Array<[string, string]> = [
    ['Unit / component', `${oneLine(inc.unit)} / ${oneLine(inc.component)}`],
    // Shape and word, as the board and the charts show a severity: never colour alone.
    [
      'Severity',
      inc.setAside === true
        ? `none: nothing of it stands (last announced as ${severityWords(inc.severity, inc.peakSeverity)})`
        : `${SEVERITY_STYLE[inc.severity].glyph} ${severityWords(inc.severity, inc.peakSeverity)}`,
    ],
    ['State', oneLine(inc.state)],
    ['Open since', formatTime(inc.openedAt, inc.timeZone)],
  ];
  if (inc.whatChanged) rows.push(['What changed', oneLine(inc.whatChanged)]);
  if (inc.acknowledgedBy) rows.push(['Acknowledged by', oneLine(inc.acknowledgedBy)]);
  // The board's page of the incident, relative to this link (/ack/<token>), so that it holds under any mount prefix.
  const board = `<p><a href="../incidents/${escapeHtml(encodeURIComponent(inc.id))}">The incident on the board: its evidence, timeline and trends</a> (asks for a board token)</p>`;
  return `<table>${rows.map(([k, v]) => `<tr><th>${escapeHtml(k)}</th><td>${escapeHtml(v)}</td></tr>`).join('')}</table>\n${board}`;
}

function page(title: string, body: string[]): string {
  return [
    '<!DOCTYPE html>',
    '<html lang="en"><head><meta charset="utf-8">',
    '<meta name="viewport" content="width=device-width, initial-scale=1">',
    '<meta name="robots" content="noindex">',
    `<title>${escapeHtml(oneLine(title))} · wearshift</title>`,
    '<style>body{font-family:sans-serif;line-height:1.4;max-width:40em;margin:2em auto;padding:0 1em}th{text-align:left;padding-right:1em;vertical-align:top}.quiet{color:#555}input,textarea{font:inherit;max-width:100%;box-sizing:border-box}button{font:inherit;min-height:44px;padding:.5em 1.5em}</style>',
    '</head><body>',
    `<h1>${escapeHtml(oneLine(title))}</h1>`,
    ...body.filter((b) => b !== ''),
    `<p class="quiet"><em>${escapeHtml(ADVISORY_CAUTION)}</em></p>`,
    '</body></html>',
    '',
  ].join('\n');
}
