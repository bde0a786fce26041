/** Which panels a measurand's chart has, with each one's heading, height and value range. */
import { max, min } from 'd3-array';
import type { Levels } from '../../domain/config.ts';
import { MEASURANDS } from '../../domain/measurands.ts';
import type { MarkPanel, MeasurandSeries } from '../componentSeries.ts';
import { codeNumbers } from './codeNumbers.ts';
import { fmt } from './formatNumber.ts';
import { NEAR_LIMIT } from './layout.ts';
import { projectionOf } from './projectionOf.ts';
import { readingsHeading } from './readingsHeading.ts';

export interface PanelSpec {
  readonly key: MarkPanel;
  readonly heading: string;
  readonly height: number;
  readonly domain: [number, number];
}

export function panelsOf(m: MeasurandSeries): PanelSpec[] {
  if (m.cleanliness !== null) {
    const t = m.cleanliness.target;
    const numbers = [...m.cleanliness.points.flatMap((p) => codeNumbers(p.code)), ...(t === null ? [] : codeNumbers(t))];
    return [{ key: 'readings', heading: `${m.measurand}: scale number per size range (each step doubles the count)`, height: 190, domain: [(min(numbers) ?? 0) - 1, (max(numbers) ?? 1) + 1] }];
  }
  const readings = m.charges.flatMap((c) => c.points.map((p) => p.value));
  const kind = MEASURANDS[m.measurand].kind;
  const fromZero = kind === 'wear' || kind === 'contaminant';
  const populationLevels = (m.population ?? []).flatMap((p) => (p.status.kind === 'limits' ? [p.status.caution, p.status.alarm] : []));
  const projected = projectionOf(m).flatMap((p) => [p.central, p.low, p.high]);
  const panels: PanelSpec[] = [
    {
      key: 'readings',
      heading: readingsHeading(m),
      height: 170,
      domain: domainOf(
        [
          ...readings,
          ...nearLevels(m.limits, readings),
          ...near(populationLevels, readings),
          ...near(
            m.conditionLevels.map((l) => l.level),
            readings,
          ),
          ...near(projected, readings),
        ],
        fromZero,
      ),
    },
  ];
  if (m.rates !== null && m.rates.points.length > 0) {
    const rates = m.rates.points.map((p) => p.per100h);
    panels.push({ key: 'rate', heading: `${m.measurand} wear rate, ${m.unit} per 100 h`, height: 110, domain: domainOf([0, ...rates, ...nearLevels(m.rates.limits, rates)], false) });
  }
  if (m.cusum !== null && m.cusum.points.length > 0) {
    const two = m.cusum.sided === 'two';
    const hi = max([m.cusum.h, ...m.cusum.points.map((p) => p.upper)])!;
    const lo = two ? -max([m.cusum.hFall, ...m.cusum.points.map((p) => p.lower)])! : 0;
    panels.push({ key: 'cusum', heading: `CUSUM of the standardised wear (σ), decision interval h = ${fmt(m.cusum.h)}`, height: two ? 120 : 95, domain: [lo, hi] });
  }
  if (m.ewma !== null && m.ewma.points.length > 0) {
    const values = m.ewma.points.flatMap((p) => [p.ewma, p.ucl, p.lcl]);
    panels.push({ key: 'ewma', heading: `EWMA of the standardised wear (σ), λ = ${fmt(m.ewma.lambda)}, L = ${fmt(m.ewma.L)}`, height: 100, domain: [min(values)!, max(values)!] });
  }
  return panels;
}

function domainOf(values: number[], fromZero: boolean): [number, number] {
  let lo = min(values) ?? 0;
  let hi = max(values) ?? 1;
  if (fromZero) lo = Math.min(0, lo);
  if (hi === lo) {
    hi += Math.max(1, Math.abs(hi) * 0.1);
    if (!fromZero) lo -= Math.max(1, Math.abs(lo) * 0.1);
  }
  return [lo, hi + (hi - lo) * 0.06];
}

function nearLevels(levels: Levels | null, data: number[]): number[] {
  return near([levels?.caution, levels?.alarm].filter((v): v is number => v !== undefined), data);
}

function near(levels: number[], data: number[]): number[] {
  const top = max(data) ?? 0;
  return levels.filter((v) => v <= Math.max(top, 1) * NEAR_LIMIT);
}
