/**
 * The `population` family: statistical limits from like-for-like components of the group, per oil-hours
 * band. sigma method: caution = mean + k₁·sd, alarm = mean + k₂·sd (k₁ = 1, k₂ = 2 by default, common
 * practice); percentile method: the configured percentiles of the band's results (90th and 97.5th by
 * default). A band with fewer than `minResults` results (about 30 is common practice) gives no limit and no
 * finding; `populationLimitStatus` tells the chart and the API so ("not enough data").
 */
import type { Sample } from '../../domain/event.ts';
import type { Finding } from '../../domain/finding.ts';
import type { Measurand } from '../../domain/measurands.ts';
import type { BandStats } from '../model.ts';
import { bandFor, percentileOfSorted, populationMeasurands } from '../populationStats.ts';
import { crossing, findingAt, formatNumber, measurandTitle, quantity, readingText, sweep, type RuleInput, type SampleInput } from './ruleInput.ts';
import { nextStep } from './nextStep.ts';

export type PopulationLimitStatus =
  | { readonly kind: 'limits'; readonly caution: number; readonly alarm: number; readonly n: number }
  | { readonly kind: 'not-enough-data'; readonly n: number; readonly needed: number };

/**
 * The population limits that apply to one sample's measurand. A sample without oil hours, outside every band
 * or in a group without statistics reports n = 0; so does a band that carries no values under the percentile
 * method (statistics built for the sigma method).
 */
export function populationLimitStatus(input: Pick<SampleInput, 'settings' | 'group'>, measurand: Measurand, sample: Sample): PopulationLimitStatus {
  const band = bandOf(input, measurand, sample);
  return band === undefined ? { kind: 'not-enough-data', n: 0, needed: input.settings.population.minResults } : bandLimits(input, band);
}

/** The population alarm level of the oil-hours band holding `oilHours`; undefined where the band has no trusted limits. */
export function populationAlarmAt(input: Pick<SampleInput, 'settings' | 'group'>, measurand: Measurand, oilHours: number): number | undefined {
  const bands = input.group?.bands[measurand];
  const band = bands === undefined ? undefined : bandFor(bands, oilHours);
  if (band === undefined) return undefined;
  const status = bandLimits(input, band);
  return status.kind === 'limits' ? status.alarm : undefined;
}

export function populationFindings(input: RuleInput): Finding[] {
  return sweep(input, populationVerdicts);
}

export function populationVerdicts(input: SampleInput): Finding[] {
  const { population, group } = input.settings;
  const sample = input.sample;
  const findings: Finding[] = [];
  for (const m of populationMeasurands(population)) {
    const reading = sample.readings[m];
    const band = reading && bandOf(input, m, sample);
    if (!reading || !band) continue;
    const status = bandLimits(input, band);
    if (status.kind !== 'limits') continue;
    const c = crossing(reading, status, 'above');
    if (!c) continue;
    const basis =
      population.method === 'sigma'
        ? `mean ${quantity(m, band.mean)} + ${formatNumber(population.sigma[c.severity])}σ`
        : `${formatNumber(population.percentile[c.severity])}th percentile`;
    findings.push(
      findingAt(input, sample, {
        measurand: m,
        rule: 'population',
        disposition: population.opensIncidents ? 'incident' : 'advisory',
        severity: c.severity,
        value: c.value,
        threshold: c.level,
        basis: 'reading',
        explanation:
          `${measurandTitle(m)} ${readingText(m, reading)} at ${formatNumber(sample.oilHours!)} oil hours is above the population ` +
          `${c.severity} level of ${quantity(m, c.level)} (${basis} of ${status.n} results in the ${bandName(band)} band of group ${group}): higher than most like-for-like components at this point of the charge. ${nextStep(m)}`,
      }),
    );
  }
  return findings;
}

function bandOf(input: Pick<SampleInput, 'group'>, m: Measurand, sample: Sample): BandStats | undefined {
  const bands = input.group?.bands[m];
  return bands === undefined || sample.oilHours === undefined ? undefined : bandFor(bands, sample.oilHours);
}

function bandLimits(input: Pick<SampleInput, 'settings'>, band: BandStats): PopulationLimitStatus {
  const p = input.settings.population;
  if (p.method === 'sigma') {
    if (band.n < p.minResults) return { kind: 'not-enough-data', n: band.n, needed: p.minResults };
    return { kind: 'limits', caution: band.mean + p.sigma.caution * band.sd, alarm: band.mean + p.sigma.alarm * band.sd, n: band.n };
  }
  const values = band.values ?? [];
  if (values.length < p.minResults) return { kind: 'not-enough-data', n: values.length, needed: p.minResults };
  return {
    kind: 'limits',
    caution: percentileOfSorted(values, p.percentile.caution),
    alarm: percentileOfSorted(values, p.percentile.alarm),
    n: values.length,
  };
}

function bandName(band: BandStats): string {
  return band.toHours === null ? `from ${formatNumber(band.fromHours)} h` : `${formatNumber(band.fromHours)}–${formatNumber(band.toHours)} h`;
}
