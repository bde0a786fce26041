/**
 * The `rate` family: fixed levels on the wear rate (ppm per 100 operating hours on one charge), which see a
 * fast rise while the concentration is still low. Censored intervals are not judged (the rate is a bound
 * only), nor are running-in intervals: a new or overhauled component wears fast by nature and would page
 * someone after every overhaul.
 */
import type { Finding } from '../../domain/finding.ts';
import { MEASURAND_NAMES, type Measurand } from '../../domain/measurands.ts';
import type { Interval } from '../model.ts';
import { crossing, findingAt, formatNumber, measurandTitle, quantity, type RuleInput } from './ruleInput.ts';

export function rateFindings(input: RuleInput): Finding[] {
  const { rateLimits, group } = input.settings;
  const judged = new Map<Measurand, Map<string, Interval>>();
  for (const m of MEASURAND_NAMES) {
    if (rateLimits[m] === undefined) continue;
    const byEnd = new Map<string, Interval>();
    for (const iv of input.intervals(m)) if (!iv.censored && !iv.runningIn) byEnd.set(iv.to.sampleId, iv);
    judged.set(m, byEnd);
  }
  const findings: Finding[] = [];
  for (const sample of input.history.samples) {
    for (const [m, byEnd] of judged) {
      const iv = byEnd.get(sample.sampleId);
      if (iv === undefined) continue;
      const per100h = iv.rate * 100;
      const c = crossing({ kind: 'value', value: per100h }, rateLimits[m]!, 'above');
      if (!c) continue;
      findings.push(
        findingAt(input, sample, {
          measurand: m,
          rule: 'rate',
          severity: c.severity,
          value: per100h,
          threshold: c.level,
          basis: 'rate',
          explanation:
            `${measurandTitle(m)} gained ${quantity(m, iv.increment)} in ${formatNumber(iv.hours)} h on this charge ` +
            `(${quantity(m, per100h)} per 100 h), above the ${c.severity} rate of ${quantity(m, c.level)} per 100 h set for group ${group}.`,
        }),
      );
    }
  }
  return findings;
}
