/**
 * The `limit` family: fixed caution and alarm levels per measurand, as the site or the equipment maker sets
 * them. A level is crossed when the reading is strictly above it; a censored reading only when its bound
 * settles it (see `crossing`).
 */
import type { Finding } from '../../domain/finding.ts';
import { MEASURAND_NAMES } from '../../domain/measurands.ts';
import { crossing, findingAt, measurandTitle, quantity, readingText, type RuleInput } from './ruleInput.ts';

export function limitFindings(input: RuleInput): Finding[] {
  const { limits, group } = input.settings;
  const measurands = MEASURAND_NAMES.filter((m) => limits[m] !== undefined);
  const findings: Finding[] = [];
  for (const sample of input.history.samples) {
    for (const m of measurands) {
      const reading = sample.readings[m];
      const c = reading && crossing(reading, limits[m]!, 'above');
      if (!reading || !c) continue;
      findings.push(
        findingAt(input, sample, {
          measurand: m,
          rule: 'limit',
          severity: c.severity,
          value: c.value,
          threshold: c.level,
          basis: 'reading',
          explanation: `${measurandTitle(m)} ${readingText(m, reading)} is above the ${c.severity} level of ${quantity(m, c.level)} set for group ${group}.`,
        }),
      );
    }
  }
  return findings;
}
