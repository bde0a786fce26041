/**
 * Structured logs (pino, JSON lines on stderr so that stdout stays free for `--json` output).
 * Credentials never reach a log line: authorization headers, tokens, passwords and secrets are redacted
 * wherever they appear in the first few levels of a logged object, and Redis URLs lose their password. Every line
 * is also scrubbed as text just before it is written (redactText.ts): acknowledgement-link tokens in URLs, `token=`
 * query parameters, bearer tokens inside messages and the configured API tokens never reach the output.
 */
import { pino, type Logger, type LoggerOptions } from 'pino';
import { redactText, secretsFromEnv } from './redactText.ts';
export { maskUrl } from './redactText.ts';

export type { Logger } from 'pino';

const SECRET_KEYS = ['authorization', 'cookie', 'token', 'tokens', 'password', 'secret', 'apiKey', 'signingSecret'];

/** fast-redact paths: a sensitive key at the top level, or up to three levels down. */
export const REDACTED_PATHS: string[] = SECRET_KEYS.flatMap((k) => [k, `*.${k}`, `*.*.${k}`, `*.*.*.${k}`]);

export interface LoggerSettings {
  /** pino level. Default: `LOG_LEVEL` from the environment, else `info`. */
  level?: string;
  /** Where lines go. Default: standard error. */
  destination?: NodeJS.WritableStream;
  /** Bound fields on every line, e.g. `{ role: 'worker' }`. */
  base?: Record<string, unknown>;
  /** Values never to be written, wherever they appear. Default: the API tokens of the environment (auth.ts). */
  secrets?: readonly string[];
}

export function createLogger(settings: LoggerSettings = {}): Logger {
  const options: LoggerOptions = {
    level: settings.level ?? process.env.LOG_LEVEL ?? 'info',
    base: { pid: process.pid, ...settings.base },
    redact: { paths: REDACTED_PATHS, censor: '[redacted]' },
    timestamp: pino.stdTimeFunctions.isoTime,
    hooks: { streamWrite: secretFreeLine(settings.secrets ?? secretsFromEnv()) },
  };
  return pino(options, (settings.destination ?? process.stderr) as pino.DestinationStream);
}

/** The last step before a line is written: the line with every credential in its text redacted. */
export function secretFreeLine(known: readonly string[]): (line: string) => string {
  return (line) => redactText(line, known);
}

/** A logger that writes nothing, for commands that print their own output and for tests. */
export function silentLogger(): Logger {
  return pino({ level: 'silent' });
}

