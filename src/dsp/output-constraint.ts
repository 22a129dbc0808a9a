/**
 * Output-constrained adaptation: the controller knows the output cap and keeps its own output below
 * it, so the limiter after it stays the last line of defence that (almost) never acts.
 *
 * The constraint level is A = cap · 10^(−margin/20): the cap minus a margin (default 1 dB) that
 * leaves room for what the output stage does after the controller (the speaker high-pass can
 * overshoot a little on transients; a start ramp or a crossfade only lowers the level).
 *
 * Methods (`controller.outputConstraint`):
 * - 'rescale': when a block of control output would exceed A, the block is scaled by h = A / peak,
 *   so no output sample exceeds A, and the weights by h^0.1, so they cannot wind up beyond what the
 *   output may carry. This is the re-scaling algorithm of Qiu & Hansen ("A study of time-domain FXLMS
 *   algorithms with control output constraint", J. Acoust. Soc. Am. 109(6), 2001), applied once per
 *   block rather than per sample and with a partial step on the weights: a full rescale (h itself)
 *   lets one rare noise peak cut the whole filter (measured on causal broadband noise whose peaks
 *   just reach the constraint: 19.8 dB with h, 22.8 dB with h^0.1, 23.2 dB with the limiter alone),
 *   while on a tone, whose every block exceeds A while the weights are too large, h^0.1 converges
 *   to the same place within a few blocks. Gradient steps followed by a rescale
 *   settle where the gradient is parallel to the weights, w = −(R + λI)⁻¹p for some λ ≥ 0: a
 *   regularised Wiener filter, which at each frequency reduces |D| and never amplifies it (with a
 *   correct model). The tonal controller applies it per harmonic with a budget (see
 *   tonal-controller.ts).
 * - 'effort': a penalty on the output (effort weighting, Elliott, *Signal Processing for Active
 *   Control*, 2001, ch. 4: minimise E[e²] + β·E[y²], which the update realises as a leakage). β is
 *   not fixed but follows the output level, as a Lagrange multiplier would: it grows (×10 every
 *   20 ms) while the held output peak exceeds A and relaxes (÷10 every 300 ms) while the peak is
 *   below 0.85·A, down to zero. The output may overshoot A while β catches up; the limiter takes it.
 *   The controllers read `penalty`, a per-sample weight loss λ added to their own leakage
 *   (w ← (1 − μγ − λ)·w − …).
 * - 'none': the controller ignores the cap; only the limiter holds the output (adaptation is never
 *   frozen for it, so nothing locks up, but the weights may wind up while the limiter works).
 *
 * Every controller owns one `OutputConstraint`; the engine passes the cap with `setCap` at
 * construction and whenever the user changes it. No allocation after construction.
 */

export type OutputConstraintMethod = 'rescale' | 'effort' | 'none';
export const OUTPUT_CONSTRAINT_METHODS: readonly OutputConstraintMethod[] = ['rescale', 'effort', 'none'];
/** Chosen by measurement: see README, "Output constraint". */
export const DEFAULT_OUTPUT_CONSTRAINT: OutputConstraintMethod = 'rescale';
/** Indices into `OutputConstraint.state` (read these on the audio thread rather than the getters). */
export const PENALTY = 0;
export const WEIGHT_SCALE = 1;
const HELD_PEAK = 2;
const SINCE_ACTIVE = 3;
const SAMPLES = 4;
const ACTIVE_SAMPLES = 5;
/** Constraint level below the cap, dB. */
export const DEFAULT_OUTPUT_MARGIN_DB = 1;

/** The constraint fields a controller configuration may carry. */
export interface OutputConstraintSettings {
  /** 'rescale' (default), 'effort' or 'none'. */
  outputConstraint?: OutputConstraintMethod | undefined;
  /** Constraint level below the cap, dB, 0 … 20. Default 1. */
  outputMarginDb?: number | undefined;
}

const PEAK_HOLD_S = 0.05;
/** Share (as a power) of a block's rescale that the weights take; see the module comment. */
const WEIGHT_SHARE = 0.1;
const PENALTY_MIN = 1e-7;
const PENALTY_MAX = 0.05;
const PENALTY_RISE_S = 0.02; // ×10 per this time while over
const PENALTY_FALL_S = 0.3; // ÷10 per this time while under
const RELAX_BELOW = 0.85;
/** The constraint counts as acting for this long after it last acted (for the meters). */
const ACTIVE_HOLD_S = 0.1;

/** Refuse a bad method or margin, naming the field, the allowed values and the value. */
export function validateOutputConstraint(s: OutputConstraintSettings): void {
  if (s.outputConstraint !== undefined && !OUTPUT_CONSTRAINT_METHODS.includes(s.outputConstraint)) {
    throw new RangeError(`controller.outputConstraint must be one of "rescale", "effort", "none", got ${String(s.outputConstraint)}`);
  }
  const m = s.outputMarginDb;
  if (m !== undefined && !(typeof m === 'number' && m >= 0 && m <= 20)) throw new RangeError(`controller.outputMarginDb must be a number from 0 to 20 dB, got ${String(m)}`);
}

export class OutputConstraint {
  readonly method: OutputConstraintMethod;
  readonly marginDb: number;
  readonly sampleRate: number;
  /** Constraint level A (linear, full scale 1); Infinity until a cap is set. */
  level = Infinity;
  /** The cap it derives from (linear); Infinity until set. */
  cap = Infinity;
  /**
   * Per-block state in a typed array (stores of doubles into object fields can box them):
   * [PENALTY] effort method's per-sample weight loss λ the controller adds to its leakage (0
   * otherwise); [WEIGHT_SCALE] the factor by which the controller must scale its weights after the
   * last block (1 = leave them); [HELD_PEAK] output peak held over ~50 ms, before any rescale;
   * [SINCE_ACTIVE] samples since the constraint last acted; [SAMPLES], [ACTIVE_SAMPLES] samples
   * processed and samples of blocks in which the constraint acted (since reset).
   */
  readonly state = new Float64Array(6);
  /** 1 while the constraint acts (rescaled or penalised within the last 100 ms), else 0. */
  active = 0;
  private readonly holdSamples: number;
  private readonly activeHoldSamples: number;
  private readonly riseRate: number;
  private readonly fallRate: number;

  constructor(settings: OutputConstraintSettings = {}, sampleRate = 48000) {
    validateOutputConstraint(settings);
    this.method = settings.outputConstraint ?? DEFAULT_OUTPUT_CONSTRAINT;
    this.marginDb = settings.outputMarginDb ?? DEFAULT_OUTPUT_MARGIN_DB;
    this.sampleRate = sampleRate > 0 && Number.isFinite(sampleRate) ? sampleRate : 48000;
    this.holdSamples = PEAK_HOLD_S * this.sampleRate;
    this.activeHoldSamples = ACTIVE_HOLD_S * this.sampleRate;
    this.riseRate = Math.LN10 / (PENALTY_RISE_S * this.sampleRate);
    this.fallRate = Math.LN10 / (PENALTY_FALL_S * this.sampleRate);
    this.reset();
  }

  /** Set the output cap (linear, 0 < cap ≤ 1); non-finite or non-positive values are ignored. */
  setCap(cap: number): void {
    if (!(cap > 0 && cap <= 1)) return;
    this.cap = cap;
    this.level = cap * Math.pow(10, -this.marginDb / 20);
  }

  /** Forget the penalty, the held peak and the counters (the cap stays). */
  reset(): void {
    const st = this.state;
    st.fill(0);
    st[WEIGHT_SCALE] = 1;
    st[SINCE_ACTIVE] = Infinity;
    this.active = 0;
  }

  get penalty(): number {
    return this.state[PENALTY]!;
  }
  get weightScale(): number {
    return this.state[WEIGHT_SCALE]!;
  }
  get heldPeak(): number {
    return this.state[HELD_PEAK]!;
  }
  /** Fraction of the processed samples during which the constraint acted (since reset). */
  get activeFraction(): number {
    return this.state[SAMPLES]! > 0 ? this.state[ACTIVE_SAMPLES]! / this.state[SAMPLES]! : 0;
  }

  /**
   * Call once per block after the controller has written its output. Sets `weightScale`, the factor
   * g ≤ 1 by which the controller must scale its weights (1: leave them); with 'rescale' the block
   * `out` has already been scaled to the constraint. Updates the effort penalty for the next block.
   * (A field rather than a return value: a double returned from a call the JIT does not inline is
   * boxed, a few bytes of garbage per block.)
   */
  /**
   * Scale a controller's weights (time taps or spectra) by the factor the last block asked for; nothing
   * when it asked for none. Reads the factor here, so no double crosses a call.
   */
  scaleWeights(w: Float32Array | Float64Array): void {
    const g = this.state[WEIGHT_SCALE]!;
    if (!(g < 1)) return;
    for (let i = 0; i < w.length; i++) w[i] = w[i]! * g;
  }

  afterBlock(out: Float32Array, n: number): void {
    let peak = 0;
    for (let i = 0; i < n; i++) {
      const v = out[i]!;
      const a = v < 0 ? -v : v;
      if (a > peak) peak = a;
    }
    const st = this.state;
    const decay = Math.exp(-n / this.holdSamples);
    const held = st[HELD_PEAK]! * decay;
    st[HELD_PEAK] = peak > held ? peak : held;
    const A = this.level;
    let g = 1;
    let acted = false;
    if (this.method === 'rescale') {
      if (peak > A) {
        const h = A / peak;
        for (let i = 0; i < n; i++) out[i] = out[i]! * h;
        g = Math.pow(h, WEIGHT_SHARE);
        acted = true;
      }
    } else if (this.method === 'effort') {
      let p = st[PENALTY]!;
      if (st[HELD_PEAK]! > A) {
        p = p < PENALTY_MIN ? PENALTY_MIN : p * Math.exp(this.riseRate * n);
        if (p > PENALTY_MAX) p = PENALTY_MAX;
      } else if (st[HELD_PEAK]! < RELAX_BELOW * A && p > 0) {
        p *= Math.exp(-this.fallRate * n);
        if (p < PENALTY_MIN) p = 0;
      }
      st[PENALTY] = p;
      acted = p > 0;
    }
    st[SINCE_ACTIVE] = acted ? 0 : st[SINCE_ACTIVE]! + n;
    this.active = st[SINCE_ACTIVE]! < this.activeHoldSamples ? 1 : 0;
    st[SAMPLES] = st[SAMPLES]! + n;
    if (acted) st[ACTIVE_SAMPLES] = st[ACTIVE_SAMPLES]! + n;
    st[WEIGHT_SCALE] = g;
  }
}
