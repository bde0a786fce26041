/**
 * What the notification channels are given to say. The shape is ours, independent of the incident engine's
 * internals: the queue maps an incident effect onto it, and every channel (e-mail, webhook, MQTT) renders it.
 */

export const INCIDENT_MESSAGE_TYPES = ['opened', 'updated', 'escalated', 'acknowledged', 'returned', 'closed'] as const;
export type IncidentMessageType = (typeof INCIDENT_MESSAGE_TYPES)[number];

export type MessageSeverity = 'watch' | 'caution' | 'alarm';

export interface IncidentMessage {
  type: IncidentMessageType;
  incident: {
    id: string;
    unit: string;
    component: string;
    group: string;
    severity: MessageSeverity;
    state: string;
    openedAt: string;
    acknowledgedBy?: string;
    /** Escalation tier the incident has reached; 0 before the first escalation. */
    tier: number;
    /** The incident's address in the API or on the board. */
    url: string;
  };
  findings: Array<{
    measurand: string;
    rule: string;
    severity: string;
    value: number;
    threshold?: number;
    /** What `value` is: 'reading', 'rate', 'ewma', 'cusum', 'change', 'steps'. */
    basis: string;
    sampleId: string;
    sampledAt: string;
    explanation: string;
  }>;
  /**
   * How long until the evidence's measurands cross their limits at the present rate (central estimate and
   * interval, in operating hours and as a date), or why there is no forecast; with the caution that a forecast
   * assumes the present rate continues. Absent when forecasts are disabled.
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
      /** crossing, after-oil-change or not-enough-history. */
      outcome: string;
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
  /** The caution that goes with every finding: the tool advises, people decide (ADVICE_CAUTION). */
  advice: string;
  /** From the incident engine: the same key means the same message, so every channel can de-duplicate on it. */
  idempotencyKey: string;
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
