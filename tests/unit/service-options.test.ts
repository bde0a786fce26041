/** Options of `wearshift serve|worker` refused before anything starts, with the option, the range and the value. */
import { describe, expect, it } from 'vitest';
import { InputError } from '../../src/domain/errors.ts';
import { MAX_HISTORY_THREADS, runService } from '../../src/runtime/runService.ts';

describe('service options', () => {
  it.each(['x', '-1', '1.5', String(MAX_HISTORY_THREADS + 1)])('--history-threads %s is refused before Redis is touched', async (value) => {
    const env = { REDIS_URL: 'redis://127.0.0.1:1' };
    const run = runService('worker', { historyThreads: value }, env);
    await expect(run).rejects.toThrow(InputError);
    await expect(run).rejects.toThrow(`--history-threads: expected a whole number from 0 to ${MAX_HISTORY_THREADS}, got "${value}"`);
  });
});
