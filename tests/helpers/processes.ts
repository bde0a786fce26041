/**
 * `wearshift worker|serve` as real child processes (`node bin/wearshift.js ...`), for the fault tests: started
 * with an explicit environment, awaited until their /readyz answers 200, and ended by SIGTERM (graceful) or
 * SIGKILL (a crash). Every process started here is killed by `stopAll()` so that a failed test leaves none
 * behind.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { freePort } from './redisServer.ts';

const ROOT = fileURLToPath(new URL('../..', import.meta.url));
const BIN = fileURLToPath(new URL('../../bin/wearshift.js', import.meta.url));

export type WearshiftKind = 'worker' | 'serve';

export interface StartOptions {
  /** Variables for the child on top of PATH and HOME; nothing else of the test's environment leaks in. */
  env: Record<string, string>;
  /** Extra command-line arguments after the command name. */
  args?: string[];
  /** Longest wait for /readyz to answer 200. Default 30 000 ms (tsx compiles the sources on first start). */
  readyTimeoutMs?: number;
}

export interface WearshiftProcess {
  readonly kind: WearshiftKind;
  readonly pid: number;
  /** The port /readyz, /healthz and /metrics (and for `serve` the whole API) answer on. */
  readonly port: number;
  readonly url: string;
  /** Everything the process wrote to stdout and stderr so far (pino JSON lines go to stderr). */
  output(): string;
  /** Resolves when the process has exited. */
  readonly exited: Promise<{ code: number | null; signal: NodeJS.Signals | null }>;
  /** Sends SIGKILL and waits for the exit: a crash, no shutdown code runs. */
  crash(): Promise<void>;
  /** Sends SIGTERM and waits for the exit; resolves with the exit code. */
  stop(): Promise<number | null>;
}

const running = new Set<ChildProcess>();

export async function startWearshift(kind: WearshiftKind, options: StartOptions): Promise<WearshiftProcess> {
  const port = await freePort();
  const portArgs = kind === 'worker' ? ['--metrics-port', String(port)] : ['--port', String(port)];
  const env: NodeJS.ProcessEnv = { PATH: process.env.PATH ?? '', HOME: process.env.HOME ?? '', LOG_LEVEL: 'info', ...options.env };
  const child = spawn(process.execPath, [BIN, kind, ...portArgs, ...(options.args ?? [])], { cwd: ROOT, env, stdio: ['ignore', 'pipe', 'pipe'] });
  running.add(child);
  let output = '';
  child.stdout!.on('data', (d: Buffer) => (output += d.toString()));
  child.stderr!.on('data', (d: Buffer) => (output += d.toString()));
  const exited = new Promise<{ code: number | null; signal: NodeJS.Signals | null }>((resolve) => {
    child.once('exit', (code, signal) => {
      running.delete(child);
      resolve({ code, signal });
    });
  });
  const url = `http://127.0.0.1:${port}`;
  const process_: WearshiftProcess = {
    kind,
    pid: child.pid!,
    port,
    url,
    output: () => output,
    exited,
    async crash() {
      if (child.exitCode === null && child.signalCode === null) child.kill('SIGKILL');
      await exited;
    },
    async stop() {
      if (child.exitCode === null && child.signalCode === null) child.kill('SIGTERM');
      return (await exited).code;
    },
  };
  try {
    await untilReady(url, exited, options.readyTimeoutMs ?? 30_000);
  } catch (e) {
    await process_.crash();
    throw new Error(`wearshift ${kind} did not become ready: ${(e as Error).message}\n${output}`);
  }
  return process_;
}

async function untilReady(url: string, exited: Promise<unknown>, timeoutMs: number): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  let gone = false;
  void exited.then(() => (gone = true));
  while (Date.now() < deadline) {
    if (gone) throw new Error('the process exited');
    try {
      const res = await fetch(`${url}/readyz`, { signal: AbortSignal.timeout(1000) });
      if (res.status === 200) return;
    } catch {
      // Not listening yet.
    }
    await new Promise((r) => setTimeout(r, 100));
  }
  throw new Error(`/readyz did not answer 200 within ${timeoutMs} ms`);
}

/** SIGKILLs every process started here that is still running. */
export async function stopAll(): Promise<void> {
  const waits = [...running].map((child) => new Promise<void>((resolve) => {
    child.once('exit', () => resolve());
    child.kill('SIGKILL');
  }));
  await Promise.all(waits);
}

/** Polls `probe` until it returns true; fails with `what` after `timeoutMs`. */
export async function waitFor(what: string | (() => string), probe: () => Promise<boolean> | boolean, timeoutMs = 60_000, everyMs = 100): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  while (!(await probe())) {
    if (Date.now() > deadline) throw new Error(`timed out after ${timeoutMs} ms waiting for ${typeof what === 'string' ? what : what()}`);
    await new Promise((r) => setTimeout(r, everyMs));
  }
}
