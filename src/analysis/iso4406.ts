/**
 * ISO 4406 cleanliness codes: particle counts per mL mapped to scale numbers, and how far a code is from a
 * target. The scale comes from the standard's table, whose bounds are rounded (0.64 → 1.3, 640 → 1300), so a
 * power-of-two formula would put counts near those bounds in the wrong code.
 */
import type { Sample } from '../domain/event.ts';
import { parseReading, type Iso4406Code } from '../domain/reading.ts';

/**
 * Upper bound ("up to and including") of each scale number, index = scale number; each range starts
 * "more than" the bound of the number below it. ISO 4406:2021, table of scale numbers.
 */
const UPPER_BOUNDS = [
  0.01, 0.02, 0.04, 0.08, 0.16, 0.32, 0.64, 1.3, 2.5, 5, 10, 20, 40, 80, 160, 320, 640, 1300, 2500, 5000, 10_000, 20_000,
  40_000, 80_000, 160_000, 320_000, 640_000, 1_300_000, 2_500_000,
] as const;

/** Returned for counts above the table's last range (more than 2.5 million per mL, printed by labs as ">28"). */
export const ISO4406_ABOVE_TABLE = UPPER_BOUNDS.length;

/** The scale number of a count per mL: the range "more than" the lower bound and "up to and including" the upper. */
export function iso4406ScaleNumber(particlesPerMl: number): number {
  if (!(particlesPerMl >= 0)) throw new RangeError(`a particle count must be a non-negative number, got ${particlesPerMl}`);
  const code = UPPER_BOUNDS.findIndex((upper) => particlesPerMl <= upper);
  return code === -1 ? ISO4406_ABOVE_TABLE : code;
}

/** The code of counts per mL at ≥4, ≥6 and ≥14 µm(c); without a ≥4 count the code has no first part ("-/16/13"). */
export function iso4406FromCounts(p4: number | undefined, p6: number, p14: number): Iso4406Code {
  return { p4: p4 === undefined ? null : iso4406ScaleNumber(p4), p6: iso4406ScaleNumber(p6), p14: iso4406ScaleNumber(p14) };
}

/**
 * Scale numbers by which `actual` is worse than `target`: the largest difference over the size ranges both
 * codes give (the ≥4 part counts only when both have it). Negative when every range is cleaner than the target.
 */
export function codeStepsWorse(actual: Iso4406Code, target: Iso4406Code): number {
  const steps = [actual.p6 - target.p6, actual.p14 - target.p14];
  if (actual.p4 !== null && target.p4 !== null) steps.push(actual.p4 - target.p4);
  return Math.max(...steps);
}

/** The code a cleanliness judgement uses: the lab's ISO 4406 code, else the code of the particle counts. */
export function sampleIso4406Code(sample: Sample): { code: Iso4406Code; fromCounts: boolean } | undefined {
  const { iso4406, p4, p6, p14 } = sample.readings;
  if (iso4406?.kind === 'code') return { code: iso4406.code, fromCounts: false };
  if (p6?.kind !== 'value' || p14?.kind !== 'value') return undefined;
  return { code: iso4406FromCounts(p4?.kind === 'value' ? p4.value : undefined, p6.value, p14.value), fromCounts: true };
}

/** A configured target code ("17/15/12"); the configuration schema has already checked its form. */
export function targetIso4406Code(target: string | undefined): Iso4406Code | undefined {
  if (target === undefined) return undefined;
  const parsed = parseReading(target, 'iso4406');
  return parsed.ok && parsed.reading.kind === 'code' ? parsed.reading.code : undefined;
}
