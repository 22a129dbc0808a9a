import { describe, expect, it } from 'vitest';
import { crossCorrelation, wienerBound } from '../../src/analysis/wiener.ts';
import { solveToeplitz } from '../../src/analysis/toeplitz.ts';
import { Random } from '../../src/dsp/random.ts';

function directSolve(A: number[][], b: number[]): number[] {
  // Gaussian elimination with partial pivoting: the plain textbook method (Golub & Van Loan, *Matrix
  // Computations*, 3rd ed., 1996, Alg. 3.4.1; from memory)
  const n = b.length;
  const M = A.map((row, i) => [...row, b[i]!]);
  for (let c = 0; c < n; c++) {
    let p = c;
    for (let r = c + 1; r < n; r++) if (Math.abs(M[r]![c]!) > Math.abs(M[p]![c]!)) p = r;
    [M[c], M[p]] = [M[p]!, M[c]!];
    for (let r = c + 1; r < n; r++) {
      const f = M[r]![c]! / M[c]![c]!;
      for (let k = c; k <= n; k++) M[r]![k] = M[r]![k]! - f * M[c]![k]!;
    }
  }
  const x = new Array<number>(n).fill(0);
  for (let r = n - 1; r >= 0; r--) {
    let s = M[r]![n]!;
    for (let k = r + 1; k < n; k++) s -= M[r]![k]! * x[k]!;
    x[r] = s / M[r]![r]!;
  }
  return x;
}

describe('solveToeplitz (Levinson recursion)', () => {
  it('should agree with a direct solve on a random positive-definite Toeplitz system', () => {
    const rng = new Random(9);
    const x = new Float64Array(4000).map(() => rng.gaussian());
    for (let i = x.length - 1; i > 0; i--) x[i] = x[i]! + 0.8 * x[i - 1]!; // coloured: AR-like
    const n = 24;
    const r = crossCorrelation(x, x, n);
    const b = Array.from({ length: n }, () => rng.gaussian());
    const lev = solveToeplitz(r, b)!;
    const A = Array.from({ length: n }, (_, i) => Array.from({ length: n }, (_, j) => r[Math.abs(i - j)]!));
    const ref = directSolve(A, b);
    for (let i = 0; i < n; i++) expect(lev[i]!).toBeCloseTo(ref[i]!, 8);
  });

  it('should report a matrix that is not positive definite', () => {
    expect(solveToeplitz([1, 2, 0], [1, 1, 1])).toBeNull();
  });
});

// The Wiener solution of a transversal filter: Widrow & Stearns, *Adaptive Signal Processing*, 1985, ch. 2
// (from memory), write R·w* = p with E_min = E[d²] − pᵀR⁻¹p for e = d − y. With this project's e = d + y
// (y = wᵀr) the same derivation gives R·w = −p and the same E_min (calculated from theirs with w → −w).
// Levinson, J. Math. Phys. 25, 1947.
describe('wienerBound', () => {
  it('should find the delayed, scaled reference for a pure-delay plant (white reference)', () => {
    // d(n) = −g·r(n − D): the optimum is w = g·δ(k − D), reaching the noise floor.
    const rng = new Random(4);
    const N = 20000;
    const r = new Float64Array(N).map(() => rng.gaussian());
    const g = 0.6;
    const D = 7;
    const noise = 0.001;
    const d = new Float64Array(N);
    for (let n = 0; n < N; n++) d[n] = -g * (n >= D ? r[n - D]! : 0) + noise * rng.gaussian();
    const wb = wienerBound(d, r, 16)!;
    for (let k = 0; k < 16; k++) expect(wb.weights[k]!).toBeCloseTo(k === D ? g : 0, 2);
    // least error = the noise power; attenuation = 10·log10(E[d²]/σ²)
    const expected = 10 * Math.log10((g * g + noise * noise) / (noise * noise));
    expect(Math.abs(wb.attenuationDb - expected)).toBeLessThan(0.3);
  });

  it('should equal the error of a directly solved normal equation', () => {
    const rng = new Random(5);
    const N = 30000;
    const r = new Float64Array(N);
    let prev = 0;
    for (let n = 0; n < N; n++) r[n] = prev = 0.7 * prev + rng.gaussian();
    const d = new Float64Array(N);
    for (let n = 3; n < N; n++) d[n] = 0.5 * r[n - 1]! - 0.3 * r[n - 3]! + 0.1 * rng.gaussian();
    const L = 8;
    const wb = wienerBound(d, r, L)!;
    const R = crossCorrelation(r, r, L);
    const p = crossCorrelation(d, r, L);
    const A = Array.from({ length: L }, (_, i) => Array.from({ length: L }, (_, j) => R[Math.abs(i - j)]!));
    const w = directSolve(A, Array.from(p)).map((v) => -v);
    let ed = 0, ee = 0;
    for (let n = 0; n < N; n++) {
      let y = 0;
      for (let k = 0; k < L; k++) if (n - k >= 0) y += w[k]! * r[n - k]!;
      ee += (d[n]! + y) ** 2;
      ed += d[n]! ** 2;
    }
    expect(Math.abs(wb.attenuationDb - 10 * Math.log10(ed / ee))).toBeLessThan(0.01);
  });
});
