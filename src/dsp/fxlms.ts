import type { Controller } from './controller.ts';
import { copyPrefix, replacePadded } from './copy.ts';
import { OutputConstraint, PENALTY, validateOutputConstraint, type OutputConstraintSettings } from './output-constraint.ts';

/**
 * Filtered-reference LMS (FxLMS) feedforward controller: one reference, one error microphone.
 * (Morgan, IEEE TASSP 28(4), 1980; Burgess, JASA 70(3), 1981; Widrow & Stearns, 1985.)
 *
 *   y(n) = Σ_{k<L} w_k · x(n − k)                       control output
 *   f(n) = Σ_{m<M} ŝ_m · x(n − m)                       filtered reference (ŝ: secondary-path model)
 *   e(n) = d(n) + (s * y)(n)                            what the error microphone hears
 *   FxLMS:  w ← (1 − μγ)·w − μ · e(n) · f(n)
 *   FxNLMS: w ← (1 − μγ)·w − μ · e(n) · f(n) / (δ + ‖f(n)‖²),  ‖f(n)‖² = Σ_{k<L} f(n − k)²
 *
 * so that 0 < μ < 2 is the NLMS range before the secondary-path delay is accounted for (with a
 * bulk delay Δ, the practical bound shrinks roughly as L/(L + Δ); Elliott, *Signal Processing for
 * Active Control*, 2001, ch. 3). γ ≥ 0 is the leakage, δ > 0 the regularisation.
 *
 * Update timing: per sample (default), y(n) is computed with w(n) and then w(n + 1) formed from
 * e(n), f(n). In block mode the output of a whole block uses the weights held at its start and the
 * per-sample gradients of the block (each normalised by its own ‖f‖² in FxNLMS) are summed with the
 * same μ and applied at the block end: w ← (1 − μγ)^n · w − μ · Σ_n e(n)·f(n)[/(δ + ‖f(n)‖²)].
 *
 * Start-up: until the filtered-reference window has held L samples since the first non-zero f (the
 * reference arrives, and f lags it by the model's bulk delay), ‖f‖² covers only part of the window
 * and would make the normalised step explode; the energy is then scaled up to a full window,
 * ‖f‖²·L/k after k samples, so the first updates have their intended size.
 *
 * Output constraint (src/dsp/output-constraint.ts): after each block, 'rescale' scales the block and
 * w by A/peak when the output peak exceeds the constraint level A; 'effort' adds its penalty λ to
 * the leakage, w ← (1 − μγ − λ)·w − ….
 *
 * Storage: Float32Array delay lines, mirrored (each sample written at p and p + N) so inner products
 * never wrap. ‖f‖² is a float64 running sum of float32-rounded values (so additions and removals
 * cancel exactly) and is recomputed from the line every few thousand samples.
 */
export interface FxlmsConfig extends OutputConstraintSettings {
  algorithm: 'fxlms' | 'fxnlms';
  /** Control filter length L (taps), 1 … 65536. */
  taps: number;
  /** Step size μ > 0. FxNLMS: dimensionless, 0 < μ < 2. FxLMS: in 1/(signal power · taps) units. */
  stepSize: number;
  /** Leakage γ ≥ 0 (w ← (1 − μγ)·w). Default 0. */
  leakage?: number;
  /** FxNLMS regularisation δ > 0, added to ‖f‖². Default 1e-6 (full-scale² units; see README). */
  regularization?: number;
  /** Weight update per sample (default) or once per block. */
  update?: 'sample' | 'block';
  /** Sample rate (Hz), for the timing of the output constraint's effort penalty. Default 48000. */
  sampleRate?: number;
}

export const FXNLMS_DEFAULT_REGULARIZATION = 1e-6;
const RECOMPUTE_EVERY = 8192;

export class FxlmsController implements Controller {
  readonly kind: 'fxlms' | 'fxnlms';
  adapt = true;
  readonly taps: number;
  readonly modelTaps: number;
  stepSize: number;
  leakage: number;
  readonly regularization: number;
  readonly update: 'sample' | 'block';
  /** Keeps the output below the cap (the engine sets the cap). */
  readonly outputConstraint: OutputConstraint;
  private readonly normalized: boolean;
  private readonly w: Float32Array;
  private readonly grad: Float64Array;
  private readonly model: Float32Array;
  private readonly xLine: Float32Array;
  private readonly fLine: Float32Array;
  private readonly nx: number;
  private px = 0;
  private pf = 0;
  private fEnergy = 0;
  private sinceRecompute = 0;
  /** Samples since the first non-zero filtered reference, capped at L (start-up scaling of ‖f‖²). */
  private filled = 0;

  constructor(config: FxlmsConfig, secondaryPathModel: Float32Array, maxBlockSize: number) {
    validateFxlmsConfig(config);
    validateSecondaryPathModel(secondaryPathModel);
    if (!Number.isInteger(maxBlockSize) || maxBlockSize < 1) throw new RangeError(`maxBlockSize must be an integer ≥ 1, got ${maxBlockSize}`);
    this.kind = config.algorithm;
    this.normalized = config.algorithm === 'fxnlms';
    this.taps = config.taps;
    this.stepSize = config.stepSize;
    this.leakage = config.leakage ?? 0;
    this.regularization = config.regularization ?? FXNLMS_DEFAULT_REGULARIZATION;
    this.update = config.update ?? 'sample';
    this.modelTaps = secondaryPathModel.length;
    this.model = Float32Array.from(secondaryPathModel);
    this.w = new Float32Array(this.taps);
    this.grad = new Float64Array(this.update === 'block' ? this.taps : 0);
    this.nx = Math.max(this.taps, this.modelTaps);
    this.xLine = new Float32Array(2 * this.nx);
    this.fLine = new Float32Array(2 * this.taps);
    this.outputConstraint = new OutputConstraint(config, config.sampleRate);
  }

  setOutputCap(cap: number): void {
    this.outputConstraint.setCap(cap);
  }

  reset(): void {
    this.w.fill(0);
    this.grad.fill(0);
    this.xLine.fill(0);
    this.fLine.fill(0);
    this.px = 0;
    this.pf = 0;
    this.fEnergy = 0;
    this.sinceRecompute = 0;
    this.outputConstraint.reset();
  }

  setStepSize(mu: number): void {
    if (mu > 0 && Number.isFinite(mu)) this.stepSize = mu;
  }

  setLeakage(gamma: number): void {
    if (gamma >= 0 && Number.isFinite(gamma)) this.leakage = gamma;
  }

  setSecondaryPathModel(taps: ArrayLike<number>): void {
    replacePadded(this.model, taps, this.modelTaps);
  }

  /** Copy the secondary-path model into `out`; returns the count written. */
  copySecondaryPathModel(out: Float32Array): number {
    return copyPrefix(this.model, out, this.modelTaps);
  }

  /** Clear the weights only (delay lines keep their history). */
  resetWeights(): void {
    this.w.fill(0);
    this.grad.fill(0);
  }

  weightNormSquared(): number {
    const w = this.w;
    let s = 0;
    for (let k = 0; k < w.length; k++) s += w[k]! * w[k]!;
    return s;
  }

  copyWeights(out: Float32Array): number {
    const n = Math.min(out.length, this.taps);
    for (let i = 0; i < n; i++) out[i] = this.w[i]!;
    return n;
  }

  /** Replace the weights (for tests and for restoring a converged filter). */
  setWeights(w: ArrayLike<number>): void {
    const n = Math.min(w.length, this.taps);
    for (let i = 0; i < n; i++) this.w[i] = w[i]!;
    for (let i = n; i < this.taps; i++) this.w[i] = 0;
  }

  /** Energy ‖f(n)‖² of the filtered-reference window. */
  filteredReferenceEnergy(): number {
    return this.fEnergy;
  }

  process(ref: Float32Array, err: Float32Array, out: Float32Array, n: number): void {
    // Fields copied into locals: the JIT keeps them in registers across the inner loops.
    const L = this.taps;
    const M = this.modelTaps;
    const NX = this.nx;
    const w = this.w;
    const s = this.model;
    const xl = this.xLine;
    const fl = this.fLine;
    const grad = this.grad;
    const adapt = this.adapt;
    const block = this.update === 'block';
    const normalized = this.normalized;
    const mu = this.stepSize;
    const reg = this.regularization;
    const leak = 1 - mu * this.leakage - this.outputConstraint.state[PENALTY]!;
    const L4 = L & ~3;
    const M4 = M & ~3;
    let px = this.px;
    let pf = this.pf;
    let energy = this.fEnergy;
    let since = this.sinceRecompute;
    let filled = this.filled;

    for (let i = 0; i < n; i++) {
      // push x(n)
      px = px === 0 ? NX - 1 : px - 1;
      const x = ref[i]!;
      xl[px] = x;
      xl[px + NX] = x;

      // control output y(n) = wᵀx(n), with w(n)
      let y0 = 0, y1 = 0, y2 = 0, y3 = 0;
      let k = 0;
      for (; k < L4; k += 4) {
        y0 += w[k]! * xl[px + k]!;
        y1 += w[k + 1]! * xl[px + k + 1]!;
        y2 += w[k + 2]! * xl[px + k + 2]!;
        y3 += w[k + 3]! * xl[px + k + 3]!;
      }
      for (; k < L; k++) y0 += w[k]! * xl[px + k]!;
      out[i] = y0 + y1 + y2 + y3;

      if (!adapt) continue;

      // filtered reference f(n) = ŝᵀx(n)
      let f0 = 0, f1 = 0, f2 = 0, f3 = 0;
      let m = 0;
      for (; m < M4; m += 4) {
        f0 += s[m]! * xl[px + m]!;
        f1 += s[m + 1]! * xl[px + m + 1]!;
        f2 += s[m + 2]! * xl[px + m + 2]!;
        f3 += s[m + 3]! * xl[px + m + 3]!;
      }
      for (; m < M; m++) f0 += s[m]! * xl[px + m]!;
      const f = Math.fround(f0 + f1 + f2 + f3);
      pf = pf === 0 ? L - 1 : pf - 1;
      const leaving = fl[pf]!; // f(n − L)
      fl[pf] = f;
      fl[pf + L] = f;
      if (++since >= RECOMPUTE_EVERY) {
        let e2 = 0;
        for (let j = 0; j < L; j++) e2 += fl[pf + j]! * fl[pf + j]!;
        energy = e2;
        since = 0;
      } else {
        energy += f * f - leaving * leaving;
      }

      if (filled < L && (filled > 0 || f !== 0)) filled++;
      const e = err[i]!;
      const norm = filled === L ? energy : filled > 0 ? (energy * L) / filled : 0;
      const c = normalized ? (mu * e) / (reg + (norm > 0 ? norm : 0)) : mu * e;
      if (block) {
        for (k = 0; k < L; k++) grad[k] = grad[k]! + c * fl[pf + k]!;
      } else if (leak === 1) {
        for (k = 0; k < L4; k += 4) {
          w[k] = w[k]! - c * fl[pf + k]!;
          w[k + 1] = w[k + 1]! - c * fl[pf + k + 1]!;
          w[k + 2] = w[k + 2]! - c * fl[pf + k + 2]!;
          w[k + 3] = w[k + 3]! - c * fl[pf + k + 3]!;
        }
        for (; k < L; k++) w[k] = w[k]! - c * fl[pf + k]!;
      } else {
        for (k = 0; k < L; k++) w[k] = leak * w[k]! - c * fl[pf + k]!;
      }
    }

    if (adapt && block) {
      const blockLeak = leak === 1 ? 1 : Math.pow(leak, n);
      for (let k = 0; k < L; k++) {
        w[k] = blockLeak * w[k]! - grad[k]!;
        grad[k] = 0;
      }
    }
    this.px = px;
    this.pf = pf;
    this.fEnergy = energy;
    this.sinceRecompute = since;
    this.filled = filled;
    const oc = this.outputConstraint;
    oc.afterBlock(out, n);
    oc.scaleWeights(this.w);
  }
}

/** Refuse an empty secondary-path model or one with a non-finite tap, naming the tap. */
export function validateSecondaryPathModel(model: ArrayLike<number>): void {
  if (model.length < 1) throw new RangeError('secondary-path model needs at least one tap');
  for (let i = 0; i < model.length; i++) {
    if (!Number.isFinite(model[i]!)) throw new RangeError(`secondary-path model tap ${i} is not finite`);
  }
}

/** Validate an FxLMS configuration; the message names the field, its range and the value. */
export function validateFxlmsConfig(c: FxlmsConfig): void {
  if (c.algorithm !== 'fxlms' && c.algorithm !== 'fxnlms') throw new RangeError(`controller.algorithm must be "fxlms" or "fxnlms", got ${String(c.algorithm)}`);
  if (!Number.isInteger(c.taps) || c.taps < 1 || c.taps > 65536) throw new RangeError(`controller.taps must be an integer from 1 to 65536, got ${c.taps}`);
  if (!(c.stepSize > 0) || !Number.isFinite(c.stepSize)) throw new RangeError(`controller.stepSize must be a finite number > 0, got ${c.stepSize}`);
  if (c.leakage !== undefined && !(c.leakage >= 0 && Number.isFinite(c.leakage))) throw new RangeError(`controller.leakage must be ≥ 0, got ${c.leakage}`);
  if (c.regularization !== undefined && !(c.regularization > 0 && Number.isFinite(c.regularization))) throw new RangeError(`controller.regularization must be > 0, got ${c.regularization}`);
  if (c.update !== undefined && c.update !== 'sample' && c.update !== 'block') throw new RangeError(`controller.update must be "sample" or "block", got ${String(c.update)}`);
  validateOutputConstraint(c);
}
