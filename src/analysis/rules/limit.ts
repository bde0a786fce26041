/**
 * The `limit` family: fixed caution and alarm levels per measurand, as the site or the equipment maker sets
 * them. A level is crossed when the reading is strictly above it; a censored reading only when its bound
 * settles it (see `crossing`).
 */
import type { Finding } from '../../domain/finding.ts';
import { MEASURAND_NAMES } from '../../domain/measurands.ts';
import { crossing, findingAt, measurandTitle, quantity, readingText, sweep, type RuleInput, type SampleInput } from './ruleInput.ts';
import { nextStep } from './nextStep.ts';

export function limitFindings(input: RuleInput): Finding[] {
  return sweep(input, limitVerdicts);
}

export function limitVerdicts(input: SampleInput): Finding[] {
  const { limits, group } = input.settings;
  const findings: Finding[] = [];
  for (const m of MEASURAND_NAMES) {
    const levels = limits[m];
    const reading = levels && input.sample.readings[m];
    const c = reading && crossing(reading, levels, 'above');
    if (!reading || !c) continue;
    findings.push(
      findingAt(input, input.sample, {
        measurand: m,
        rule: 'limit',
        disposition: 'incident',
        severity: c.severity,
        value: c.value,
        threshold: c.level,
        basis: 'reading',
        explanation: `${measurandTitle(m)} ${readingText(m, reading)} is above the ${c.severity} level of ${quantity(m, c.level)} set for group ${group}. ${nextStep(m)}`,
      }),
    );
  }
  return findings;
}
