/**
 * The `ewma` and `cusum` rule families: change detection on the standardised prediction errors of each
 * detection measurand (see innovations.ts and fold/changeTrack.ts). In control the errors are independent
 * N(0, 1), so the chart limits come straight from run-length design (budget.ts). Findings are `watch`: a change
 * is detected, no limit is crossed. A fall is reported too (two-sided) because a wear rate does not fall by
 * itself: it points at a sampling fault, an unreported oil change or a mixed-up bottle.
 */
import type { Finding } from '../../domain/finding.ts';
import { MEASURANDS, type Measurand } from '../../domain/measurands.ts';
import type { ComponentSettings } from '../../domain/settings.ts';
import type { ChangePoint, ChangeTrack } from '../fold/changeTrack.ts';
import { findingAt, type SampleInput } from './ruleInput.ts';

export function changeVerdicts(input: SampleInput, points: readonly ChangePoint[], _tracks: Readonly<Partial<Record<Measurand, ChangeTrack>>>): Finding[] {
  const { settings } = input;
  const out: Finding[] = [];
  for (const p of points) {
    const m = p.interval.measurand;
    const report = (rule: 'ewma' | 'cusum', direction: 'up' | 'down', value: number, threshold: number) => {
      if (direction === 'down' && settings.detection.sided !== 'two') return;
      out.push(
        findingAt(input, input.sample, {
          measurand: m,
          rule,
          severity: 'watch',
          value: round(value),
          threshold: round(threshold),
          basis: rule,
          direction,
          explanation: explain(m, rule, direction, value, threshold, p, settings),
        }),
      );
    };
    if (p.cusum !== undefined) {
      if (p.cusum.upper > p.cusum.h) report('cusum', 'up', p.cusum.upper, p.cusum.h);
      if (p.cusum.lower > p.cusum.h) report('cusum', 'down', p.cusum.lower, p.cusum.h);
    }
    if (p.ewma !== undefined) {
      if (p.ewma.value > p.ewma.ucl) report('ewma', 'up', p.ewma.value, p.ewma.ucl);
      if (p.ewma.value < p.ewma.lcl) report('ewma', 'down', p.ewma.value, p.ewma.lcl);
    }
  }
  return out;
}

function explain(m: Measurand, rule: 'ewma' | 'cusum', direction: 'up' | 'down', value: number, threshold: number, p: ChangePoint, settings: ComponentSettings): string {
  const name = `${m} (${MEASURANDS[m].label})`;
  const stat = rule === 'cusum' ? `CUSUM ${fmt(value)} against its decision interval ${fmt(threshold)}` : `EWMA ${fmt(value)} beyond its limit ${fmt(threshold)}`;
  const reference = p.source === 'own' ? 'its own stable history' : `group ${settings.group}`;
  const rates = `in-control ${fmt(p.baselineRate * 100)} ppm/100 h from ${reference}, latest interval ${fmt(p.interval.rate * 100)} ppm/100 h`;
  return direction === 'up'
    ? `${name} wear rate has shifted up: ${stat} (${rates}).`
    : `${name} is rising more slowly than it should: ${stat} (${rates}); check for a sampling fault or an unreported oil change.`;
}

function round(x: number): number {
  return Math.round(x * 1000) / 1000;
}

function fmt(x: number): string {
  return Number(x.toPrecision(3)).toString();
}
