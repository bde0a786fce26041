/**
 * `wearshift chart cusum|ewma`: runs one detector over a plain series of numbers read from stdin, with the parameters in
 * sigma units, and prints every point (a table, or JSON lines with --json).
 */
import { type Command } from 'commander';
import { type CusumPoint, cusumChart } from '../../analysis/cusum.ts';
import { type EwmaPoint, ewmaChart } from '../../analysis/ewma.ts';
import { InputError } from '../../domain/errors.ts';
import { asInputError, formatTable, numberOption, round, tidy, writeJsonLine } from '../output.ts';

export interface ChartIo {
  readonly input: NodeJS.ReadableStream;
  readonly output: NodeJS.WritableStream;
}

const DECIMAL = /^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$/;

/** Numbers separated by whitespace, commas or newlines; a bad token is named by its position. */
function parseSeries(text: string): number[] {
  const values: number[] = [];
  text.split('\n').forEach((line, lineIndex) => {
    for (const token of line.split(/[\s,]+/)) {
      if (token === '') continue;
      if (!DECIMAL.test(token)) throw new InputError(`stdin: token ${values.length + 1} (line ${lineIndex + 1}) is not a number: "${token}"`);
      values.push(Number(token));
    }
  });
  if (values.length === 0) throw new InputError('stdin: no values to chart (expected numbers separated by spaces, commas or newlines)');
  return values;
}

async function readAll(input: NodeJS.ReadableStream): Promise<string> {
  let text = '';
  for await (const chunk of input) text += typeof chunk === 'string' ? chunk : (chunk as Buffer).toString('utf8');
  return text;
}

function firstSignalLine(points: readonly (CusumPoint | EwmaPoint)[]): string {
  const first = points.find((p) => p.signal !== null);
  return first ? `first signal at point ${first.index} (${first.signal})\n` : `no signal in ${points.length} points\n`;
}

interface CommonOptions {
  target: number;
  sigma: number;
  json?: boolean;
}

export function registerChart(program: Command, io: ChartIo = { input: process.stdin, output: process.stdout }): void {
  const chart = program
    .command('chart');
  const common = (c: Command) =>
    c
      .requiredOption('--target <T>', 'in-control mean of the series', numberOption('target'))
      .requiredOption('--sigma <S>', 'in-control standard deviation of one value (> 0)', numberOption('sigma'))
      .option('--json', 'one JSON object per point (JSON lines)')
      .addHelpText('after', '\nstdin: numbers separated by spaces, commas or newlines; a token that is not a number stops the run (exit 2).');

  common(
    chart
      .command('cusum')
      .description('tabular CUSUM: C+ = max(0, C+ + z − k), C− = max(0, C− − z − k), z = (x − target)/sigma; signals when a sum exceeds h; no reset')
      .requiredOption('--k <K>', 'reference value in sigma (half the shift to detect fastest)', numberOption('k'))
      .requiredOption('--h <H>', 'decision interval in sigma', numberOption('h'))
      .option('--headstart <F>', 'fast-initial-response headstart: both sums start at F·h, 0 ≤ F < 1', numberOption('headstart'), 0),
  ).action(async (opts: CommonOptions & { k: number; h: number; headstart: number }) => {
    const values = parseSeries(await readAll(io.input));
    const points = asInputError(() => cusumChart(values, opts.target, opts.sigma, { k: opts.k, h: opts.h, headstart: opts.headstart }));
    if (opts.json) {
      for (const p of points) writeJsonLine({ index: p.index, value: p.value, upper: tidy(p.upper), lower: tidy(p.lower), signal: p.signal }, io.output);
      return;
    }
    io.output.write(formatTable(['point', 'value', 'C+', 'C−', 'signal'], points.map((p) => [p.index, p.value, round(p.upper), round(p.lower), p.signal ?? ''])));
    io.output.write(firstSignalLine(points));
  });

  common(
    chart
      .command('ewma')
      .description('EWMA chart starting at the target: w = λ·x + (1 − λ)·w, limits target ± L·sigma·sqrt(λ/(2 − λ)·(1 − (1 − λ)^(2i))); no reset')
      .requiredOption('--lambda <λ>', 'smoothing constant, 0 < λ ≤ 1', numberOption('lambda'))
      .requiredOption('--L <L>', 'limit width in standard deviations of the EWMA', numberOption('L'))
      .option('--steady-limits', 'use the steady-state limits target ± L·sigma·sqrt(λ/(2 − λ)) from the first point (default: exact time-varying limits)'),
  ).action(async (opts: CommonOptions & { lambda: number; L: number; steadyLimits?: boolean }) => {
    const values = parseSeries(await readAll(io.input));
    const points = asInputError(() => ewmaChart(values, opts.target, opts.sigma, { lambda: opts.lambda, L: opts.L, exactLimits: !opts.steadyLimits }));
    if (opts.json) {
      for (const p of points) writeJsonLine({ index: p.index, value: p.value, ewma: tidy(p.ewma), ucl: tidy(p.ucl), lcl: tidy(p.lcl), signal: p.signal }, io.output);
      return;
    }
    io.output.write(formatTable(['point', 'value', 'EWMA', 'LCL', 'UCL', 'signal'], points.map((p) => [p.index, p.value, round(p.ewma, 6), round(p.lcl, 6), round(p.ucl, 6), p.signal ?? ''])));
    io.output.write(firstSignalLine(points));
  });
}
