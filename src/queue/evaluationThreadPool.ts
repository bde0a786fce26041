/**
 * Threads that evaluate components for the worker's own thread, each with its own Redis connection and store: an
 * evaluation is mostly serialising, compressing and talking to Redis, all on one thread in Node, so a worker whose
 * history job has a month's components to evaluate (processors/historyProcessor.ts) uses more cores this way. The
 * evaluation is the same `evaluateStored` (the same locks, commits and verdicts); the calling thread keeps the rest
 * (metrics, live events, the group's cascade). A request goes to the thread with the fewest in flight. Threads start
 * at their first request and end after `idleMs` without one, so that a worker that is not loading a history holds
 * neither their memory nor their connections. A thread that dies fails the evaluations it held (the job is retried;
 * the component's lock lapses after its lifetime) and is started again at the next request.
 */
import { Worker } from 'node:worker_threads';
import type { EvaluationSummary } from '../pipeline/evaluationSummary.ts';
import type { ComponentRef } from '../pipeline/ports.ts';
import type { EvaluationThreadData, ThreadRequest } from './evaluationThread.ts';

export interface EvaluationThreadPoolOptions extends EvaluationThreadData {
  /** Threads at most (at least 1). */
  readonly threads: number;
  /** A thread with nothing to do for this long ends (it starts again when needed). Default 60 000 ms. */
  readonly idleMs?: number;
}

export const DEFAULT_THREAD_IDLE_MS = 60_000;

/** The name of a thread's Redis connection (CLIENT LIST). */
export const EVALUATION_THREAD_CONNECTION = 'wearshift:evaluation-thread';

/** How long `close` waits for a thread to let go of its connection before stopping it. */
const CLOSE_WAIT_MS = 5000;

type Reply = { readonly id: number; readonly summary: EvaluationSummary } | { readonly id: number; readonly error: string };

interface Pending {
  resolve(summary: EvaluationSummary): void;
  reject(error: Error): void;
}

/** A running thread and the requests it holds. */
interface Running {
  readonly worker: Worker;
  readonly pending: Map<number, Pending>;
  idle?: NodeJS.Timeout;
}

export class EvaluationThreadPool {
  /** By slot: the running thread, if any. */
  private readonly slots: Array<Running | undefined>;
  private readonly idleMs: number;
  private nextId = 1;
  private closed = false;

  constructor(private readonly options: EvaluationThreadPoolOptions) {
    if (!Number.isInteger(options.threads) || options.threads < 1) throw new RangeError(`evaluation threads: expected a whole number ≥ 1, got ${options.threads}`);
    this.slots = Array.from({ length: options.threads }, () => undefined);
    this.idleMs = options.idleMs ?? DEFAULT_THREAD_IDLE_MS;
  }

  get threads(): number {
    return this.slots.length;
  }

  /** Threads running now. */
  get running(): number {
    return this.slots.filter((s) => s !== undefined).length;
  }

  /** Evaluates the component on a thread, at processing time `now` (epoch ms). */
  evaluate(ref: ComponentRef, now: number): Promise<EvaluationSummary> {
    if (this.closed) return Promise.reject(new Error('evaluation threads closed'));
    let slot = 0;
    for (let i = 1; i < this.slots.length; i++) if ((this.slots[i]?.pending.size ?? 0) < (this.slots[slot]?.pending.size ?? 0)) slot = i;
    const thread = this.slots[slot] ?? this.start(slot);
    clearTimeout(thread.idle);
    const id = this.nextId++;
    return new Promise<EvaluationSummary>((resolve, reject) => {
      thread.pending.set(id, { resolve, reject });
      thread.worker.postMessage({ id, ref, now } satisfies ThreadRequest);
    });
  }

  /** Lets every thread close its connection once its evaluations are done (the callers wait for those). */
  async close(): Promise<void> {
    this.closed = true;
    await Promise.all(
      this.slots.map(async (thread, slot) => {
        if (thread === undefined) return;
        const exited = new Promise<void>((resolve) => thread.worker.once('exit', () => resolve()));
        // Requests still held (their callers gave up waiting) fail with the thread.
        if (thread.pending.size > 0) await thread.worker.terminate();
        else this.retire(slot, thread);
        await exited;
      }),
    );
  }

  private start(slot: number): Running {
    const { threads: _threads, idleMs: _idle, ...data } = this.options;
    const thread: Running = { worker: spawnThread(data), pending: new Map() };
    this.slots[slot] = thread;
    thread.worker.on('message', (reply: Reply) => {
      const waiting = thread.pending.get(reply.id);
      if (waiting === undefined) return;
      thread.pending.delete(reply.id);
      if (thread.pending.size === 0 && !this.closed) {
        thread.idle = setTimeout(() => this.retire(slot, thread), this.idleMs);
        thread.idle.unref();
      }
      if ('error' in reply) waiting.reject(new Error(reply.error));
      else waiting.resolve(reply.summary);
    });
    const fail = (error: Error) => {
      clearTimeout(thread.idle);
      if (this.slots[slot] === thread) this.slots[slot] = undefined;
      for (const p of thread.pending.values()) p.reject(error);
      thread.pending.clear();
    };
    thread.worker.on('error', (e) => fail(new Error(`evaluation thread failed: ${e.message}`)));
    thread.worker.on('exit', (code) => fail(new Error(`evaluation thread exited (code ${code})`)));
    return thread;
  }

  /**
   * Takes an idle thread out of its slot and lets it close its connection and end; one that has not ended after
   * CLOSE_WAIT_MS (its connection cannot say goodbye while Redis is away) is stopped.
   */
  private retire(slot: number, thread: Running): void {
    if (this.slots[slot] !== thread || thread.pending.size > 0) return;
    clearTimeout(thread.idle);
    this.slots[slot] = undefined;
    const stop = setTimeout(() => void thread.worker.terminate(), CLOSE_WAIT_MS);
    stop.unref();
    thread.worker.once('exit', () => clearTimeout(stop));
    thread.worker.postMessage({ close: true } satisfies ThreadRequest);
  }
}

/** The thread's entry beside this module (evaluationThread.mjs: under tsx it registers the loader first). */
const THREAD = new URL('./evaluationThread.mjs', import.meta.url);

function spawnThread(data: EvaluationThreadData): Worker {
  return new Worker(THREAD, { workerData: data, execArgv: [] });
}
