/**
 * Delay between two recordings by generalised cross-correlation with the phase transform (GCC-PHAT;
 * Knapp & Carter, "The generalized correlation method for estimation of time delay", IEEE Trans. ASSP
 * 24(4), 1976), refined below one sample.
 *
 * Method: with X, Y the spectra of the mean-removed signals (zero-padded to M ≥ Nx + Ny so the
 * correlation is linear, not circular), the cross spectrum G = conj(X)·Y is whitened to unit magnitude,
 * W = G/|G|, and r = IDFT(W). For y[n] = x[n − D], every bin of W is e^(−jωD), so r is a single band-limited
 * pulse at lag D whatever the spectrum of x: a tone no longer dominates because each frequency bin
 * contributes equally. The integer peak is refined by a parabola through its neighbours, then by parabolas
 * through the band-limited interpolation of r (its DFT sum evaluated at fractional lags), which removes
 * the bias of a parabola on a sinc-shaped peak (up to ~0.1 sample).
 *
 * Limits (read these before trusting a result):
 * - PHAT gives every bin the same weight, including bins where only the noise floor is present. The
 *   estimate works when that floor is common to both signals (the noise travels the same path as the
 *   tone); independent sensor noise in those bins only adds random phase, lowering the peak.
 * - A pure tone carries the delay only modulo its period T: with no common broadband content, lags D + kT
 *   fit equally well. Keep maxDelayS below T/2 for tonal signals, or make sure broadband content exists.
 * - peakValue is the height of r at the peak (≈ 1 for an exact delay of broadband noise over the whole
 *   record; 0.59 measured with independent noise at 0 dB SNR in y). Between unrelated signals r spreads
 *   by about 1/√M per lag, so the largest of a few thousand lags reaches about 4/√M: treat a peak below
 *   ~10/√M as no detection.
 *   Silent input gives delay 0 with peakValue 0.
 */
import { inverseRealSpectrum, nextPow2, realSpectrum } from '../dsp/fft.ts';
import { requireNonNegative, requireOutputLength, requirePositive } from './validate.ts';

export interface DelayEstimateOptions {
  /** Largest |delay| searched (s), ≤ (shorter length − 1)/fs. Default: that maximum. */
  maxDelayS?: number;
  /**
   * 'positive' (default): the highest peak; 'either': the largest |peak|, for a path that may invert the
   * signal (then peakValue is negative).
   */
  polarity?: 'positive' | 'either';
}

export interface DelayEstimate {
  /** Delay of y relative to x in samples (positive: y lags x), with sub-sample refinement. */
  delaySamples: number;
  /** The same in milliseconds. */
  delayMs: number;
  /** Height of the whitened correlation at the peak, in [−1, 1]. */
  peakValue: number;
}

export interface GccPhatOptions {
  /** Largest |lag| returned (samples), ≤ shorter length − 1. */
  maxLagSamples: number;
}

/** Relative floor below which a cross-spectrum bin counts as empty (left out of the whitening). */
const EMPTY_BIN_RELATIVE = 1e-12;

/** Estimate how many samples y lags x. */
export function estimateDelay(
  x: ArrayLike<number>,
  y: ArrayLike<number>,
  sampleRate: number,
  options: DelayEstimateOptions = {},
): DelayEstimate {
  requirePositive('sampleRate', sampleRate);
  const longest = checkSignals(x, y);
  const maxDelayS = options.maxDelayS ?? longest / sampleRate;
  requireNonNegative('maxDelayS', maxDelayS);
  if (maxDelayS * sampleRate > longest + 1e-9) {
    throw new RangeError(
      `maxDelayS must be in [0, ${longest / sampleRate}] s (shorter signal length − 1 samples), got ${maxDelayS}`,
    );
  }
  const polarity = options.polarity ?? 'positive';
  if (polarity !== 'positive' && polarity !== 'either') {
    throw new RangeError(`polarity must be 'positive' or 'either', got ${String(polarity)}`);
  }
  const maxLag = Math.min(longest, Math.floor(maxDelayS * sampleRate + 1e-9));
  const { whitened, correlation } = phatCorrelation(x, y);
  const M = correlation.length;
  const at = (lag: number): number => correlation[(lag + M) % M]!;

  let best = 0;
  let bestScore = -Infinity;
  for (let lag = -maxLag; lag <= maxLag; lag++) {
    const score = polarity === 'either' ? Math.abs(at(lag)) : at(lag);
    if (score > bestScore) {
      bestScore = score;
      best = lag;
    }
  }
  if (at(best) === 0) return { delaySamples: 0, delayMs: 0, peakValue: 0 };
  const sign = at(best) < 0 ? -1 : 1;

  // Parabola through the integer neighbours (only inside the search range), then twice on the
  // band-limited interpolation with shrinking spacing.
  let t = best;
  if (best > -maxLag && best < maxLag) t += vertexOffset(sign * at(best - 1), sign * at(best), sign * at(best + 1));
  for (const h of [0.25, 0.05]) {
    const left = sign * interpolate(whitened, t - h);
    const mid = sign * interpolate(whitened, t);
    const right = sign * interpolate(whitened, t + h);
    t += h * vertexOffset(left, mid, right);
  }
  t = Math.max(-maxLag, Math.min(maxLag, t));
  return { delaySamples: t, delayMs: (1000 * t) / sampleRate, peakValue: interpolate(whitened, t) };
}

/**
 * The GCC-PHAT correlation at lags −maxLag … +maxLag (index lag + maxLag); a peak at positive lag means
 * y lags x. For plots and for checking how unique a peak is.
 */
export function gccPhat(
  x: ArrayLike<number>,
  y: ArrayLike<number>,
  options: GccPhatOptions,
  output?: Float64Array,
): Float64Array {
  const longest = checkSignals(x, y);
  const maxLag = options.maxLagSamples;
  if (!Number.isInteger(maxLag) || maxLag < 0 || maxLag > longest) {
    throw new RangeError(`maxLagSamples must be an integer in [0, ${longest}], got ${String(maxLag)}`);
  }
  const out = output ?? new Float64Array(2 * maxLag + 1);
  requireOutputLength('output', out, 2 * maxLag + 1);
  const { correlation } = phatCorrelation(x, y);
  const M = correlation.length;
  for (let lag = -maxLag; lag <= maxLag; lag++) out[lag + maxLag] = correlation[(lag + M) % M]!;
  return out;
}

/** Validates the pair and returns the largest lag their lengths allow (shorter length − 1). */
function checkSignals(x: ArrayLike<number>, y: ArrayLike<number>): number {
  if (x.length < 2 || y.length < 2) {
    throw new RangeError(`x and y must have at least 2 samples each, got ${x.length} and ${y.length}`);
  }
  return Math.min(x.length, y.length) - 1;
}

/** Whitened cross spectrum W (full, interleaved, length 2M) and r = IDFT(W) (length M). */
function phatCorrelation(x: ArrayLike<number>, y: ArrayLike<number>): { whitened: Float64Array; correlation: Float64Array } {
  const M = nextPow2(x.length + y.length);
  const X = realSpectrum(withoutMean(x), M);
  const Y = realSpectrum(withoutMean(y), M);
  const W = new Float64Array(2 * M);
  let largest = 0;
  for (let k = 0; k < M; k++) {
    const xr = X[2 * k]!, xi = X[2 * k + 1]!, yr = Y[2 * k]!, yi = Y[2 * k + 1]!;
    // conj(X)·Y
    const gr = xr * yr + xi * yi;
    const gi = xr * yi - xi * yr;
    W[2 * k] = gr;
    W[2 * k + 1] = gi;
    largest = Math.max(largest, Math.hypot(gr, gi));
  }
  const floor = largest * EMPTY_BIN_RELATIVE;
  for (let k = 0; k < M; k++) {
    const mag = Math.hypot(W[2 * k]!, W[2 * k + 1]!);
    const scale = mag > floor ? 1 / mag : 0;
    W[2 * k] = W[2 * k]! * scale;
    W[2 * k + 1] = W[2 * k + 1]! * scale;
  }
  return { whitened: W, correlation: inverseRealSpectrum(W) };
}

/**
 * r(t) at a fractional lag t: the real inverse DFT of W evaluated between samples,
 * r(t) = (1/M)·[W_0 + 2·Σ_{k=1}^{M/2−1} Re(W_k·e^(j2πkt/M)) + Re(W_{M/2})·cos(πt)].
 */
function interpolate(W: Float64Array, t: number): number {
  const M = W.length / 2;
  const theta = (2 * Math.PI * t) / M;
  let sum = W[0]! + W[M]! * Math.cos(Math.PI * t);
  for (let k = 1; k < M / 2; k++) {
    sum += 2 * (W[2 * k]! * Math.cos(theta * k) - W[2 * k + 1]! * Math.sin(theta * k));
  }
  return sum / M;
}

/** Offset of the vertex of the parabola through (−1, a), (0, b), (1, c) from 0, limited to ±1. */
function vertexOffset(a: number, b: number, c: number): number {
  const den = a - 2 * b + c;
  if (!(den < 0)) return 0; // not a maximum: keep the centre
  return Math.max(-1, Math.min(1, (0.5 * (a - c)) / den));
}

function withoutMean(x: ArrayLike<number>): Float64Array {
  const out = Float64Array.from(x);
  let mean = 0;
  for (let i = 0; i < out.length; i++) mean += out[i]!;
  mean /= out.length;
  for (let i = 0; i < out.length; i++) out[i] = out[i]! - mean;
  return out;
}
