/**
 * Threads that evaluate components for the worker's own thread, each with its own Redis connection and store: an
 * evaluation is mostly serialising, compressing and talking to Redis, all on one thread in Node, so a worker whose
 * history job has a month's components to evaluate (processors/historyProcessor.ts) uses more cores this way. The
 * evaluation is the same `evaluateStored` (the same locks, commits and verdicts); the calling thread keeps the rest
 * (metrics, live events, the group's cascade). A request goes to the thread with the fewest in flight. A thread that
 * dies fails the evaluations it held (the job is retried; the component's lock lapses after its lifetime) and is
 * started again at the next request.
 */
import { Worker } from 'node:worker_threads';
import type { EvaluationSummary } from '../pipeline/evaluationSummary.ts';
import type { ComponentRef } from '../pipeline/ports.ts';
import type { EvaluationThreadData, ThreadRequest } from './evaluationThread.ts';

export interface EvaluationThreadPoolOptions extends EvaluationThreadData {
  /** Threads to start (at least 1). */
  readonly threads: number;
}

type Reply = { readonly id: number; readonly summary: EvaluationSummary } | { readonly id: number; readonly error: string };

interface Pending {
  resolve(summary: EvaluationSummary): void;
  reject(error: Error): void;
}

interface Slot {
  worker: Worker | undefined;
  readonly pending: Map<number, Pending>;
}

/** The name of a thread's Redis connection (CLIENT LIST). */
export const EVALUATION_THREAD_CONNECTION = 'wearshift:evaluation-thread';

/** How long `close` waits for a thread to let go of its connection before stopping it. */
const CLOSE_WAIT_MS = 5000;

export class EvaluationThreadPool {
  private readonly slots: Slot[];
  private nextId = 1;
  private closed = false;

  constructor(private readonly options: EvaluationThreadPoolOptions) {
    if (!Number.isInteger(options.threads) || options.threads < 1) throw new RangeError(`evaluation threads: expected a whole number ≥ 1, got ${options.threads}`);
    this.slots = Array.from({ length: options.threads }, () => ({ worker: undefined, pending: new Map() }));
  }

  get threads(): number {
    return this.slots.length;
  }

  /** Evaluates the component on a thread, at processing time `now` (epoch ms). */
  evaluate(ref: ComponentRef, now: number): Promise<EvaluationSummary> {
    if (this.closed) return Promise.reject(new Error('evaluation threads closed'));
    const slot = this.slots.reduce((a, b) => (b.pending.size < a.pending.size ? b : a));
    const worker = slot.worker ?? this.start(slot);
    const id = this.nextId++;
    return new Promise<EvaluationSummary>((resolve, reject) => {
      slot.pending.set(id, { resolve, reject });
      worker.postMessage({ id, ref, now } satisfies ThreadRequest);
    });
  }

  /** Lets every thread close its connection once its evaluations are done (the callers wait for those). */
  async close(): Promise<void> {
    this.closed = true;
    await Promise.all(
      this.slots.map(async (slot) => {
        const worker = slot.worker;
        if (worker === undefined) return;
        slot.worker = undefined;
        const exited = new Promise<void>((resolve) => worker.once('exit', () => resolve()));
        worker.postMessage({ close: true } satisfies ThreadRequest);
        let timer: NodeJS.Timeout | undefined;
        const late = new Promise<'late'>((resolve) => (timer = setTimeout(() => resolve('late'), CLOSE_WAIT_MS)));
        if ((await Promise.race([exited, late])) === 'late') await worker.terminate();
        clearTimeout(timer);
      }),
    );
  }

  private start(slot: Slot): Worker {
    const { threads: _threads, ...data } = this.options;
    const worker = spawnThread(data);
    slot.worker = worker;
    worker.on('message', (reply: Reply) => {
      const waiting = slot.pending.get(reply.id);
      if (waiting === undefined) return;
      slot.pending.delete(reply.id);
      if ('error' in reply) waiting.reject(new Error(reply.error));
      else waiting.resolve(reply.summary);
    });
    const fail = (error: Error) => {
      if (slot.worker === worker) slot.worker = undefined;
      for (const p of slot.pending.values()) p.reject(error);
      slot.pending.clear();
    };
    worker.on('error', (e) => fail(new Error(`evaluation thread failed: ${e.message}`)));
    worker.on('exit', (code) => fail(new Error(`evaluation thread exited (code ${code})`)));
    return worker;
  }
}

/** The thread's entry beside this module (evaluationThread.mjs: under tsx it registers the loader first). */
const THREAD = new URL('./evaluationThread.mjs', import.meta.url);

function spawnThread(data: EvaluationThreadData): Worker {
  return new Worker(THREAD, { workerData: data, execArgv: [] });
}
