/**
 * Secondary-path identification with an injected noise probe and an NLMS adaptive FIR.
 *
 * The identifier makes a probe signal x (white, or pink by Paul Kellet's filter) at a set AES17 RMS level and
 * for a set duration; the host plays it through the output limiter into the loudspeaker and hands back the
 * error-microphone samples d of the same instants. An FIR model ŵ of L taps learns to predict d from the probe
 * history by normalised LMS (Nagumo & Noda 1967; Haykin, Adaptive Filter Theory, from memory):
 *
 *   ŷ(n) = Σ_k ŵ_k·x(n − k),   e(n) = d(n) − ŷ(n),
 *   ŵ_k ← ŵ_k + μ̃·e(n)·x(n − k) / (δ + ‖x(n)‖²),   ‖x(n)‖² = Σ_{k<L} x(n − k)²,
 *
 * μ̃ ∈ (0, 2) the normalised step (stable for any probe level; steady-state misadjustment about μ̃/(2 − μ̃),
 * Slock 1993, from memory) and δ > 0 the regularisation that keeps the step bounded while the history fills.
 * The model must span the path's bulk delay plus its decay: L ≥ delay + response length.
 *
 * Use per block (n ≤ maxBlockSize samples): `nextProbe(out, n)` first, then `observe(err, n)` with the microphone
 * samples taken at the same n instants. Nothing is allocated and nothing is thrown after construction.
 *
 * Measurement SNR (ours): over the last quarter of the run, 10·log10(Σŷ² / Σe²), the modelled part of the
 * microphone signal against the part the model does not explain (sensor noise, other sound, misalignment).
 */
import { dbfsToPower } from './units.ts';
import { Random } from './random.ts';

export type ProbeColor = 'white' | 'pink';

export interface NoiseIdentifierOptions {
  /** Sample rate in Hz (> 0). */
  sampleRate: number;
  /** Number of model taps L (1 … 65536); must cover bulk delay + impulse response. */
  modelLength: number;
  /** Largest block n passed to nextProbe/observe (1 … 65536). */
  maxBlockSize: number;
  /** Probe level, AES17 RMS in dBFS (full-scale sine = 0 dBFS), from −120 to 0. */
  levelDbfs: number;
  /** How long to probe and adapt, in seconds (> 0). */
  durationS: number;
  /** Probe spectrum (default 'white'). Pink concentrates power at low frequencies but converges more slowly. */
  color?: ProbeColor;
  /** Normalised step size μ̃ in (0, 2) (default 0.05: misadjustment ≈ 2.6 %). */
  stepSize?: number;
  /** Regularisation δ ≥ 0 added to ‖x‖² (default 0.01·L·σ², σ² the probe's mean square). */
  regularization?: number;
  /** Seed of the probe's random generator (default 1). */
  seed?: number;
}

/** Pink noise by Paul Kellet's refined filter (music-dsp mailing list, 1999; coefficients from memory). */
class KelletPink {
  private b0 = 0;
  private b1 = 0;
  private b2 = 0;
  private b3 = 0;
  private b4 = 0;
  private b5 = 0;
  private b6 = 0;

  reset(): void {
    this.b0 = this.b1 = this.b2 = this.b3 = this.b4 = this.b5 = this.b6 = 0;
  }

  next(white: number): number {
    this.b0 = 0.99886 * this.b0 + white * 0.0555179;
    this.b1 = 0.99332 * this.b1 + white * 0.0750759;
    this.b2 = 0.969 * this.b2 + white * 0.153852;
    this.b3 = 0.8665 * this.b3 + white * 0.3104856;
    this.b4 = 0.55 * this.b4 + white * 0.5329522;
    this.b5 = -0.7616 * this.b5 - white * 0.016898;
    const pink = this.b0 + this.b1 + this.b2 + this.b3 + this.b4 + this.b5 + this.b6 + white * 0.5362;
    this.b6 = white * 0.115926;
    return pink;
  }

  /** Output variance for unit-variance white input: Σ h[n]² over the impulse response (run once, in the constructor). */
  static powerGain(): number {
    const f = new KelletPink();
    let sum = 0;
    let h = f.next(1);
    sum += h * h;
    // The slowest pole (0.99886) decays below 1e-12 of its start within 25 000 samples.
    for (let n = 1; n < 25000; n++) {
      h = f.next(0);
      sum += h * h;
    }
    return sum;
  }
}

function check(ok: boolean, message: string): void {
  if (!ok) throw new RangeError(message);
}

export class NoiseProbeIdentifier {
  readonly sampleRate: number;
  readonly modelLength: number;
  readonly maxBlockSize: number;
  readonly levelDbfs: number;
  readonly color: ProbeColor;
  readonly stepSize: number;
  readonly regularization: number;
  /** Total number of probe samples (round(durationS·sampleRate)). */
  readonly totalSamples: number;

  private readonly seed: number;
  private readonly random: Random;
  private readonly pink = new KelletPink();
  /** White-noise RMS that gives the requested probe RMS after the colouring filter. */
  private readonly whiteRms: number;
  private readonly weights: Float64Array;
  /**
   * Probe history, linear: index L + i holds the probe of sample i of the current block, indices below hold the
   * L previous samples (index i is the one that leaves the window when sample i enters).
   */
  private readonly history: Float64Array;
  /** Length of the last probe block (where its samples sit in `history`). */
  private pending = 0;
  /** Samples of the last probe block not yet observed (observe twice for one block adapts once). */
  private unobserved = 0;
  private generated = 0;
  private observed = 0;
  private readonly tailStart: number;
  private tailModelled = 0;
  private tailResidual = 0;
  private tailMic = 0;
  private tailCount = 0;

  constructor(options: NoiseIdentifierOptions) {
    const { sampleRate, modelLength, maxBlockSize, levelDbfs, durationS } = options;
    check(Number.isFinite(sampleRate) && sampleRate > 0, `sampleRate must be a finite number of Hz > 0, got ${sampleRate}`);
    check(Number.isInteger(modelLength) && modelLength >= 1 && modelLength <= 65536,
      `modelLength must be a whole number of taps from 1 to 65536, got ${modelLength}`);
    check(Number.isInteger(maxBlockSize) && maxBlockSize >= 1 && maxBlockSize <= 65536,
      `maxBlockSize must be a whole number of samples from 1 to 65536, got ${maxBlockSize}`);
    check(Number.isFinite(levelDbfs) && levelDbfs >= -120 && levelDbfs <= 0,
      `levelDbfs must be from −120 to 0 dBFS, got ${levelDbfs}`);
    check(Number.isFinite(durationS) && durationS > 0 && Math.round(durationS * sampleRate) >= 1,
      `durationS must be long enough for one sample (> 0 s), got ${durationS}`);
    const color = options.color ?? 'white';
    check(color === 'white' || color === 'pink', `color must be 'white' or 'pink', got ${String(color)}`);
    const stepSize = options.stepSize ?? 0.05;
    check(Number.isFinite(stepSize) && stepSize > 0 && stepSize < 2, `stepSize must be in (0, 2), got ${stepSize}`);
    const power = dbfsToPower(levelDbfs);
    const regularization = options.regularization ?? 0.01 * modelLength * power;
    check(Number.isFinite(regularization) && regularization >= 0, `regularization must be a finite number ≥ 0, got ${regularization}`);
    const seed = options.seed ?? 1;
    check(Number.isInteger(seed), `seed must be a whole number, got ${seed}`);

    this.sampleRate = sampleRate;
    this.modelLength = modelLength;
    this.maxBlockSize = maxBlockSize;
    this.levelDbfs = levelDbfs;
    this.color = color;
    this.stepSize = stepSize;
    // A δ of exactly 0 would divide by zero on an all-zero history; keep a floor far below any real ‖x‖².
    this.regularization = Math.max(regularization, 1e-30);
    this.totalSamples = Math.round(durationS * sampleRate);
    this.tailStart = Math.floor(0.75 * this.totalSamples);
    this.seed = seed;
    this.random = new Random(seed);
    this.whiteRms = Math.sqrt(power / (color === 'pink' ? KelletPink.powerGain() : 1));
    this.weights = new Float64Array(modelLength);
    this.history = new Float64Array(modelLength + maxBlockSize);
  }

  /** Clear the model, the history and the progress; the probe restarts from the same seed. */
  reset(): void {
    this.weights.fill(0);
    this.history.fill(0);
    this.random.reseed(this.seed);
    this.pink.reset();
    this.pending = 0;
    this.unobserved = 0;
    this.generated = 0;
    this.observed = 0;
    this.tailModelled = this.tailResidual = this.tailMic = 0;
    this.tailCount = 0;
  }

  /** Fraction of the probing done, 0..1 (samples observed / total). */
  get progress(): number {
    return Math.min(1, this.observed / this.totalSamples);
  }

  /** True once every probe sample has been observed; the probe is silent and the model frozen from then on. */
  get done(): boolean {
    return this.observed >= this.totalSamples;
  }

  /**
   * Fill out[0 … n) with the next probe samples (silence once the duration is over). n is clipped to
   * maxBlockSize. Call once per block, before `observe`.
   */
  nextProbe(out: Float32Array | Float64Array, n: number): void {
    const count = Math.max(0, Math.min(n, this.maxBlockSize, out.length));
    const h = this.history;
    const L = this.modelLength;
    // Keep the last L samples of the previous block in front (the regressors of this block reach back L − 1).
    if (this.pending > 0) h.copyWithin(0, this.pending, this.pending + L);
    for (let i = 0; i < count; i++) {
      let v = 0;
      if (this.generated < this.totalSamples) {
        const white = this.whiteRms * this.random.gaussian();
        v = this.color === 'pink' ? this.pink.next(white) : white;
        this.generated++;
      }
      h[L + i] = v;
      out[i] = v;
    }
    this.pending = count;
    this.unobserved = count;
  }

  /**
   * Adapt with the error-microphone samples err[0 … n) taken at the instants of the last `nextProbe` block
   * (n beyond that block's length is ignored).
   */
  observe(err: Float32Array | Float64Array, n: number): void {
    const count = Math.max(0, Math.min(n, this.unobserved, err.length));
    this.unobserved = 0;
    const h = this.history;
    const w = this.weights;
    const L = this.modelLength;
    const mu = this.stepSize;
    const delta = this.regularization;
    // ‖x‖² of the window ending at sample 0 of the block (indices 1 … L), then updated in O(1) per sample.
    let energy = 0;
    for (let j = 1; j <= L; j++) energy += h[j]! * h[j]!;
    for (let i = 0; i < count; i++) {
      const now = L + i;
      if (i > 0) energy += h[now]! * h[now]! - h[i]! * h[i]!;
      if (this.observed >= this.totalSamples) {
        this.observed++;
        continue;
      }
      let y = 0;
      for (let k = 0; k < L; k++) y += w[k]! * h[now - k]!;
      const d = err[i]!;
      const e = d - y;
      const g = (mu * e) / (delta + Math.max(energy, 0));
      for (let k = 0; k < L; k++) w[k] = w[k]! + g * h[now - k]!;
      if (this.observed >= this.tailStart) {
        this.tailModelled += y * y;
        this.tailResidual += e * e;
        this.tailMic += d * d;
        this.tailCount++;
      }
      this.observed++;
    }
  }

  /** A copy of the model taps (allocates: call when done, not per block). */
  modelTaps(): Float64Array {
    return this.weights.slice();
  }

  /** Copy the model taps into `out` (no allocation); returns the number written. */
  copyModel(out: Float32Array | Float64Array): number {
    const n = Math.min(out.length, this.modelLength);
    for (let i = 0; i < n; i++) out[i] = this.weights[i]!;
    return n;
  }

  /**
   * Measurement SNR in dB over the last quarter of the run (see file comment); NaN until that part has begun,
   * +Infinity for a noiseless, perfectly modelled microphone.
   */
  get snrDb(): number {
    if (this.tailCount === 0) return Number.NaN;
    if (this.tailResidual === 0) return this.tailModelled > 0 ? Infinity : Number.NaN;
    return 10 * Math.log10(this.tailModelled / this.tailResidual);
  }

  /** Mean-square microphone and residual power over the last quarter (NaN before it). */
  get tailMicPower(): number {
    return this.tailCount > 0 ? this.tailMic / this.tailCount : Number.NaN;
  }

  get tailResidualPower(): number {
    return this.tailCount > 0 ? this.tailResidual / this.tailCount : Number.NaN;
  }
}
