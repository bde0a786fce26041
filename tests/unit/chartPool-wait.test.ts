/**
 * A chart request waiting for a thread waits a bounded time: beyond `waitMs` it is refused as busy (503 with
 * Retry-After at the route), instead of holding its socket behind a queue of long charts for minutes. Real worker
 * thread; the bound is made tiny and the running job large, so that the order does not depend on the machine's speed.
 */
import { afterAll, describe, expect, it } from 'vitest';
import type { Sample } from '../../src/domain/event.ts';
import { ChartPool } from '../../src/render/chartPool.ts';
import type { ChartJob } from '../../src/render/chartJob.ts';
import { inputOf } from '../../src/render/componentInput.ts';
import { ChartUnavailableError } from '../../src/render/errors/chartErrors.ts';
import { CONFIG } from './chart-fixtures.ts';
import { sample, settingsFrom } from './history-fixtures.ts';

const settings = settingsFrom(CONFIG);
const pool = new ChartPool({ concurrency: 1, queue: 4, timeoutMs: 10 * 60_000, waitMs: 1 });
afterAll(() => pool.close());

function seriesJob(n: number): ChartJob {
  const samples: Sample[] = Array.from({ length: n }, (_, i) => sample(i + 1, { sampleId: `S-${i}`, readings: { Fe: 5 + (i % 7) } }));
  return { kind: 'series', input: inputOf({ unit: 'PT-1', component: 'gearbox', group: settings.group, samples: n, lastSampledAt: samples.at(-1)!.sampledAt }, settings, samples) };
}

describe('a chart waiting for a thread', () => {
  it('is refused as busy once it has waited waitMs, and the running chart still finishes', async () => {
    const running = pool.run(seriesJob(20_000));
    const waiting = pool.run(seriesJob(10));
    const refusal = await waiting.then(
      () => undefined,
      (e: unknown) => e,
    );
    expect(refusal).toBeInstanceOf(ChartUnavailableError);
    expect((refusal as ChartUnavailableError).message).toBe('waited 1 ms for one of the 1 chart threads, the longest a chart waits; ask again shortly');
    expect(pool.load.waiting).toBe(0);
    expect((await running).kind).toBe('series');
    // The thread is free again: a new request is taken.
    expect((await pool.run(seriesJob(10))).kind).toBe('series');
  }, 600_000);
});
