/**
 * A-, C- and Z-frequency weighting of IEC 61672-1:2013 as streaming IIR filters, and the standard's
 * analog weighting functions that the filters are designed to follow.
 *
 * Analog design goal (IEC 61672-1:2013 Annex E, equations E.1–E.6):
 *   C(f) = 20·log10[ f4²·f² / ((f² + f1²)(f² + f4²)) ] − C1000
 *   A(f) = 20·log10[ f4²·f⁴ / ((f² + f1²)·√(f² + f2²)·√(f² + f3²)·(f² + f4²)) ] − A1000
 *   f1 = 20.598997 Hz, f2 = 107.65265 Hz, f3 = 737.86223 Hz, f4 = 12194.217 Hz, A1000 = −2.000 dB, C1000 = −0.062 dB.
 *   Z is flat (0 dB).
 *
 * Digital filter (a cascade of biquads, direct form II transposed, float64 state):
 * - the high-pass pole pairs (f1, f1) and, for A, (f2, f3), with their zeros at 0 Hz, by the bilinear
 *   transform with each pole pre-warped (ω' = 2fs·tan(ω/2fs)) so the corners land where the analog ones are;
 * - the double low-pass pole at f4 by a magnitude-matched second-order section instead (poles by the
 *   matched z-transform, p = exp(−2πf4/fs); numerator chosen so |H| equals the analog |H| at 0 Hz, at
 *   min(f4, fs/4) and at fs/2; Vicanek, "Matched second order digital filters", 2016, from memory). The plain
 *   bilinear transform squeezes the analog response above ~5 kHz towards fs/2 (−1.5 dB at 10 kHz,
 *   −8.2 dB at 16 kHz for 44.1 kHz, calc); the matched section removes most of that;
 * - a gain so that the response at 1 kHz equals the analog formula's value there.
 * Measured deviation from the Annex E formula at the base-ten one-third-octave mid-band frequencies
 * (calc, tested in test/dsp/weighting-filter.test.ts):
 *   44.1 kHz: ≤ 0.09 dB up to 10 kHz, −0.12 dB at 12.5 kHz, −0.52 dB at 16 kHz, −0.76 dB at 20 kHz;
 *   48 kHz:   ≤ 0.09 dB up to 12.5 kHz, −0.34 dB at 16 kHz, −0.83 dB at 20 kHz;
 *   96 kHz:   ≤ 0.08 dB up to 20 kHz (A and C alike to 0.01 dB).
 *   16 kHz (outside the claim): ≤ 0.41 dB up to 8 kHz; below 1 kHz the whole curve sits ≈ 0.1 dB low.
 * All within the class 1 acceptance limits of IEC 61672-1:2013 Table 3 from 10 Hz to 20 kHz at those rates.
 * Other rates from 8 kHz up are accepted; the response is matched at fs/2, but check `responseDb` there.
 */

export type FrequencyWeighting = 'A' | 'C' | 'Z';

/** Pole frequencies of IEC 61672-1:2013 Annex E (Hz). */
export const WEIGHTING_POLES_HZ = {
  f1: 20.598997,
  f2: 107.65265,
  f3: 737.86223,
  f4: 12194.217,
} as const;

/** Normalisation constants A1000 and C1000 of IEC 61672-1:2013 Annex E (dB). */
export const WEIGHTING_NORMALISATION_DB = { A: -2.0, C: -0.062 } as const;

/**
 * The Annex E weighting in dB at frequency f (Hz, ≥ 0; 0 Hz gives −Infinity for A and C).
 * Unchecked: analysis/weighting.ts wraps it with argument checks.
 */
export function analogWeightingDb(frequencyHz: number, weighting: FrequencyWeighting): number {
  if (weighting === 'Z') return 0;
  const { f1, f2, f3, f4 } = WEIGHTING_POLES_HZ;
  const f2sq = frequencyHz * frequencyHz;
  const common = (f4 * f4 * f2sq) / ((f2sq + f1 * f1) * (f2sq + f4 * f4));
  if (weighting === 'C') return 20 * Math.log10(common) - WEIGHTING_NORMALISATION_DB.C;
  const a = (common * f2sq) / (Math.sqrt(f2sq + f2 * f2) * Math.sqrt(f2sq + f3 * f3));
  return 20 * Math.log10(a) - WEIGHTING_NORMALISATION_DB.A;
}

export interface WeightingFilterOptions {
  weighting: FrequencyWeighting;
  /** Sample rate (Hz), 8000 … 768000. */
  sampleRate: number;
}

const MIN_SAMPLE_RATE = 8000;
const MAX_SAMPLE_RATE = 768000;
const MAX_SECTIONS = 3;

/** Streaming A/C/Z weighting filter. Constructor validates and allocates; `process` does neither. */
export class WeightingFilter {
  readonly weighting: FrequencyWeighting;
  readonly sampleRate: number;
  // Biquad coefficients, 5 per section: b0, b1, b2, a1, a2 (a0 = 1).
  private readonly coeffs: Float64Array;
  // Direct form II transposed state, 2 per section.
  private readonly state: Float64Array;
  private readonly sectionCount: number;
  private readonly gain: number;

  constructor(options: WeightingFilterOptions) {
    const { weighting, sampleRate } = options;
    if (weighting !== 'A' && weighting !== 'C' && weighting !== 'Z') {
      throw new RangeError(`weighting must be 'A', 'C' or 'Z', got ${String(weighting)}`);
    }
    if (typeof sampleRate !== 'number' || !Number.isFinite(sampleRate) || sampleRate < MIN_SAMPLE_RATE || sampleRate > MAX_SAMPLE_RATE) {
      throw new RangeError(`sampleRate must be a number in [${MIN_SAMPLE_RATE}, ${MAX_SAMPLE_RATE}] Hz, got ${String(sampleRate)}`);
    }
    this.weighting = weighting;
    this.sampleRate = sampleRate;
    this.coeffs = new Float64Array(5 * MAX_SECTIONS);
    this.state = new Float64Array(2 * MAX_SECTIONS);
    const { f1, f2, f3, f4 } = WEIGHTING_POLES_HZ;
    let count = 0;
    if (weighting !== 'Z') {
      setBilinearHighPass(this.coeffs, count++, f1, f1, sampleRate);
      if (weighting === 'A') setBilinearHighPass(this.coeffs, count++, f2, f3, sampleRate);
      setMatchedLowPass(this.coeffs, count++, f4, sampleRate);
    }
    this.sectionCount = count;
    this.gain = 1;
    if (count > 0) {
      const target = Math.pow(10, analogWeightingDb(1000, weighting) / 20);
      this.gain = target / this.cascadeMagnitude(1000);
    }
  }

  /** Clear the filter memory. */
  reset(): void {
    this.state.fill(0);
  }

  /**
   * Weight n samples of input into output (may be the same array). Processes min(n, input.length,
   * output.length) samples; never throws, never allocates.
   */
  process(input: Float32Array | Float64Array, output: Float32Array | Float64Array, n: number): void {
    const count = Math.min(n, input.length, output.length);
    const c = this.coeffs;
    const s = this.state;
    const sections = this.sectionCount;
    const g = this.gain;
    for (let i = 0; i < count; i++) {
      let v = input[i]! * g;
      for (let k = 0; k < sections; k++) {
        const o = 5 * k;
        const y = c[o]! * v + s[2 * k]!;
        s[2 * k] = c[o + 1]! * v - c[o + 3]! * y + s[2 * k + 1]!;
        s[2 * k + 1] = c[o + 2]! * v - c[o + 4]! * y;
        v = y;
      }
      output[i] = v;
    }
  }

  /** Magnitude response of the digital filter in dB at frequency f (0 ≤ f ≤ fs/2), from its coefficients. */
  responseDb(frequencyHz: number): number {
    if (!Number.isFinite(frequencyHz) || frequencyHz < 0 || frequencyHz > this.sampleRate / 2) {
      throw new RangeError(`frequencyHz must be in [0, ${this.sampleRate / 2}] Hz, got ${String(frequencyHz)}`);
    }
    return 20 * Math.log10(this.gain * this.cascadeMagnitude(frequencyHz));
  }

  private cascadeMagnitude(frequencyHz: number): number {
    const w = (2 * Math.PI * frequencyHz) / this.sampleRate;
    const c1 = Math.cos(w), s1 = Math.sin(w), c2 = Math.cos(2 * w), s2 = Math.sin(2 * w);
    let mag = 1;
    for (let k = 0; k < this.sectionCount; k++) {
      const o = 5 * k;
      const c = this.coeffs;
      const nr = c[o]! + c[o + 1]! * c1 + c[o + 2]! * c2, ni = -(c[o + 1]! * s1 + c[o + 2]! * s2);
      const dr = 1 + c[o + 3]! * c1 + c[o + 4]! * c2, di = -(c[o + 3]! * s1 + c[o + 4]! * s2);
      mag *= Math.sqrt((nr * nr + ni * ni) / (dr * dr + di * di));
    }
    return mag;
  }
}

/**
 * Bilinear transform of s²/((s + ωa)(s + ωb)) with pre-warped poles:
 * each s/(s + ω) → [K/(K + ω)]·(1 − z⁻¹)/(1 − p·z⁻¹), K = 2fs, p = (K − ω)/(K + ω).
 */
function setBilinearHighPass(coeffs: Float64Array, section: number, faHz: number, fbHz: number, fs: number): void {
  const K = 2 * fs;
  const wa = K * Math.tan((Math.PI * faHz) / fs);
  const wb = K * Math.tan((Math.PI * fbHz) / fs);
  const pa = (K - wa) / (K + wa);
  const pb = (K - wb) / (K + wb);
  const g = (K * K) / ((K + wa) * (K + wb));
  coeffs.set([g, -2 * g, g, -(pa + pb), pa * pb], 5 * section);
}

/**
 * Magnitude-matched digital version of the analog low-pass ω²/(s + ω)² (double real pole at f).
 * Poles: p = exp(−ω/fs), twice. With φ1 = sin²(θ/2), φ0 = 1 − φ1, φ2 = 4φ0φ1 at digital frequency θ,
 * |B(e^jθ)|² = B0·φ0 + B1·φ1 + B2·φ2 with B0 = (b0 + b1 + b2)², B1 = (b0 − b1 + b2)², B2 = −4·b0·b2, and the
 * same for A (Vicanek 2016, from memory). B0, B1, B2 follow from |H|² at 0 Hz, fs/2 and the middle frequency.
 */
function setMatchedLowPass(coeffs: Float64Array, section: number, fHz: number, fs: number): void {
  const w = 2 * Math.PI * fHz;
  const p = Math.exp(-w / fs);
  const a1 = -2 * p;
  const a2 = p * p;
  const analogSq = (f: number): number => {
    const r = (w * w) / ((2 * Math.PI * f) ** 2 + w * w);
    return r * r;
  };
  const A0 = (1 + a1 + a2) ** 2, A1 = (1 - a1 + a2) ** 2, A2 = -4 * a2;
  const B0 = A0 * analogSq(0);
  const B1 = A1 * analogSq(fs / 2);
  const fMid = Math.min(fHz, fs / 4);
  const phi1 = Math.sin((Math.PI * fMid) / fs) ** 2;
  const phi0 = 1 - phi1;
  const phi2 = 4 * phi0 * phi1;
  const B2 = (analogSq(fMid) * (A0 * phi0 + A1 * phi1 + A2 * phi2) - B0 * phi0 - B1 * phi1) / phi2;
  const sum = Math.sqrt(B0), diff = Math.sqrt(B1);
  const W = (sum + diff) / 2; // b0 + b2
  const b1 = (sum - diff) / 2;
  // b0·b2 = −B2/4 with b0 + b2 = W; a negative discriminant would mean the three targets are not reachable.
  const root = Math.sqrt(Math.max(0, W * W + B2));
  coeffs.set([(W + root) / 2, b1, (W - root) / 2, a1, a2], 5 * section);
}
