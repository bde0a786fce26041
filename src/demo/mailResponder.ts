/**
 * The demo's on-call engineer: follows the acknowledgement link of an incident e-mail the way a person does —
 * opens the confirmation page (a GET, which must change nothing), then sends its form (the POST acknowledges).
 */
import type { ReceivedMail } from './mailReceiver.ts';

export type AckOutcome = 'acknowledged' | 'already-acknowledged' | 'no-link' | 'refused';

export interface AckAttempt {
  readonly incidentId: string;
  readonly mailSeq: number;
  readonly recipient: string;
  readonly by: string;
  readonly outcome: AckOutcome;
  /** HTTP status of the confirmation page and of the form submission. */
  readonly pageStatus?: number;
  readonly formStatus?: number;
  /** Why the last try failed without an answer. */
  readonly error?: string;
}

const ACK_LINK = /https?:\/\/[^\s"<>]+\/ack\/[A-Za-z0-9_\-.]+/;

export function ackLinkOf(mail: ReceivedMail): string | undefined {
  return ACK_LINK.exec(mail.parsed.text ?? '')?.[0];
}

export function incidentIdOf(mail: ReceivedMail): string | undefined {
  const value = mail.parsed.headers.get('x-wearshift-incident');
  return typeof value === 'string' ? value : undefined;
}

/** How long the engineer waits for a page before giving up on that try. */
const PAGE_TIMEOUT_MS = 30_000;
/** Tries of a link that failed (no answer, or an answer other than the page), a few seconds apart, as a person clicks again. */
const TRIES = 4;

export async function acknowledgeByMail(mail: ReceivedMail, by: string, note: string): Promise<AckAttempt> {
  let last: AckAttempt | undefined;
  for (let t = 0; t < TRIES; t++) {
    if (t > 0) await new Promise((r) => setTimeout(r, 2000 * t));
    try {
      last = await acknowledgeOnce(mail, by, note);
    } catch (e) {
      last = { incidentId: incidentIdOf(mail) ?? '(unknown)', mailSeq: mail.seq, recipient: mail.to[0] ?? '', by, outcome: 'refused', error: (e as Error).message };
    }
    if (last.outcome !== 'refused') return last;
  }
  return last!;
}

async function acknowledgeOnce(mail: ReceivedMail, by: string, note: string): Promise<AckAttempt> {
  const incidentId = incidentIdOf(mail) ?? '(unknown)';
  const base = { incidentId, mailSeq: mail.seq, recipient: mail.to[0] ?? '', by };
  const link = ackLinkOf(mail);
  if (link === undefined) return { ...base, outcome: 'no-link' };
  const page = await fetch(link, { signal: AbortSignal.timeout(PAGE_TIMEOUT_MS) });
  const html = await page.text();
  if (page.status !== 200) return { ...base, outcome: 'refused', pageStatus: page.status };
  if (!html.includes('<form')) return { ...base, outcome: 'already-acknowledged', pageStatus: page.status };
  const form = await fetch(link, { method: 'POST', signal: AbortSignal.timeout(PAGE_TIMEOUT_MS), headers: { 'content-type': 'application/x-www-form-urlencoded' }, body: new URLSearchParams({ name: by, note }).toString() });
  const done = await form.text();
  const outcome: AckOutcome = form.status !== 200 ? 'refused' : /already acknowledged/i.test(done) ? 'already-acknowledged' : 'acknowledged';
  return { ...base, outcome, pageStatus: page.status, formStatus: form.status };
}
