/**
 * The peers' prediction limit uses Student's t quantile (src/analysis/rules/peers.ts, Cornish–Fisher expansion).
 * Checked against the critical values of the t distribution as tabulated in the NIST/SEMATECH e-Handbook of
 * Statistical Methods, section 1.3.6.7.2 (upper critical values of Student's t), within 1 %.
 */
import { describe, expect, it } from 'vitest';
import { studentT } from '../../src/analysis/rules/peers.ts';

const TABLE: Array<[p: number, df: number, t: number]> = [
  [0.95, 5, 2.015],
  [0.975, 5, 2.571],
  [0.95, 10, 1.812],
  [0.975, 10, 2.228],
  [0.99, 10, 2.764],
  [0.95, 30, 1.697],
  [0.99, 30, 2.457],
];

describe('Student t quantile', () => {
  it.each(TABLE)('t(%f, %i df) is within 1 %% of the table', (p, df, t) => {
    expect(Math.abs(studentT(p, df) / t - 1)).toBeLessThan(0.01);
  });
});
