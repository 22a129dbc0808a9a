/**
 * Exponential (logarithmic) sine sweep, played block by block (Farina, "Simultaneous measurement of impulse
 * response and distortion with a swept-sine technique", AES 108th Convention, preprint 5093, 2000):
 *
 *   x(t) = A · g(t) · sin[(2π·f1·T / R)·(e^{t·R/T} − 1)],   R = ln(f2/f1),   0 ≤ t < T,
 *
 * whose instantaneous frequency f1·e^{t·R/T} rises from f1 to f2 in T seconds, spending equal time per octave.
 * g(t) is a raised-cosine (half-Hann) fade-in over the first `fadeInS` seconds and fade-out over the last
 * `fadeOutS`, which keeps the start and stop from splattering energy outside [f1, f2].
 *
 * Because every frequency N·f(t) is reached by the sweep itself T·ln N / R seconds later, the N-th harmonic of a
 * nonlinear system's response lines up, after deconvolution, T·ln N / R seconds before the linear response.
 *
 * The block `process` allocates nothing and never throws; after the sweep it writes silence, so the recording
 * can continue through the system's decay (the tail).
 */

export interface SweepOptions {
  /** Sample rate in Hz (> 0). */
  sampleRate: number;
  /** Start frequency f1 in Hz, 0 < f1 < f2. */
  startHz: number;
  /** End frequency f2 in Hz, f1 < f2 ≤ sampleRate/2. */
  endHz: number;
  /** Sweep duration T in seconds (> 0; at least 2 samples). */
  durationS: number;
  /** Peak amplitude A relative to full scale, in (0, 1] (default 0.5, about −6 dBFS peak, −6 dBFS RMS). */
  amplitude?: number;
  /** Fade-in length in seconds, 0 ≤ fadeInS (default 5 % of T). */
  fadeInS?: number;
  /** Fade-out length in seconds, 0 ≤ fadeOutS, fadeInS + fadeOutS ≤ T (default 1 % of T). */
  fadeOutS?: number;
}

export class ExponentialSweep {
  readonly sampleRate: number;
  readonly startHz: number;
  readonly endHz: number;
  readonly durationS: number;
  readonly amplitude: number;
  /** R = ln(f2/f1). */
  readonly rate: number;
  /** Number of sweep samples, round(T·fs). */
  readonly lengthSamples: number;
  private readonly fadeInSamples: number;
  private readonly fadeOutSamples: number;
  private readonly phaseScale: number;
  private readonly expScale: number;
  private position = 0;

  constructor(options: SweepOptions) {
    const { sampleRate, startHz, endHz, durationS } = options;
    if (!Number.isFinite(sampleRate) || sampleRate <= 0) {
      throw new RangeError(`sampleRate must be a finite number of Hz > 0, got ${sampleRate}`);
    }
    if (!Number.isFinite(startHz) || startHz <= 0) throw new RangeError(`startHz must be > 0 Hz, got ${startHz}`);
    if (!Number.isFinite(endHz) || endHz <= startHz || endHz > sampleRate / 2) {
      throw new RangeError(`endHz must be in (${startHz}, ${sampleRate / 2}] Hz (above startHz, at most half the sample rate), got ${endHz}`);
    }
    if (!Number.isFinite(durationS) || durationS * sampleRate < 2) {
      throw new RangeError(`durationS must be at least 2 samples (${2 / sampleRate} s), got ${durationS}`);
    }
    const amplitude = options.amplitude ?? 0.5;
    if (!Number.isFinite(amplitude) || amplitude <= 0 || amplitude > 1) {
      throw new RangeError(`amplitude must be in (0, 1] (peak relative to full scale), got ${amplitude}`);
    }
    const fadeInS = options.fadeInS ?? 0.05 * durationS;
    const fadeOutS = options.fadeOutS ?? 0.01 * durationS;
    if (!Number.isFinite(fadeInS) || fadeInS < 0) throw new RangeError(`fadeInS must be ≥ 0 s, got ${fadeInS}`);
    if (!Number.isFinite(fadeOutS) || fadeOutS < 0) throw new RangeError(`fadeOutS must be ≥ 0 s, got ${fadeOutS}`);
    if (fadeInS + fadeOutS > durationS) {
      throw new RangeError(`fadeInS + fadeOutS must not exceed durationS (${durationS} s), got ${fadeInS + fadeOutS} s`);
    }
    this.sampleRate = sampleRate;
    this.startHz = startHz;
    this.endHz = endHz;
    this.durationS = durationS;
    this.amplitude = amplitude;
    this.rate = Math.log(endHz / startHz);
    this.lengthSamples = Math.round(durationS * sampleRate);
    this.fadeInSamples = Math.round(fadeInS * sampleRate);
    this.fadeOutSamples = Math.round(fadeOutS * sampleRate);
    this.phaseScale = (2 * Math.PI * startHz * durationS) / this.rate;
    this.expScale = this.rate / (durationS * sampleRate);
  }

  /** Rewind to the start of the sweep. */
  reset(): void {
    this.position = 0;
  }

  /** Samples written so far (sweep and silence after it). */
  get samplesWritten(): number {
    return this.position;
  }

  /** True once every sweep sample has been written. */
  get done(): boolean {
    return this.position >= this.lengthSamples;
  }

  /** Fraction of the sweep written, 0..1. */
  get progress(): number {
    return Math.min(1, this.position / this.lengthSamples);
  }

  /** Sweep sample n (0-based); 0 outside [0, lengthSamples). */
  sampleAt(n: number): number {
    if (n < 0 || n >= this.lengthSamples) return 0;
    const phase = this.phaseScale * (Math.exp(n * this.expScale) - 1);
    let gain = this.amplitude;
    if (n < this.fadeInSamples) gain *= 0.5 * (1 - Math.cos((Math.PI * n) / this.fadeInSamples));
    const fromEnd = this.lengthSamples - 1 - n;
    if (fromEnd < this.fadeOutSamples) gain *= 0.5 * (1 - Math.cos((Math.PI * fromEnd) / this.fadeOutSamples));
    return gain * Math.sin(phase);
  }

  /** Write the next n samples into `out` (silence after the sweep's end). */
  process(out: Float32Array | Float64Array, n: number = out.length): void {
    for (let i = 0; i < n; i++) out[i] = this.sampleAt(this.position + i);
    this.position += n;
  }

  /** Instantaneous frequency f1·e^{t·R/T} in Hz at time t seconds from the start. */
  instantaneousFrequencyHz(timeS: number): number {
    return this.startHz * Math.exp((timeS * this.rate) / this.durationS);
  }

  /** How much earlier than the linear response harmonic N's response arrives: T·ln N / R seconds (Farina 2000). */
  harmonicAdvanceS(order: number): number {
    return harmonicAdvanceS(order, this.durationS, this.startHz, this.endHz);
  }
}

/** T·ln N / R in seconds: the advance of the N-th harmonic's response for a sweep f1 → f2 lasting T (Farina 2000). */
export function harmonicAdvanceS(order: number, durationS: number, startHz: number, endHz: number): number {
  if (!Number.isInteger(order) || order < 1) throw new RangeError(`order must be a whole number ≥ 1, got ${order}`);
  return (durationS * Math.log(order)) / Math.log(endHz / startHz);
}

/** The whole sweep as one array (for offline use and for building the inverse filter). */
export function exponentialSweepSignal(options: SweepOptions): Float64Array {
  const sweep = new ExponentialSweep(options);
  const out = new Float64Array(sweep.lengthSamples);
  sweep.process(out);
  return out;
}
