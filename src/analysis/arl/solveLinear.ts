/**
 * Solves A·x = b by Gaussian elimination with partial pivoting. The run-length systems are dense and small (at most a few
 * hundred unknowns), so a hand-written O(n³) elimination is faster than pulling in a linear-algebra package.
 * `a` is row-major n×n and is overwritten, as is `b`, which returns the solution.
 */
export function solveLinear(a: Float64Array, b: Float64Array): Float64Array {
  const n = b.length;
  for (let col = 0; col < n; col++) {
    let pivotRow = col;
    let pivotSize = Math.abs(a[col * n + col]!);
    for (let r = col + 1; r < n; r++) {
      const size = Math.abs(a[r * n + col]!);
      if (size > pivotSize) {
        pivotSize = size;
        pivotRow = r;
      }
    }
    if (pivotSize === 0) throw new RangeError('singular run-length system');
    if (pivotRow !== col) {
      for (let c = col; c < n; c++) {
        const t = a[col * n + c]!;
        a[col * n + c] = a[pivotRow * n + c]!;
        a[pivotRow * n + c] = t;
      }
      const t = b[col]!;
      b[col] = b[pivotRow]!;
      b[pivotRow] = t;
    }
    const pivot = a[col * n + col]!;
    for (let r = col + 1; r < n; r++) {
      const factor = a[r * n + col]! / pivot;
      if (factor === 0) continue;
      for (let c = col + 1; c < n; c++) a[r * n + c]! -= factor * a[col * n + c]!;
      b[r]! -= factor * b[col]!;
    }
  }
  for (let r = n - 1; r >= 0; r--) {
    let sum = b[r]!;
    for (let c = r + 1; c < n; c++) sum -= a[r * n + c]! * b[c]!;
    b[r] = sum / a[r * n + r]!;
  }
  return b;
}
