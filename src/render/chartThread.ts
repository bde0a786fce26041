/**
 * The body of a chart thread: runs the chart jobs its pool posts, one at a time, and posts each result (or the
 * error's message) back. Loaded through chartThread.mjs, which first makes the thread able to load TypeScript.
 */
import { parentPort } from 'node:worker_threads';
import { runChartJob, type ChartJob } from './chartJob.ts';

export interface ChartRequest {
  readonly id: number;
  readonly job: ChartJob;
  readonly sampleBudget: number;
}

parentPort?.on('message', (request: ChartRequest) => {
  try {
    const result = runChartJob(request.job, request.sampleBudget);
    parentPort!.postMessage({ id: request.id, ok: true, result }, result.kind === 'png' ? [result.png.buffer as ArrayBuffer] : []);
  } catch (e) {
    parentPort!.postMessage({ id: request.id, ok: false, message: (e as Error).message });
  }
});
parentPort?.postMessage({ ready: true });
