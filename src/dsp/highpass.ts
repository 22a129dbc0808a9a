/**
 * Output high-pass: a DC blocker followed by a 2nd-order Butterworth high-pass, to keep DC and
 * sub-audio content (which moves a loudspeaker cone a lot and is not heard: at constant SPL cone
 * displacement rises 12 dB per octave downwards; Beranek, Acoustics, from memory) out of the output.
 *
 * DC blocker (J. O. Smith III, Introduction to Digital Filters with Audio Applications, 2007,
 * "DC blocker"; from memory):  y[n] = x[n] − x[n − 1] + R·y[n − 1],  R = exp(−2π·dcBlockerHz/fs);
 * its −3 dB point is close to dcBlockerHz when dcBlockerHz ≪ fs.
 *
 * Butterworth high-pass (Q = 1/√2) from the bilinear transform with the corner pre-warped, in the
 * form of R. Bristow-Johnson, "Cookbook formulae for audio EQ biquad filter coefficients" (HPF;
 * from memory): w0 = 2π·f0/fs, α = sin(w0)/(2Q),
 *   b0 = b2 = (1 + cos w0)/2, b1 = −(1 + cos w0), a0 = 1 + α, a1 = −2·cos w0, a2 = 1 − α.
 * Pre-warping puts the −3.01 dB point exactly at f0; at other frequencies the response equals the
 * analogue prototype |H(jΩ)|² = Ω⁴/(1 + Ω⁴) at Ω = tan(ω/2)/tan(ω0/2).
 * Realised as transposed direct form II in float64.
 *
 * Non-finite input samples pass through unchanged (the limiter downstream counts and silences
 * them) but enter the filter state as 0, so one bad sample cannot poison the filter for good.
 * States below 1e−30 are flushed to 0 at the end of each block (no denormal slow-down on decay).
 * No allocation after construction; `process` never throws.
 */

export interface HighPassConfig {
  /** Sample rate in Hz, 8000 … 384000. */
  sampleRate: number;
  /** Butterworth corner (−3 dB) in Hz, 0 = off, else 1 … 0.45·sampleRate. Default 20 Hz. */
  cornerHz?: number;
  /** DC blocker corner in Hz, 0 = off, else 0.1 … 50. Default 2 Hz. */
  dcBlockerHz?: number;
}

export const DEFAULT_CORNER_HZ = 20;
export const DEFAULT_DC_BLOCKER_HZ = 2;

const FLUSH = 1e-30;

export class HighPass {
  readonly sampleRate: number;
  readonly cornerHz: number;
  readonly dcBlockerHz: number;
  private readonly b0: number;
  private readonly b1: number;
  private readonly b2: number;
  private readonly a1: number;
  private readonly a2: number;
  private readonly pole: number;
  private z1 = 0;
  private z2 = 0;
  private dcX = 0;
  private dcY = 0;

  constructor(config: HighPassConfig) {
    if (typeof config !== 'object' || config === null) throw new TypeError('HighPass config must be an object');
    const fs = config.sampleRate;
    if (typeof fs !== 'number' || !(fs >= 8000 && fs <= 384000)) {
      throw new RangeError(`sampleRate must be a number from 8000 to 384000 Hz, got ${String(fs)}`);
    }
    this.sampleRate = fs;
    const corner = config.cornerHz ?? DEFAULT_CORNER_HZ;
    const maxCorner = 0.45 * fs;
    if (typeof corner !== 'number' || !(corner === 0 || (corner >= 1 && corner <= maxCorner))) {
      throw new RangeError(`cornerHz must be 0 (off) or a number from 1 to ${maxCorner} Hz (0.45·sampleRate), got ${String(corner)}`);
    }
    this.cornerHz = corner;
    const dc = config.dcBlockerHz ?? DEFAULT_DC_BLOCKER_HZ;
    if (typeof dc !== 'number' || !(dc === 0 || (dc >= 0.1 && dc <= 50))) {
      throw new RangeError(`dcBlockerHz must be 0 (off) or a number from 0.1 to 50 Hz, got ${String(dc)}`);
    }
    this.dcBlockerHz = dc;
    this.pole = dc > 0 ? Math.exp((-2 * Math.PI * dc) / fs) : 0;
    if (corner > 0) {
      const w0 = (2 * Math.PI * corner) / fs;
      const cosW = Math.cos(w0);
      const alpha = Math.sin(w0) / (2 * Math.SQRT1_2);
      const a0 = 1 + alpha;
      this.b0 = (1 + cosW) / 2 / a0;
      this.b1 = -(1 + cosW) / a0;
      this.b2 = this.b0;
      this.a1 = (-2 * cosW) / a0;
      this.a2 = (1 - alpha) / a0;
    } else {
      this.b0 = 1;
      this.b1 = 0;
      this.b2 = 0;
      this.a1 = 0;
      this.a2 = 0;
    }
  }

  /** Clear the filter states. */
  reset(): void {
    this.z1 = 0;
    this.z2 = 0;
    this.dcX = 0;
    this.dcY = 0;
  }

  /** Filter n samples from `input` into `output` (may be the same array); n is clamped to the shorter array. */
  process(input: Float32Array, output: Float32Array, n: number): void {
    let count = n < input.length ? n : input.length;
    if (output.length < count) count = output.length;
    const dcOn = this.dcBlockerHz > 0;
    const hpOn = this.cornerHz > 0;
    const R = this.pole;
    const b0 = this.b0;
    const b1 = this.b1;
    const b2 = this.b2;
    const a1 = this.a1;
    const a2 = this.a2;
    let dcX = this.dcX;
    let dcY = this.dcY;
    let z1 = this.z1;
    let z2 = this.z2;
    for (let i = 0; i < count; i++) {
      const raw = input[i]!;
      // NaN or ±Infinity (raw − raw is NaN for both) enter the states as 0 and pass on unchanged.
      const finite = raw - raw === 0;
      let v = finite ? raw : 0;
      if (dcOn) {
        const y = v - dcX + R * dcY;
        dcX = v;
        dcY = y;
        v = y;
      }
      if (hpOn) {
        const y = b0 * v + z1;
        z1 = b1 * v - a1 * y + z2;
        z2 = b2 * v - a2 * y;
        v = y;
      }
      output[i] = finite ? v : raw;
    }
    this.dcX = dcX;
    this.dcY = Math.abs(dcY) < FLUSH ? 0 : dcY;
    this.z1 = Math.abs(z1) < FLUSH ? 0 : z1;
    this.z2 = Math.abs(z2) < FLUSH ? 0 : z2;
  }
}
