/**
 * Finds the parameter of a chart (h, L) that gives a target run length. The run length rises steeply but smoothly with the
 * parameter and ln(ARL) is nearly linear in it, so the root of ln f(x) − ln target is bracketed by geometric steps from a
 * guess and then found by the Illinois variant of false position, which keeps the bracket and converges superlinearly.
 */
export interface IncreasingRoot {
  /** Increasing, positive function of x > 0; may return Infinity for x past its reliable range. */
  readonly f: (x: number) => number;
  readonly target: number;
  readonly guess: number;
  /** Names the parameter in errors, e.g. "decision interval h". */
  readonly name: string;
}

const STEP = 1.25;
const SMALLEST = 1e-6;
const RELATIVE_TOLERANCE = 1e-10;

export function solveIncreasing({ f, target, guess, name }: IncreasingRoot): number {
  const logTarget = Math.log(target);
  const g = (x: number) => Math.log(f(x)) - logTarget;
  let lo = guess;
  let gLo = g(lo);
  let hi = guess;
  let gHi = gLo;
  if (gLo === 0) return guess;
  if (gLo < 0) {
    while (gHi < 0) {
      lo = hi;
      gLo = gHi;
      hi *= STEP;
      gHi = g(hi);
    }
  } else {
    while (gLo > 0) {
      hi = lo;
      gHi = gLo;
      lo /= STEP;
      if (lo < SMALLEST) throw new RangeError(`no ${name} gives a run length as short as ${target}`);
      gLo = g(lo);
    }
  }
  // Illinois false position; a bisection step whenever the upper end is past the reliable range.
  let side = 0;
  for (let iteration = 0; iteration < 200; iteration++) {
    const x = Number.isFinite(gHi) ? (lo * gHi - hi * gLo) / (gHi - gLo) : (lo + hi) / 2;
    const gx = g(x);
    if (Math.abs(gx) < 1e-13 || hi - lo <= RELATIVE_TOLERANCE * hi) return x;
    if (gx < 0) {
      lo = x;
      gLo = gx;
      if (side === -1) gHi /= 2;
      side = -1;
    } else {
      hi = x;
      gHi = gx;
      if (side === 1) gLo /= 2;
      side = 1;
    }
  }
  return (lo + hi) / 2;
}
