/**
 * The results of one file (or one run of a file) by their identity — unit, component, sampleId and revision, as the
 * store keys them — so that a later record with the same identity is judged the way the store would judge it: the
 * same content again is a repeat, kept once (as the intake keeps a redelivery); other content is a conflict, which the
 * store would refuse (the first stays), so it is rejected with both records named. Import checks a whole file
 * this way before anything is enqueued (a dry run too), whatever the batches; replay and backtest name the earlier
 * record when the store refuses one.
 *
 * A sampleId and revision under two spellings of one unit or component (letter case) is a conflict too, naming both:
 * the store keys samples per component and would start a second one.
 *
 * Holds a digest of each result, not the result: some tens of bytes per record.
 */
import { createHash } from 'node:crypto';
import type { Sample } from '../domain/event.ts';
import { canonicalSampleJson } from './canonicalSample.ts';

export type RepeatVerdict =
  /** The first record of its identity in the file. */
  | { readonly kind: 'first' }
  /** The same content as record `of`: taken once. */
  | { readonly kind: 'duplicate'; readonly of: number }
  /** Other content than record `of`, under the same identity: refused; `reason` says so and what to do. */
  | { readonly kind: 'conflict'; readonly of: number; readonly reason: string };

export class FileRevisions {
  /** identity → `digest line`. */
  private readonly seen = new Map<string, string>();
  /** sampleId, revision and the unit and component in lower case → the first record's `line unit / component`. */
  private readonly owner = new Map<string, string>();

  /** @param what how a record is named in the reason: "line" (CSV, JSONL) or "row" (a lab's file). */
  constructor(private readonly what: 'line' | 'row' = 'line') {}

  /** Notes `sample`, met at record `at`, and says whether an earlier record of the file had its identity. */
  check(at: number, sample: Sample): RepeatVerdict {
    const identity = `${sample.unit}\u001f${sample.component}\u001f${sample.sampleId}\u001f${sample.revision}`;
    const digest = createHash('sha256').update(canonicalSampleJson(sample)).digest('base64').slice(0, 22);
    const earlier = this.seen.get(identity);
    if (earlier === undefined) {
      // The same sampleId and revision under another spelling of the unit or component ("PS2-P3" and "ps2-p3"): the
      // store keeps samples per component, so it would hold the bottle twice and start a component that does not
      // exist. (Another component altogether may well have a sample of the same number from another lab.)
      const sampleKey = `${sample.unit.toLowerCase()}\u001f${sample.component.toLowerCase()}\u001f${sample.sampleId}\u001f${sample.revision}`;
      const owner = this.owner.get(sampleKey);
      if (owner !== undefined) {
        const space = owner.indexOf(' ');
        const of = Number(owner.slice(0, space));
        return { kind: 'conflict', of, reason: otherComponentReason(sample, this.what, of, owner.slice(space + 1)) };
      }
      this.owner.set(sampleKey, `${at} ${sample.unit} / ${sample.component}`);
      this.seen.set(identity, `${digest} ${at}`);
      return { kind: 'first' };
    }
    const of = Number(earlier.slice(earlier.indexOf(' ') + 1));
    if (earlier.startsWith(`${digest} `)) return { kind: 'duplicate', of };
    return { kind: 'conflict', of, reason: fileConflictReason(sample, this.what, of) };
  }
}

/** The reason a record is refused when an earlier one of the file holds its sampleId and revision with other content. */
export function fileConflictReason(sample: Pick<Sample, 'sampleId' | 'revision'>, what: 'line' | 'row', of: number): string {
  return `sample ${sample.sampleId} revision ${sample.revision} is already on ${what} ${of} with different content; a correction needs a higher revision (e.g. ${sample.revision + 1})`;
}

/** The reason a record is refused when an earlier one of the file gives its sampleId and revision to another component. */
function otherComponentReason(sample: Pick<Sample, 'sampleId' | 'revision' | 'unit' | 'component'>, what: 'line' | 'row', of: number, owner: string): string {
  return (
    `sample ${sample.sampleId} revision ${sample.revision} is on ${what} ${of} under ${owner}, here under ${sample.unit} / ${sample.component}; ` +
    'the names differ only in letter case, which makes another component: write them one way'
  );
}
