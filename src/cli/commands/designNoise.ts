/**
 * `wearshift design noise`: the incidents per 100 component-years a configuration is designed to give on healthy
 * components, per rule family and in total, for the top level and each group; with --components the load per tier-0
 * responder of the escalation policies, beside the published reference of ~150 alarms per operator per day.
 */
import type { Command } from 'commander';
import type { DesignNoise } from '../../backtest/designNoise.ts';
import { InputError } from '../../domain/errors.ts';
import { RULE_FAMILIES, RULE_FAMILY_LABELS } from '../../domain/finding.ts';
import { ADVISORY_LINE, formatTable, numberOption, writeJsonLine } from '../output.ts';

const HELP = `
From the configuration alone (--config, else WEARSHIFT_CONFIG, else the built-in defaults):
  ewma, cusum   charts per component × samples a year / in-control ARL of each chart (upper side, as designed);
  population    the share of the false-alarm budget the comparison with peers takes, plus, with
                population.opensIncidents, single results above the caution level (an upper bound);
  others        fixed, rate, oil-condition and cleanliness levels and sampling checks depend on the site's levels and
                the data: "-" here; run "wearshift backtest" on a history to measure them and the alarm figures.
The total adds what can be derived; findings of one component share an incident, so it is an upper bound.
--components N: N components of the group, the incidents a day and a week they give, and the tier-0 responders of the
escalation policy that hear of them (ISA-18.2 takes ~150 alarms per operator per day as acceptable, from memory).
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
    .option('--components <N>', 'fleet size: incidents per day and week, and per tier-0 responder', numberOption('components'))
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
  const out = [`configuration: ${file ?? 'built-in defaults'}; expected false-alarm incidents per 100 component-years on healthy components`];
  out.push(
    formatTable(
      ['rule family', ...rows.map((r) => r.group)],
      [
        ...RULE_FAMILIES.map((f) => [RULE_FAMILY_LABELS[f], ...rows.map((r) => fmt(r.byFamily[f].per100ComponentYears))]),
        ['total (upper bound)', ...rows.map((r) => fmt(r.per100ComponentYears))],
        ['budget', ...rows.map((r) => fmt(r.budgetPer100ComponentYears))],
      ],
    ).trimEnd(),
  );
  out.push("-: set by the site's levels and the data (wearshift backtest measures it on a history); sampling check: only the fall side of the change detectors' charts, the other checks depend on the data");
  for (const r of rows) {
    const f = r.fleet;
    if (f === null) continue;
    const who = f.responders.length === 0 ? 'no escalation policy names anybody for it' : `each of ${f.responders.join(', ')} hears of all of them`;
    out.push(`${r.group}: ${f.components} components give ${fmt(f.incidentsPerDay)} incidents a day, ${fmt(f.incidentsPerWeek)} a week; ${who} (reference: ~${f.acceptablePerDay} a day per operator)`);
  }
  out.push(ADVISORY_LINE);
  return `${out.join('\n')}\n`;
}

function fmt(x: number | null): string {
  return x === null ? '-' : String(Number(x.toPrecision(4)));
}
