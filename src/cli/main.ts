/** The `wearshift` command line. Each command lives in its own module under ./commands. */
import { ADVISORY_CAUTION } from '../domain/caution.ts';
import { readFileSync } from 'node:fs';
import { Command, CommanderError } from 'commander';
import { InputError } from '../domain/errors.ts';
import { registerDocs } from './commands/docs.ts';
import { registerSchema } from './commands/schema.ts';
import { registerChart } from './commands/chart.ts';
import { registerDesign } from './commands/design.ts';
import { registerIncidents } from './commands/incidents.ts';
import { registerDemo } from './commands/demo.ts';
import { registerApi } from './commands/api.ts';
import { registerBacktest } from './commands/backtest.ts';
import { registerFailed } from './commands/failed.ts';
import { registerImport } from './commands/import.ts';
import { registerReplay } from './commands/replay.ts';
import { registerServe } from './commands/serve.ts';
import { registerWorker } from './commands/worker.ts';

const CAUTION =
  ADVISORY_CAUTION;

export function buildProgram(): Command {
  const program = new Command('wearshift')
    .description('Early warnings from used-oil analysis: wear-rate change detection beside classic limits, incidents and escalation.')
    .version(packageVersion(), '-V, --version', 'print the version of wearshift')
    .addHelpText('after', `\nEnvironment: REDIS_URL, REDIS_CLUSTER_NODES (host:port,… of a Redis Cluster), WEARSHIFT_CONFIG, PORT, WEARSHIFT_TOKEN_INGEST, WEARSHIFT_TOKEN_RESPONDER, WEARSHIFT_TOKEN_VIEWER.\n\n${CAUTION}`)
    .showHelpAfterError()
    .exitOverride();
  // What an engineer runs first; the tools for people who change wearshift itself come last.
  program.commandsGroup('Try it and run it:');
  registerDemo(program);
  registerServe(program);
  registerWorker(program);
  registerApi(program);
  program.commandsGroup('Results and incidents:');
  registerImport(program);
  registerIncidents(program);
  registerReplay(program);
  registerFailed(program);
  program.commandsGroup('Tuning and checking the detectors:');
  registerDesign(program);
  registerBacktest(program);
  registerChart(program);
  program.commandsGroup('For developers of wearshift:');
  registerSchema(program);
  registerDocs(program);
  return program;
}

/** The version in package.json, read next to the sources (works from any directory, and through npm link). */
function packageVersion(): string {
  const pkg = JSON.parse(readFileSync(new URL('../../package.json', import.meta.url), 'utf8')) as { version?: string };
  return pkg.version ?? 'unknown';
}

export async function main(argv: string[]): Promise<number> {
  const program = buildProgram();
  try {
    await program.parseAsync(argv, { from: 'user' });
    return typeof process.exitCode === 'number' ? process.exitCode : 0;
  } catch (e) {
    if (e instanceof CommanderError) return e.exitCode;
    if (e instanceof InputError) {
      process.stderr.write(`wearshift: ${e.message}\n`);
      return 2;
    }
    process.stderr.write(`wearshift: ${e instanceof Error ? (e.stack ?? e.message) : String(e)}\n`);
    return 1;
  }
}
