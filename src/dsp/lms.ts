/**
 * Test-only: no production path uses this class. It pins the project's LMS step-size conventions
 * against published figures (test/dsp/lms.test.ts: time constants, misadjustment, the adaptive notch),
 * which the FxLMS family (src/dsp/fxlms.ts) shares.
 *
 * Adaptive FIR filter of the LMS family: LMS, normalised LMS (NLMS) and leaky LMS.
 *
 * Convention (Haykin, *Adaptive Filter Theory*): output y(n) = wᵀx(n), error e(n) = d(n) − y(n),
 *   LMS:        w ← (1 − μγ)·w + μ·e(n)·x(n)
 *   NLMS:       w ← (1 − μγ)·w + μ·e(n)·x(n) / (δ + ‖x(n)‖²)      (stable for 0 < μ < 2)
 * with γ ≥ 0 the leakage (γ = 0: plain LMS). Widrow's convention writes 2μ where this writes μ.
 * Use: `filter(x)` pushes a sample and returns y(n); `adapt(e)` applies one update with the
 * delay line as it stands, so a test can freeze learning by not calling it.
 *
 * ‖x‖² is kept as a running sum in float64 and recomputed every `recomputeEvery` samples so
 * rounding cannot make it drift (or go negative).
 */
export interface LmsOptions {
  /** Number of taps L ≥ 1. */
  taps: number;
  /** Step size μ > 0 (for NLMS, 0 < μ < 2). */
  stepSize: number;
  /** Normalise by the input energy (NLMS). Default false. */
  normalized?: boolean;
  /** Leakage γ ≥ 0, applied as w ← (1 − μγ)·w. Default 0. */
  leakage?: number;
  /** NLMS regularisation δ > 0 (same units as ‖x‖²). Default 1e-6. */
  regularization?: number;
}

export class LmsFilter {
  readonly taps: number;
  stepSize: number;
  leakage: number;
  readonly normalized: boolean;
  readonly regularization: number;
  private readonly w: Float64Array;
  private readonly line: Float64Array;
  private pos = 0;
  private energy = 0;
  private sinceRecompute = 0;

  constructor(opts: LmsOptions) {
    if (!Number.isInteger(opts.taps) || opts.taps < 1) throw new RangeError(`taps must be an integer ≥ 1, got ${opts.taps}`);
    if (!(opts.stepSize > 0)) throw new RangeError(`stepSize must be > 0, got ${opts.stepSize}`);
    const leakage = opts.leakage ?? 0;
    if (!(leakage >= 0)) throw new RangeError(`leakage must be ≥ 0, got ${leakage}`);
    const reg = opts.regularization ?? 1e-6;
    if (!(reg > 0)) throw new RangeError(`regularization must be > 0, got ${reg}`);
    this.taps = opts.taps;
    this.stepSize = opts.stepSize;
    this.leakage = leakage;
    this.normalized = opts.normalized ?? false;
    this.regularization = reg;
    this.w = new Float64Array(opts.taps);
    this.line = new Float64Array(2 * opts.taps);
  }

  reset(): void {
    this.w.fill(0);
    this.line.fill(0);
    this.pos = 0;
    this.energy = 0;
    this.sinceRecompute = 0;
  }

  /** Push x(n) and return y(n) = wᵀx(n). */
  filter(x: number): number {
    const L = this.taps;
    const line = this.line;
    let p = this.pos - 1;
    if (p < 0) p += L;
    const old = line[p]!; // x(n − L), leaving the window
    this.pos = p;
    line[p] = x;
    line[p + L] = x;
    if (++this.sinceRecompute >= 4 * L + 1024) {
      let s = 0;
      for (let k = 0; k < L; k++) s += line[p + k]! * line[p + k]!;
      this.energy = s;
      this.sinceRecompute = 0;
    } else {
      this.energy += x * x - old * old;
    }
    const w = this.w;
    let y = 0;
    for (let k = 0; k < L; k++) y += w[k]! * line[p + k]!;
    return y;
  }

  /** One update with error e(n) = d(n) − y(n) and the current delay line. */
  adapt(e: number): void {
    const L = this.taps;
    const line = this.line;
    const p = this.pos;
    let mu = this.stepSize;
    if (this.normalized) mu /= this.regularization + Math.max(this.energy, 0);
    const g = mu * e;
    const leak = 1 - this.stepSize * this.leakage;
    const w = this.w;
    if (leak === 1) {
      for (let k = 0; k < L; k++) w[k] = w[k]! + g * line[p + k]!;
    } else {
      for (let k = 0; k < L; k++) w[k] = leak * w[k]! + g * line[p + k]!;
    }
  }

  /** Energy ‖x(n)‖² of the current delay line. */
  inputEnergy(): number {
    return Math.max(this.energy, 0);
  }

  /** Copy the weights into `out`; returns the count written. */
  copyWeights(out: Float32Array | Float64Array): number {
    const n = Math.min(out.length, this.taps);
    for (let i = 0; i < n; i++) out[i] = this.w[i]!;
    return n;
  }
}

/**
 * Adaptive linear combiner: y = wᵀx for an arbitrary input vector x (not a delay line), with the
 * same Haykin-convention LMS update w ← (1 − μγ)·w + μ·e·x (Widrow & Stearns, *Adaptive Signal
 * Processing*, 1985, ch. 2). Used for quadrature (cos, sin) references.
 */
export class LmsCombiner {
  readonly size: number;
  stepSize: number;
  leakage: number;
  private readonly w: Float64Array;
  private readonly x: Float64Array;

  constructor(size: number, stepSize: number, leakage = 0) {
    if (!Number.isInteger(size) || size < 1) throw new RangeError(`size must be an integer ≥ 1, got ${size}`);
    if (!(stepSize > 0)) throw new RangeError(`stepSize must be > 0, got ${stepSize}`);
    if (!(leakage >= 0)) throw new RangeError(`leakage must be ≥ 0, got ${leakage}`);
    this.size = size;
    this.stepSize = stepSize;
    this.leakage = leakage;
    this.w = new Float64Array(size);
    this.x = new Float64Array(size);
  }

  reset(): void {
    this.w.fill(0);
    this.x.fill(0);
  }

  /** Set the input vector (copied) and return y = wᵀx. */
  filter(x: ArrayLike<number>): number {
    let y = 0;
    for (let i = 0; i < this.size; i++) {
      const v = x[i]!;
      this.x[i] = v;
      y += this.w[i]! * v;
    }
    return y;
  }

  /** One update with e = d − y and the last input vector. */
  adapt(e: number): void {
    const g = this.stepSize * e;
    const leak = 1 - this.stepSize * this.leakage;
    for (let i = 0; i < this.size; i++) this.w[i] = leak * this.w[i]! + g * this.x[i]!;
  }

  weight(i: number): number {
    return this.w[i]!;
  }
}
