/** Order statistics for benchmark figures. Misses (a step never detected) enter as Infinity and sort last. */

/** Nearest-rank percentile (the smallest value with at least p of the data at or below it); NaN for no data. */
export function percentile(values: readonly number[], p: number): number {
  if (values.length === 0) return NaN;
  const sorted = [...values].sort((a, b) => a - b);
  const rank = Math.max(1, Math.ceil(p * sorted.length));
  return sorted[rank - 1]!;
}

export function median(values: readonly number[]): number {
  return percentile(values, 0.5);
}

/** Slope of log(time) against log(size): 1 is linear growth, 2 quadratic. */
export function growthExponent(sizeA: number, timeA: number, sizeB: number, timeB: number): number {
  return Math.log(timeB / timeA) / Math.log(sizeB / sizeA);
}

/** Three significant figures, whole numbers from 1000; Infinity as ∞ (JSON gets null). */
export function fmt(x: number, digits = 3): string {
  if (!Number.isFinite(x)) return Number.isNaN(x) ? '–' : '∞';
  if (Math.abs(x) >= 10 ** digits) return String(Math.round(x));
  return String(Number(x.toPrecision(digits)));
}

/** Rounds for JSON output; non-finite numbers become null (JSON has no Infinity). */
export function round(x: number, digits = 4): number | null {
  if (!Number.isFinite(x)) return null;
  return Number(x.toPrecision(digits));
}
