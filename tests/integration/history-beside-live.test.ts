/**
 * A history import beside live results (a known limit: README, *Known limit: a longer wait, and partitions*), on a
 * private redis-server. Live results are not ordered against a history job: a component of the group judged live past
 * the history's months is judged again when the job's months change the group's statistics (the group's cascade). The
 * history job says so: its outcome counts those components (`rejudged`) and the worker logs a warning that names the
 * remedy; with the history loaded first, neither.
 */
import { Writable } from 'node:stream';
import { Worker, type Job } from 'bullmq';
import { describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/domain/configFile.ts';
import { validateResult } from '../../src/intake/validate.ts';
import { storeSample } from '../../src/pipeline/storeResult.ts';
import { runEvaluation } from '../../src/queue/evaluationRunner.ts';
import { historyProcessor, type HistoryOutcome } from '../../src/queue/processors/historyProcessor.ts';
import { openSharedQueue, QUEUE_NAMES } from '../../src/queue/queues.ts';
import { createLogger } from '../../src/telemetry/logger.ts';
import { evaluationSites } from '../helpers/evaluationSites.ts';
import { inventedFleet } from '../helpers/fleetCsv.ts';
import { liftGearboxJudging, POPULATION_FLEET } from '../helpers/populationFleet.ts';

const config = parseConfig(liftGearboxJudging(true));
const NOW = Date.parse('2026-12-01T00:00:00Z');
const events = inventedFleet(POPULATION_FLEET);
// LS1's first year as the live feed; the other units' same months as the history loaded beside it.
const live = events.filter((e) => e.unit.startsWith('LS1-') && e.sampledAt < '2025-01');
const history = events.filter((e) => !e.unit.startsWith('LS1-') && e.sampledAt < '2025-01');

const sites = evaluationSites(config, 'hl');

/** A store on a fresh prefix, its deps with a logger whose warnings are kept, and a way to run one history job. */
function site() {
  const warnings: string[] = [];
  const logger = createLogger({
    level: 'warn',
    destination: new Writable({
      write(chunk: Buffer, _encoding, done) {
        warnings.push(String(JSON.parse(chunk.toString()).msg));
        done();
      },
    }),
  });
  const { connection, store, partitions, settings, deps } = sites.site({ now: () => NOW, logger });
  const historyQueue = openSharedQueue(QUEUE_NAMES.history, connection, settings, partitions);
  const taker = new Worker(QUEUE_NAMES.history, null, { connection, prefix: partitions.sharedTag(), autorun: false });
  sites.closeAfter(() => Promise.all([taker.close(), historyQueue.close()]));
  return {
    deps,
    warnings,
    async live() {
      for (const e of live) {
        const parsed = validateResult(e, { now: NOW });
        if (!parsed.ok) throw new Error(JSON.stringify(parsed.issues));
        await storeSample(store, config, parsed.sample, NOW);
        expect(await runEvaluation(deps, { unit: e.unit, component: e.component })).toBe('done');
      }
    },
    async history(): Promise<HistoryOutcome> {
      await historyQueue.add('history', { records: history });
      const job = (await taker.getNextJob('history-1', { block: false })) as Job;
      return (await historyProcessor(deps)(job, 'history-1')) as HistoryOutcome;
    },
  };
}

describe('a history import beside live results', () => {
  it('says how many components judged live past its months are judged again, and warns', async () => {
    const s = site();
    await s.live();
    const outcome = await s.history();
    expect(outcome.results).toBe(history.length);
    expect(outcome.rejudged).toBeGreaterThan(0);
    expect(s.warnings.filter((w) => w.startsWith('a history import changed group statistics'))).toHaveLength(1);
    expect(s.warnings.join('\n')).toContain("load a group's history before its live feed");
  });

  it('says nothing when the history is loaded first', async () => {
    const s = site();
    const outcome = await s.history();
    await s.live();
    expect(outcome.rejudged).toBe(0);
    expect(s.warnings).toEqual([]);
  });
});
