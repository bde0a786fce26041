/** Standard normal density and distribution function, to double precision (the ARL tables need Φ far into the tails). */

const INV_SQRT_2PI = 0.3989422804014327;

export function normalDensity(x: number): number {
  return INV_SQRT_2PI * Math.exp(-0.5 * x * x);
}

/**
 * Φ(x) by Hart's rational approximation (Hart et al. 1968, algorithm 5666, as given by G. West, "Better approximations to
 * cumulative normal functions", Wilmott 2005): absolute error below 1e-15, relative error below 1e-8 even far in the lower
 * tail, where 1 − Φ(−x) would lose every digit.
 */
export function normalCdf(x: number): number {
  const a = Math.abs(x);
  let tail: number;
  if (a > 37) {
    tail = 0;
  } else if (a < 7.07106781186547) {
    const e = Math.exp(-0.5 * a * a);
    let num = 3.52624965998911e-2 * a + 0.700383064443688;
    num = num * a + 6.37396220353165;
    num = num * a + 33.912866078383;
    num = num * a + 112.079291497871;
    num = num * a + 221.213596169931;
    num = num * a + 220.206867912376;
    let den = 8.83883476483184e-2 * a + 1.75566716318264;
    den = den * a + 16.064177579207;
    den = den * a + 86.7807322029461;
    den = den * a + 296.564248779674;
    den = den * a + 637.333633378831;
    den = den * a + 793.826512519948;
    den = den * a + 440.413735824752;
    tail = (e * num) / den;
  } else {
    const e = Math.exp(-0.5 * a * a);
    let cf = a + 0.65;
    cf = a + 4 / cf;
    cf = a + 3 / cf;
    cf = a + 2 / cf;
    cf = a + 1 / cf;
    tail = e / cf / 2.506628274631;
  }
  return x > 0 ? 1 - tail : tail;
}
