/**
 * Output limiter: the last stage of every output path. Two guarantees, whatever the input
 * (huge values, ±Infinity, NaN, denormals):
 *  1. every output sample is finite (non-finite input samples become 0 and are counted);
 *  2. no output sample exceeds the ceiling: a hard clamp after the smooth gain catches whatever
 *     the gain computer missed (rounding, zero-latency mode, a ceiling change in flight).
 *
 * Gain computer (look-ahead mode, lookaheadMs > 0 or truePeak):
 *   required gain     r[m] = min(1, c / peak[m])           (peak of the newest sample, or in true-peak
 *                                                            mode of the newest interpolated interval)
 *   hold              h[m] = min(r[m − W + 1 … m])          (sliding minimum, Lemire's monotone deque)
 *   attack            e[m] = mean(h[m − A + 1 … m])         (boxcar: a linear ramp of A samples,
 *                                                            summed in a binary tree, see boxTree)
 *   release           g[m] = e[m] if e[m] ≤ g[m − 1], else g[m − 1] + αr·(e[m] − g[m − 1])
 *   output            y[m] = clamp(g[m] · x[m − D], ±c)     (D = lookaheadSamples)
 * With D ≥ s1 + A − 1 and W = D − s0 + 1, where the r[m] computed at step m must bound the gain of
 * the input samples m − s1 … m − s0, the mean in e covers only hold values that include r[m], so
 * g ≤ r on every sample r[m] speaks for: the smooth gain alone meets the ceiling (the common
 * brick-wall look-ahead construction; sliding minimum: D. Lemire, "Streaming maximum-minimum
 * filter using no more than three comparisons per element", 2006).
 *   sample mode: s0 = s1 = 0 (r speaks for the newest sample).
 *   true-peak mode: r[m] covers the four 4×-interpolated points between x[m − 6] and x[m − 5]
 *   (ITU-R BS.1770-4 Annex 2 interpolator, see true-peak.ts) and those two samples; it is applied
 *   over the whole 12-sample support m − 11 … m of the interpolator (s0 = 0, s1 = 11), so the
 *   interpolated output sees a gain ≤ r on every tap. Where the gain changes inside the support
 *   the interpolated output can still differ a little from g·(interpolated input), so the true-peak
 *   bound is empirical, not exact: the attack ramp is at least TRUE_PEAK_MIN_ATTACK_SAMPLES (8) and
 *   the release time constant at least TRUE_PEAK_MIN_RELEASE_SAMPLES (32) in this mode. With these
 *   floors the worst over-shoot found was 0.05 dB in 20 000 adversarial trials (impulses 60 dB above
 *   a limited square wave, 8 … 96 kHz) and 0.17 dB in 20 000 runs of the property test (a 4-sample
 *   ramp and no release floor gave 0.6 dB). The sample peak bound stays exact.
 * Attack: the boxcar length A is attackMs (default: as long as the look-ahead allows); it is capped
 * at D − s1 + 1 because a longer ramp could not finish before the peak leaves the delay line.
 * Release: one-pole in the linear gain domain, αr = 1 − exp(−1 / (releaseMs·fs/1000)).
 *
 * Zero-latency gain computer (lookaheadMs = 0 and truePeak false): r[m] from the current sample,
 * attack by a one-pole (attackMs = 0: instant, the default), release as above, then the clamp. On its
 * own it guarantees the sample peak only; the output true peak is measured (`maxTruePeakDbtp`) in
 * every mode.
 *
 * True-peak filter (the default unless `truePeak` is given): after the clamp, the smoothing filter
 *   z[m] = (8·y[m] + 17·y[m − 1] + 5·y[m − 2]) / 30                    (TRUE_PEAK_FILTER)
 * then the clamp again. Its coefficients are positive and sum to 1, so |z| ≤ c whenever |y| ≤ c:
 * the sample peak bound is untouched. Each 4×-interpolated point of z is a fixed 14-tap combination
 * of y (the BS.1770-4 Annex 2 phase convolved with the filter), so it is at most the sum of that
 * combination's |coefficients| times c (the ℓ∞ gain of an FIR filter): TRUE_PEAK_FILTER_BOUND
 * (1.0478, +0.41 dB), computed below from the interpolator table. This is a bound for every input,
 * not a measurement. The taps were chosen (by a search over positive 3-tap filters, ours) for the
 * shortest delay whose bound stays near 0.4 dB: a group delay of 0.90 samples below fs/16 (the
 * symmetric (2, 5, 2)/9 bounds at +0.30 dB but delays a full sample, and in ANC every fraction of
 * a sample of loop delay costs broadband attenuation). Treble loss: −0.07 dB at fs/32, −0.28 dB at
 * fs/16, −1.15 dB at fs/8, −4.8 dB at fs/4, −17.5 dB at fs/2. Delay and response are part of the
 * secondary path (`responseTaps`); `latencySamples` counts the filter as one sample. The
 * look-ahead gain computer can run in front of it too.
 *
 * Ceiling changes (`setCeilingDbfs`) take effect at the next block and ramp linearly over
 * CEILING_RAMP_MS. Each delayed sample carries the ceiling that was current when it entered; the
 * clamp uses the larger of that and the current one, so during a change the bound is the largest
 * ceiling value in flight and, after it (+ latency), the new ceiling.
 *
 * Float32 outputs: the clamp level is c·(1 − 2⁻²³), so rounding to float32 cannot exceed c.
 * No allocation after construction; `process` never throws.
 */
import { TruePeakMeter, BS1770_INTERPOLATOR, INTERPOLATOR_DELAY_SAMPLES, INTERPOLATOR_TAPS } from './true-peak.ts';
import { TruePeakMax } from './true-peak-max.ts';

export interface OutputLimiterConfig {
  /** Sample rate in Hz, 8000 … 384000. */
  sampleRate: number;
  /** Largest n `process` will be given, 1 … 65536 samples. */
  maxBlockSize: number;
  /** Ceiling in dBFS (sample peak; 4×-oversampled true peak when `truePeak`), −120 … 0. */
  ceilingDbfs: number;
  /** Look-ahead delay in ms, 0 … 50. 0 = no look-ahead (the default, for use inside the control loop). */
  lookaheadMs?: number;
  /** Limit the 4×-oversampled true peak with the look-ahead detector (adds at least TRUE_PEAK_MIN_LATENCY_SAMPLES of delay). Default false. */
  truePeak?: boolean;
  /**
   * Follow the limiter with the true-peak filter (TRUE_PEAK_FILTER: one sample of delay; the 4× true
   * peak then stays within TRUE_PEAK_FILTER_BOUND_DB of the ceiling for every input). Default: on
   * when `truePeak` is not given, off when it is (`truePeak: false` asks for sample peaks only).
   */
  truePeakFilter?: boolean;
  /**
   * Attack in ms, 0 … 1000. Look-ahead mode: length of the linear gain ramp, capped by the look-ahead
   * (default: the whole of it; at least 8 samples in true-peak mode). Zero-latency mode: one-pole
   * time constant (default 0 = instant).
   */
  attackMs?: number;
  /** Release time constant in ms, 1 … 10000 (at least 32 samples in true-peak mode). Default 50 ms. */
  releaseMs?: number;
}

export const DEFAULT_RELEASE_MS = 50;
/** Duration of the linear ramp applied to ceiling changes, ms. */
export const CEILING_RAMP_MS = 10;
/** Range of accepted ceilings, dBFS. */
export const CEILING_DBFS_MIN = -120;
export const CEILING_DBFS_MAX = 0;
/** Shortest attack ramp of true-peak mode, samples: a gain step inside the interpolator support would overshoot. */
export const TRUE_PEAK_MIN_ATTACK_SAMPLES = 8;
/** Shortest release time constant of true-peak mode, samples. */
export const TRUE_PEAK_MIN_RELEASE_SAMPLES = 32;
/** Smallest look-ahead of true-peak mode: the interpolator support (12 samples) minus one, plus the shortest ramp. */
export const TRUE_PEAK_MIN_LATENCY_SAMPLES = INTERPOLATOR_TAPS - 1 + TRUE_PEAK_MIN_ATTACK_SAMPLES - 1;

/** The true-peak filter's taps, z[m] = Σ b[k]·y[m − k]: (8, 17, 5)/30. */
export const TRUE_PEAK_FILTER: readonly number[] = [8 / 30, 17 / 30, 5 / 30];
/** Delay counted for the true-peak filter, whole samples (its group delay is 0.90 samples at low frequencies). */
export const TRUE_PEAK_FILTER_DELAY_SAMPLES = 1;

/**
 * Largest 4×-interpolated |value| (BS.1770-4 Annex 2) of the true-peak filter's output per unit of
 * its largest |input sample|: max over the four phases p of Σ_j |(h_p * b)[j]|, computed from the
 * interpolator table (1.0478).
 */
export const TRUE_PEAK_FILTER_BOUND: number = (() => {
  const b = TRUE_PEAK_FILTER;
  let worst = 0;
  for (let p = 0; p < 4; p++) {
    let sum = 0;
    for (let j = 0; j < INTERPOLATOR_TAPS + b.length - 1; j++) {
      let v = 0;
      for (let k = 0; k < b.length; k++) {
        const t = j - k;
        if (t >= 0 && t < INTERPOLATOR_TAPS) v += BS1770_INTERPOLATOR[p * INTERPOLATOR_TAPS + t]! * b[k]!;
      }
      sum += Math.abs(v);
    }
    if (sum > worst) worst = sum;
  }
  return worst;
})();
/** TRUE_PEAK_FILTER_BOUND in dB (+0.41 dB). */
export const TRUE_PEAK_FILTER_BOUND_DB: number = 20 * Math.log10(TRUE_PEAK_FILTER_BOUND);

/** Why `ceilingDbfs` is not acceptable, or null if it is (the engine can check queued messages with this). */
export function checkCeilingDbfs(db: number): string | null {
  if (typeof db === 'number' && db >= CEILING_DBFS_MIN && db <= CEILING_DBFS_MAX) return null;
  return `ceilingDbfs must be a number from ${CEILING_DBFS_MIN} to ${CEILING_DBFS_MAX} dBFS, got ${String(db)}`;
}

function checkRange(field: string, value: unknown, lo: number, hi: number, unit: string): number {
  if (typeof value !== 'number' || !(value >= lo && value <= hi)) {
    throw new RangeError(`${field} must be a number from ${lo} to ${hi}${unit}, got ${String(value)}`);
  }
  return value;
}

function pow2AtLeast(n: number): number {
  let p = 1;
  while (p < n) p *= 2;
  return p;
}

/** 1 − 2⁻²³: scales the clamp so float32 rounding (≤ 2⁻²⁴ relative) cannot exceed the ceiling. */
const FLOAT32_SAFE = 1 - 1 / 8388608;

export class OutputLimiter {
  readonly sampleRate: number;
  readonly maxBlockSize: number;
  readonly truePeak: boolean;
  /** The true-peak filter follows the limiter. */
  readonly truePeakFilter: boolean;
  /** True when lookaheadMs = 0 and truePeak is false (the gain computer has no look-ahead). */
  readonly zeroLatency: boolean;
  /** Boxcar attack length A in samples (look-ahead mode), 1 in zero-latency mode. */
  readonly attackSamples: number;
  private readonly latency: number;
  private readonly lookahead: number;
  private readonly holdLength: number;
  private readonly alphaRelease: number;
  private readonly alphaAttack: number;
  private readonly ceilingRampSamples: number;

  // Delay line of input samples and of the ceiling current when each entered.
  private readonly delay: Float64Array;
  private readonly delayCeiling: Float64Array;
  private readonly delayMask: number;
  private writePos = 0;

  // Sliding minimum (monotone deque) of required gains over `holdLength` steps.
  private readonly dqValue: Float64Array;
  private readonly dqIndex: Float64Array;
  private readonly dqMask: number;
  private dqHead = 0;
  private dqSize = 0;
  private step = 0;

  // Boxcar of hold values, summed in a binary tree (leaves at boxLeaves + i, node k = sum of its
  // children, root at 1). A running sum would cancel catastrophically when gains near 1 leave a
  // window of gains near 1e−17 (huge inputs): the mean could even turn negative and invert the output.
  // Every node is a sum of non-negative values, so the relative error stays ≈ log2(A)·2⁻⁵³.
  private readonly boxTree: Float64Array;
  private readonly boxLeaves: number;
  private boxPos = 0;

  private readonly detector = new TruePeakMeter();
  /** The output's largest true peak, for reporting (SIMD when available: see true-peak-max.ts). */
  private readonly outputMeter: TruePeakMax;

  private gain = 1;
  // True-peak filter state: the clamped samples y[m − 1], y[m − 2].
  private f1 = 0;
  private f2 = 0;
  private ceiling: number;
  private ceilingTarget: number;
  private ceilingStep = 0;
  private ceilingRampLeft = 0;
  private pendingCeiling = NaN;

  // Read-outs.
  private minGainBlock = 1;
  private minGainEver = 1;
  private samplePeakEver = 0;
  private samplePeakBlock = 0;
  private nonFiniteTotal = 0;
  private nonFiniteBlock = 0;

  constructor(config: OutputLimiterConfig) {
    if (typeof config !== 'object' || config === null) throw new TypeError('OutputLimiter config must be an object');
    this.sampleRate = checkRange('sampleRate', config.sampleRate, 8000, 384000, ' Hz');
    const maxBlock = config.maxBlockSize;
    if (typeof maxBlock !== 'number' || !Number.isInteger(maxBlock) || maxBlock < 1 || maxBlock > 65536) {
      throw new RangeError(`maxBlockSize must be an integer from 1 to 65536 samples, got ${String(maxBlock)}`);
    }
    this.maxBlockSize = maxBlock;
    this.outputMeter = new TruePeakMax(maxBlock);
    const ceilingError = checkCeilingDbfs(config.ceilingDbfs);
    if (ceilingError !== null) throw new RangeError(ceilingError);
    const lookaheadMs = checkRange('lookaheadMs', config.lookaheadMs ?? 0, 0, 50, ' ms');
    if (config.truePeak !== undefined && typeof config.truePeak !== 'boolean') {
      throw new TypeError(`truePeak must be a boolean, got ${String(config.truePeak)}`);
    }
    this.truePeak = config.truePeak ?? false;
    if (config.truePeakFilter !== undefined && typeof config.truePeakFilter !== 'boolean') {
      throw new TypeError(`truePeakFilter must be a boolean, got ${String(config.truePeakFilter)}`);
    }
    this.truePeakFilter = config.truePeakFilter ?? config.truePeak === undefined;
    const attackMs = config.attackMs === undefined ? undefined : checkRange('attackMs', config.attackMs, 0, 1000, ' ms');
    const releaseMs = checkRange('releaseMs', config.releaseMs ?? DEFAULT_RELEASE_MS, 1, 10000, ' ms');

    const fs = this.sampleRate;
    const lookahead = Math.round((lookaheadMs * fs) / 1000);
    this.zeroLatency = lookahead === 0 && !this.truePeak;
    // s0, s1: the input samples (m − s1 … m − s0) that r[m] speaks for.
    const s0 = 0;
    const s1 = this.truePeak ? INTERPOLATOR_TAPS - 1 : 0;
    let latency = this.truePeak ? Math.max(lookahead, TRUE_PEAK_MIN_LATENCY_SAMPLES) : lookahead;
    let attack: number;
    if (this.zeroLatency) {
      attack = 1;
      latency = 0;
    } else {
      const maxAttack = latency - s1 + 1;
      const minAttack = this.truePeak ? TRUE_PEAK_MIN_ATTACK_SAMPLES : 1;
      attack = attackMs === undefined ? maxAttack : Math.max(minAttack, Math.min(maxAttack, Math.round((attackMs * fs) / 1000)));
    }
    this.lookahead = latency;
    this.latency = latency + (this.truePeakFilter ? TRUE_PEAK_FILTER_DELAY_SAMPLES : 0);
    this.attackSamples = attack;
    this.holdLength = latency - s0 + 1;
    // True-peak mode: a release much faster than the interpolator support would let the gain
    // differ across the taps of one interpolated point, so its time constant has a floor in samples.
    const releaseSamples = (releaseMs * fs) / 1000;
    this.alphaRelease = 1 - Math.exp(-1 / (this.truePeak ? Math.max(releaseSamples, TRUE_PEAK_MIN_RELEASE_SAMPLES) : releaseSamples));
    const zlAttackMs = this.zeroLatency ? (attackMs ?? 0) : 0;
    this.alphaAttack = zlAttackMs > 0 ? 1 - Math.exp(-1000 / (zlAttackMs * fs)) : 1;
    this.ceilingRampSamples = Math.max(1, Math.round((CEILING_RAMP_MS * fs) / 1000));

    const delaySize = pow2AtLeast(latency + 1);
    this.delay = new Float64Array(delaySize);
    this.delayCeiling = new Float64Array(delaySize);
    this.delayMask = delaySize - 1;
    const dqSize = pow2AtLeast(this.holdLength + 1);
    this.dqValue = new Float64Array(dqSize);
    this.dqIndex = new Float64Array(dqSize);
    this.dqMask = dqSize - 1;
    this.boxLeaves = pow2AtLeast(attack);
    this.boxTree = new Float64Array(2 * this.boxLeaves);

    this.ceiling = Math.pow(10, config.ceilingDbfs / 20);
    this.ceilingTarget = this.ceiling;
    this.reset();
  }

  /**
   * Delay the stage adds to the audio path, samples: the look-ahead plus, with the true-peak filter,
   * its group delay of one sample (0 in zero-latency sample-peak mode).
   */
  get latencySamples(): number {
    return this.latency;
  }

  /** The look-ahead delay alone, samples. */
  get lookaheadSamples(): number {
    return this.lookahead;
  }

  /**
   * The stage's response to a signal it does not limit (gain 1): the look-ahead delay, then the
   * true-peak filter when on. It is part of the secondary path. A new array on each call.
   */
  responseTaps(): Float64Array {
    const d = this.lookahead;
    if (!this.truePeakFilter) {
      const r = new Float64Array(d + 1);
      r[d] = 1;
      return r;
    }
    const b = TRUE_PEAK_FILTER;
    const r = new Float64Array(d + b.length);
    for (let k = 0; k < b.length; k++) r[d + k] = b[k]!;
    return r;
  }

  /** Clear every delay line, the gain state and the read-outs; keep the ceiling (a pending change is applied now). */
  reset(): void {
    // A ramp in progress jumps to its end; a queued change applies now.
    this.ceiling = this.ceilingTarget;
    if (!Number.isNaN(this.pendingCeiling)) {
      this.ceiling = this.pendingCeiling;
      this.pendingCeiling = NaN;
    }
    this.ceilingTarget = this.ceiling;
    this.ceilingRampLeft = 0;
    this.ceilingStep = 0;
    this.delay.fill(0);
    this.delayCeiling.fill(this.ceiling);
    this.writePos = 0;
    this.dqHead = 0;
    this.dqSize = 0;
    this.step = 0;
    const tree = this.boxTree;
    tree.fill(0);
    for (let i = 0; i < this.attackSamples; i++) tree[this.boxLeaves + i] = 1;
    for (let k = this.boxLeaves - 1; k >= 1; k--) tree[k] = tree[2 * k]! + tree[2 * k + 1]!;
    this.boxPos = 0;
    this.gain = 1;
    this.f1 = 0;
    this.f2 = 0;
    this.detector.reset();
    this.outputMeter.reset();
    this.resetMeters();
  }

  /** Clear the read-outs (maxima and counters) without touching the signal path. */
  resetMeters(): void {
    this.minGainBlock = this.gain;
    this.minGainEver = this.gain;
    this.samplePeakEver = 0;
    this.samplePeakBlock = 0;
    this.nonFiniteTotal = 0;
    this.nonFiniteBlock = 0;
    this.outputMeter.resetPeak();
    this.updateReadouts();
  }

  /**
   * Queue a new ceiling; it takes effect at the next `process` call and ramps linearly over
   * CEILING_RAMP_MS. Throws a RangeError for values outside −120 … 0 dBFS (check queued messages
   * with `checkCeilingDbfs` so the audio thread never gets here with a bad value).
   */
  setCeilingDbfs(db: number): void {
    const problem = checkCeilingDbfs(db);
    if (problem !== null) throw new RangeError(problem);
    this.pendingCeiling = Math.pow(10, db / 20);
  }

  /** The ceiling in force (dBFS); during a ramp, the value the ramp is heading to. */
  get ceilingDbfs(): number {
    const c = Number.isNaN(this.pendingCeiling) ? this.ceilingTarget : this.pendingCeiling;
    return 20 * Math.log10(c);
  }

  /**
   * Limit n samples from `input` into `output` (they may be the same array). n is clamped to the
   * shorter array; the output is delayed by `lookaheadSamples` (and, with the true-peak filter,
   * filtered: its delay is one more sample).
   */
  process(input: Float32Array, output: Float32Array, n: number): void {
    let count = n < input.length ? n : input.length;
    if (output.length < count) count = output.length;
    if (!(count > 0)) count = 0;
    if (!Number.isNaN(this.pendingCeiling)) {
      this.ceilingTarget = this.pendingCeiling;
      this.pendingCeiling = NaN;
      this.ceilingRampLeft = this.ceilingRampSamples;
      this.ceilingStep = (this.ceilingTarget - this.ceiling) / this.ceilingRampSamples;
    }
    const zeroLatency = this.zeroLatency;
    const truePeak = this.truePeak;
    const delay = this.delay;
    const delayCeiling = this.delayCeiling;
    const dMask = this.delayMask;
    const latency = this.lookahead;
    const filter = this.truePeakFilter;
    const b0 = TRUE_PEAK_FILTER[0]!;
    const b1 = TRUE_PEAK_FILTER[1]!;
    const b2 = TRUE_PEAK_FILTER[2]!;
    let f1 = this.f1;
    let f2 = this.f2;
    const dqValue = this.dqValue;
    const dqIndex = this.dqIndex;
    const qMask = this.dqMask;
    const hold = this.holdLength;
    const tree = this.boxTree;
    const leaves = this.boxLeaves;
    const boxLen = this.attackSamples;
    const invBox = 1 / boxLen;
    const aR = this.alphaRelease;
    const aA = this.alphaAttack;
    const detector = this.detector;
    const meter = this.outputMeter;

    let g = this.gain;
    let c = this.ceiling;
    let minGain = 1;
    let peakBlock = 0;
    let nonFinite = 0;
    let w = this.writePos;
    let stepIndex = this.step;
    let head = this.dqHead;
    let size = this.dqSize;
    let bp = this.boxPos;

    for (let i = 0; i < count; i++) {
      let x = input[i]!;
      const finite = x - x === 0;
      if (!finite) {
        // NaN or ±Infinity (x − x is NaN for both): silence this sample and count it.
        x = 0;
        nonFinite++;
      }
      if (this.ceilingRampLeft > 0) {
        this.ceilingRampLeft--;
        c = this.ceilingRampLeft === 0 ? this.ceilingTarget : c + this.ceilingStep;
      }

      // Required gain for the newest sample / interpolated interval.
      let peak = x < 0 ? -x : x;
      if (truePeak) {
        detector.pushAt(input, i); // treats the non-finite sample as 0, like x
        const ip = detector.intervalPeak;
        // The interval lies between x[m − 6] and x[m − 5]; include those samples too.
        const a = delay[(w - INTERPOLATOR_DELAY_SAMPLES + 1) & dMask]!;
        const b = delay[(w - INTERPOLATOR_DELAY_SAMPLES + 2) & dMask]!;
        peak = ip;
        const aa = a < 0 ? -a : a;
        const ab = b < 0 ? -b : b;
        if (aa > peak) peak = aa;
        if (ab > peak) peak = ab;
        // The newest sample itself is bounded too (the clamp would catch it, but smoothly is better).
        const ax = x < 0 ? -x : x;
        if (ax > peak) peak = ax;
      }
      const r = peak > c ? c / peak : 1;

      // Delay line: write the newest sample, read the one leaving.
      w = (w + 1) & dMask;
      delay[w] = x;
      delayCeiling[w] = c;
      const xOut = delay[(w - latency) & dMask]!;
      const cIn = delayCeiling[(w - latency) & dMask]!;

      let target: number;
      if (zeroLatency) {
        target = r;
        if (target < g) g += aA * (target - g);
        else g += aR * (target - g);
      } else {
        // Sliding minimum over the last `hold` required gains.
        stepIndex++;
        while (size > 0 && dqValue[(head + size - 1) & qMask]! >= r) size--;
        dqValue[(head + size) & qMask] = r;
        dqIndex[(head + size) & qMask] = stepIndex;
        size++;
        while (dqIndex[head]! <= stepIndex - hold) {
          head = (head + 1) & qMask;
          size--;
        }
        const h = dqValue[head]!;
        // Boxcar mean of the last A hold values (tree update: log2(A) additions).
        let node = leaves + bp;
        tree[node] = h;
        node >>= 1;
        while (node >= 1) {
          tree[node] = tree[2 * node]! + tree[2 * node + 1]!;
          node >>= 1;
        }
        bp++;
        if (bp === boxLen) bp = 0;
        target = tree[1]! * invBox;
        if (target <= g) g = target;
        else g += aR * (target - g);
      }

      // Hard ceiling: the larger of the ceiling the sample entered with and the current one.
      const limit = (cIn > c ? cIn : c) * FLOAT32_SAFE;
      let y = g * xOut;
      if (y > limit) y = limit;
      else if (y < -limit) y = -limit;
      if (filter) {
        // True-peak filter, then the clamp again (the filter output is a convex mix of clamped
        // samples; during a ceiling change the older ones may carry a higher limit).
        let z = b0 * y + b1 * f1 + b2 * f2;
        f2 = f1;
        f1 = y;
        if (z > limit) z = limit;
        else if (z < -limit) z = -limit;
        y = z;
      }
      output[i] = y;
      const ay = y < 0 ? -y : y;
      if (ay > peakBlock) peakBlock = ay;
      if (g < minGain) minGain = g;
    }

    this.gain = g;
    this.f1 = f1;
    this.f2 = f2;
    this.ceiling = c;
    this.writePos = w;
    this.step = stepIndex;
    this.dqHead = head;
    this.dqSize = size;
    this.boxPos = bp;
    this.minGainBlock = count > 0 ? minGain : g;
    if (minGain < this.minGainEver) this.minGainEver = minGain;
    this.samplePeakBlock = peakBlock;
    if (peakBlock > this.samplePeakEver) this.samplePeakEver = peakBlock;
    this.nonFiniteBlock = nonFinite;
    this.nonFiniteTotal += nonFinite;
    meter.processMax(output, count);
    this.updateReadouts();
  }

  /**
   * Read-outs as plain fields, refreshed at the end of every block. Per-block callers (the engine)
   * read these rather than the getters: a getter the JIT does not inline returns its double boxed,
   * which allocates once per call.
   */
  readonly readout = { gainReductionDb: 0, blockMaxGainReductionDb: 0, maxGainReductionDb: 0, maxTruePeak: 0, blockNonFiniteCount: 0, nonFiniteCount: 0 };

  private updateReadouts(): void {
    const r = this.readout;
    r.gainReductionDb = gainToReductionDb(this.gain);
    r.blockMaxGainReductionDb = gainToReductionDb(this.minGainBlock);
    r.maxGainReductionDb = gainToReductionDb(this.minGainEver);
    r.maxTruePeak = this.outputMeter.peak;
    r.blockNonFiniteCount = this.nonFiniteBlock;
    r.nonFiniteCount = this.nonFiniteTotal;
  }

  /** Current gain reduction in dB (≥ 0), at the end of the last block. */
  get gainReductionDb(): number {
    return gainToReductionDb(this.gain);
  }

  /** Largest gain reduction within the last block, dB (≥ 0). */
  get blockMaxGainReductionDb(): number {
    return gainToReductionDb(this.minGainBlock);
  }

  /** Largest gain reduction since reset / resetMeters, dB (≥ 0). */
  get maxGainReductionDb(): number {
    return gainToReductionDb(this.minGainEver);
  }

  /** Largest |output sample| since reset / resetMeters (linear). */
  get maxSamplePeak(): number {
    return this.samplePeakEver;
  }

  /** Largest |output sample| in the last block (linear). */
  get blockSamplePeak(): number {
    return this.samplePeakBlock;
  }

  /** Largest 4×-oversampled |output| since reset / resetMeters (ITU-R BS.1770-4 Annex 2 interpolator, linear). */
  get maxTruePeak(): number {
    return this.outputMeter.peak;
  }

  /** `maxTruePeak` in dBTP. */
  get maxTruePeakDbtp(): number {
    return 20 * Math.log10(this.outputMeter.peak);
  }

  /** Non-finite input samples replaced by 0 since reset / resetMeters. */
  get nonFiniteCount(): number {
    return this.nonFiniteTotal;
  }

  /** Non-finite input samples replaced by 0 in the last block. */
  get blockNonFiniteCount(): number {
    return this.nonFiniteBlock;
  }
}

function gainToReductionDb(g: number): number {
  if (g >= 1) return 0;
  return -20 * Math.log10(g);
}
