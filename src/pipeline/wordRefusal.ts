/**
 * Whether a sample takes a responder's word, from its record in the component's findings log (the last judgement of
 * it): `confirmed` and `rejected` only a sample in doubt (a sampling finding questioned it, or it holds a word already),
 * `usual-rate` only a sample at which EWMA or CUSUM signal a rise. The API (src/queue/sampleVerdicts.ts) and replay
 * with a file of words (replay.ts) refuse by the same rule. Taking a word back is always allowed and is not asked here.
 */
import type { SampleMark } from '../analysis/model.ts';
import type { StepRecord } from './ports.ts';

/** Why the sample does not take the word: `no-rise` (usual-rate), `not-in-doubt` (confirmed, rejected); undefined when it does. */
export function wordRefusal(record: StepRecord | undefined, mark: SampleMark): 'no-rise' | 'not-in-doubt' | undefined {
  if (mark === 'usual-rate') {
    return record !== undefined && record.findings.some((f) => (f.rule === 'ewma' || f.rule === 'cusum') && f.direction === 'up') ? undefined : 'no-rise';
  }
  return record !== undefined && (record.status !== undefined || record.findings.some((f) => f.rule === 'sampling')) ? undefined : 'not-in-doubt';
}

/**
 * Why a word was not taken, in words, for the sample named `where` (e.g. `sample "T-6" of PS7-T1/gearbox`): the API's
 * answers, replay's refused words and the command line say the same.
 */
export function refusalText(why: 'unknown' | 'no-rise' | 'not-in-doubt', where: string): string {
  switch (why) {
    case 'unknown':
      return `no such sample: ${where}`;
    case 'no-rise':
      return `no change detector (EWMA or CUSUM) signals a rise of a wear rate at ${where}, so it takes no word on a usual rate`;
    case 'not-in-doubt':
      return `${where} is not in doubt: no sampling finding questioned it, so it takes no verdict; a wrong reading is corrected by the lab's revision of the result`;
  }
}
