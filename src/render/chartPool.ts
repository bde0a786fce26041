/**
 * Chart and series work off the event loop, bounded: at most `concurrency` worker threads compute at once, at most
 * `queue` requests wait for one, each at most `waitMs` (further ones are refused at once as busy), and a job that runs longer than
 * `timeoutMs` is abandoned — its thread is terminated and replaced — and reported as timed out. However long a
 * history, the process keeps answering HTTP and running its queue workers meanwhile.
 */
import { Worker } from 'node:worker_threads';
import type { ChartJob, ChartJobResult } from './chartJob.ts';
import type { ChartRequest, ChartRequestPart } from './chartThread.ts';
import { ChartUnavailableError } from './errors/chartErrors.ts';

export interface ChartPoolOptions {
  /** Threads computing at once. Default 1. */
  readonly concurrency?: number;
  /** Jobs waiting for a thread; beyond them, `run` rejects as busy. Default 16. */
  readonly queue?: number;
  /** Longest a job may run, from when its thread takes it (a new thread's start-up is bounded at three times this). Default 20 000 ms. */
  readonly timeoutMs?: number;
  /** Longest a job may wait for a thread; then it is refused as busy (its request holds a socket meanwhile). Default `timeoutMs`. */
  readonly waitMs?: number;
  /** Most samples a chart draws (src/charts/chartWindow.ts). Default 1 000. */
  readonly sampleBudget?: number;
}

interface Waiting {
  readonly job: ChartJob;
  timer?: NodeJS.Timeout;
  resolve(result: ChartJobResult): void;
  reject(error: Error): void;
}

interface Slot {
  worker: Worker | undefined;
  ready: Promise<void> | undefined;
}

const THREAD = new URL('./chartThread.mjs', import.meta.url);

/** Samples cloned to the thread per event-loop turn: a long history is sent in parts, so that copying it never holds up other requests for long. */
export const SAMPLES_PER_PART = 1000;

/**
 * Posts a request, its samples first in parts of SAMPLES_PER_PART with a turn of the event loop between them
 * (cloning 50 000 samples in one message held the event loop for about half a second on a busy two-core machine).
 */
export async function postInParts(worker: Pick<Worker, 'postMessage'>, request: ChartRequest, abandoned: () => boolean = () => false): Promise<void> {
  const { samples } = request.job.input;
  if (samples.length <= SAMPLES_PER_PART) return worker.postMessage(request);
  for (let from = 0; from < samples.length; from += SAMPLES_PER_PART) {
    if (abandoned()) return;
    worker.postMessage({ id: request.id, samples: samples.slice(from, from + SAMPLES_PER_PART) } satisfies ChartRequestPart);
    await new Promise((resolve) => setImmediate(resolve));
  }
  if (!abandoned()) worker.postMessage({ ...request, job: { ...request.job, input: { ...request.job.input, samples: [] } }, partsSent: true } satisfies ChartRequest);
}

export class ChartPool {
  readonly concurrency: number;
  readonly queueLimit: number;
  readonly timeoutMs: number;
  readonly waitMs: number;
  readonly sampleBudget: number;
  private readonly idle: Slot[] = [];
  private readonly waiting: Waiting[] = [];
  private running = 0;
  private nextId = 0;
  private closed = false;
  private readonly slots: Slot[] = [];

  constructor(options: ChartPoolOptions = {}) {
    this.concurrency = Math.max(1, Math.floor(options.concurrency ?? 1));
    this.queueLimit = Math.max(0, Math.floor(options.queue ?? 16));
    this.timeoutMs = options.timeoutMs ?? 20_000;
    this.waitMs = options.waitMs ?? this.timeoutMs;
    this.sampleBudget = options.sampleBudget ?? 1000;
    for (let i = 0; i < this.concurrency; i++) {
      const slot: Slot = { worker: undefined, ready: undefined };
      this.slots.push(slot);
      this.idle.push(slot);
    }
  }

  /** Jobs running and waiting now. */
  get load(): { running: number; waiting: number } {
    return { running: this.running, waiting: this.waiting.length };
  }

  run(job: ChartJob): Promise<ChartJobResult> {
    if (this.closed) return Promise.reject(new ChartUnavailableError('the chart pool is closed', 'closed', 5));
    return new Promise<ChartJobResult>((resolve, reject) => {
      const w: Waiting = { job, resolve, reject };
      const slot = this.idle.pop();
      if (slot !== undefined) return void this.start(slot, w);
      if (this.waiting.length >= this.queueLimit) {
        return reject(new ChartUnavailableError(`${this.running} charts are being drawn and ${this.waiting.length} are waiting, the most this process takes; ask again shortly`, 'busy', 2));
      }
      this.waiting.push(w);
      w.timer = setTimeout(() => {
        const at = this.waiting.indexOf(w);
        if (at < 0) return;
        this.waiting.splice(at, 1);
        reject(new ChartUnavailableError(`waited ${this.waitMs} ms for one of the ${this.concurrency} chart threads, the longest a chart waits; ask again shortly`, 'busy', 5));
      }, this.waitMs);
      w.timer.unref();
    });
  }

  async close(): Promise<void> {
    this.closed = true;
    for (const w of this.waiting.splice(0)) {
      clearTimeout(w.timer);
      w.reject(new ChartUnavailableError('the chart pool is closed', 'closed', 5));
    }
    await Promise.all(this.slots.map((s) => s.worker?.terminate()));
  }

  private thread(slot: Slot): { worker: Worker; ready: Promise<void> } {
    if (slot.worker !== undefined && slot.ready !== undefined) return { worker: slot.worker, ready: slot.ready };
    const worker = new Worker(THREAD, { execArgv: [], stdout: false, stderr: false });
    worker.unref();
    const ready = new Promise<void>((resolve, reject) => {
      const onMessage = (m: { ready?: boolean }) => {
        if (m.ready) {
          worker.off('error', reject);
          resolve();
        }
      };
      worker.once('message', onMessage);
      worker.once('error', reject);
    });
    ready.catch(() => {});
    slot.worker = worker;
    slot.ready = ready;
    return { worker, ready };
  }

  private start(slot: Slot, w: Waiting): void {
    this.running++;
    const id = ++this.nextId;
    const { worker, ready } = this.thread(slot);
    let settled = false;
    const finish = (fail: boolean) => {
      if (settled) return false;
      settled = true;
      clearTimeout(timer);
      worker.off('message', onMessage);
      worker.off('error', onError);
      worker.off('exit', onExit);
      if (fail) {
        slot.worker = undefined;
        slot.ready = undefined;
        void worker.terminate();
      }
      this.running--;
      this.release(slot);
      return true;
    };
    // A new thread first loads the program (seconds on a busy machine): bounded apart, so that the job's own time
    // limit measures the job.
    let timer = setTimeout(() => {
      if (finish(true)) w.reject(new ChartUnavailableError(`the chart thread did not start within ${3 * this.timeoutMs} ms`, 'failed', 30));
    }, 3 * this.timeoutMs);
    const onMessage = (m: { id?: number; ok?: boolean; result?: ChartJobResult; message?: string }) => {
      if (m.id !== id) return;
      if (!finish(false)) return;
      if (m.ok) w.resolve(m.result!);
      else w.reject(new Error(m.message ?? 'the chart failed'));
    };
    const onError = (e: Error) => {
      if (finish(true)) w.reject(new ChartUnavailableError(`the chart thread failed: ${e.message}`, 'failed', 5));
    };
    const onExit = () => {
      if (finish(true)) w.reject(new ChartUnavailableError('the chart thread stopped', 'failed', 5));
    };
    worker.on('message', onMessage);
    worker.on('error', onError);
    worker.on('exit', onExit);
    ready.then(
      () => {
        if (settled) return;
        clearTimeout(timer);
        timer = setTimeout(() => {
          if (finish(true)) w.reject(new ChartUnavailableError(`the chart took longer than ${this.timeoutMs} ms and was abandoned`, 'timeout', 30));
        }, this.timeoutMs);
        void postInParts(worker, { id, job: w.job, sampleBudget: this.sampleBudget }, () => settled).catch(onError);
      },
      (e: Error) => onError(e),
    );
  }

  private release(slot: Slot): void {
    const next = this.waiting.shift();
    clearTimeout(next?.timer);
    if (next !== undefined && !this.closed) this.start(slot, next);
    else this.idle.push(slot);
  }
}
