/**
 * Solve T·x = b for a symmetric positive-definite Toeplitz matrix T with first column r, by the
 * Levinson recursion (Levinson, J. Math. Phys. 25, 1947; written as in Golub & Van Loan, *Matrix
 * Computations*, Algorithm 4.7.3 "Levinson", on the matrix scaled to a unit diagonal). O(n²) time,
 * O(n) memory. Returns null when the recursion meets a non-positive prediction-error power
 * (T not positive definite, within rounding).
 */
export function solveToeplitz(r: ArrayLike<number>, b: ArrayLike<number>): Float64Array | null {
  const n = b.length;
  if (r.length < n) throw new RangeError(`Toeplitz column needs ${n} values, got ${r.length}`);
  if (n === 0) return new Float64Array(0);
  const r0 = r[0]!;
  if (!(r0 > 0)) return null;
  // scaled problem: unit diagonal, off-diagonals t_k = r_k / r0, right-hand side b / r0
  const x = new Float64Array(n);
  const y = new Float64Array(n);
  const tmp = new Float64Array(n);
  x[0] = b[0]! / r0;
  if (n === 1) return x;
  y[0] = -r[1]! / r0;
  let beta = 1;
  let alpha = y[0]!;
  for (let k = 1; k < n; k++) {
    beta = (1 - alpha * alpha) * beta;
    if (!(beta > 0)) return null;
    // mu = (b_k − Σ_{i<k} t_{i+1} · x_{k−1−i}) / beta
    let dot = 0;
    for (let i = 0; i < k; i++) dot += (r[i + 1]! / r0) * x[k - 1 - i]!;
    const mu = (b[k]! / r0 - dot) / beta;
    for (let i = 0; i < k; i++) tmp[i] = x[i]! + mu * y[k - 1 - i]!;
    for (let i = 0; i < k; i++) x[i] = tmp[i]!;
    x[k] = mu;
    if (k < n - 1) {
      let dy = 0;
      for (let i = 0; i < k; i++) dy += (r[i + 1]! / r0) * y[k - 1 - i]!;
      alpha = (-(r[k + 1]! / r0) - dy) / beta;
      for (let i = 0; i < k; i++) tmp[i] = y[i]! + alpha * y[k - 1 - i]!;
      for (let i = 0; i < k; i++) y[i] = tmp[i]!;
      y[k] = alpha;
    }
  }
  return x;
}
