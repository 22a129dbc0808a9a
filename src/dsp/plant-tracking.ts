import type { Controller } from './controller.ts';
import type { OutputConstraint } from './output-constraint.ts';
import { copyPrefix, replacePadded } from './copy.ts';
import { Random } from './random.ts';
import { dbfsToPower } from './units.ts';

/**
 * A broadband FxLMS-family controller wrapped with the three answers to a plant that changes or has
 * too few microphones. Each is optional; the wrapped controller is unchanged.
 *
 * 1. Online secondary-path modelling with an auxiliary noise probe (Eriksson & Allie, "Use of random
 *    noise for on-line transducer modeling in an adaptive active attenuation system", J. Acoust. Soc.
 *    Am. 85(2), 1989). A white probe v is added to the control output (it passes the engine's
 *    high-pass, ramp and limiter like everything else), and an NLMS model ŝ of the path from the
 *    controller's output to the error microphone is adapted on the modelling error
 *
 *      g(n) = e(n) − Σ_k ŝ_k·v(n − k),      ŝ ← ŝ + μ_s · g(n) · v(n) / (δ + ‖v(n)‖²)
 *
 *    (v(n) the vector of the M latest probe samples). v is independent of the disturbance and of the
 *    control output, so the estimate is unbiased whatever else the error mic hears. The controller
 *    adapts on g (the error with the modelled probe removed) and takes ŝ over as its model every
 *    `modelUpdateMs`; only its adaptation depends on the model, so the swap makes no click.
 *
 *    Probe level (ours): with `variablePower` the probe's level at the error mic, ‖ŝ‖²·σ_v², is held
 *    10 dB below the smoothed power of g (the residual the probe is measured against), within
 *    [noiseDbfs − 60 dB, noiseDbfs]. The learning SNR then stays at −10 dB whatever the residual, so
 *    the model converges at the same rate converged or not, and the probe adds 10·log10(1.1) ≈ 0.4 dB
 *    to a converged residual. After a plant change the residual rises and the probe with it. Letting
 *    the probe follow the residual is the idea of the variable-power schemes in the literature; this
 *    particular rule is ours.
 *
 * 2. Feedback neutralisation (Kuo & Morgan, *Active Noise Control Systems*, Wiley, 1996): a model f̂ of
 *    the loudspeaker → reference-microphone path filters the controller's own past output u = y + v,
 *    and the result is subtracted from the reference before the controller sees it:
 *
 *      x'(n) = x(n) − Σ_k f̂_k · u(n − k)
 *
 * 3. Internal model control, one microphone (Elliott & Sutton, "Performance of feedforward and
 *    feedback systems for active control", IEEE Trans. Speech Audio Process. 4(3), 1996): the
 *    reference is regenerated from the error microphone, x̂(n) = e(n) − Σ_k ŝ_k · u(n − k); with a
 *    perfect model x̂ = d and the loop is a feedforward controller whose reference is the disturbance
 *    itself, one loop delay late: it cancels what is predictable across the secondary path's delay.
 *
 * Causality: u of the current block is not known before the wrapped controller has run, so (2) and (3)
 * use only outputs of earlier blocks (model taps shorter than the block in use are skipped). The true
 * paths are at least one block long (the audio I/O latency), so nothing is lost on a real plant.
 *
 * No allocation in `process`.
 */
export interface OnlineModelSettings {
  method: 'auxiliary-noise';
  /** Probe RMS level, dBFS (AES17); with variablePower, the highest level. Default −30. */
  noiseDbfs?: number | undefined;
  /** NLMS step size of the online model, 0 < μ ≤ 1. Default 0.01. */
  stepSize?: number | undefined;
  /** Online model length (taps). Default: the given model's length. */
  taps?: number | undefined;
  /** Probe level follows the residual error. Default true. */
  variablePower?: boolean | undefined;
}

export interface PlantTrackingConfig {
  sampleRate: number;
  maxBlockSize: number;
  /** Regenerate the reference from the error microphone (internal model control). */
  imc: boolean;
  /** Online modelling, or null. */
  online: OnlineModelSettings | null;
  /** Loudspeaker → reference-mic model for feedback neutralisation, or null. */
  feedbackPathModel: Float32Array | null;
  /** Seed of the probe's noise generator. Default 0x70726f62. */
  seed?: number;
  /** Length of the filter that removes the reference-predictable residual from the modelling error (default 2 × model taps). */
  crossTaps?: number;
  /** How often the controller takes the online model over, ms. Default 50. */
  modelUpdateMs?: number;
}

/** What the wrapper needs of the wrapped controller beyond the Controller contract. */
export type TrackedController = Controller & { readonly stepSize?: number };

export const ONLINE_DEFAULTS = { noiseDbfs: -30, stepSize: 0.01, variablePower: true } as const;
/** Probe level at the error mic relative to the residual, with variablePower (dB). */
export const PROBE_BELOW_RESIDUAL_DB = 10;
/** NLMS step of the cross-update filter h. */
const CROSS_STEP = 0.01;
const BELOW = Math.pow(10, PROBE_BELOW_RESIDUAL_DB / 10);
/** Range of the variable probe below noiseDbfs (dB). */
export const PROBE_RANGE_DB = 60;
/** Averaging time of the model handed to the controller (s). */
export const MODEL_AVERAGE_S = 0.5;
/** Smoothing of the residual power the probe follows (s). */
const RESIDUAL_TC_S = 0.1;

/** A ring of past samples, mirrored so a window never wraps: value at time t is at (t mod H) and (t mod H) + H. */
class History {
  readonly buf: Float32Array;
  readonly H: number;
  constructor(taps: number, maxBlock: number) {
    this.H = taps + maxBlock + 1;
    this.buf = new Float32Array(2 * this.H);
  }
  reset(): void {
    this.buf.fill(0);
  }
  /** Scale the n samples of times t0 … t0 + n − 1 (both copies) by gain[0] (a typed array: a double argument would be boxed). */
  scale(t0: number, n: number, gain: Float64Array): void {
    const g = gain[0]!;
    const H = this.H;
    const b = this.buf;
    let p = t0 % H;
    for (let i = 0; i < n; i++) {
      b[p] = b[p]! * g;
      b[p + H] = b[p + H]! * g;
      if (++p === H) p = 0;
    }
  }
  /** Write the n samples of times t0 … t0 + n − 1. */
  write(t0: number, x: Float32Array, n: number): void {
    const H = this.H;
    const b = this.buf;
    let p = t0 % H;
    for (let i = 0; i < n; i++) {
      const v = x[i]!;
      b[p] = v;
      b[p + H] = v;
      if (++p === H) p = 0;
    }
  }
}

export class PlantTrackingController implements Controller {
  readonly kind: string;
  readonly inner: TrackedController;
  readonly imc: boolean;
  /** The online model ŝ (float64 for slow adaptation), or null without online modelling. */
  readonly onlineModel: Float64Array | null;
  /** The model in use for IMC regeneration (the online one when it runs). */
  private readonly fixedModel: Float32Array;
  readonly feedbackModel: Float32Array | null;
  /** Probe RMS of the last block (linear, before the output stage) and its ceiling. */
  probeRms = 0;
  readonly probeMaxRms: number;
  readonly probeMinRms: number;
  /** Smoothed power of the modelling error g (what the probe is measured against). */
  residualPower = 0;
  private readonly mu: number;
  private readonly variablePower: boolean;
  private readonly rng: Random;
  private readonly probe: Float32Array;
  private readonly probeHist: History | null;
  private readonly outHist: History | null;
  private readonly xIn: Float32Array;
  private readonly weights: Float32Array;
  private readonly eIn: Float32Array;
  private readonly y: Float32Array;
  private readonly modelOut: Float32Array;
  private readonly updateEvery: number;
  private readonly averageCoef: number;
  private readonly residualCoef: number;
  private sinceUpdate = 0;
  /** ‖ŝ − ŝ_in_use‖² / ‖ŝ_in_use‖² at the last model update. */
  modelDistance = 0;
  /** True while the controller's adaptation is held because the plant is changing. */
  holding = false;
  private readonly holdAbove: number;
  /** Cross-update filter h predicting the residual from the reference (none with IMC). */
  private readonly crossWeights: Float64Array;
  private readonly crossHist: History | null;
  private t = 0;
  private _adapt = true;

  constructor(inner: TrackedController, initialModel: Float32Array, config: PlantTrackingConfig) {
    const { maxBlockSize, sampleRate } = config;
    this.inner = inner;
    this.imc = config.imc;
    this.kind = config.imc ? 'imc' : inner.kind;
    const on = config.online;
    const M = on?.taps ?? initialModel.length;
    this.fixedModel = new Float32Array(M);
    replacePadded(this.fixedModel, initialModel, M);
    this.onlineModel = on ? Float64Array.from(this.fixedModel) : null;
    this.feedbackModel = config.feedbackPathModel ? Float32Array.from(config.feedbackPathModel) : null;
    this.mu = on?.stepSize ?? ONLINE_DEFAULTS.stepSize;
    this.variablePower = on?.variablePower ?? ONLINE_DEFAULTS.variablePower;
    this.probeMaxRms = on ? Math.sqrt(dbfsToPower(on.noiseDbfs ?? ONLINE_DEFAULTS.noiseDbfs)) : 0;
    this.probeMinRms = this.probeMaxRms * Math.pow(10, -PROBE_RANGE_DB / 20);
    this.probeRms = this.probeMaxRms;
    this.rng = new Random((config.seed ?? 0x70726f62) >>> 0);
    this.probe = new Float32Array(maxBlockSize);
    this.probeHist = on ? new History(M, maxBlockSize) : null;
    const LH = on && !config.imc ? (config.crossTaps ?? 2 * M) : 0;
    this.crossWeights = new Float64Array(LH);
    this.crossHist = LH > 0 ? new History(LH, maxBlockSize) : null;
    const outTaps = Math.max(config.imc ? M : 0, this.feedbackModel ? this.feedbackModel.length : 0);
    this.outHist = outTaps > 0 ? new History(outTaps, maxBlockSize) : null;
    this.xIn = new Float32Array(maxBlockSize);
    this.weights = new Float32Array((inner as { taps?: number }).taps ?? 65536);
    this.eIn = new Float32Array(maxBlockSize);
    this.y = new Float32Array(maxBlockSize);
    this.modelOut = Float32Array.from(this.fixedModel);
    this.updateEvery = Math.max(1, Math.round(((config.modelUpdateMs ?? 50) / 1000) * sampleRate));
    this.averageCoef = Math.min(1, this.updateEvery / (MODEL_AVERAGE_S * sampleRate));
    // 3 dB above the NLMS estimate's expected misalignment, μ/(2 − μ)·(residual / probe at the mic)
    this.holdAbove = Math.max(0.05, 2 * (this.mu / (2 - this.mu)) * BELOW);
    this.residualCoef = Math.exp(-1 / (RESIDUAL_TC_S * sampleRate));
    if (this.onlineModel) inner.setSecondaryPathModel?.(this.fixedModel);
  }

  get adapt(): boolean {
    return this._adapt;
  }
  /** Freezing (by the user, the guard or the limiter) freezes the controller and the online model alike. */
  set adapt(on: boolean) {
    this._adapt = on;
    this.inner.adapt = on && !this.holding;
  }
  get stepSize(): number | undefined {
    return this.inner.stepSize;
  }

  /** Clears the controller's weights and the delay lines; the online model keeps what it has learnt. */
  reset(): void {
    this.inner.reset();
    this.probeHist?.reset();
    this.crossHist?.reset();
    this.outHist?.reset();
    this.t = 0;
  }
  /** ‖w‖² computed here from a copy: a double returned through a second, non-inlined call would be boxed every block. */
  weightNormSquared(): number {
    const w = this.weights;
    const n = this.inner.copyWeights(w);
    let s = 0;
    for (let k = 0; k < n; k++) s += w[k]! * w[k]!;
    return s;
  }
  copyWeights(out: Float32Array): number {
    return this.inner.copyWeights(out);
  }
  setStepSize(mu: number): void {
    this.inner.setStepSize(mu);
  }
  setLeakage(gamma: number): void {
    this.inner.setLeakage(gamma);
  }
  /** The output cap goes to the wrapped controller, whose output constraint keeps within it (src/dsp/output-constraint.ts). */
  setOutputCap(cap: number): void {
    this.inner.setOutputCap?.(cap);
  }
  get outputConstraint(): OutputConstraint | undefined {
    return this.inner.outputConstraint;
  }
  /** A new model from outside (a new identification, a fault): the online model restarts from it. */
  setSecondaryPathModel(taps: ArrayLike<number>): void {
    replacePadded(this.fixedModel, taps, this.fixedModel.length);
    if (this.onlineModel) {
      replacePadded(this.onlineModel, taps, this.onlineModel.length);
      replacePadded(this.modelOut, taps, this.modelOut.length);
    }
    this.inner.setSecondaryPathModel?.(this.fixedModel);
  }
  /** The model the controller uses now (with online modelling, the averaged online estimate); returns the count written. */
  copySecondaryPathModel(out: Float32Array): number {
    return copyPrefix(this.onlineModel ? this.modelOut : this.fixedModel, out, this.fixedModel.length);
  }

  /**
   * The gain the engine's output stage applied to the last block (start/stop ramp × limiter gain),
   * set by the engine after each block: the loudspeaker played this much of what the models assume,
   * so the stored output and probe histories are scaled by it before use.
   */
  readonly stageGain = new Float64Array([1]);
  private lastN = 0;
  private settling = 0;

  process(ref: Float32Array, err: Float32Array, out: Float32Array, n: number): void {
    const t0 = this.t;
    const sg = this.stageGain[0]!;
    if ((sg > 1.000001 || sg < 0.999999) && this.lastN > 0) {
      this.outHist?.scale(t0 - this.lastN, this.lastN, this.stageGain);
      this.probeHist?.scale(t0 - this.lastN, this.lastN, this.stageGain);
    }
    // the model learns only from a probe played in full: a ramp or a limiter leaves it too faint
    // for the normalised step, whose noise would then swamp the estimate
    if (sg < 0.99) this.settling = (this.onlineModel?.length ?? 0) + this.lastN;
    else if (this.settling > 0) this.settling -= this.lastN;
    this.lastN = n;
    const e = this.eIn;
    const s = this.onlineModel;
    const ph = this.probeHist;
    // 1. The probe for this block and the error with the modelled probe removed.
    const x = this.xIn;
    if (!this.imc) {
      // 2. The reference the controller sees (feedback neutralised or as heard).
      if (this.feedbackModel) this.subtractPastOutput(ref, this.feedbackModel, x, n, t0);
      else for (let i = 0; i < n; i++) x[i] = ref[i]!;
    }
    if (s && ph) {
      // unit noise, scaled here: a double passed to a call the JIT does not inline is boxed
      const v = this.probe;
      this.rng.fillGaussianN(v, n);
      const rms = this.probeRms;
      for (let i = 0; i < n; i++) v[i] = v[i]! * rms;
      ph.write(t0, this.probe, n);
      this.adaptModel(err, n, t0);
    } else {
      for (let i = 0; i < n; i++) e[i] = err[i]!;
    }
    // 2'. With IMC the reference is regenerated from the error mic.
    // (the model in use: with online modelling, the averaged estimate the controller also has)
    if (this.imc) this.subtractPastOutput(e, s ? this.modelOut : this.fixedModel, x, n, t0);
    // 3. The controller, then the probe on top of its output.
    const y = this.y;
    this.inner.process(x, e, y, n);
    if (ph) {
      const v = this.probe;
      for (let i = 0; i < n; i++) out[i] = y[i]! + v[i]!;
    } else {
      for (let i = 0; i < n; i++) out[i] = y[i]!;
    }
    if (this.outHist) this.outHist.write(t0, out, n);
    this.t = t0 + n;
  }

  /** NLMS on the probe: fills eIn with g = e − ŝ*v, adapts ŝ (unless frozen), sets the next block's probe level. */
  private adaptModel(err: Float32Array, n: number, t0: number): void {
    const s = this.onlineModel!;
    const ph = this.probeHist!;
    const b = ph.buf;
    const H = ph.H;
    const M = s.length;
    const g = this.eIn;
    const adapt = this._adapt && this.settling <= 0;
    // step scaled by the probe's SNR at the mic: full step when the probe is within
    // PROBE_BELOW_RESIDUAL_DB of the residual, proportionally less below (the probe is capped at
    // noiseDbfs), so a loud residual slows the model instead of making it noisy
    let s2 = 0;
    for (let k = 0; k < M; k++) s2 += s[k]! * s[k]!;
    const probeAtMic = (s2 > 1e-6 ? s2 : 1e-6) * this.probeRms * this.probeRms;
    const snrScale = this.residualPower > 0 ? Math.min(1, (BELOW * probeAtMic) / this.residualPower) : 1;
    const mu = this.mu * snrScale;
    const a = this.residualCoef;
    let pr = this.residualPower;
    const cx = this.crossHist;
    if (cx) cx.write(t0, this.xIn, n);
    const xb = cx ? cx.buf : this.probe;
    const HX = cx ? cx.H : 1;
    const hw = this.crossWeights;
    const LH = hw.length;
    for (let i = 0; i < n; i++) {
      // window of v(t), v(t − 1), … v(t − M + 1), read backwards from the newest
      const newest = (t0 + i) % H + H;
      let acc = 0, vv = 0;
      for (let k = 0; k < M; k++) {
        const v = b[newest - k]!;
        acc += s[k]! * v;
        vv += v * v;
      }
      const gi = err[i]! - acc;
      g[i] = gi;
      // the part of g the reference predicts (disturbance and control output), removed before the
      // model sees it (cross-updated modelling: Zhang, Lan & Ser, IEEE Trans. Speech Audio Process.
      // 9(5), 2001, from memory); without it a tonal residual lands in the model at the tone
      let gc = gi;
      if (cx) {
        const xnew = (t0 + i) % HX + HX;
        let hx = 0, xx = 0;
        for (let k = 0; k < LH; k++) {
          const xv = xb[xnew - k]!;
          hx += hw[k]! * xv;
          xx += xv * xv;
        }
        gc = gi - hx;
        if (adapt && xx > 0) {
          const ch = (CROSS_STEP * gc) / (xx + 1e-9);
          for (let k = 0; k < LH; k++) hw[k] = hw[k]! + ch * xb[xnew - k]!;
        }
      }
      pr = a * pr + (1 - a) * gc * gc;
      if (adapt && vv > 0) {
        const c = (mu * gc) / (vv + 1e-12);
        for (let k = 0; k < M; k++) s[k] = s[k]! + c * b[newest - k]!;
      }
    }
    this.residualPower = pr === pr ? pr : 0;
    if (this.variablePower) {
      const want = Math.sqrt(this.residualPower / ((s2 > 1e-6 ? s2 : 1e-6) * BELOW));
      this.probeRms = want > this.probeMaxRms ? this.probeMaxRms : want < this.probeMinRms ? this.probeMinRms : want;
    }
    this.sinceUpdate += n;
    if (adapt && this.sinceUpdate >= this.updateEvery) {
      this.sinceUpdate = 0;
      // the controller takes an average of the NLMS estimate over ~MODEL_AVERAGE_S: it tracks a change
      // with that lag, and its noise (the estimate's fluctuation about the path) is several dB lower
      const m = this.modelOut;
      const b2 = this.averageCoef;
      let dist = 0, mm = 0;
      for (let k = 0; k < M; k++) {
        const mk = m[k]! + b2 * (s[k]! - m[k]!);
        m[k] = mk;
        dist += (s[k]! - mk) * (s[k]! - mk);
        mm += mk * mk;
      }
      this.inner.setSecondaryPathModel?.(m);
      // while the estimate runs away from the model in use, the plant is changing: hold the
      // controller's weights (they are right for the old plant, and adapting them with a model more
      // than 90° off would diverge) until the model in use has caught up
      this.modelDistance = mm > 0 ? dist / mm : 0;
      this.holding = this.modelDistance > this.holdAbove;
      this.inner.adapt = this._adapt && !this.holding;
    }
  }

  /** dst(i) = src(i) − Σ_{k > i} model_k · u(t0 + i − k): the model applied to outputs of earlier blocks only. */
  private subtractPastOutput(src: Float32Array, model: Float32Array, dst: Float32Array, n: number, t0: number): void {
    const oh = this.outHist!;
    const b = oh.buf;
    const H = oh.H;
    const K = model.length;
    for (let i = 0; i < n; i++) {
      const newest = (t0 + i) % H + H;
      let acc = 0;
      for (let k = i + 1; k < K; k++) acc += model[k]! * b[newest - k]!;
      dst[i] = src[i]! - acc;
    }
  }
}

/** Normalised misalignment 10·log10(‖s − ŝ‖² / ‖s‖²) of a model against a path, both from tap 0 (dB). */
export function modelMisalignmentDb(model: ArrayLike<number>, path: ArrayLike<number>): number {
  const L = Math.max(model.length, path.length);
  let num = 0, den = 0;
  for (let k = 0; k < L; k++) {
    const p = k < path.length ? path[k]! : 0;
    const m = k < model.length ? model[k]! : 0;
    num += (p - m) * (p - m);
    den += p * p;
  }
  return 10 * Math.log10(num / den);
}
