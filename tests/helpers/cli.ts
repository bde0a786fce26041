/** Runs the real command line (`node bin/wearshift.js ...`) as a child process. */
import { spawn, type ChildProcess } from 'node:child_process';
import { fileURLToPath } from 'node:url';

export const BIN = fileURLToPath(new URL('../../bin/wearshift.js', import.meta.url));

export interface CliResult {
  readonly code: number | null;
  readonly stdout: string;
  readonly stderr: string;
}

/** The bound only stops a hung command: a busy shared machine can take minutes to start Node and tsx. */
export function runCli(args: readonly string[], env: NodeJS.ProcessEnv = {}, timeoutMs = 600_000): Promise<CliResult> {
  return new Promise((resolve, reject) => {
    const child = spawn(process.execPath, [BIN, ...args], { env: { ...process.env, ...env }, stdio: ['ignore', 'pipe', 'pipe'] });
    let stdout = '';
    let stderr = '';
    child.stdout.on('data', (d: Buffer) => (stdout += d.toString()));
    child.stderr.on('data', (d: Buffer) => (stderr += d.toString()));
    const timer = setTimeout(() => {
      child.kill('SIGKILL');
      reject(new Error(`wearshift ${args.join(' ')} did not finish within ${timeoutMs} ms\n${stderr}`));
    }, timeoutMs);
    child.on('error', reject);
    child.on('close', (code) => {
      clearTimeout(timer);
      resolve({ code, stdout, stderr });
    });
  });
}

/** Starts a long-running command (worker, serve, api); stop it with `stop()` (SIGTERM, waits for exit). */
export function startCli(args: readonly string[], env: NodeJS.ProcessEnv = {}): { child: ChildProcess; output: () => string; stop(signal?: NodeJS.Signals): Promise<number | null> } {
  const child = spawn(process.execPath, [BIN, ...args], { env: { ...process.env, ...env }, stdio: ['ignore', 'pipe', 'pipe'] });
  let output = '';
  child.stdout!.on('data', (d: Buffer) => (output += d.toString()));
  child.stderr!.on('data', (d: Buffer) => (output += d.toString()));
  return {
    child,
    output: () => output,
    stop: (signal = 'SIGTERM') =>
      new Promise((resolve) => {
        if (child.exitCode !== null) return resolve(child.exitCode);
        child.once('exit', (code) => resolve(code));
        child.kill(signal);
      }),
  };
}
