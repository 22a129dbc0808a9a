/**
 * Memoryless polynomial loudspeaker nonlinearity for the simulated plant:
 *
 *   y = x + a2·x² + a3·x³
 *
 * A weak model of a driver pushed towards its excursion limits: the even term (a2) makes an asymmetric
 * suspension, the odd term (a3, usually negative) a compressive one. For a sine x = A·sin(ωt):
 *   a2·x² = a2·A²/2 − (a2·A²/2)·cos(2ωt)      → 2nd harmonic of amplitude a2·A²/2 (relative a2·A/2),
 *   a3·x³ = (3a3·A³/4)·sin(ωt) − (a3·A³/4)·sin(3ωt) → 3rd harmonic of amplitude a3·A³/4 (relative a3·A²/4),
 * from sin² = (1 − cos 2θ)/2 and sin³ = (3 sin θ − sin 3θ)/4.
 *
 * Streaming: `process` works on blocks of any length and keeps no state, so blocks can be cut anywhere.
 */

export interface PolynomialNonlinearityOptions {
  /** Coefficient of x² (finite; 0 for none). */
  a2?: number;
  /** Coefficient of x³ (finite; 0 for none). */
  a3?: number;
}

export class PolynomialNonlinearity {
  readonly a2: number;
  readonly a3: number;

  constructor(options: PolynomialNonlinearityOptions = {}) {
    const { a2 = 0, a3 = 0 } = options;
    if (!Number.isFinite(a2)) throw new RangeError(`a2 must be a finite number, got ${a2}`);
    if (!Number.isFinite(a3)) throw new RangeError(`a3 must be a finite number, got ${a3}`);
    this.a2 = a2;
    this.a3 = a3;
  }

  /** Nothing to clear (memoryless); present so the plant can treat every block alike. */
  reset(): void {}

  /** y = x + a2·x² + a3·x³ for the first n samples; `output` may be `input` (in place). */
  process(input: Float32Array | Float64Array, output: Float32Array | Float64Array, n: number = input.length): void {
    const { a2, a3 } = this;
    for (let i = 0; i < n; i++) {
      const x = input[i]!;
      output[i] = x + x * x * (a2 + a3 * x);
    }
  }
}
