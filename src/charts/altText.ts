/**
 * The text alternative of a trend chart: what a sighted reader takes from it, in words, for screen readers and
 * for mail clients that block images. It names the span, the latest reading against its limits, the latest wear rate
 * and detector state, and the findings of the latest sample.
 */
import type { Measurand } from '../domain/measurands.ts';
import type { ComponentSeries, MeasurandSeries } from './componentSeries.ts';

export function chartAltText(series: ComponentSeries, measurand: Measurand): string {
  const m = series.measurands.find((s) => s.measurand === measurand);
  if (m === undefined) return `No ${measurand} readings for ${series.unit} / ${series.component}.`;
  if (m.cleanliness !== null) return cleanlinessText(series, m);
  const points = m.charges.flatMap((c) => c.points);
  const first = points[0];
  const last = points[points.length - 1];
  if (first === undefined || last === undefined) return `No ${measurand} readings for ${series.unit} / ${series.component}.`;
  const charges = m.charges.filter((c) => c.points.length > 0).length;
  const parts = [
    `Trend of ${m.measurand} (${m.label}) for ${series.unit} / ${series.component}: ${points.length} ${points.length === 1 ? 'reading' : 'readings'} on ${charges} oil ${charges === 1 ? 'charge' : 'charges'} from ${day(first.sampledAt)} to ${day(last.sampledAt)}.`,
    `Latest reading ${last.text} ${m.unit} on ${day(last.sampledAt)}${levelsText(m)}.`,
  ];
  const rate = m.rates?.points[m.rates.points.length - 1];
  if (rate !== undefined) parts.push(`Latest wear rate ${fmt(rate.per100h)} ${m.unit} per 100 h${rate.runningIn ? ' (running in)' : ''}.`);
  const cusum = m.cusum?.points[m.cusum.points.length - 1];
  if (m.cusum && cusum) {
    const falling = m.cusum.sided === 'two' && cusum.lower / m.cusum.hFall > cusum.upper / m.cusum.h;
    const [stat, h] = falling ? [cusum.lower, m.cusum.hFall] : [cusum.upper, m.cusum.h];
    parts.push(`CUSUM ${falling ? 'of a fall ' : ''}${fmt(stat)} against its decision interval ${fmt(h)}${stat > h ? ', above it' : ''}.`);
  }
  const ewma = m.ewma?.points[m.ewma.points.length - 1];
  if (ewma) parts.push(`EWMA ${fmt(ewma.ewma)} within limits ${fmt(ewma.lcl)} to ${fmt(ewma.ucl)}${ewma.ewma > ewma.ucl || ewma.ewma < ewma.lcl ? ': outside them' : ''}.`);
  parts.push(findingsText(m, last.sampleId));
  // The nearest level the trend heads for, as the dashed projection shows it.
  const ahead = m.forecast?.limits.filter((l) => l.outcome === 'crossing').sort((a, b) => a.central!.hoursFromNow - b.central!.hoursFromNow)[0];
  if (ahead !== undefined) parts.push(`Dashed projection: ${ahead.text} A forecast assumes the present trend continues.`);
  return parts.join(' ');
}

function cleanlinessText(series: ComponentSeries, m: MeasurandSeries): string {
  const points = m.cleanliness!.points;
  const first = points[0];
  const last = points[points.length - 1];
  if (first === undefined || last === undefined) return `No ISO 4406 codes for ${series.unit} / ${series.component}.`;
  const target = m.cleanliness!.target;
  const parts = [
    `ISO 4406 cleanliness of ${series.unit} / ${series.component}: ${points.length} ${points.length === 1 ? 'code' : 'codes'} from ${day(first.sampledAt)} to ${day(last.sampledAt)}.`,
    `Latest code ${last.text} on ${day(last.sampledAt)}${target === null ? ', no target set' : ` against the target ${target.p4 ?? '-'}/${target.p6}/${target.p14}`}.`,
  ];
  parts.push(findingsText(m, last.sampleId));
  return parts.join(' ');
}

function findingsText(m: MeasurandSeries, lastSampleId: string): string {
  const latest = m.marks.filter((k) => k.sampleId === lastSampleId);
  return latest.length === 0
    ? `No rule fired on the latest sample; ${m.marks.length} ${m.marks.length === 1 ? 'finding' : 'findings'} over the whole history.`
    : `On the latest sample: ${latest.map((k) => `${k.severity} by the ${k.rule} rule${k.direction ? ` (${k.direction})` : ''}`).join('; ')}.`;
}

function levelsText(m: MeasurandSeries): string {
  const out: string[] = [];
  if (m.limits?.caution !== undefined) out.push(`caution level ${fmt(m.limits.caution)}`);
  if (m.limits?.alarm !== undefined) out.push(`alarm level ${fmt(m.limits.alarm)}`);
  for (const l of m.conditionLevels) out.push(`${l.severity} level ${fmt(l.level)}${l.side === 'below' ? ' below' : ''}`);
  const population = m.population?.[m.population.length - 1]?.status;
  if (population?.kind === 'limits') out.push(`group limits ${fmt(population.caution)} and ${fmt(population.alarm)}`);
  if (population?.kind === 'not-enough-data') out.push('group limits not yet known (not enough data)');
  return out.length === 0 ? '' : ` (${out.join(', ')})`;
}

function day(iso: string): string {
  return iso.slice(0, 10);
}

function fmt(v: number): string {
  return Math.abs(v) >= 1000 ? String(Math.round(v)) : String(Number(v.toPrecision(3)));
}
