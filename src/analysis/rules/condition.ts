/**
 * The `condition` family: the oil itself, against the group's new-oil reference and contamination levels.
 *
 * - TBN: alarm when it falls below tbnFallFraction × new (0.5 by default: "about half", common practice);
 *   caution midway between new and that point, (1 + fraction)/2 × new (0.75 × new by default; this
 *   midpoint is our own choice, not a published value).
 * - TAN: caution/alarm when it rises more than tanRise over new (1 and 2 mg KOH/g by default).
 * - Viscosity (v40, v100): caution/alarm when it moves more than viscosityChangePercent from new, either way
 *   (10 % and 20 %: common practice for industrial oils).
 * - Water (ppm), fuel dilution (%), soot (%): fixed levels.
 * - Oxidation, nitration: levels on the rise over new oil (A/cm); without a new-oil value the reading is
 *   taken as the rise already (FTIR results are often reported as a difference from new oil).
 * - Glycol: any detection is coolant in the oil and gets glycolSeverity; "<x" means none found.
 *
 * TBN, TAN and viscosity need a new-oil value: without one they stay silent. Sodium and potassium, the other
 * coolant indicators, are judged by the limit and population families.
 */
import type { Levels } from '../../domain/config.ts';
import type { Finding } from '../../domain/finding.ts';
import type { Measurand } from '../../domain/measurands.ts';
import type { Reading } from '../../domain/reading.ts';
import { crossing, findingAt, type Crossing, formatNumber, measurandTitle, quantity, readingText, sweep, type RuleInput, type SampleInput, type Verdict } from './ruleInput.ts';
import { nextStep } from './nextStep.ts';

type Judgement = Omit<Verdict, 'measurand' | 'rule' | 'disposition'>;
type Judge = (reading: Reading, input: SampleInput) => Judgement | undefined;

export function conditionFindings(input: RuleInput): Finding[] {
  return sweep(input, conditionVerdicts);
}

export function conditionVerdicts(input: SampleInput): Finding[] {
  const findings: Finding[] = [];
  for (const [m, judge] of JUDGES) {
    const reading = input.sample.readings[m];
    const verdict = reading && judge(reading, input);
    if (verdict) findings.push(findingAt(input, input.sample, { measurand: m, rule: 'condition', disposition: 'incident', ...verdict }));
  }
  return findings;
}

const JUDGES: readonly (readonly [Measurand, Judge])[] = [
  ['water', (r, input) => fixedLevel('water', r, input.settings.condition.water)],
  ['fuel', (r, input) => fixedLevel('fuel', r, input.settings.condition.fuel)],
  ['soot', (r, input) => fixedLevel('soot', r, input.settings.condition.soot)],
  ['glycol', glycol],
  ['v40', (r, input) => viscosity('v40', r, input)],
  ['v100', (r, input) => viscosity('v100', r, input)],
  ['tbn', baseNumber],
  ['tan', acidNumber],
  ['oxidation', (r, input) => riseOverNew('oxidation', r, input)],
  ['nitration', (r, input) => riseOverNew('nitration', r, input)],
];

function baseNumber(reading: Reading, input: SampleInput) {
  const fresh = input.settings.newOil.tbn;
  if (fresh === undefined || !(fresh > 0)) return undefined;
  const fraction = input.settings.condition.tbnFallFraction;
  const fractions = { alarm: fraction, caution: (1 + fraction) / 2 };
  const levels = { alarm: fresh * fractions.alarm, caution: fresh * fractions.caution };
  return levelVerdict('tbn', reading, levels, 'below', (c) => `${formatNumber(fractions[c.severity])} of the new-oil ${quantity('tbn', fresh)}`);
}

function acidNumber(reading: Reading, input: SampleInput) {
  const fresh = input.settings.newOil.tan;
  if (fresh === undefined) return undefined;
  const rise = input.settings.condition.tanRise;
  const levels = { caution: fresh + rise.caution, alarm: fresh + rise.alarm };
  return levelVerdict('tan', reading, levels, 'above', (c) => `new oil ${quantity('tan', fresh)} plus ${quantity('tan', rise[c.severity])}`);
}

function viscosity(m: 'v40' | 'v100', reading: Reading, input: SampleInput) {
  const fresh = input.settings.newOil[m];
  if (fresh === undefined || !(fresh > 0)) return undefined;
  const percent = input.settings.condition.viscosityChangePercent;
  const at = (p: number, sign: 1 | -1) => fresh * (1 + (sign * p) / 100);
  const up = crossing(reading, { caution: at(percent.caution, 1), alarm: at(percent.alarm, 1) }, 'above');
  const c = up ?? crossing(reading, { caution: at(percent.caution, -1), alarm: at(percent.alarm, -1) }, 'below');
  if (!c) return undefined;
  const change = ((c.value - fresh) / fresh) * 100;
  return {
    severity: c.severity,
    value: change,
    threshold: up ? percent[c.severity] : -percent[c.severity],
    basis: 'change',
    explanation:
      `${measurandTitle(m)} ${readingText(m, reading)} is ${formatNumber(Math.abs(change))} % ${up ? 'above' : 'below'} ` +
      `the new-oil ${quantity(m, fresh)}, more than the ${c.severity} change of ${formatNumber(percent[c.severity])} %. ${nextStep(m)}`,
  };
}

function riseOverNew(m: 'oxidation' | 'nitration', reading: Reading, input: SampleInput) {
  const fresh = input.settings.newOil[m];
  return levelVerdict(m, reading, shifted(input.settings.condition[m], fresh ?? 0), 'above', (c) =>
    fresh === undefined ? 'taken as the rise over new oil' : `new oil ${quantity(m, fresh)} plus ${quantity(m, c.level - fresh)}`,
  );
}

function fixedLevel(m: 'water' | 'fuel' | 'soot', reading: Reading, levels: Levels) {
  return levelVerdict(m, reading, levels, 'above');
}

/** A reading judged against caution/alarm levels, in the family's one sentence; `note` says where the level comes from. */
function levelVerdict(m: Measurand, reading: Reading, levels: Levels, side: 'above' | 'below', note?: (c: Crossing) => string): Judgement | undefined {
  const c = crossing(reading, levels, side);
  if (!c) return undefined;
  return {
    severity: c.severity,
    value: c.value,
    threshold: c.level,
    basis: 'reading',
    explanation: `${measurandTitle(m)} ${readingText(m, reading)} is ${side} the ${c.severity} level of ${quantity(m, c.level)}${note ? ` (${note(c)})` : ''}. ${nextStep(m)}`,
  };
}

function glycol(reading: Reading, input: SampleInput) {
  const c = crossing(reading, { alarm: 0 }, 'above');
  if (!c) return undefined;
  return {
    severity: input.settings.condition.glycolSeverity,
    value: c.value,
    threshold: 0,
    basis: 'reading',
    explanation: `${measurandTitle('glycol')} ${readingText('glycol', reading)} found. ${nextStep('glycol')}`,
  };
}

function shifted(levels: Levels, by: number): Levels {
  return {
    ...(levels.caution !== undefined && { caution: levels.caution + by }),
    ...(levels.alarm !== undefined && { alarm: levels.alarm + by }),
  };
}
