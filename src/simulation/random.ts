/** A small seeded generator, so that simulated fleets, tests and benchmarks are reproducible. */

export interface Random {
  /** Uniform on [0, 1). */
  next(): number;
  normal(): number;
  uniform(lo: number, hi: number): number;
}

/** mulberry32: 32-bit state, good enough statistical quality for simulation, and fast. */
export function seededRandom(seed: number): Random {
  let a = seed >>> 0;
  let spare: number | undefined;
  const next = (): number => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
  return {
    next,
    uniform: (lo, hi) => lo + (hi - lo) * next(),
    normal: () => {
      if (spare !== undefined) {
        const s = spare;
        spare = undefined;
        return s;
      }
      // Box–Muller; 1 − u keeps the logarithm finite.
      const r = Math.sqrt(-2 * Math.log(1 - next()));
      const theta = 2 * Math.PI * next();
      spare = r * Math.sin(theta);
      return r * Math.cos(theta);
    },
  };
}
