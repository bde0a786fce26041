/**
 * What a responder says of a sample in doubt (a sampling finding: a bottle of new oil, a mixed-up label, a duplicated
 * bottle): `confirmed` puts it back into the trend and the baselines, `rejected` keeps it out for good, `null` takes
 * the word back. The mark is stored with the component and the component is evaluated again from that sample on, so
 * the findings and incidents follow as if the mark had been there when the sample arrived.
 */
import type { Queue } from 'bullmq';
import type { SampleMark } from '../analysis/model.ts';
import type { ComponentRef, ComponentStore } from '../pipeline/ports.ts';
import type { Partitions } from '../redis/keys.ts';
import { scheduleEvaluation } from './queues.ts';

export class SampleVerdicts {
  constructor(
    private readonly store: Pick<ComponentStore, 'markSample'>,
    private readonly evaluateQueues: readonly Queue[],
    private readonly partitions: Partitions,
  ) {}

  /** Stores the mark and schedules the evaluation; false when the component holds no such sample. */
  async mark(ref: ComponentRef, sampleId: string, mark: SampleMark | null): Promise<boolean> {
    const known = await this.store.markSample(ref, sampleId, mark);
    if (!known) return false;
    await scheduleEvaluation(this.evaluateQueues[this.partitions.of(ref)]!, ref);
    return true;
  }
}
