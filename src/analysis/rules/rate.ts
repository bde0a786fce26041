/**
 * The `rate` family: fixed levels on the wear rate (ppm per 100 operating hours on one charge), which see a
 * fast rise while the concentration is still low. Censored intervals are not judged (the rate is a bound
 * only), nor are running-in intervals: a new or overhauled component wears fast by nature and would page
 * someone after every overhaul.
 */
import type { Finding } from '../../domain/finding.ts';
import { MEASURAND_NAMES } from '../../domain/measurands.ts';
import { crossing, findingAt, formatNumber, measurandTitle, quantity, sweep, type RuleInput, type SampleInput } from './ruleInput.ts';
import { nextStep } from './nextStep.ts';

export function rateFindings(input: RuleInput): Finding[] {
  return sweep(input, rateVerdicts, MEASURAND_NAMES.filter((m) => input.settings.rateLimits[m] !== undefined));
}

export function rateVerdicts(input: SampleInput): Finding[] {
  const { rateLimits, group } = input.settings;
  const findings: Finding[] = [];
  for (const [m, iv] of input.intervals) {
    const levels = rateLimits[m];
    if (levels === undefined || iv.censored || iv.runningIn) continue;
    const per100h = iv.rate * 100;
    const c = crossing({ kind: 'value', value: per100h }, levels, 'above');
    if (!c) continue;
    findings.push(
      findingAt(input, input.sample, {
        measurand: m,
        rule: 'rate',
        disposition: 'incident',
        severity: c.severity,
        value: per100h,
        threshold: c.level,
        basis: 'rate',
        explanation:
          `${measurandTitle(m)} gained ${quantity(m, iv.increment)} in ${formatNumber(iv.hours)} h on this charge ` +
          `(${quantity(m, per100h)} per 100 h), above the ${c.severity} rate of ${quantity(m, c.level)} per 100 h set for group ${group}. ${nextStep(m)}`,
      }),
    );
  }
  return findings;
}
