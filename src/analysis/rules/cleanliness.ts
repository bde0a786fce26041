/**
 * The `cleanliness` family: the sample's ISO 4406 code against the group's target code (a goal-based
 * limit). Each scale number is a doubling of the particle count, so one step worse than the target is a
 * caution and two or more an alarm (common practice). The code is the lab's `iso4406` result, else it is
 * worked out from the particle counts per mL (p4 optional, p6 and p14 needed; censored counts give no code).
 */
import type { Sample } from '../../domain/event.ts';
import type { Finding } from '../../domain/finding.ts';
import { formatReading, parseReading, type Iso4406Code } from '../../domain/reading.ts';
import { codeStepsWorse, iso4406FromCounts } from '../iso4406.ts';
import { findingAt, type RuleInput } from './ruleInput.ts';

export function cleanlinessFindings(input: RuleInput): Finding[] {
  const target = targetCode(input.settings.cleanlinessTarget);
  if (target === undefined) return [];
  const findings: Finding[] = [];
  for (const sample of input.history.samples) {
    const code = sampleCode(sample);
    if (code === undefined) continue;
    const steps = codeStepsWorse(code.code, target);
    if (steps < 1) continue;
    const severity = steps >= 2 ? 'alarm' : 'caution';
    const text = (c: Iso4406Code) => formatReading({ kind: 'code', code: c });
    findings.push(
      findingAt(input, sample, {
        measurand: 'iso4406',
        rule: 'cleanliness',
        severity,
        value: steps,
        threshold: severity === 'alarm' ? 2 : 1,
        basis: 'steps',
        explanation:
          `ISO 4406 code ${text(code.code)}${code.fromCounts ? ' (from the particle counts)' : ''} is ${steps} ` +
          `scale step${steps === 1 ? '' : 's'} worse than the target ${text(target)}; each step doubles the particle count.`,
      }),
    );
  }
  return findings;
}

function targetCode(target: string | undefined): Iso4406Code | undefined {
  if (target === undefined) return undefined;
  const parsed = parseReading(target, 'iso4406');
  return parsed.ok && parsed.reading.kind === 'code' ? parsed.reading.code : undefined;
}

function sampleCode(sample: Sample): { code: Iso4406Code; fromCounts: boolean } | undefined {
  const { iso4406, p4, p6, p14 } = sample.readings;
  if (iso4406?.kind === 'code') return { code: iso4406.code, fromCounts: false };
  if (p6?.kind !== 'value' || p14?.kind !== 'value') return undefined;
  return { code: iso4406FromCounts(p4?.kind === 'value' ? p4.value : undefined, p6.value, p14.value), fromCounts: true };
}
