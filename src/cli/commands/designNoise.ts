/**
 * `wearshift design noise`: the incidents per 100 component-years a configuration is designed to give on healthy
 * components, per rule family and the total of the families it can derive, for the top level and each group; with
 * --components the load per tier-0 responder of the escalation policies, each part (family, severity, incident kind)
 * counted for the policy that matches it, beside the published reference of ~150 alarms per operator per day.
 */
import type { Command } from 'commander';
import type { DesignNoise, ResponderNoise } from '../../backtest/designNoise.ts';
import { InputError } from '../../domain/errors.ts';
import { RULE_FAMILIES, RULE_FAMILY_LABELS } from '../../domain/finding.ts';
import { ADVISORY_LINE, formatTable, numberOption, writeJsonLine } from '../output.ts';

const HELP = `
From the configuration alone (--config, else WEARSHIFT_CONFIG, else the built-in defaults):
  ewma, cusum   charts per component × samples a year / in-control ARL of each chart (upper side, as designed);
  population    the share of the false-alarm budget the comparison with peers takes, plus, with
                population.opensIncidents, single results above the caution level (an upper bound);
  sampling      at least: the fall side of two-sided charts (a fall opens a sampling incident); the other sampling
                checks depend on the data;
  others        fixed, rate, oil-condition and cleanliness levels depend on the site's levels and the data: "-" here;
                run "wearshift backtest" on a history to measure them and the alarm figures.
The total adds only the families it can derive and leaves the others out, so it is not the configuration's whole
noise: a total within the budget does not show that the configuration keeps it.
--components N: N components of the group, the incidents a day and a week they give, and what each tier-0 target hears
of: every part of the load (rule family, severity, machine or sampling incident) goes to the escalation policy that
matches it (EWMA and CUSUM rises are watch machine incidents, a fall a watch sampling incident, the comparison with
peers a caution); parts no policy matches are heard of by nobody (ISA-18.2 takes ~150 alarms per operator per day as
acceptable, from memory).
--json prints one JSON object.`;

interface NoiseOptions {
  config?: string;
  group?: string;
  components?: number;
  json?: boolean;
}

export function registerDesignNoise(design: Command, output: NodeJS.WritableStream): void {
  design
    .command('noise')
    .description('incidents per 100 component-years a configuration gives on healthy components, per rule family and in total, and the load per responder')
    .option('--config <file>', 'configuration file (default: WEARSHIFT_CONFIG, else the built-in defaults)')
    .option('--group <name>', 'one group of the configuration (default: the top level and every group)')
    .option('--components <N>', 'fleet size: incidents per day and week, and what each tier-0 responder hears of', numberOption('components'))
    .option('--json', 'machine-readable output (one JSON object)')
    .addHelpText('after', HELP)
    .action(async (opts: NoiseOptions) => {
      if (opts.components !== undefined && !(Number.isInteger(opts.components) && opts.components >= 1)) throw new InputError(`--components must be a whole number ≥ 1, got ${opts.components}`);
      const file = opts.config ?? process.env.WEARSHIFT_CONFIG;
      // Loaded when the command runs: `design --help` and `design ewma` do without the configuration parser and the simulation.
      const [{ loadConfig }, { designNoise }] = await Promise.all([import('../../runtime/loadConfig.ts'), import('../../backtest/designNoise.ts')]);
      const config = loadConfig(file);
      const names = config.groups.map((g) => g.name);
      if (opts.group !== undefined && !names.includes(opts.group)) throw new InputError(`--group: no group "${opts.group}" in ${file ?? 'the built-in defaults'} (groups: ${names.join(', ') || 'none'})`);
      const targets: (string | undefined)[] = opts.group !== undefined ? [opts.group] : [undefined, ...names];
      const rows = targets.map((group) => ({
        ...designNoise(config, { ...(group !== undefined && { group }), ...(opts.components !== undefined && { components: opts.components }) }),
        ...(group === undefined && { group: '(top level)' }),
      }));
      if (opts.json) {
        writeJsonLine({ method: 'noise', configFile: file ?? null, rows }, output);
        return;
      }
      output.write(readable(file, rows));
    });
}

function readable(file: string | undefined, rows: readonly DesignNoise[]): string {
  const out = [`configuration: ${file ?? 'built-in defaults'}; false-alarm incidents per 100 component-years on healthy components, as the limits are designed`];
  out.push(
    formatTable(
      ['rule family', ...rows.map((r) => r.group)],
      [
        ...RULE_FAMILIES.map((f) => [RULE_FAMILY_LABELS[f], ...rows.map((r) => fmt(r.byFamily[f].per100ComponentYears))]),
        ['total (derived families)', ...rows.map((r) => fmt(r.per100ComponentYears))],
        ['budget', ...rows.map((r) => fmt(r.budgetPer100ComponentYears))],
      ],
    ).trimEnd(),
  );
  out.push("-: set by the site's levels and the data (wearshift backtest measures it on a history); sampling check: only the fall side of the change detectors' charts, the other checks depend on the data");
  out.push(
    'EWMA, CUSUM: each designed as if the charts were independent; on one metal both watch the same prediction errors and a signal of either joins the same incident, so together they open fewer than the sum (about 0.7 of it at the built-in λ and k, simulated)',
  );
  // The rows' totals cover the same families unless a group turns the fall side off; each row's own basis says which.
  const bases = [...new Set(rows.map((r) => r.total.basis))];
  out.push(bases.length === 1 ? `total: ${bases[0]}` : rows.map((r) => `total of ${r.group}: ${r.total.basis}`).join('\n'));
  for (const r of rows) {
    const f = r.fleet;
    if (f === null) continue;
    out.push(`${r.group}: ${f.components} components give ${fmt(f.incidentsPerDay)} incidents a day, ${fmt(f.incidentsPerWeek)} a week of the derived families (reference: ~${f.acceptablePerDay} a day per operator)`);
    for (const who of f.responders) out.push(`  ${who.responder} hears of ${hearing(who)}`);
    if (f.unrouted !== null) out.push(`  no escalation policy names anybody for ${hearing(f.unrouted)}`);
  }
  out.push(ADVISORY_LINE);
  return `${out.join('\n')}\n`;
}

function hearing(r: ResponderNoise): string {
  const parts = r.heardOf.map((h) => `${RULE_FAMILY_LABELS[h.family]} (${h.severity}${h.kind === 'sampling' ? ', sampling incidents' : ''})`);
  return `${fmt(r.perDay)} a day, ${fmt(r.perWeek)} a week: ${parts.join(', ')}`;
}

function fmt(x: number | null): string {
  return x === null ? '-' : String(Number(x.toPrecision(4)));
}
