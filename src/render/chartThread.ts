/**
 * The body of a chart thread: runs the chart jobs its pool posts, one at a time, and posts each result (or the
 * error's message) back. Loaded through chartThread.mjs, which first makes the thread able to load TypeScript.
 */
import { parentPort } from 'node:worker_threads';
import type { Sample } from '../domain/event.ts';
import { runChartJob, type ChartJob } from './chartJob.ts';

export interface ChartRequest {
  readonly id: number;
  readonly job: ChartJob;
  readonly sampleBudget: number;
  /** The samples came before, in parts (a long history): the job's own list is empty. */
  readonly partsSent?: boolean;
}

/** A part of a long history's samples, posted before its request (chartPool.ts). */
export interface ChartRequestPart {
  readonly id: number;
  readonly samples: readonly Sample[];
}

const parts = new Map<number, Sample[]>();

parentPort?.on('message', (message: ChartRequest | ChartRequestPart) => {
  if ('samples' in message) {
    const got = parts.get(message.id);
    if (got === undefined) parts.set(message.id, [...message.samples]);
    else for (const s of message.samples) got.push(s);
    return;
  }
  const request = message;
  const samples = request.partsSent ? (parts.get(request.id) ?? []) : undefined;
  parts.delete(request.id);
  try {
    const job: ChartJob = samples === undefined ? request.job : { ...request.job, input: { ...request.job.input, samples } };
    const result = runChartJob(job, request.sampleBudget);
    parentPort!.postMessage({ id: request.id, ok: true, result }, result.kind === 'png' ? [result.png.buffer as ArrayBuffer] : []);
  } catch (e) {
    parentPort!.postMessage({ id: request.id, ok: false, message: (e as Error).message });
  }
});
parentPort?.postMessage({ ready: true });
