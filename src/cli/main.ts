/** The `wearshift` command line. Each command lives in its own module under ./commands, loaded only when it runs. */
import { ADVISORY_CAUTION } from '../domain/caution.ts';
import { readFileSync } from 'node:fs';
import { Command, CommanderError, Help } from 'commander';
import { InputError } from '../domain/errors.ts';
import { COMMANDS, type CommandEntry } from './commandIndex.ts';

/** The exit code of an error the user can fix: a usage error, bad input, bad configuration. */
export const EXIT_USAGE = 2;

const EXIT_CODES = `Exit codes: 0 done; 1 some records were rejected (import, replay, backtest: the others were taken), the demo's
own checks failed, or an unexpected failure (printed with its stack trace); 2 a usage or input error (unknown option,
missing argument, bad value, unreadable file, bad configuration, a port in use), printed without a stack trace.`;

/**
 * The program with every command listed and `load` (or, by default, none) loaded in full. A command not loaded is
 * there by name and summary only: enough for `wearshift --help`, for "did you mean" and for `help <command>` to
 * name it; `main` loads the one the arguments call for.
 */
export async function buildProgram(load: (entry: CommandEntry) => boolean = () => false): Promise<Command> {
  const program = new Command('wearshift')
    .description('Early warnings from used-oil analysis: wear-rate change detection beside classic limits, incidents and escalation.')
    .version(packageVersion(), '-V, --version', 'print the version of wearshift')
    .addHelpText('after', `\nEnvironment: REDIS_URL, REDIS_CLUSTER_NODES (host:port,… of a Redis Cluster), WEARSHIFT_CONFIG, PORT, WEARSHIFT_TOKEN_INGEST, WEARSHIFT_TOKEN_RESPONDER, WEARSHIFT_TOKEN_VIEWER, WEARSHIFT_WORKER_ID (names a worker's MQTT sessions; default the host name), LOG_LEVEL (default info).\n\n${EXIT_CODES}\n\n${ADVISORY_CAUTION}`)
    .showHelpAfterError()
    .exitOverride();
  const usage = new Map(COMMANDS.map((c) => [c.name, c.usage]));
  const defaultTerm = new Help().subcommandTerm.bind(new Help());
  program.configureHelp({ subcommandTerm: (cmd) => (usage.has(cmd.name()) ? `${cmd.name()} ${usage.get(cmd.name())}`.trimEnd() : defaultTerm(cmd)) });
  // What an engineer runs first; the tools for people who change wearshift itself come last (the order of COMMANDS).
  let group: string | undefined;
  for (const entry of COMMANDS) {
    if (entry.group !== group) program.commandsGroup((group = entry.group));
    if (load(entry)) await entry.register(program);
    else program.command(entry.name);
    program.commands.find((c) => c.name() === entry.name)!.description(entry.summary);
  }
  return program;
}

/** The command the arguments call for (`wearshift <name> …` or `wearshift help <name>`), if any. */
function calledFor(argv: readonly string[]): string | undefined {
  const words = argv.filter((a) => !a.startsWith('-'));
  return words[0] === 'help' ? words[1] : words[0];
}

/** The version in package.json, read next to the sources (works from any directory, and through npm link). */
function packageVersion(): string {
  const pkg = JSON.parse(readFileSync(new URL('../../package.json', import.meta.url), 'utf8')) as { version?: string };
  return pkg.version ?? 'unknown';
}

export async function main(argv: string[]): Promise<number> {
  const called = calledFor(argv);
  const program = await buildProgram((entry) => entry.name === called);
  try {
    await program.parseAsync(argv, { from: 'user' });
    return typeof process.exitCode === 'number' ? process.exitCode : 0;
  } catch (e) {
    // Commander has printed its message (and the usage). --help and --version end with 0; an unknown option, a missing
    // argument or a value an option parser refused is a usage error: 2, like every other error the user can fix, so
    // that 1 keeps meaning "some records were rejected".
    if (e instanceof CommanderError) return e.exitCode === 0 ? 0 : EXIT_USAGE;
    if (e instanceof InputError) {
      process.stderr.write(`wearshift: ${e.message}\n`);
      return EXIT_USAGE;
    }
    process.stderr.write(`wearshift: ${e instanceof Error ? (e.stack ?? e.message) : String(e)}\n`);
    return 1;
  }
}
