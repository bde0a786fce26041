/**
 * A long history goes to the chart thread in parts, with a turn of the event loop between them, so that cloning it
 * never holds up other requests for long; a short one goes in one message. The thread puts the parts back together
 * (the drawing of a 3 000-sample history over its latest samples is checked in tests/abuse/chart-load.test.ts).
 */
import { describe, expect, it } from 'vitest';
import type { Sample } from '../../src/domain/event.ts';
import { postInParts, SAMPLES_PER_PART } from '../../src/render/chartPool.ts';
import type { ChartRequest, ChartRequestPart } from '../../src/render/chartThread.ts';
import { inputOf } from '../../src/render/componentInput.ts';
import { CONFIG } from './chart-fixtures.ts';
import { sample, settingsFrom } from './history-fixtures.ts';

const settings = settingsFrom(CONFIG);

function request(n: number): ChartRequest {
  const samples: Sample[] = Array.from({ length: n }, (_, i) => sample(i + 1, { sampleId: `S-${i}`, readings: { Fe: 5 + (i % 7) } }));
  const input = inputOf({ unit: 'PT-1', component: 'gearbox', group: settings.group, samples: n, lastSampledAt: samples.at(-1)!.sampledAt }, settings, samples);
  return { id: 7, job: { kind: 'series', input }, sampleBudget: 1000 };
}

/** What was posted, with a mark wherever another task of the event loop ran in between. */
async function posted(req: ChartRequest, abandoned?: () => boolean): Promise<(ChartRequest | ChartRequestPart | 'turn')[]> {
  const log: (ChartRequest | ChartRequestPart | 'turn')[] = [];
  let ticking = true;
  const tick = () => {
    if (!ticking) return;
    if (log.at(-1) !== 'turn') log.push('turn');
    setImmediate(tick);
  };
  setImmediate(tick);
  await postInParts({ postMessage: (m: ChartRequest | ChartRequestPart) => log.push(m) }, req, abandoned);
  ticking = false;
  return log;
}

describe('a chart request posted to its thread', () => {
  it('sends a long history in parts, other tasks running between them, then the request without its samples', async () => {
    const n = 5 * SAMPLES_PER_PART + 17;
    const req = request(n);
    const log = await posted(req);
    const parts = log.filter((m): m is ChartRequestPart => m !== 'turn' && 'samples' in m);
    expect(parts).toHaveLength(6);
    expect(parts.every((p) => p.id === 7 && p.samples.length <= SAMPLES_PER_PART)).toBe(true);
    expect(parts.flatMap((p) => p.samples.map((s) => s.sampleId))).toEqual(req.job.input.samples.map((s) => s.sampleId));
    const last = log.filter((m) => m !== 'turn').at(-1) as ChartRequest;
    expect(last).toMatchObject({ id: 7, partsSent: true, sampleBudget: 1000 });
    expect(last.job.input.samples).toEqual([]);
    // Between any two parts the event loop served something else.
    const messages = log.map((m) => (m === 'turn' ? 'turn' : 'samples' in m ? 'part' : 'request'));
    for (let i = 1; i < messages.length; i++) if (messages[i] !== 'turn' && messages[i - 1] === 'part') throw new Error(`two messages without a turn between them at ${i}: ${messages.join(' ')}`);
  });

  it('sends a short history in one message, and stops sending parts once the job is abandoned', async () => {
    const short = await posted(request(SAMPLES_PER_PART));
    expect(short.filter((m) => m !== 'turn')).toEqual([request(SAMPLES_PER_PART)].map((r) => expect.objectContaining({ id: r.id, sampleBudget: 1000 })));
    let sent = 0;
    const log = await posted(request(4 * SAMPLES_PER_PART), () => sent++ >= 2);
    expect(log.filter((m) => m !== 'turn' && 'samples' in m)).toHaveLength(2);
    expect(log.some((m) => m !== 'turn' && !('samples' in m))).toBe(false);
  });
});
