/**
 * Runs the real command parser in this process (no child process to start): stdout collected, stderr silenced,
 * the given environment set for the call only.
 */
import { vi } from 'vitest';
import { main } from '../../src/cli/main.ts';

export async function runCliInProcess(args: readonly string[], env: Readonly<Record<string, string>> = {}): Promise<{ code: number; out: string }> {
  let out = '';
  const o = vi.spyOn(process.stdout, 'write').mockImplementation((s) => ((out += String(s)), true));
  const e = vi.spyOn(process.stderr, 'write').mockImplementation(() => true);
  const saved = Object.fromEntries(Object.keys(env).map((k) => [k, process.env[k]]));
  Object.assign(process.env, env);
  try {
    return { code: await main([...args]), out };
  } finally {
    o.mockRestore();
    e.mockRestore();
    for (const [k, v] of Object.entries(saved)) {
      if (v === undefined) delete process.env[k];
      else process.env[k] = v;
    }
    process.exitCode = undefined;
  }
}
