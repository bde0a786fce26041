/** The e-mail that lists an alarm flood's held-back messages (src/notify/floodControl.ts) for one address. */
import { ADVISORY_CAUTION } from '../../domain/caution.ts';
import { escapeHtml, headerValue, oneLine } from '../../domain/safeText.ts';
import { DEFAULT_TIME_ZONE, formatTime, timeZoneNote } from '../../notify/format.ts';
import { summaryHeadline, summaryOrder, type FloodSummary, type HeldMessage } from '../../notify/floodControl.ts';
import { createHash } from 'node:crypto';
import { mailDomain, type RenderedEmail } from './emailRender.ts';

export interface FloodSummaryEmailOptions {
  from: string;
  to: string;
  /** The site zone the window's times are shown in (`display.timeZone`), as in the incident e-mails. Default UTC. */
  timeZone?: string;
}

/** The summary e-mail: one line per held incident, with its link. */
export function renderFloodSummaryEmail(summary: FloodSummary, options: FloodSummaryEmailOptions): RenderedEmail {
  const held = summaryOrder(summary.held);
  const headline = summaryHeadline(summary);
  const zone = options.timeZone ?? DEFAULT_TIME_ZONE;
  const limit =
    `At most ${summary.maxMessages} messages go to one recipient between ${formatTime(summary.window.from, zone)} and ${formatTime(summary.window.until, zone)}; ` +
    `these came on top and are listed here instead. ${timeZoneNote(zone)}`;
  const line = (h: HeldMessage) => `${oneLine(h.severity)} · ${oneLine(h.unit)} / ${oneLine(h.component)} · ${oneLine(h.type)} · ${oneLine(h.incidentId)}`;
  const text = [headline, '', limit, '', ...held.flatMap((h) => [`- ${line(h)}`, `  ${h.url}`]), '', ADVISORY_CAUTION, ''].join('\n');
  const html = [
    '<!DOCTYPE html>',
    `<html lang="en"><head><meta charset="utf-8"><title>${escapeHtml(headline)}</title></head>`,
    '<body style="font-family:sans-serif;line-height:1.4;max-width:46em">',
    `<p><strong>${escapeHtml(headline)}</strong></p>`,
    `<p>${escapeHtml(limit)}</p>`,
    `<ul>${held.map((h) => `<li>${escapeHtml(line(h))} — <a href="${escapeHtml(h.url)}">open</a></li>`).join('')}</ul>`,
    `<p style="color:#555"><em>${escapeHtml(ADVISORY_CAUTION)}</em></p>`,
    '</body></html>',
    '',
  ].join('\n');
  return {
    from: options.from,
    to: options.to,
    subject: headerValue(`[wearshift] ${headline}`, 180),
    text,
    html,
    headers: {
      // One summary per target and window: a resend (a retry after a lost reply) keeps its Message-ID.
      'Message-ID': `<${createHash('sha256').update(`${summary.channel}\u0000${summary.target}\u0000${summary.window.from}`).digest('hex').slice(0, 32)}.flood-summary@${mailDomain(options.from)}>`,
      'Auto-Submitted': 'auto-generated',
      'X-Wearshift-Type': 'flood-summary',
    },
    attachments: [],
  };
}
