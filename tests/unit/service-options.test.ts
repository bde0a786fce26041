/** Options of `wearshift serve|worker`: bad values refused before anything starts (option, range, value), and defaults. */
import { describe, expect, it } from 'vitest';
import { InputError } from '../../src/domain/errors.ts';
import { defaultHistoryThreads, MAX_HISTORY_THREADS, MAX_RESULTS_AT_ONCE, runService } from '../../src/runtime/runService.ts';

describe('service options', () => {
  it.each(['x', '-1', '1.5', String(MAX_HISTORY_THREADS + 1)])('--history-threads %s is refused before Redis is touched', async (value) => {
    const env = { REDIS_URL: 'redis://127.0.0.1:1' };
    const run = runService('worker', { historyThreads: value }, env);
    await expect(run).rejects.toThrow(InputError);
    await expect(run).rejects.toThrow(`--history-threads: expected a whole number from 0 to ${MAX_HISTORY_THREADS}, got "${value}"`);
  });

  it.each(['x', '0', '2.5', String(MAX_RESULTS_AT_ONCE + 1)])('--results-at-once %s is refused before Redis is touched', async (value) => {
    const run = runService('worker', { resultsAtOnce: value }, { REDIS_URL: 'redis://127.0.0.1:1' });
    await expect(run).rejects.toThrow(InputError);
    await expect(run).rejects.toThrow(`--results-at-once: expected a whole number from 1 to ${MAX_RESULTS_AT_ONCE}, got "${value}"`);
  });

  it('history threads default to the cores, at most 4, and none on one core', () => {
    expect([1, 2, 3, 4, 8, 64].map((cores) => defaultHistoryThreads(cores))).toEqual([0, 2, 3, 4, 4, 4]);
  });
});
