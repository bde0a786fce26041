import { describe, expect, it } from 'vitest';
import { codeStepsWorse, ISO4406_ABOVE_TABLE, iso4406FromCounts, iso4406ScaleNumber } from '../../src/analysis/iso4406.ts';

// Source: ISO 4406:2021, table of scale numbers (particles per mL, "more than" the lower bound,
// "up to and including" the upper bound), as quoted in the project's published check values.
const TABLE: [code: number, moreThan: number, upToAndIncluding: number][] = [
  [1, 0.01, 0.02], [2, 0.02, 0.04], [3, 0.04, 0.08], [4, 0.08, 0.16], [5, 0.16, 0.32], [6, 0.32, 0.64],
  [7, 0.64, 1.3], [8, 1.3, 2.5], [9, 2.5, 5], [10, 5, 10], [11, 10, 20], [12, 20, 40], [13, 40, 80],
  [14, 80, 160], [15, 160, 320], [16, 320, 640], [17, 640, 1300], [18, 1300, 2500], [19, 2500, 5000],
  [20, 5000, 10_000], [21, 10_000, 20_000], [22, 20_000, 40_000], [23, 40_000, 80_000], [24, 80_000, 160_000],
  [25, 160_000, 320_000], [26, 320_000, 640_000], [27, 640_000, 1_300_000], [28, 1_300_000, 2_500_000],
];

describe('ISO 4406 scale numbers (ISO 4406:2021 table)', () => {
  it.each(TABLE)('code %i: more than %d, up to and including %d', (code, lower, upper) => {
    expect(iso4406ScaleNumber(upper)).toBe(code);
    expect(iso4406ScaleNumber(lower * 1.0001)).toBe(code);
    expect(iso4406ScaleNumber((lower + upper) / 2)).toBe(code);
    expect(iso4406ScaleNumber(lower)).toBe(code - 1);
  });

  it('puts exact bounds in the lower code and anything above them in the next', () => {
    // ISO 4406:2021 table: 18 is "more than 1300 up to and including 2500", 19 starts above 2500.
    expect(iso4406ScaleNumber(2500)).toBe(18);
    expect(iso4406ScaleNumber(2500.01)).toBe(19);
    expect(iso4406ScaleNumber(0.01)).toBe(0);
    expect(iso4406ScaleNumber(0.0100001)).toBe(1);
    expect(iso4406ScaleNumber(0)).toBe(0);
  });

  it('follows the rounded bounds of the table, not powers of two', () => {
    // ISO 4406:2021 table: 1.3 and 1300 are rounded bounds. Doubling from 0.01 would put the bounds at 1.28
    // and 1310.72, coding 1.29 as 8 and 1305 as 17; the table says 7 and 18.
    expect(iso4406ScaleNumber(1.29)).toBe(7);
    expect(iso4406ScaleNumber(1.3)).toBe(7);
    expect(iso4406ScaleNumber(1.31)).toBe(8);
    expect(iso4406ScaleNumber(1300)).toBe(17);
    expect(iso4406ScaleNumber(1305)).toBe(18);
  });

  it('marks counts beyond the last range as above the table', () => {
    expect(iso4406ScaleNumber(2_500_000)).toBe(28);
    expect(iso4406ScaleNumber(2_500_001)).toBe(ISO4406_ABOVE_TABLE);
    expect(ISO4406_ABOVE_TABLE).toBe(29);
  });

  it('rejects counts that are not counts', () => {
    expect(() => iso4406ScaleNumber(-1)).toThrow(RangeError);
    expect(() => iso4406ScaleNumber(Number.NaN)).toThrow(RangeError);
  });
});

describe('ISO 4406 code from counts', () => {
  it('codes each size range by the table', () => {
    // ISO 4406:2021 table: 1752/mL ≥4 µm(c) is in 1300–2500 (18), 517 ≥6 µm(c) in 320–640 (16), 55 ≥14 µm(c) in 40–80 (13).
    expect(iso4406FromCounts(1752, 517, 55)).toEqual({ p4: 18, p6: 16, p14: 13 });
  });

  it('leaves out the ≥4 part for a microscope count', () => {
    // ISO 4407 microscope counts give "-/≥5/≥15": no first part.
    expect(iso4406FromCounts(undefined, 517, 55)).toEqual({ p4: null, p6: 16, p14: 13 });
  });
});

describe('code steps worse than a target', () => {
  const code = (p4: number | null, p6: number, p14: number) => ({ p4, p6, p14 });

  it('takes the worst size range', () => {
    expect(codeStepsWorse(code(19, 17, 14), code(17, 15, 12))).toBe(2);
    expect(codeStepsWorse(code(17, 15, 14), code(17, 15, 12))).toBe(2);
    expect(codeStepsWorse(code(18, 15, 12), code(17, 15, 12))).toBe(1);
    expect(codeStepsWorse(code(17, 15, 12), code(17, 15, 12))).toBe(0);
  });

  it('is negative when every range is cleaner than the target', () => {
    expect(codeStepsWorse(code(16, 14, 11), code(17, 15, 12))).toBe(-1);
  });

  it('compares the ≥4 range only when both codes have it', () => {
    expect(codeStepsWorse(code(22, 15, 12), code(null, 15, 12))).toBe(0);
    expect(codeStepsWorse(code(null, 17, 12), code(17, 15, 12))).toBe(2);
  });
});
