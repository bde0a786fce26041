/** `wearshift demo`: the invented demo fleet end to end, in one process, in about a minute. */
import type { Command } from 'commander';
import { InputError } from '../../domain/errors.ts';
import { demoPassed, formatIntro, formatKeepOpen, formatReport } from '../../demo/report.ts';
import { DEMO_DEFAULTS, DemoInterrupted, runDemo } from '../../demo/runDemo.ts';
import { RedisServerMissingError } from '../../runtime/embeddedRedis.ts';

interface DemoCommandOptions {
  keepOpen?: boolean;
  json?: boolean;
  out: string;
  config?: string;
  feedSeconds: string;
  settleSeconds: string;
}

export function registerDemo(program: Command): void {
  program
    .command('demo')
    .option('--keep-open', 'leave the API running afterwards (Ctrl-C ends it) and print its address, a viewer token and a responder token')
    .option('--json', 'print the report as one JSON line instead of text')
    .option('--out <dir>', 'where the received e-mails (.eml) and webhook deliveries (.json) go, relative to the working directory', 'demo/out')
    .option('--config <file>', 'the demo configuration (default: demo/config.yaml of the wearshift package, from any directory)')
    .option('--feed-seconds <s>', 'how long the playback of the 18 months of lab reports takes', String(DEMO_DEFAULTS.feedSeconds))
    .option('--settle-seconds <s>', 'how long to wait after the feed for the queues to empty and the escalation to play out (ends as soon as it has)', String(DEMO_DEFAULTS.settleSeconds))
    .addHelpText('after', '\nWithout REDIS_URL the demo starts a private redis-server from PATH; with it, it uses a key prefix of its own and removes only its keys.')
    .action((opts: DemoCommandOptions) => demo(opts));
}

async function demo(opts: DemoCommandOptions): Promise<void> {
  const feedSeconds = Number(opts.feedSeconds);
  if (!(feedSeconds > 0 && feedSeconds <= 600)) throw new InputError(`--feed-seconds: expected a number of seconds from 0 to 600, got "${opts.feedSeconds}"`);
  const settleSeconds = Number(opts.settleSeconds);
  if (!(settleSeconds > 0 && settleSeconds <= 3600)) throw new InputError(`--settle-seconds: expected a number of seconds from 0 to 3600, got "${opts.settleSeconds}"`);
  const text = !opts.json;
  const print = (line: string) => void (text && process.stdout.write(`${line}\n`));
  if (text) for (const line of formatIntro({ redis: process.env.REDIS_URL ? 'REDIS_URL, under a key prefix of its own' : 'a private redis-server from PATH', outDir: opts.out, feedSeconds })) print(line);
  // Ctrl-C during the run still stops the private redis-server and everything else the demo started.
  const interrupt = new AbortController();
  const abort = () => interrupt.abort();
  process.once('SIGINT', abort);
  process.once('SIGTERM', abort);
  let run;
  try {
    run = await runDemo({ outDir: opts.out, ...(opts.config !== undefined && { configFile: opts.config }), feedSeconds, settleSeconds, ...(opts.keepOpen && { keepOpen: true }), progress: print, signal: interrupt.signal });
  } catch (e) {
    if (e instanceof RedisServerMissingError || e instanceof DemoInterrupted) {
      process.stderr.write(`wearshift demo: ${e.message}\n`);
      process.exitCode = e instanceof DemoInterrupted ? 130 : 2;
      return;
    }
    throw e;
  } finally {
    process.off('SIGINT', abort);
    process.off('SIGTERM', abort);
  }
  const { report } = run;
  if (text) for (const line of formatReport(report, opts.out)) print(line);
  else process.stdout.write(`${JSON.stringify(report)}\n`);
  process.exitCode = demoPassed(report) ? 0 : 1;
  if (!opts.keepOpen) return;

  const board = await fetch(`${report.apiUrl}/`).then((r) => r.ok && (r.headers.get('content-type') ?? '').startsWith('text/html'), () => false);
  for (const line of formatKeepOpen({ apiUrl: report.apiUrl, board, viewerToken: String(run.viewerToken), responderToken: String(run.responderToken) })) print(line);
  await new Promise<void>((resolve) => {
    const stop = () => resolve();
    process.once('SIGINT', stop);
    process.once('SIGTERM', stop);
  });
  await run.close();
}
