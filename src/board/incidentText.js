/*
 * An incident in words and badges, the same everywhere on the board: its severity (with its peak), its state, its
 * evidence most severe first, its measurands, its timeline entries, and the caution beside every forecast.
 */
import { el } from './dom.js';
import { formatTime } from './format.js';

export const SEVERITY_RANK = { watch: 0, caution: 1, alarm: 2 };
const GLYPH = { watch: '◇', caution: '▲', alarm: '■' };

/** Above the advisory findings of the evidence's sample, as in the e-mail (src/channels/email/emailRender.ts). */
export const ADVISORY_HEADING = 'Also on this sample (advisory, opens no incident)';

/** Beside every forecast, as in the e-mail (src/domain/caution.ts). */
export const FORECAST_CAUTION = 'A forecast assumes the present trend continues; wear can speed up or settle at any time.';

/** Since when the incident has waited for someone: when it was announced, else its opening sample. */
export const waitingSince = (incident) => incident.escalation?.startedAt ?? incident.openedAt;

/**
 * The one rule for an incident's severity (as in src/notify/message.ts): the highest severity of its evidence;
 * when it was more severe before, the peak is written beside it.
 */
export function severityWords(severity, peak) {
  return peak !== undefined && SEVERITY_RANK[peak] > SEVERITY_RANK[severity] ? `${severity} (peak ${peak})` : severity;
}

export function severityBadge(severity, peak) {
  return el('span', { class: 'sev', 'data-severity': severity }, el('span', { class: 'glyph', 'aria-hidden': 'true', text: GLYPH[severity] ?? '?' }), ` ${severityWords(severity, peak)}`);
}

/**
 * Most severe first: the finding that sets the incident's severity always leads the evidence; within a severity, the
 * one furthest beyond its limit first (as in src/notify/message.ts), so that the chart follows the strongest signal.
 */
const beyondLimit = (f) => (typeof f.value === 'number' && typeof f.threshold === 'number' && f.threshold !== 0 ? Math.abs(f.value / f.threshold) : 0);
export const bySeverity = (findings) =>
  [...(findings ?? [])].sort((a, b) => (SEVERITY_RANK[b.severity] ?? -1) - (SEVERITY_RANK[a.severity] ?? -1) || beyondLimit(b) - beyondLimit(a));

export function stateWords(incident) {
  if (incident.closed) return 'closed';
  const parts = [incident.alarm === 'active' ? 'active' : 'returned to normal', incident.acknowledged ? 'acknowledged' : 'unacknowledged'];
  if (incident.shelved) parts.push(`shelved until ${formatTime(incident.shelved.until)}`);
  return parts.join(', ');
}

/** The sampling checks that judge the whole sample, not one measurand (a copy of src/domain/finding.ts). */
export const SAMPLE_WIDE_CHECKS = ['duplicate-bottle', 'unit-hours-back', 'oil-hours-back', 'new-oil-mid-charge', 'foreign-oil'];

/** What a finding (or timeline entry) is about: its measurand, or "sample" for a sample-wide check (as `subjectOf` in src/domain/finding.ts). */
export const subjectOf = (f) => (f.rule === 'sampling' && SAMPLE_WIDE_CHECKS.includes(f.check) ? 'sample' : f.measurand);

/** What the incident is about, the subject that sets its severity first (an incident kept per measurand: that one). */
export function subjectsOf(incident) {
  const seen = [];
  if (incident.measurand) seen.push(incident.measurand);
  for (const f of bySeverity(incident.evidence)) if (!seen.includes(subjectOf(f))) seen.push(subjectOf(f));
  return seen;
}

/** The sample-wide checks filed under a metal that does not show them (as CHARTLESS_CHECKS in src/domain/finding.ts). */
export const CHARTLESS_CHECKS = ['duplicate-bottle', 'unit-hours-back'];
const chartable = (f) => !(f.rule === 'sampling' && CHARTLESS_CHECKS.includes(f.check));

/**
 * The incident's measurands to chart, the one that sets its severity first: a sample-wide finding's metal where it
 * shows the fault (a new-oil bottle: the metal that fell), none for a duplicated bottle or hours going back.
 */
export function measurandsOf(incident) {
  const seen = [];
  if (incident.measurand) seen.push(incident.measurand);
  for (const f of bySeverity(incident.evidence).filter(chartable)) if (!seen.includes(f.measurand)) seen.push(f.measurand);
  return seen;
}

/** Where an incident has no measurand to chart, why (on its card and on its incident page alike). */
export function noChartText(incident) {
  // A fault of the whole sample (a duplicated bottle, hours going back…) is no metal's trend.
  return subjectsOf(incident).includes('sample') ? 'A fault of the whole sample: no measurand to chart (every trend is on the component page).' : 'No measurand to chart.';
}

/** As NO_LONGER_HOLD and withdrawnEvidenceText in src/incidents/model.ts. */
export const NO_LONGER_HOLD = 'the findings it stood on no longer hold';
export function withdrawnEvidenceText(findings) {
  if (!findings || findings.length === 0) return '';
  const samples = [...new Set(findings.map((f) => f.sampleId))];
  const of = samples.map((id) => `${findings.filter((f) => f.sampleId === id).map((f) => `${subjectOf(f)} (${foundByWords(f)}, ${f.severity})`).join(', ')} of sample ${id}`);
  return `${NO_LONGER_HOLD}: ${of.join('; ')}`;
}

/** A sample-wide sampling check in words (a copy of SAMPLE_WIDE_WORDS in src/domain/finding.ts). */
export const SAMPLE_WIDE_WORDS = {
  'duplicate-bottle': 'duplicated bottle',
  'unit-hours-back': 'unit hours back',
  'oil-hours-back': 'oil hours back',
  'new-oil-mid-charge': 'new-oil bottle mid-charge',
  'foreign-oil': "another unit's sample",
};
/** What found it, in words (as `foundByWords` in src/domain/finding.ts). */
export const foundByWords = (f) => (subjectOf(f) === 'sample' ? SAMPLE_WIDE_WORDS[f.check] : f.rule);

/**
 * A finding an incident stood on that no longer holds (`withdrawnEvidence`), never shown as current evidence. A
 * sampling finding of a sample a responder rejected was borne out, not withdrawn: the sample is wrong, as it said (as
 * `borneOutText` in src/incidents/model.ts).
 */
export function withdrawnFindingText(f, closure) {
  if (closure?.how === 'sample-verdict' && closure.verdict === 'rejected' && f.rule === 'sampling' && f.sampleId === closure.sampleId) {
    return `borne out: ${closure.by ?? 'a responder'} judged sample ${f.sampleId} wrong, as this finding said, and it is kept out of the trend; reported: ${f.explanation}`;
  }
  return `no longer holds (the results as they stand now do not give it); as first reported for sample ${f.sampleId}: ${f.explanation}`;
}

/** The incident's timeline and the messages about it (sent or not), in time order (the command line's `incidents show` too). */
export function mergedTimeline(incident) {
  const all = [...(incident.timeline ?? []), ...(incident.notifications ?? [])];
  return all
    .map((e, i) => ({ e, i, t: Date.parse(e.at) }))
    .sort((a, b) => a.t - b.t || a.i - b.i)
    .map((x) => x.e);
}

/** A sample verdict in the timeline (as sampleVerdictText in src/incidents/model.ts). */
const VERDICT_WORDS = {
  confirmed: (sampleId, by) => `sample ${sampleId} confirmed by ${by}: genuine, back into the trend`,
  rejected: (sampleId, by) => `sample ${sampleId} rejected by ${by}: wrong, kept out of the trend`,
  withdrawn: (sampleId, by) => `verdict on sample ${sampleId} taken back by ${by}: the sampling check judges it again`,
  'usual-rate': (sampleId, by) => `${by}: the wear rate signalled at sample ${sampleId} is this component's usual one; its change detectors learn a new baseline from there`,
};
export function sampleVerdictText(entry) {
  return (VERDICT_WORDS[entry.verdict] ?? ((sampleId, by) => `sample ${sampleId}: ${entry.verdict} by ${by}`))(entry.sampleId, entry.by);
}

/** An incident closed by a responder's word on its opening sample (as closureText in src/incidents/model.ts). */
const CLOSING_VERDICT_WORDS = {
  rejected: (by) => `rejected by ${by} (sample judged wrong; kept out of the trend)`,
  confirmed: (by) => `confirmed as genuine by ${by} (back into the trend)`,
};
export function closingVerdictText(closure) {
  const by = closure.by ?? 'a responder';
  const words = CLOSING_VERDICT_WORDS[closure.verdict]?.(by) ?? `judged by ${by}`;
  return `closed: sample ${closure.sampleId ?? '(unknown)'} ${words}`;
}

/** Why an incident was closed (as closureText in src/incidents/model.ts). */
const CLOSED_WORDS = {
  'acknowledged-and-returned': 'returned to normal and acknowledged',
  resolved: 'resolved by hand',
  'returned-unannounced': 'returned to normal before anyone was told',
  withdrawn: 'withdrawn: a late or corrected result changed the history so that this incident no longer stands',
};
export function closureText(closure) {
  if (closure.how === 'sample-verdict') return closingVerdictText(closure);
  return CLOSED_WORDS[closure.how] ?? `closed (${closure.how})`;
}

/**
 * A live incident event read out (the announcer): "Incident acknowledged: PS2-P3 / gearbox, caution, active,
 * acknowledged." The closing of an incident whose evidence was set aside carries severity `none` (src/pipeline/
 * liveEvent.ts): it says how it was closed and that no severity stands, with the one last announced.
 */
export function liveIncidentText(event, state) {
  const where = `${event.unit} / ${event.component}`;
  if (event.severity === 'none') {
    const how = event.closed !== undefined ? `${closureText(event.closed)}; ` : '';
    const last = event.lastAnnouncedSeverity !== undefined ? ` (last announced as ${event.lastAnnouncedSeverity})` : '';
    return `Incident ${event.change}: ${where}, ${how}severity none: nothing of it stands${last}, ${state}.`;
  }
  return `Incident ${event.change}: ${where}, ${event.severity}, ${state}.`;
}

/** A message event's targets, each one held back marked so, with why (as notifiedTargetsText in src/incidents/model.ts). */
const WITHDRAWN_WORDS = { acknowledged: 'acknowledged', shelved: 'shelved', closed: 'closed', returned: 'returned to normal' };
export function notifiedTargetsText(entry) {
  return entry.targets
    .map((target) => {
      const held = (entry.withdrawn ?? []).find((w) => w.target === target);
      if (held === undefined) return target;
      const why = WITHDRAWN_WORDS[held.because] ?? held.because;
      if (held.attemptedAt === undefined) return `${target} (not sent: ${why} meanwhile)`;
      return `${target} (not sent again: ${why} meanwhile; an attempt begun at ${held.attemptedAt} may have reached it)`;
    })
    .join(', ');
}

export function timelineText(entry) {
  const at = formatTime(entry.at);
  const sample = entry.sampleId ? ` (sample ${entry.sampleId})` : '';
  switch (entry.kind) {
    case 'opened':
      return `${at}: opened at sample ${entry.sampleId}, ${entry.severity}`;
    case 'finding':
      return `${at}: ${subjectOf(entry)} ${entry.rule} ${entry.change.replace('-', ' ')} (${entry.severity})${sample}${entry.explanation ? ` — ${entry.explanation}` : ''}`;
    case 'returned':
      return `${at}: returned to normal${sample}${typeof entry.cleanSamples === 'number' ? `, after ${entry.cleanSamples} ${entry.cleanSamples === 1 ? 'sample' : 'samples'} without findings` : ''}`;
    case 'active-again':
      return `${at}: ${entry.reopened ? 'reopened' : 'active again'}${sample}`;
    case 'acknowledged':
      return `${at}: acknowledged by ${entry.by}${entry.note ? ` — ${entry.note}` : ''}`;
    case 'unacknowledged':
      return `${at}: acknowledgement withdrawn — ${entry.reason}`;
    case 'shelved':
      return `${at}: shelved by ${entry.by} until ${formatTime(entry.until)} — ${entry.reason}`;
    case 'unshelved':
      return `${at}: ${entry.by ? `unshelved by ${entry.by}` : 'shelving ended'}`;
    case 'closed':
      // Withdrawn or answered by a sample verdict: why, in the words of the closing message.
      if (entry.how === 'sample-verdict' || entry.how === 'withdrawn') return `${at}: ${closureText(entry)}`;
      return `${at}: closed (${entry.how})${entry.by ? ` by ${entry.by}` : ''}${entry.note ? ` — ${entry.note}` : ''}`;
    case 'sample-verdict':
      return `${at}: ${sampleVerdictText(entry)}`;
    case 'notified': {
      const what = String(entry.type ?? '').replace('wearshift.incident.', '');
      const who = entry.targets.length > 0 ? `tier ${entry.tier}: ${notifiedTargetsText(entry)}` : 'nobody (no escalation policy names anyone for it)';
      return `${at}: message "${what}" to ${who} — ${entry.reason}`;
    }
    default:
      return `${at}: ${entry.kind.replace('-', ' ')}${entry.by ? ` by ${entry.by}` : ''}${entry.reason ? ` — ${entry.reason}` : ''}${entry.note ? ` — ${entry.note}` : ''}`;
  }
}
