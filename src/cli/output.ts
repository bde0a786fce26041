/** Output for people (aligned tables) and for machines (`--json`: one JSON object per line). */
import { ADVISORY_CAUTION } from '../domain/caution.ts';
import { InvalidArgumentError } from 'commander';
import type { Config } from '../domain/config.ts';
import { InputError } from '../domain/errors.ts';
import { describeTarget, redisTarget } from '../redis/target.ts';

export function writeJsonLine(value: unknown, out: NodeJS.WritableStream = process.stdout): void {
  out.write(`${JSON.stringify(value)}\n`);
}

export function formatTable(headers: string[], rows: (string | number)[][]): string {
  const cells = [headers, ...rows.map((r) => r.map(String))];
  const widths = headers.map((_, c) => Math.max(...cells.map((r) => (r[c] ?? '').length)));
  const line = (r: string[]) => r.map((v, c) => (c === 0 ? v.padEnd(widths[c]!) : v.padStart(widths[c]!))).join('  ');
  return [line(cells[0]!), widths.map((w) => '─'.repeat(w)).join('  '), ...cells.slice(1).map(line)].join('\n') + '\n';
}

/** Rounds for display without trailing noise. */
export function round(x: number, digits = 4): number {
  return Number(x.toPrecision(digits));
}

/** Parses a number option; commander hands options over as strings. */
export function numberOption(name: string) {
  return (raw: string): number => {
    const v = Number(raw);
    if (raw.trim() === '' || !Number.isFinite(v)) throw new InvalidArgumentError(`--${name} expects a number, got "${raw}"`);
    return v;
  };
}

export function numberListOption(name: string) {
  return (raw: string): number[] => raw.split(',').map((p) => numberOption(name)(p));
}

export { tidy } from '../domain/numbers.ts';

/** Parameter errors of the analysis core (RangeError) are the user's to fix: printed without a stack, exit 2. */
export function asInputError<T>(run: () => T): T {
  try {
    return run();
  } catch (e) {
    if (e instanceof RangeError) throw new InputError(e.message);
    throw e;
  }
}

/**
 * A date-time option: ISO 8601 with its zone (Z or ±hh:mm), as epoch ms. One without a zone is refused, not read in
 * whatever zone the machine runs in.
 */
export function zonedTime(option: string, text: string): number {
  const t = Date.parse(text);
  if (!/(Z|[+-]\d\d:?\d\d)$/i.test(text.trim()) || Number.isNaN(t)) {
    throw new InputError(`--${option}: expected an ISO 8601 date-time with a time zone, such as 2026-03-01T18:00:00Z; got "${text}"`);
  }
  return t;
}

/** `--now`: the processing time a command judges against (future dates, backfill); default the clock. */
export function processingTime(text: string | undefined): number {
  return text === undefined ? Date.now() : zonedTime('now', text);
}

/** The caution every human-readable output that carries findings ends with. */
export const ADVISORY_LINE =
  ADVISORY_CAUTION;
/**
 * Which Redis and key prefix a command uses, and why: "Redis redis://127.0.0.1:6379 (the default: neither REDIS_URL
 * nor redis.url is set), key prefix {wearshift}". Commands that read or write stored data print it first, so
 * that nobody works on whatever Redis happens to answer on localhost without knowing.
 */
export function redisChoice(config: Pick<Config, 'redis'>, env: NodeJS.ProcessEnv = process.env): string {
  const target = redisTarget(config, env);
  const source = env.REDIS_CLUSTER_NODES
    ? 'REDIS_CLUSTER_NODES'
    : target.kind === 'cluster'
      ? 'redis.cluster.nodes in the configuration'
      : env.REDIS_URL
        ? 'REDIS_URL'
        : config.redis.url
          ? 'redis.url in the configuration'
          : 'the default: neither REDIS_URL nor redis.url is set';
  return `Redis ${describeTarget(target)} (${source}), key prefix ${config.redis.prefix}`;
}
