/**
 * What a responder says of a sample in doubt (a sampling finding: a bottle of new oil, a mixed-up label, a duplicated
 * bottle): `confirmed` puts it back into the trend and the baselines, `rejected` keeps it out for good, `null` takes
 * the word back. Only a sample in doubt takes a word: one that a sampling finding questioned (or that holds a word
 * already); a sample nothing questioned is corrected by the lab's revision of the result, never by a verdict, so that
 * no responder can take a machine's evidence out of its history. The mark is stored with the component and the
 * component is evaluated again from that sample on, so the findings and incidents follow as if the mark had been
 * there when the sample arrived. Who said what, and when, goes into the timeline of every incident that holds the
 * sample (src/incidents/sampleVerdict.ts).
 *
 * `usual-rate` is said of a sample at which EWMA or CUSUM signal a rise of a wear rate: the rate is this component's
 * usual one (a baseline learnt low, not a change). Only such a sample takes it; the change detectors of each measurand
 * signalling a rise there learn a new own baseline from that sample on (analysis/fold/changeTrack.ts `restartChange`).
 */
import type { Queue } from 'bullmq';
import type { SampleMark } from '../analysis/model.ts';
import type { Incident, StepPosition } from '../incidents/model.ts';
import type { SampleVerdictWord } from '../incidents/sampleVerdict.ts';
import { incidentLiveEvent, type LiveEvent } from '../pipeline/liveEvent.ts';
import type { ComponentRef, ComponentStore, WordGiven } from '../pipeline/ports.ts';
import { wordRefusal } from '../pipeline/wordRefusal.ts';
import type { Partitions } from '../redis/keys.ts';
import { scheduleEvaluation } from './queues.ts';

export interface SampleVerdictTimeline {
  /**
   * The incidents whose timeline takes the word (RedisIncidents), and the component's incident state, whose latest
   * judged sample is kept with the word (replay gives the word there).
   */
  readonly incidents: {
    recordSampleVerdict(ref: ComponentRef, word: SampleVerdictWord): Promise<readonly Incident[]>;
    component(ref: ComponentRef): Promise<{ readonly judged: StepPosition | null }>;
  };
  /**
   * Told of each incident whose timeline changed, for live views: one closed because its evidence was set aside (a
   * late result withdrew it, or an earlier word answered it) with no severity standing.
   */
  readonly live?: (event: LiveEvent) => void;
  /** When the word is given. Default: the system clock. */
  readonly now?: () => Date;
}

/**
 * `taken`: stored, the component is evaluated again; `unknown`: no such sample; `not-in-doubt`: nothing questioned it
 * (confirmed, rejected); `no-rise`: no change detector signals a rise at it (usual-rate).
 */
export type VerdictOutcome = 'taken' | 'unknown' | 'not-in-doubt' | 'no-rise';

export class SampleVerdicts {
  constructor(
    private readonly store: Pick<ComponentStore, 'markSample' | 'findings' | 'revisions'>,
    private readonly evaluateQueues: readonly Queue[],
    private readonly partitions: Partitions,
    private readonly timeline: SampleVerdictTimeline,
  ) {}

  /**
   * Stores the mark, writes who gave it into the timelines of the incidents concerned, and schedules the evaluation,
   * for a sample in doubt. Taking a word back is always allowed.
   */
  async mark(ref: ComponentRef, sampleId: string, mark: SampleMark | null, by: string): Promise<VerdictOutcome> {
    if (mark !== null) {
      const refusal = wordRefusal((await this.store.findings(ref)).find((r) => r.sampleId === sampleId), mark);
      if (refusal !== undefined) {
        const known = (await this.store.revisions(ref)).some((r) => r.sample.sampleId === sampleId);
        return known ? refusal : 'unknown';
      }
    }
    const now = (this.timeline.now ?? (() => new Date()))();
    const judged = mark === null ? null : (await this.timeline.incidents.component(ref)).judged;
    const given: WordGiven = { by, at: now.toISOString(), ...(judged !== null && { after: judged.sampleId }) };
    const known = await this.store.markSample(ref, sampleId, mark, given);
    if (!known) return 'unknown';
    // The word is in force once stored: the timeline says so after it (never of a word not taken), and the component
    // is judged again even when the timeline could not be written.
    try {
      const word: SampleVerdictWord = { sampleId, verdict: mark ?? 'withdrawn', by, now };
      for (const incident of await this.timeline.incidents.recordSampleVerdict(ref, word)) {
        this.timeline.live?.(incidentLiveEvent(incident, 'sample-verdict', word.now.toISOString()));
      }
    } finally {
      await scheduleEvaluation(this.evaluateQueues[this.partitions.of(ref)]!, ref);
    }
    return 'taken';
  }
}
