/** The `wearshift` command line. Each command lives in its own module under ./commands. */
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
  'wearshift advises: it does not replace the laboratory\'s diagnosis, the equipment maker\'s limits, local codes or licensed practice.';

export function buildProgram(): Command {
  const program = new Command('wearshift')
    .description('Early warnings from used-oil analysis: wear-rate change detection beside classic limits, incidents and escalation.')
    .addHelpText('after', `\nEnvironment: REDIS_URL, REDIS_CLUSTER_NODES (host:port,… of a Redis Cluster), WEARSHIFT_CONFIG, PORT, WEARSHIFT_TOKEN_INGEST, WEARSHIFT_TOKEN_RESPONDER, WEARSHIFT_TOKEN_VIEWER.\n\n${CAUTION}`)
    .showHelpAfterError()
    .exitOverride();
  registerSchema(program);
  registerDocs(program);
  registerChart(program);
  registerDesign(program);
  registerIncidents(program);
  registerDemo(program);
  registerServe(program);
  registerWorker(program);
  registerApi(program);
  registerImport(program);
  registerReplay(program);
  registerBacktest(program);
  registerFailed(program);
  return program;
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
