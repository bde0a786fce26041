/**
 * The cost of one new in-order sample against the length of the component's history, on the live path: the result
 * stored in Redis and the component evaluated (src/pipeline/storeResult.ts and evaluateStored.ts on the Redis store,
 * a private redis-server of this run), exactly what a results job does. With a checkpoint after the last sample the
 * evaluation folds the new sample only, so the time must not grow with the history: the target is a ratio of at most
 * 1.5 between 10 000 and 10 samples of history.
 *
 * Both components are loaded first (every sample stored, one evaluation over the whole history), then new samples
 * are timed alternately on the short and the long history, so that a change in the machine's load hits both alike.
 */
import type { ResultEvent } from '../src/domain/event.ts';
import { parseConfig } from '../src/domain/configFile.ts';
import { incidentRules } from '../src/incidents/policy.ts';
import { evaluateStored, type EvaluationDeps } from '../src/pipeline/evaluateStored.ts';
import { storeResult } from '../src/pipeline/storeResult.ts';
import { RedisStore } from '../src/redis/redisStore.ts';
import { seededRandom } from '../src/simulation/random.ts';
import { simulateWearSeries } from '../src/simulation/wearSeries.ts';
import { startEmbeddedRedis as startRedisServer } from '../src/runtime/embeddedRedis.ts';
import { pipelineMissing } from './pipeline.ts';
import { skipped, type PartResult } from './report.ts';
import type { RunOptions } from './runner.ts';
import { fmt, median, percentile, round } from './stats.ts';

const GROUP = 'cost-gearboxes';
const CONFIG = `
redis: { prefix: "{cost}" }
detection: { runningInHours: 0 }
backfill: { quietAfterDays: 100000 }
groups:
  - name: ${GROUP}
    sumpLitres: 120
    residualFraction: 0.1
    limits:
      Fe: { caution: 60, alarm: 100 }
      Si: { caution: 15, alarm: 25 }
`;
/** A flat cost within the noise of a shared machine. */
const MAX_RATIO = 1.5;

/** A component's results, every 12 operating hours or so (so that 10 000 samples span about 14 years, ending now). */
function history(unit: string, samples: number, seed: number, now: number): ResultEvent[] {
  const intervalHours = 12;
  return simulateWearSeries(
    {
      unit,
      component: 'gearbox',
      group: GROUP,
      samples,
      metals: {
        Fe: { rate: 0.04, processVariance: 0.016 },
        Cu: { rate: 0.01, processVariance: 0.004 },
        Al: { rate: 0.005, processVariance: 0.002 },
        Cr: { rate: 0.003, processVariance: 0.0012 },
        Pb: { rate: 0.006, processVariance: 0.0024 },
      },
      labNoise: { absolute: 1, relative: 0.05 },
      intervalHours,
      jitter: 0.3,
      drainHours: 1000,
      residualFraction: 0.1,
      sumpLitres: 120,
      topUpPer100h: 0.5,
      startTime: now - (samples + 2) * intervalHours * 1.3 * 3_600_000,
      decimals: 1,
      sampleIdPrefix: `COST-${unit}`,
    },
    seededRandom(seed),
  ).map((s) => s.event);
}

export async function runEvaluationCost(o: RunOptions): Promise<PartResult> {
  const missing = pipelineMissing();
  if (missing !== undefined) return skipped('evaluation-cost', missing);
  const lengths = [10, Math.max(100, Math.round(10_000 * Math.min(1, o.scale)))] as const;
  const timed = Math.max(20, Math.round(200 * Math.min(1, o.scale)));
  const server = await startRedisServer();
  const client = server.client();
  try {
    const config = parseConfig(CONFIG);
    const store = new RedisStore(client, { prefix: '{cost}', config });
    const deps: EvaluationDeps = { store, ledger: store, config, rules: incidentRules(config), now: Date.now };
    const now = Date.now();
    const feeds = lengths.map((n, i) => history(`EC${i + 1}`, n + timed, o.seed * 31 + i, now));
    const step = async (event: ResultEvent) => {
      const stored = await storeResult(store, config, event, Date.now());
      const result = await evaluateStored(deps, stored.sample);
      if (result.kind !== 'evaluated') throw new Error(`evaluation of ${event.sampleId}: ${result.kind}`);
      return result;
    };
    for (const [i, n] of lengths.entries()) {
      const t0 = performance.now();
      for (const e of feeds[i]!.slice(0, n)) await storeResult(store, config, e, Date.now());
      const first = await step(feeds[i]![n]!);
      o.log(`evaluation-cost: ${n} samples of history loaded and evaluated in ${fmt((performance.now() - t0) / 1000)} s (${first.steps.length} steps folded)`);
    }
    // Warm-up: the first in-order samples after the load (JIT, caches) are not timed.
    const times: number[][] = lengths.map(() => []);
    const folded: number[][] = lengths.map(() => []);
    for (let k = 1; k < timed; k++) {
      for (const i of k % 2 === 0 ? [0, 1] : [1, 0]) {
        const event = feeds[i]![lengths[i]! + k]!;
        const t0 = performance.now();
        const result = await step(event);
        const ms = performance.now() - t0;
        if (k > 3) {
          times[i]!.push(ms);
          folded[i]!.push(result.steps.length);
        }
      }
    }
    const medians = times.map((t) => median(t));
    const ratio = medians[1]! / medians[0]!;
    const met = ratio <= MAX_RATIO;
    return {
      name: 'evaluation-cost',
      json: {
        historyLengths: lengths,
        samplesTimed: times[0]!.length,
        medianMs: medians.map((m) => round(m)),
        p90Ms: times.map((t) => round(percentile(t, 0.9))),
        stepsFoldedPerSample: folded.map((f) => Math.max(...f)),
        ratio: round(ratio),
        target: { ratioAtMost: MAX_RATIO, met },
      },
      table: {
        columns: ['history (samples)', 'median ms', 'p90 ms', 'steps folded', 'vs 10'],
        rows: lengths.map((n, i) => [String(n), fmt(medians[i]!), fmt(percentile(times[i]!, 0.9)), String(Math.max(...folded[i]!)), fmt(medians[i]! / medians[0]!)]),
      },
      notes: [
        `one new in-order sample: store (Lua script) + evaluation from the checkpoint + commit, on a private redis-server, ${times[0]!.length} samples per length timed alternately`,
        `five wear metals and silicon, limits, EWMA and CUSUM; 10 000 samples are about 14 years at 12 operating hours apart`,
        `target: ${lengths[1]} vs ${lengths[0]} samples of history ≤ ${MAX_RATIO}: ${met ? 'MET' : 'MISSED'} (${fmt(ratio)})`,
      ],
    };
  } finally {
    await server.dispose();
  }
}
