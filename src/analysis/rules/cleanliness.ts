/**
 * The `cleanliness` family: the sample's ISO 4406 code against the group's target code (a goal-based
 * limit). Each scale number is a doubling of the particle count, so one step worse than the target is a
 * caution and two or more an alarm (common practice). The code is the lab's `iso4406` result, else it is
 * worked out from the particle counts per mL (p4 optional, p6 and p14 needed; censored counts give no code).
 */
import type { Finding } from '../../domain/finding.ts';
import { formatReading, type Iso4406Code } from '../../domain/reading.ts';
import { codeStepsWorse, sampleIso4406Code, targetIso4406Code } from '../iso4406.ts';
import { findingAt, sweep, type RuleInput, type SampleInput } from './ruleInput.ts';
import { nextStep } from './nextStep.ts';

export function cleanlinessFindings(input: RuleInput): Finding[] {
  return sweep(input, cleanlinessVerdicts);
}

export function cleanlinessVerdicts(input: SampleInput): Finding[] {
  const target = targetIso4406Code(input.settings.cleanlinessTarget);
  const code = target && sampleIso4406Code(input.sample);
  if (target === undefined || code === undefined) return [];
  const steps = codeStepsWorse(code.code, target);
  if (steps < 1) return [];
  const severity = steps >= 2 ? 'alarm' : 'caution';
  const text = (c: Iso4406Code) => formatReading({ kind: 'code', code: c });
  return [
    findingAt(input, input.sample, {
      measurand: 'iso4406',
      rule: 'cleanliness',
      disposition: 'incident',
      severity,
      value: steps,
      threshold: severity === 'alarm' ? 2 : 1,
      basis: 'steps',
      explanation:
        `ISO 4406 code ${text(code.code)}${code.fromCounts ? ' (from the particle counts)' : ''} is ${steps} ` +
        `scale step${steps === 1 ? '' : 's'} worse than the target ${text(target)}; each step doubles the particle count. ${nextStep('iso4406')}`,
    }),
  ];
}
