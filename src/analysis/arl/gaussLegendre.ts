/** Gauss–Legendre quadrature rules, the nodes of the Nyström method that the run-length integral equations are solved with. */

export interface QuadratureRule {
  readonly nodes: Float64Array;
  readonly weights: Float64Array;
}

const standardRules = new Map<number, QuadratureRule>();

/** The n-point rule on [−1, 1]: Legendre roots by Newton's method from Tricomi's initial guesses. */
function standardRule(n: number): QuadratureRule {
  const cached = standardRules.get(n);
  if (cached) return cached;
  const nodes = new Float64Array(n);
  const weights = new Float64Array(n);
  for (let i = 0; i < Math.ceil(n / 2); i++) {
    let x = Math.cos((Math.PI * (i + 0.75)) / (n + 0.5));
    let derivative = 0;
    for (let iteration = 0; iteration < 100; iteration++) {
      let p0 = 1;
      let p1 = x;
      for (let j = 2; j <= n; j++) {
        const p2 = ((2 * j - 1) * x * p1 - (j - 1) * p0) / j;
        p0 = p1;
        p1 = p2;
      }
      derivative = (n * (x * p1 - p0)) / (x * x - 1);
      const dx = p1 / derivative;
      x -= dx;
      if (Math.abs(dx) < 1e-15) break;
    }
    const w = 2 / ((1 - x * x) * derivative * derivative);
    nodes[i] = -x;
    nodes[n - 1 - i] = x;
    weights[i] = w;
    weights[n - 1 - i] = w;
  }
  const rule = { nodes, weights };
  standardRules.set(n, rule);
  return rule;
}

/** The n-point Gauss–Legendre rule on [lo, hi]. */
export function gaussLegendre(n: number, lo: number, hi: number): QuadratureRule {
  const { nodes, weights } = standardRule(n);
  const half = (hi - lo) / 2;
  const mid = (hi + lo) / 2;
  return { nodes: nodes.map((t) => mid + half * t), weights: weights.map((w) => w * half) };
}
