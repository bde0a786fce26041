/**
 * A correction must carry a higher revision: a record whose sampleId and revision are already stored with other
 * content would be discarded by the store (the first arrival stands), so the intake refuses it up front, naming
 * the record, the field and the reason — and so does a second record of the same request with the same identity
 * and other content. The same content again is a harmless redelivery and stays accepted.
 */
import type { FieldIssue } from '../domain/event.ts';
import { encodeSample } from '../pipeline/sampleCodec.ts';
import { componentKeys, type Partitions } from './keys.ts';
import type { RedisConnection } from './connection.ts';
import type { ValidatedRecord } from '../intake/validate.ts';

export function conflictReason(sampleId: string, revision: number, where: 'stored' | 'request'): string {
  return `sample ${sampleId} revision ${revision} is already ${where === 'stored' ? 'stored' : 'in this request'} with different content; a correction needs a higher revision (e.g. ${revision + 1})`;
}

/** The index of every conflicting record with its issue. */
export async function revisionConflicts(redis: RedisConnection, partitions: Partitions, records: readonly ValidatedRecord[]): Promise<Map<number, FieldIssue>> {
  const conflicts = new Map<number, FieldIssue>();
  if (records.length === 0) return conflicts;
  const encoded = records.map((r) => encodeSample(r.sample));
  const stored = await Promise.all(
    records.map((r) => {
      const tag = partitions.tag(partitions.of(r.sample));
      return redis.hget(componentKeys(tag, r.sample).revisions, `${r.sample.sampleId}\u001f${r.sample.revision}`);
    }),
  );
  const seen = new Map<string, string>();
  records.forEach((r, i) => {
    const { sample } = r;
    const value = stored[i];
    // Stored as `receivedAt|encoded sample`.
    if (value !== null && value !== undefined && value.slice(value.indexOf('|') + 1) !== encoded[i]) {
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
