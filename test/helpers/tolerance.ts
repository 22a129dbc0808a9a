// Shared tolerance helpers for every test: compare floats and arrays with a stated tolerance.
import { expect } from 'vitest';

/** Assert |actual − expected| ≤ tol, with a message naming what was compared. */
export function expectClose(actual: number, expected: number, tol: number, what = 'value'): void {
  const diff = Math.abs(actual - expected);
  if (!(diff <= tol)) {
    throw new Error(`${what}: expected ${expected} ± ${tol}, got ${actual} (off by ${diff})`);
  }
  expect(diff).toBeLessThanOrEqual(tol);
}

/** Assert |actual/expected − 1| ≤ rel. */
export function expectRelClose(actual: number, expected: number, rel: number, what = 'value'): void {
  const r = Math.abs(actual / expected - 1);
  if (!(r <= rel)) {
    throw new Error(`${what}: expected ${expected} within ${(rel * 100).toFixed(1)} %, got ${actual} (${(r * 100).toFixed(2)} % off)`);
  }
  expect(r).toBeLessThanOrEqual(rel);
}

/** Norm-wise relative error ‖a − b‖ / ‖b‖. */
export function normRelError(a: ArrayLike<number>, b: ArrayLike<number>): number {
  let num = 0;
  let den = 0;
  for (let i = 0; i < b.length; i++) {
    const d = a[i]! - b[i]!;
    num += d * d;
    den += b[i]! * b[i]!;
  }
  return Math.sqrt(num / (den || 1));
}
