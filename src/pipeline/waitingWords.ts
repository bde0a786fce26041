/**
 * The responders' words a replay gives (replay.ts `sampleVerdicts`), each waiting for the sample that was its
 * component's latest when it was given (`after`, else the word's own sample): `take` hands over, in the file's order,
 * the words waiting for a sample the history has just brought; `rest` those whose sample never came.
 */
import type { Sample } from '../domain/event.ts';
import type { SampleVerdictLine } from '../intake/sampleVerdictFile.ts';

export class WaitingWords {
  private readonly bySample = new Map<string, SampleVerdictLine[]>();

  constructor(words: readonly SampleVerdictLine[]) {
    for (const w of words) {
      const key = keyOf(w.unit, w.component, w.after ?? w.sampleId);
      this.bySample.set(key, [...(this.bySample.get(key) ?? []), w]);
    }
  }

  /** The words waiting for this sample (once: a revision of it brings none again). */
  take(sample: Pick<Sample, 'unit' | 'component' | 'sampleId'>): readonly SampleVerdictLine[] {
    const key = keyOf(sample.unit, sample.component, sample.sampleId);
    const words = this.bySample.get(key) ?? [];
    this.bySample.delete(key);
    return words;
  }

  /** Every word still waiting, in the file's order, and none after. */
  rest(): readonly SampleVerdictLine[] {
    const words = [...this.bySample.values()].flat().sort((a, b) => a.line - b.line);
    this.bySample.clear();
    return words;
  }
}

function keyOf(unit: string, component: string, sampleId: string): string {
  return JSON.stringify([unit, component, sampleId]);
}
