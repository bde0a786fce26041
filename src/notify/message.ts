/**
 * What the notification channels are given to say. The shape is ours, independent of the incident engine's
 * internals: the queue maps an incident effect onto it, and every channel (e-mail, webhook, MQTT) renders it.
 */

import type { ForecastOutcome } from '../analysis/forecast/model.ts';

export const INCIDENT_MESSAGE_TYPES = ['opened', 'updated', 'escalated', 'acknowledged', 'returned', 'closed'] as const;
export type IncidentMessageType = (typeof INCIDENT_MESSAGE_TYPES)[number];

export type MessageSeverity = 'watch' | 'caution' | 'alarm';

/** Every message, page and payload that carries findings says this (the `advisory` field of the event data). */
export { ADVISORY_CAUTION } from '../domain/caution.ts';

const SEVERITY_ORDER: readonly MessageSeverity[] = ['watch', 'caution', 'alarm'];

/**
 * The one rule for an incident's severity, shown the same on the board card, in the evidence, in e-mail subjects,
 * pages and command output: the highest severity among its evidence (the findings of its latest sample with
 * findings); when the incident was more severe before, the peak is written beside it, "watch (peak caution)", so
 * that a later message that says less than an earlier one reads as a change, not a contradiction.
 */
export function severityWords(severity: MessageSeverity, peakSeverity?: MessageSeverity): string {
  return peakSeverity !== undefined && SEVERITY_ORDER.indexOf(peakSeverity) > SEVERITY_ORDER.indexOf(severity) ? `${severity} (peak ${peakSeverity})` : severity;
}

/**
 * Most severe first, so that the finding that sets the incident's severity is always the first one shown; within a
 * severity, the one furthest beyond its limit (value / limit) first, so that the chart follows the strongest signal.
 */
export function bySeverity<T extends { severity: string; value?: number; threshold?: number }>(findings: readonly T[]): T[] {
  const rank = (s: string) => SEVERITY_ORDER.indexOf(s as MessageSeverity);
  const beyond = (f: T) => (f.value !== undefined && f.threshold !== undefined && f.threshold !== 0 ? Math.abs(f.value / f.threshold) : 0);
  return [...findings].sort((a, b) => rank(b.severity) - rank(a.severity) || beyond(b) - beyond(a));
}

export interface IncidentMessage {
  type: IncidentMessageType;
  incident: {
    id: string;
    unit: string;
    component: string;
    group: string;
    /**
     * The highest severity among the findings below: see `severityWords`. When a closing leaves no findings because the
     * evidence was set aside (`closed.how` `withdrawn` or `sample-verdict`), the severity as last announced: it asks
     * nothing any more.
     */
    severity: MessageSeverity;
    /** The highest severity the incident has had. */
    peakSeverity: MessageSeverity;
    state: string;
    openedAt: string;
    acknowledgedBy?: string;
    /** Escalation tier the incident has reached; 0 before the first escalation. */
    tier: number;
    /** The incident's page on the board (it asks for a viewer token, as the board does). */
    url: string;
    /** The incident in the JSON API (a bearer token), for integrations. */
    apiUrl: string;
    /** Of a closed incident: how, when and, where the closing names them, by whom and on which sample's verdict. */
    closed?: MessageClosure;
  };
  /** The evidence: the findings that opened or updated the incident and set its severity. */
  findings: MessageFinding[];
  /**
   * Also on the evidence's sample: advisory findings (e.g. population band limits), which open no incident and take
   * no part in its severity, shown the way a lab report shows them. Empty when there are none.
   */
  advisoryFindings: MessageFinding[];
  /**
   * How long until the evidence's measurands cross their limits at the present trend (central estimate and
   * interval, in operating hours and as a date), or why there is no forecast; with the caution that a forecast
   * assumes the present trend continues. Absent when forecasts are disabled, and from returned and closed messages
   * (made on the evidence's sample, the forecast would contradict the later results those messages show).
   */
  forecast?: {
    caution: string;
    items: Array<{
      measurand: string;
      severity: string;
      /** fixed, population or condition. */
      source: string;
      side: 'above' | 'below';
      level: number;
      outcome: ForecastOutcome;
      text: string;
      central?: ForecastTimeMessage;
      early?: ForecastTimeMessage;
      late?: ForecastTimeMessage;
    }>;
  };
  /** The last few results (about five), newest last, readings already formatted. */
  recentResults: Array<{ sampleId: string; sampledAt: string; oilHours?: number; readings: Record<string, string> }>;
  /** One sentence, e.g. "Fe wear rate shifted up (CUSUM 5.6 above its limit 5.0) since LAB-0042." */
  whatChanged: string;
  /** From the incident engine: the same key means the same message, so every channel can de-duplicate on it. */
  idempotencyKey: string;
  /** Always ADVISORY_CAUTION: integrators that pass the severity on pass this with it. */
  advisory: string;
}

/** How an incident was closed, for receivers that act on it without reading the sentence of what changed. */
export interface MessageClosure {
  /** acknowledged-and-returned, resolved, returned-unannounced, withdrawn or sample-verdict. */
  how: string;
  at: string;
  by?: string;
  note?: string;
  /** With `sample-verdict`: the sample judged and the word on it (confirmed or rejected). */
  sampleId?: string;
  verdict?: string;
}

/** Closed because the findings it stood on were set aside (withdrawn, or answered by a sample verdict): `findings` is empty. */
export function evidenceSetAside(msg: Pick<IncidentMessage, 'type' | 'incident'>): boolean {
  const how = msg.incident.closed?.how;
  return msg.type === 'closed' && (how === 'withdrawn' || how === 'sample-verdict');
}

/** One finding as a message carries it. */
export interface MessageFinding {
  /** The measurand the finding is filed under; for a sample-wide sampling check not what it is about (see `subject`). */
  measurand: string;
  /** What the finding is about: its measurand, or `sample` for a sampling check that judges the whole sample. */
  subject: string;
  rule: string;
  /** For the `sampling` family: which check fired. */
  check?: string;
  severity: string;
  value: number;
  threshold?: number;
  /** What `value` is: 'reading', 'rate', 'ewma', 'cusum', 'change', 'steps'. */
  basis: string;
  sampleId: string;
  sampledAt: string;
  explanation: string;
}

/** A forecast time: oil hours on the charge, operating hours from the latest sample, date (YYYY-MM-DD) when known. */
export interface ForecastTimeMessage {
  oilHours: number;
  hoursFromNow: number;
  date?: string;
}

/** Whether a message still asks someone to take ownership, so that it carries an acknowledgement link. */
export function asksForAcknowledgement(msg: IncidentMessage): boolean {
  return msg.incident.acknowledgedBy === undefined && msg.type !== 'acknowledged' && msg.type !== 'closed';
}
