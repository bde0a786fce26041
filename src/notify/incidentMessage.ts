/** Maps an incident engine's notify effect onto the message every channel renders (src/notify/message.ts). */
import { createHash } from 'node:crypto';
import { buildHistory } from '../analysis/history.ts';
import type { Sample } from '../domain/event.ts';
import { formatReading } from '../domain/reading.ts';
import type { NotifyEffect } from '../incidents/model.ts';
import { subjectOf, type Finding } from '../domain/finding.ts';
import { bySeverity, type IncidentMessage, type IncidentMessageType, type MessageFinding } from './message.ts';
import { ADVISORY_CAUTION, FORECAST_CAUTION } from '../domain/caution.ts';

/** About five recent results, as the message format asks. */
const RECENT_RESULTS = 5;

export function incidentMessage(effect: NotifyEffect, revisions: readonly Sample[], apiBaseUrl: string): IncidentMessage {
  const s = effect.incident;
  // Up to the sample the event is about, as its latest revision stands (a correction may move its time): results
  // stored later would change the message between retries. An incident closed with its evidence set aside stands on
  // no sample any more: its closing shows the latest stored results.
  const samples = buildHistory(revisions).samples;
  const latest = samples.find((x) => x.sampleId === s.lastSampleId);
  const until = s.closed && s.findings.length === 0 ? Infinity : (latest?.time ?? Date.parse(s.lastSampledAt));
  const recent = samples.filter((x) => x.time <= until).slice(-RECENT_RESULTS);
  const type = effect.type.slice('wearshift.incident.'.length) as IncidentMessageType;
  // A forecast is as of the evidence's sample: after a return to normal or a closing it no longer speaks for the
  // results the message shows (a charge drained since, say), so those messages carry none.
  const forecast = type === 'returned' || type === 'closed' ? undefined : s.forecast;
  const closure = s.closure;
  return {
    type,
    incident: {
      id: s.id,
      unit: s.unit,
      component: s.component,
      group: s.group,
      severity: s.severity,
      peakSeverity: s.peakSeverity,
      state: s.state,
      openedAt: s.openedAt,
      ...(s.acknowledgedBy !== undefined && { acknowledgedBy: s.acknowledgedBy }),
      tier: s.tier,
      url: `${apiBaseUrl.replace(/\/+$/, '')}/incidents/${encodeURIComponent(s.id)}`,
      apiUrl: `${apiBaseUrl.replace(/\/+$/, '')}/v1/incidents/${encodeURIComponent(s.id)}`,
      ...(closure !== undefined && {
        closed: {
          how: closure.how,
          at: closure.at,
          ...(closure.by !== undefined && { by: closure.by }),
          ...(closure.note !== undefined && { note: closure.note }),
          ...(closure.sampleId !== undefined && { sampleId: closure.sampleId }),
          ...(closure.verdict !== undefined && { verdict: closure.verdict }),
        },
      }),
    },
    // Most severe first, as the e-mail shows them: the first finding is the one that sets the severity.
    findings: bySeverity(s.findings).map(messageFinding),
    // Beside the evidence, never in it: the severity stays the evidence's.
    advisoryFindings: bySeverity(s.advisoryFindings ?? []).map(messageFinding),
    ...(forecast !== undefined &&
      forecast.length > 0 && {
        forecast: {
          caution: `${FORECAST_CAUTION} ${ADVISORY_CAUTION}`,
          items: forecast.map((f) => ({
            measurand: f.measurand,
            severity: f.severity,
            source: f.source,
            side: f.side,
            level: f.level,
            outcome: f.outcome,
            text: f.text,
            ...(f.central && { central: { ...f.central } }),
            ...(f.early && { early: { ...f.early } }),
            ...(f.late && { late: { ...f.late } }),
          })),
        },
      }),
    recentResults: recent.map((r) => ({
      sampleId: r.sampleId,
      sampledAt: r.sampledAt,
      ...(r.oilHours !== undefined && { oilHours: r.oilHours }),
      readings: Object.fromEntries(Object.entries(r.readings).map(([m, reading]) => [m, formatReading(reading!)])),
    })),
    whatChanged: s.reason,
    idempotencyKey: idempotencyKey(effect.key),
    advisory: ADVISORY_CAUTION,
  };
}

function messageFinding(f: Finding): MessageFinding {
  return {
    measurand: f.measurand,
    subject: subjectOf(f),
    rule: f.rule,
    ...(f.check !== undefined && { check: f.check }),
    severity: f.severity,
    value: f.value,
    ...(f.threshold !== undefined && { threshold: f.threshold }),
    basis: f.basis,
    sampleId: f.sampleId,
    sampledAt: f.sampledAt,
    explanation: f.explanation,
  };
}

/**
 * The effect key, fit to travel as the CloudEvent id and the `webhook-id` header (1 to 255 visible ASCII
 * characters): percent-encoded, so that unit names with spaces or accents stay readable; a digest when the
 * encoded key would be too long.
 */
export function idempotencyKey(effectKey: string): string {
  const encoded = encodeURIComponent(effectKey);
  return encoded.length <= 255 ? encoded : `sha256-${createHash('sha256').update(effectKey).digest('base64url')}`;
}
