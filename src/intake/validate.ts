/**
 * Validation shared by every intake path (HTTP, import, producer) and by the results processor, so that a
 * record is judged the same way however it arrives. On top of the event schema: a sample drawn more than a
 * day ahead of the server clock is a clock or typing error, not a result.
 */
import { parseResultEvent, type FieldIssue, type ParsedEvent, type Sample } from '../domain/event.ts';
import { confusableWarnings } from './confusableNames.ts';

export interface ValidationOptions {
  /** The server clock, epoch ms. */
  now: number;
  /** How far ahead of `now` a sampledAt may lie. Default one day. */
  maxAheadMs?: number;
}

export const DEFAULT_MAX_AHEAD_MS = 24 * 60 * 60 * 1000;

/** Start of the reason given for a sampledAt ahead of the clock (metrics count these apart). */
export { FUTURE_REASON } from '../domain/event.ts';
import { FUTURE_REASON } from '../domain/event.ts';

/** Every problem of the record at once: a sampledAt in the future is reported beside the schema's and the readings' problems. */
export function validateResult(input: unknown, options: ValidationOptions): ParsedEvent {
  const parsed = parseResultEvent(input);
  const time = parsed.ok ? parsed.sample.time : claimedTime(input, parsed.issues);
  const maxAheadMs = options.maxAheadMs ?? DEFAULT_MAX_AHEAD_MS;
  const future: FieldIssue | undefined =
    time !== undefined && time > options.now + maxAheadMs
      ? { path: 'sampledAt', reason: `${FUTURE_REASON} (${new Date(time).toISOString()} is more than ${formatHours(maxAheadMs)} after the server clock ${new Date(options.now).toISOString()})` }
      : undefined;
  if (future === undefined) return parsed;
  return { ok: false, issues: parsed.ok ? [future] : [...parsed.issues, future] };
}

/** The sampledAt of a record the schema refused for other reasons, when that field itself is a valid time. */
function claimedTime(record: unknown, issues: readonly FieldIssue[]): number | undefined {
  if (typeof record !== 'object' || record === null || issues.some((i) => i.path === 'sampledAt')) return undefined;
  const sampledAt = (record as { sampledAt?: unknown }).sampledAt;
  if (typeof sampledAt !== 'string') return undefined;
  const time = Date.parse(sampledAt);
  return Number.isFinite(time) ? time : undefined;
}

export interface RecordOutcome {
  /** Position of the record in the request (0-based) or line number in a file (1-based). */
  readonly index: number;
  readonly sampleId?: string;
  readonly status: 'accepted' | 'rejected';
  readonly errors?: readonly FieldIssue[];
  /** Accepted, but worth a look: a unit or component name that can be mistaken for another (confusableNames.ts). */
  readonly warnings?: readonly FieldIssue[];
  /** Rejected because its sampleId and revision are already stored (or earlier in the request) with other content. */
  readonly conflict?: boolean;
}

export interface ValidatedRecord {
  readonly index: number;
  /** The record as received; it travels through the queue as it is and is validated again there. */
  readonly event: unknown;
  readonly sample: Sample;
}

export interface ValidatedBatch {
  readonly outcomes: RecordOutcome[];
  readonly accepted: ValidatedRecord[];
}

export function validateBatch(records: readonly unknown[], options: ValidationOptions, indexOf: (i: number) => number = (i) => i): ValidatedBatch {
  const outcomes: RecordOutcome[] = [];
  const accepted: ValidatedRecord[] = [];
  records.forEach((event, i) => {
    const index = indexOf(i);
    const parsed = validateResult(event, options);
    if (parsed.ok) {
      accepted.push({ index, event, sample: parsed.sample });
      const warnings = confusableWarnings(parsed.sample);
      outcomes.push({ index, sampleId: parsed.sample.sampleId, status: 'accepted', ...(warnings.length > 0 && { warnings }) });
    } else {
      const sampleId = claimedSampleId(event);
      outcomes.push({ index, ...(sampleId !== undefined && { sampleId }), status: 'rejected', errors: parsed.issues });
    }
  });
  return { outcomes, accepted };
}

/** The sampleId a rejected record claims, so that the sender can find it; only a plausible one is echoed. */
export function claimedSampleId(record: unknown): string | undefined {
  if (typeof record !== 'object' || record === null) return undefined;
  const id = (record as { sampleId?: unknown }).sampleId;
  return typeof id === 'string' && id.length > 0 && id.length <= 80 ? id : undefined;
}

/** `readings.Fe: reason; sampledAt: reason` — one line for logs and job failures. */
export function describeIssues(issues: readonly FieldIssue[]): string {
  return issues.map((i) => `${i.path || '(record)'}: ${i.reason}`).join('; ');
}

function formatHours(ms: number): string {
  const h = ms / 3_600_000;
  return h === 24 ? '1 day' : `${h} h`;
}
