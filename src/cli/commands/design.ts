/**
 * `wearshift design cusum|ewma`: average run lengths for given chart parameters, or the parameter (h, L) that meets a target
 * in-control run length, given directly or derived from a false-alarm budget. With a budget, every choice the worker makes
 * (sample interval, hours per year, charts per component, the budget share, one-sided design, k, headstart, λ, exact
 * limits) defaults to the configuration's, or with --group to that group's resolved settings, so that the answer is the h
 * or L the worker uses.
 */
import { type Command, Option } from 'commander';
import { cusumArl } from '../../analysis/arl/cusumArl.ts';
import { ewmaArl } from '../../analysis/arl/ewmaArl.ts';
import { cusumDecisionInterval } from '../../analysis/arl/solveCusum.ts';
import { ewmaLimitWidth } from '../../analysis/arl/solveEwma.ts';
import { changeDesign, parseBudget, samplesPerBudgetPeriod, targetArl } from '../../analysis/budget.ts';
import type { Budget, BudgetSchema, Config, Detection, Population } from '../../domain/config.ts';
import { DEFAULT_HOURS_PER_YEAR, DEFAULT_SAMPLE_INTERVAL_HOURS } from '../../domain/budgetDefaults.ts';
import { DESIGNABLE_EWMA_LAMBDA, DESIGNABLE_RUN_LENGTH, ewmaLambdaIssue, runLengthDerivation, runLengthOutOfRange } from '../../domain/configBudget.ts';
import { InputError } from '../../domain/errors.ts';
import { registerDesignNoise } from './designNoise.ts';
import { ADVISORY_LINE, asInputError, formatTable, numberListOption, numberOption, round, tidy, writeJsonLine } from '../output.ts';

type Sided = 'one' | 'two';

/** The shifts of the published tables (Lucas & Crosier 1982; Lucas & Saccucci 1990), in sigma. */
const TABLE_SHIFTS = [0, 0.25, 0.5, 0.75, 1, 1.5, 2, 2.5, 3, 4, 5];

interface CommonOptions {
  sided?: Sided;
  config?: string;
  shifts?: number[];
  arl0?: number;
  budget?: string;
  every?: number;
  hoursPerYear?: number;
  charts?: number;
  share?: number;
  group?: string;
  json?: boolean;
}

/** How a target in-control run length was derived from a false-alarm budget. */
interface BudgetConversion {
  alarms: number;
  years: number;
  sampleIntervalHours: number;
  hoursPerYear: number;
  samplesPerComponent: number;
  componentArl0: number;
  charts: number;
  share: number;
  arl0: number;
}

/** The target in-control run length: --arl0, or the budget conversion; undefined when the parameter itself was given. */
function targetFrom(opts: CommonOptions, parameter: string, given: boolean, ctx: BudgetContext | undefined): { arl0: number; conversion?: BudgetConversion } | undefined {
  const targets = [given, opts.arl0 !== undefined, opts.budget !== undefined].filter(Boolean).length;
  if (targets !== 1) throw new InputError(`give exactly one of --${parameter}, --arl0 or --budget`);
  const budgetOnly = { every: opts.every, 'hours-per-year': opts.hoursPerYear, charts: opts.charts, share: opts.share, group: opts.group };
  if (opts.budget === undefined) {
    const stray = Object.entries(budgetOnly).find(([, v]) => v !== undefined);
    if (stray) throw new InputError(`--${stray[0]} applies only with --budget`);
    return opts.arl0 === undefined ? undefined : { arl0: opts.arl0 };
  }
  const { alarms, years } = parseBudget(opts.budget);
  // The sample interval and the hours per year the worker counts with, unless given.
  const configured = ctx!.settings.detection.budget;
  const parsed = ctx!.BudgetSchema.safeParse({
    alarms,
    years,
    sampleIntervalHours: opts.every ?? configured.sampleIntervalHours,
    hoursPerYear: opts.hoursPerYear ?? configured.hoursPerYear,
  });
  if (!parsed.success) throw new InputError(`--every / --hours-per-year: ${parsed.error.issues.map((i) => `${i.path.join('.')}: ${i.message}`).join('; ')}`);
  const budget: Budget = parsed.data;
  const worker = workerDesign(ctx!.settings);
  const charts = opts.charts ?? worker.charts;
  const share = opts.share ?? worker.share;
  if (!(share > 0 && share <= 1)) throw new InputError(`--share must be a fraction in (0, 1], got ${share}`);
  const arl0 = asInputError(() => targetArl(budget, charts)) / share;
  // The range a configuration's budget is held to: a budget the worker would refuse is refused here, naming the option.
  const outOfRange = runLengthOutOfRange(arl0, 'each chart', runLengthDerivation(budget, charts, share));
  if (outOfRange !== undefined) throw new InputError(`--budget "${opts.budget}" ${outOfRange}`);
  const samplesPerComponent = samplesPerBudgetPeriod(budget);
  return {
    arl0,
    conversion: {
      alarms,
      years,
      sampleIntervalHours: budget.sampleIntervalHours,
      hoursPerYear: budget.hoursPerYear,
      samplesPerComponent: tidy(samplesPerComponent),
      componentArl0: tidy(samplesPerComponent / alarms),
      charts,
      share,
      arl0: tidy(arl0),
    },
  };
}

/** The detection settings a design follows: the configuration's top level, or one group's resolved settings. */
interface DesignSettings {
  readonly detection: Detection;
  readonly population: Population;
  /** The group named by --group; undefined for the top level. */
  readonly group?: string;
}

interface BudgetContext {
  /** The configuration the worker runs with: --config, else WEARSHIFT_CONFIG, else the built-in defaults. */
  readonly config: Config;
  readonly settings: DesignSettings;
  readonly BudgetSchema: typeof BudgetSchema;
}

/** With --budget only: the configuration and the budget's schema, loaded then (the configuration parser is not small). */
async function budgetContext(opts: CommonOptions): Promise<BudgetContext | undefined> {
  if (opts.budget === undefined) return undefined;
  const [{ loadConfig }, configModule, { resolveSettings }] = await Promise.all([
    import('../../runtime/loadConfig.ts'),
    import('../../domain/config.ts'),
    import('../../domain/settings.ts'),
  ]);
  const file = opts.config ?? process.env.WEARSHIFT_CONFIG;
  const config = loadConfig(file);
  let settings: DesignSettings = { detection: config.detection, population: config.population };
  if (opts.group !== undefined) {
    const names = config.groups.map((g) => g.name);
    if (!names.includes(opts.group)) throw new InputError(`--group: no group "${opts.group}" in ${file ?? 'the built-in defaults'} (groups: ${names.join(', ') || 'none'})`);
    const resolved = resolveSettings(config, { unit: '', component: '', group: opts.group });
    settings = { detection: resolved.detection, population: resolved.population, group: opts.group };
  }
  return { config, settings, BudgetSchema: configModule.BudgetSchema };
}

/** How the worker designs its charts from the detection settings (top level or a group's). */
function workerDesign(s: DesignSettings): { charts: number; share: number; measurands: number; detectors: number } {
  const d = s.detection;
  // The rise side's design, which opens wear incidents (a fall has its own part of the budget: budget.ts changeDesign).
  const { rise, riseShare } = changeDesign(d, s.population);
  const detectors = (d.ewma.enabled ? 1 : 0) + (d.cusum.enabled ? 1 : 0);
  return { charts: Math.max(1, rise.charts), share: riseShare, measurands: d.measurands.length, detectors };
}

function conversionLines(c: BudgetConversion, opts: CommonOptions, s: DesignSettings): string {
  const w = workerDesign(s);
  const scope = s.group === undefined ? 'the configuration' : `group ${s.group}`;
  const from = (given: number | undefined, option: string, key: string) => (given === undefined ? `detection.budget.${key} of ${scope}` : `${option} given`);
  return [
    `budget: ${c.alarms} false alarm(s) per component per ${c.years} year(s), a sample every ${c.sampleIntervalHours} operating hours (${from(opts.every, '--every', 'sampleIntervalHours')}), ` +
      `${c.hoursPerYear} hours per year (${from(opts.hoursPerYear, '--hours-per-year', 'hoursPerYear')})`,
    `  a "chart" is one wear metal watched by one detector: ${scope} watches ${w.measurands} wear metal(s) with ${w.detectors} detector(s) (EWMA, CUSUM), ${w.charts} charts per component${
      opts.charts === undefined ? '' : `; --charts ${opts.charts} given`
    }`,
    `  ${c.years} × ${c.hoursPerYear} / ${c.sampleIntervalHours} = ${round(c.samplesPerComponent, 6)} samples per component; / ${c.alarms} = component in-control ARL ${round(c.componentArl0, 6)}`,
    c.share === 1
      ? `  ${c.charts} chart(s) per component, false-alarm rates adding up: each chart needs ARL0 = ${round(c.componentArl0, 6)} × ${c.charts} = ${round(c.arl0, 6)}`
      : `  ${c.charts} chart(s) per component sharing ${round(c.share, 6)} of the budget, false-alarm rates adding up: each chart needs ARL0 = ${round(c.componentArl0, 6)} × ${c.charts} / ${round(c.share, 6)} = ${round(c.arl0, 6)}`,
  ].join('\n') + '\n';
}

function arlTable(shifts: readonly number[], arl: (shift: number) => number): { shift: number; arl: number | null }[] {
  return shifts.map((shift) => {
    const value = asInputError(() => arl(shift));
    return { shift, arl: Number.isFinite(value) ? tidy(value) : null };
  });
}

/** Operating hours between samples, for the table's hours column: --every, or the budget's sample interval. */
function everyHours(opts: CommonOptions, target: { conversion?: BudgetConversion } | undefined): number | undefined {
  return target?.conversion?.sampleIntervalHours ?? opts.every;
}

/** ARLs in samples and, when the sample interval is known, in operating hours. */
function writeArlTable(out: NodeJS.WritableStream, rows: { shift: number; arl: number | null }[], every?: number): void {
  const headers = every === undefined ? ['shift (σ)', 'ARL (samples)'] : ['shift (σ)', 'ARL (samples)', `ARL (operating hours, a sample every ${every} h)`];
  out.write(
    formatTable(
      headers,
      rows.map((r) => {
        const samples = r.arl === null ? '> 1e9' : round(r.arl, 4);
        return every === undefined ? [r.shift, samples] : [r.shift, samples, r.arl === null ? '—' : round(r.arl * every, 4)];
      }),
    ),
  );
}

const COMMON_HELP = `
Give exactly one of: the parameter itself (--h / --L), a target in-control run length --arl0, or a false-alarm --budget;
with --arl0 or --budget the parameter that gives that in-control (zero-shift) run length is solved for.
Run lengths count samples until the first signal on independent N(shift, 1) observations (shift in sigma; one-sided charts
watch the upper side, so negative shifts make them slower), from the chart's start state. They are shown at --shifts
(default: the shifts of the published tables, ${TABLE_SHIFTS.join(', ')}); beyond 1e9 samples as "> 1e9" (null with --json).

--budget "A per component per Y years" with --every HOURS, --hours-per-year HOURS and --charts N: each chart's
ARL0 = Y · hours-per-year / every / A · N / share, because the false-alarm rates of a component's charts add up. A
"chart" is one wear metal watched by one detector. With a budget, --every, --hours-per-year, --charts, --share, --sided,
--k, --headstart, --lambda and the limits default to what the worker does with the configuration (--config, else
WEARSHIFT_CONFIG, else the built-in defaults: a sample every ${DEFAULT_SAMPLE_INTERVAL_HOURS} h, ${DEFAULT_HOURS_PER_YEAR} h a year, 7 wear metals × EWMA and CUSUM = 14
charts, one-sided, 0.72 of the budget: the change detectors' 0.8 less the fall side's part, detection.fallShare 0.1 of
it), and with --group NAME to that group's settings, so the answer is the h or L the worker uses for a rise; an option
given overrides its default. A fall is judged against its own limits: --share with the fall side's part (0.08 by
default) gives them. The conversion is printed. A budget must give each chart an in-control run length the limits can
be derived for (${DESIGNABLE_RUN_LENGTH.min} to ${DESIGNABLE_RUN_LENGTH.max} samples), as in a configuration.
Run lengths are in samples; with --every (or a budget) also in operating hours. --json prints one JSON object.`;

function common(c: Command, parameter: string): Command {
  return c
    .addOption(new Option('--sided <one|two>', 'two: signals on increases and decreases; one: upper side only (default: two; with --budget, one, as the worker designs)').choices(['one', 'two']))
    .option('--shifts <list>', 'comma-separated mean shifts in sigma, e.g. 0,0.5,1', numberListOption('shifts'))
    .option('--arl0 <N>', `target in-control average run length in samples: solve for ${parameter}`, numberOption('arl0'))
    .option('--budget <text>', `false-alarm budget, e.g. "1 per component per 5 years": derive ARL0, then solve for ${parameter}`)
    .option('--every <hours>', 'with --budget: operating hours between samples (default: the configuration\'s detection.budget.sampleIntervalHours)', numberOption('every'))
    .option('--hours-per-year <hours>', 'with --budget: operating hours per year (default: the configuration\'s detection.budget.hoursPerYear)', numberOption('hours-per-year'))
    .option('--charts <N>', 'with --budget: charts (wear metal × detector) per component sharing the budget (default: from the configuration)', numberOption('charts'))
    .option('--share <fraction>', 'with --budget: the part of the budget these charts get (default: from the configuration, its rise side)', numberOption('share'))
    .option('--config <file>', 'with --budget: the configuration whose detection settings to follow (default: WEARSHIFT_CONFIG)')
    .option('--group <name>', 'with --budget: follow this group\'s detection settings (default: the top level)')
    .option('--json', 'machine-readable output (one JSON object)')
    .addHelpText('after', COMMON_HELP);
}

export function registerDesign(program: Command, output: NodeJS.WritableStream = process.stdout): void {
  const design = program.command('design');

  common(
    design
      .command('cusum')
      .description(
        'tabular CUSUM run lengths (Page\'s integral equation by Nyström quadrature; two-sided combined exactly, also with a headstart), or the decision interval h for a target ARL0',
      )
      .option('--k <K>', 'reference value in sigma (default 0.5; with --budget, the configuration\'s)', numberOption('k'))
      .option('--h <H>', 'decision interval in sigma: show its ARLs', numberOption('h'))
      .option('--headstart <F>', 'fast-initial-response headstart as a fraction of h, 0 ≤ F < 1 (default 0, the zero state; with --budget, the configuration\'s)', numberOption('headstart')),
    'h',
  ).action(async (given: CommonOptions & { k?: number; h?: number; headstart?: number }) => {
    const ctx = await budgetContext(given);
    const cusum = ctx?.settings.detection.cusum;
    const opts = { ...given, sided: given.sided ?? (given.budget === undefined ? 'two' : 'one'), k: given.k ?? cusum?.k ?? 0.5, headstart: given.headstart ?? cusum?.headstart ?? 0 } as const;
    const target = targetFrom(opts, 'h', opts.h !== undefined, ctx);
    const settings = { k: opts.k, sided: opts.sided, headstart: opts.headstart };
    const h = target ? asInputError(() => cusumDecisionInterval({ ...settings, arl0: target.arl0 })) : opts.h!;
    const shifts = opts.shifts ?? TABLE_SHIFTS;
    const arl = arlTable(shifts, (shift) => cusumArl({ ...settings, h, shift }));
    if (opts.json) {
      writeJsonLine(
        { method: 'cusum', ...(opts.group !== undefined && { group: opts.group }), sided: opts.sided, k: opts.k, headstart: opts.headstart, ...(target ? { arl0: tidy(target.arl0) } : {}), h: tidy(h), ...(target?.conversion ? { budget: target.conversion } : {}), arl },
        output,
      );
      return;
    }
    output.write(`CUSUM, ${opts.sided}-sided, k = ${opts.k}, ${opts.headstart ? `headstart ${opts.headstart}·h` : 'zero state'}\n`);
    if (target?.conversion) output.write(conversionLines(target.conversion, opts, ctx!.settings));
    output.write(target ? `decision interval h = ${round(h, 6)} for an in-control ARL of ${round(target.arl0, 6)} samples\n` : `decision interval h = ${h}\n`);
    writeArlTable(output, arl, everyHours(opts, target));
    output.write(`\n${ADVISORY_LINE}\n`);
  });

  common(
    design
      .command('ewma')
      .description(
        'EWMA run lengths (Crowder\'s integral equation by Nyström quadrature; steady-state limits as in the published tables unless --exact-limits), or the limit width L for a target ARL0',
      )
      .option('--lambda <λ>', `smoothing constant, ${DESIGNABLE_EWMA_LAMBDA.min} ≤ λ ≤ ${DESIGNABLE_EWMA_LAMBDA.max} (required without --budget; with it, default the configuration's)`, numberOption('lambda'))
      .option('--L <L>', 'limit width in standard deviations of the EWMA: show its ARLs', numberOption('L'))
      .option('--exact-limits', 'time-varying exact limits from the start, as the detectors draw them (default: steady-state limits; with --budget, exact)'),
    'L',
  ).action(async (given: CommonOptions & { lambda?: number; L?: number; exactLimits?: boolean }) => {
    const ctx = await budgetContext(given);
    const lambda = given.lambda ?? ctx?.settings.detection.ewma.lambda;
    if (lambda === undefined) throw new InputError('--lambda is required (or give --budget to follow the configuration)');
    const lambdaIssue = ewmaLambdaIssue(lambda, '--lambda');
    if (lambdaIssue !== undefined) throw new InputError(lambdaIssue);
    const opts = { ...given, lambda, sided: given.sided ?? (given.budget === undefined ? 'two' : 'one') } as const;
    const target = targetFrom(opts, 'L', opts.L !== undefined, ctx);
    const exactLimits = opts.exactLimits ?? opts.budget !== undefined;
    const settings = { lambda: opts.lambda, sided: opts.sided, exactLimits };
    const L = target ? asInputError(() => ewmaLimitWidth({ ...settings, arl0: target.arl0 })) : opts.L!;
    const shifts = opts.shifts ?? TABLE_SHIFTS;
    const arl = arlTable(shifts, (shift) => ewmaArl({ ...settings, L, shift }));
    const limits = exactLimits ? 'exact' : 'steady';
    if (opts.json) {
      writeJsonLine(
        { method: 'ewma', ...(opts.group !== undefined && { group: opts.group }), sided: opts.sided, lambda: opts.lambda, limits, ...(target ? { arl0: tidy(target.arl0) } : {}), L: tidy(L), ...(target?.conversion ? { budget: target.conversion } : {}), arl },
        output,
      );
      return;
    }
    output.write(`EWMA, ${opts.sided}-sided, λ = ${opts.lambda}, ${exactLimits ? 'exact time-varying' : 'steady-state'} limits\n`);
    if (target?.conversion) output.write(conversionLines(target.conversion, opts, ctx!.settings));
    output.write(target ? `limit width L = ${round(L, 6)} for an in-control ARL of ${round(target.arl0, 6)} samples\n` : `limit width L = ${L}\n`);
    writeArlTable(output, arl, everyHours(opts, target));
    output.write(`\n${ADVISORY_LINE}\n`);
  });

  registerDesignNoise(design, output);
}
