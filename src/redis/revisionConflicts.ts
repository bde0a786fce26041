/**
 * A correction must carry a higher revision: a record whose sampleId and revision are already stored with other
 * content would be discarded by the store (the first arrival stands), so the intake refuses it up front, naming
 * the record, the field and the reason — and so does a second record of the same request with the same identity
 * and other content. The same content again is a harmless redelivery and stays accepted.
 */
import type { FieldIssue, Sample } from '../domain/event.ts';
import { composeStoredSample, encodeSample, encodeSampleCore, isCompactSample } from '../pipeline/sampleCodec.ts';
import { COMMON_FIELD, componentKeys, type Partitions } from './keys.ts';
import type { RedisConnection } from './connection.ts';
import type { ValidatedRecord } from '../intake/validate.ts';

export function conflictReason(sampleId: string, revision: number, where: 'stored' | 'request'): string {
  return `sample ${sampleId} revision ${revision} is already ${where === 'stored' ? 'stored' : 'in this request'} with different content; a correction needs a higher revision (e.g. ${revision + 1})`;
}

/**
 * Whether a stored revision (`receivedAt|stored sample`, redisStore.ts) holds this sample: compared in the form it
 * was stored in, the shorter one with the component's common group and lab, or the earlier JSON array.
 */
function sameAsStored(value: string, common: string | undefined, sample: Sample, earlierForm: string): boolean {
  const body = value.slice(value.indexOf('|') + 1);
  if (!isCompactSample(body)) return body === earlierForm;
  return common !== undefined && body === composeStoredSample(encodeSampleCore(sample), sample.group, sample.lab, common);
}

/**
 * Revisions read at once: a large batch is read in parts, one after the other, so that the last answer of a part never
 * waits behind thousands of others (each read has a request connection's command timeout).
 */
export const READ_PART_RECORDS = 500;

/** The index of every conflicting record with its issue. */
export async function revisionConflicts(redis: RedisConnection, partitions: Partitions, records: readonly ValidatedRecord[]): Promise<Map<number, FieldIssue>> {
  const conflicts = new Map<number, FieldIssue>();
  if (records.length === 0) return conflicts;
  const encoded = records.map((r) => encodeSample(r.sample));
  const stored: (boolean | null)[] = [];
  for (let start = 0; start < records.length; start += READ_PART_RECORDS) {
    const part = await Promise.all(
      records.slice(start, start + READ_PART_RECORDS).map(async (r, j) => {
        const tag = partitions.tag(partitions.of(r.sample));
        const [value, common] = await redis.hmget(componentKeys(tag, r.sample).revisions, `${r.sample.sampleId}\u001f${r.sample.revision}`, COMMON_FIELD);
        return value === null || value === undefined ? null : sameAsStored(value, common ?? undefined, r.sample, encoded[start + j]!);
      }),
    );
    stored.push(...part);
  }
  const seen = new Map<string, string>();
  records.forEach((r, i) => {
    const { sample } = r;
    if (stored[i] === false) {
      conflicts.set(r.index, { path: 'revision', reason: conflictReason(sample.sampleId, sample.revision, 'stored') });
      return;
    }
    const identity = `${sample.unit}\u001f${sample.component}\u001f${sample.sampleId}\u001f${sample.revision}`;
    const earlier = seen.get(identity);
    if (earlier !== undefined && earlier !== encoded[i]) conflicts.set(r.index, { path: 'revision', reason: conflictReason(sample.sampleId, sample.revision, 'request') });
    else seen.set(identity, encoded[i]!);
  });
  return conflicts;
}
