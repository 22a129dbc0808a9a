/**
 * Streaming sound sources for the simulator. Every source is generated block by block from a seeded
 * generator, so runs of any length are reproducible and use constant memory.
 */
import { Random } from '../dsp/random.ts';
import type { SourceSpec } from './scenario.ts';

export interface SourceGenerator {
  /** Add the next n samples of this source into out. */
  addTo(out: Float64Array, n: number): void;
  /** Instantaneous frequency (Hz) of a tonal source at the last sample generated, or NaN. */
  readonly currentHz: number;
  /**
   * Tonal sources only: the fundamental's phase (rad) and frequency (Hz) at each sample of the last
   * block, and the linear peak amplitude of each harmonic (index 0 = fundamental).
   */
  readonly phases?: Float64Array;
  readonly frequencies?: Float64Array;
  readonly harmonicAmplitudes?: readonly number[];
}

class ToneGen implements SourceGenerator {
  private phase: number;
  private t = 0;
  private base: number;
  private baseT = 0;
  private nextStep = 0;
  currentHz: number;
  readonly phases: Float64Array;
  readonly frequencies: Float64Array;
  readonly harmonicAmplitudes: readonly number[];
  private readonly stepAt: number[];
  private readonly stepHz: number[];
  constructor(hz: number, private readonly amp: number, private readonly drift: number, phaseDeg: number, private readonly fs: number, maxBlock: number, steps: readonly { atS: number; hz: number }[] = []) {
    this.phase = (phaseDeg * Math.PI) / 180;
    this.base = hz;
    this.stepAt = steps.map((s) => Math.round(s.atS * fs));
    this.stepHz = steps.map((s) => s.hz);
    this.currentHz = hz;
    this.phases = new Float64Array(maxBlock);
    this.frequencies = new Float64Array(maxBlock);
    this.harmonicAmplitudes = [amp];
  }
  addTo(out: Float64Array, n: number): void {
    const twoPiOverFs = (2 * Math.PI) / this.fs;
    for (let i = 0; i < n; i++) {
      if (this.nextStep < this.stepAt.length && this.t >= this.stepAt[this.nextStep]!) {
        this.base = this.stepHz[this.nextStep]!;
        this.baseT = this.t;
        this.nextStep++;
      }
      const f = this.base + this.drift * ((this.t - this.baseT) / this.fs);
      this.phases[i] = this.phase;
      this.frequencies[i] = f;
      out[i] = out[i]! + this.amp * Math.sin(this.phase);
      this.phase += twoPiOverFs * f;
      if (this.phase > 2 * Math.PI) this.phase -= 2 * Math.PI;
      this.currentHz = f;
      this.t++;
    }
  }
}

class HarmonicsGen implements SourceGenerator {
  private phase = 0;
  private t = 0;
  currentHz: number;
  readonly phases: Float64Array;
  readonly frequencies: Float64Array;
  readonly harmonicAmplitudes: readonly number[];
  constructor(private readonly f0: number, private readonly amps: readonly number[], private readonly drift: number, private readonly fs: number, maxBlock: number) {
    this.currentHz = f0;
    this.phases = new Float64Array(maxBlock);
    this.frequencies = new Float64Array(maxBlock);
    this.harmonicAmplitudes = amps;
  }
  addTo(out: Float64Array, n: number): void {
    const twoPiOverFs = (2 * Math.PI) / this.fs;
    const amps = this.amps;
    for (let i = 0; i < n; i++) {
      const f = this.f0 + this.drift * (this.t / this.fs);
      this.phases[i] = this.phase;
      this.frequencies[i] = f;
      let acc = 0;
      for (let h = 0; h < amps.length; h++) acc += amps[h]! * Math.sin((h + 1) * this.phase);
      out[i] = out[i]! + acc;
      this.phase += twoPiOverFs * f;
      if (this.phase > 2 * Math.PI) this.phase -= 2 * Math.PI;
      this.currentHz = f;
      this.t++;
    }
  }
}

/** Second-order section, transposed direct form II. */
class Biquad {
  private z1 = 0;
  private z2 = 0;
  constructor(private b0: number, private b1: number, private b2: number, private a1: number, private a2: number) {}
  /**
   * Butterworth (Q = 1/√2) low- or high-pass from R. Bristow-Johnson, "Cookbook formulae for audio
   * EQ biquad filter coefficients" (bilinear transform with pre-warping).
   */
  static butterworth(kind: 'lowpass' | 'highpass', hz: number, fs: number): Biquad {
    const w0 = (2 * Math.PI * hz) / fs;
    const cos = Math.cos(w0);
    const alpha = Math.sin(w0) / (2 * Math.SQRT1_2);
    const a0 = 1 + alpha;
    const b1 = kind === 'lowpass' ? 1 - cos : -(1 + cos);
    const b0 = kind === 'lowpass' ? (1 - cos) / 2 : (1 + cos) / 2;
    return new Biquad(b0 / a0, b1 / a0, b0 / a0, (-2 * cos) / a0, (1 - alpha) / a0);
  }
  step(x: number): number {
    const y = this.b0 * x + this.z1;
    this.z1 = this.b1 * x - this.a1 * y + this.z2;
    this.z2 = this.b2 * x - this.a2 * y;
    return y;
  }
}

/**
 * Coloured, optionally band-limited Gaussian noise.
 * - white: independent Gaussian samples;
 * - pink (−3 dB/octave): Paul Kellet's refined pink filter (music-dsp mailing list, 1999; coefficients
 *   from memory), accurate to about ±0.05 dB above fs/1000 or so;
 * - brown (−6 dB/octave): a leaky integrator, pole at 0.998, which keeps it bounded below ~15 Hz at 48 kHz.
 * Band limits: two cascaded second-order Butterworth high-pass and low-pass sections at each edge
 * (24 dB/octave). The level is set by measuring the RMS of an independent 4 s calibration run of the
 * same generator, so `rms` is the long-term RMS of the band-limited result.
 */
class NoiseGen implements SourceGenerator {
  readonly currentHz = NaN;
  private readonly raw: ColouredNoise;
  private readonly scale: number;
  constructor(color: NoiseColor, rms: number, band: readonly [number, number] | undefined, fs: number, seed: number) {
    // level calibration on an independent stream of the same generator
    const cal = new ColouredNoise(color, new Random(seed ^ 0x5bd1e995), makeBand(band, fs));
    const N = Math.max(4 * fs, 65536);
    let acc = 0;
    for (let i = 0; i < N; i++) {
      const v = cal.next();
      acc += v * v;
    }
    const measured = Math.sqrt(acc / N);
    this.scale = measured > 0 ? rms / measured : 0;
    this.raw = new ColouredNoise(color, new Random(seed), makeBand(band, fs));
  }
  addTo(out: Float64Array, n: number): void {
    const s = this.scale;
    for (let i = 0; i < n; i++) out[i] = out[i]! + s * this.raw.next();
  }
}

type NoiseColor = 'white' | 'pink' | 'brown';

class ColouredNoise {
  private b0 = 0; private b1 = 0; private b2 = 0; private b3 = 0; private b4 = 0; private b5 = 0; private b6 = 0;
  private brown = 0;
  constructor(private readonly color: NoiseColor, private readonly rng: Random, private readonly filters: Biquad[]) {}
  next(): number {
    const w = this.rng.gaussian();
    let v: number;
    if (this.color === 'pink') {
      this.b0 = 0.99886 * this.b0 + w * 0.0555179;
      this.b1 = 0.99332 * this.b1 + w * 0.0750759;
      this.b2 = 0.969 * this.b2 + w * 0.153852;
      this.b3 = 0.8665 * this.b3 + w * 0.3104856;
      this.b4 = 0.55 * this.b4 + w * 0.5329522;
      this.b5 = -0.7616 * this.b5 - w * 0.016898;
      v = this.b0 + this.b1 + this.b2 + this.b3 + this.b4 + this.b5 + this.b6 + w * 0.5362;
      this.b6 = w * 0.115926;
    } else if (this.color === 'brown') {
      this.brown = 0.998 * this.brown + w;
      v = this.brown;
    } else {
      v = w;
    }
    for (let i = 0; i < this.filters.length; i++) v = this.filters[i]!.step(v);
    return v;
  }
}

function makeBand(band: readonly [number, number] | undefined, fs: number): Biquad[] {
  if (!band) return [];
  const [lo, hi] = band;
  const fl: Biquad[] = [];
  if (lo > 0) fl.push(Biquad.butterworth('highpass', lo, fs), Biquad.butterworth('highpass', lo, fs));
  if (hi < fs / 2) fl.push(Biquad.butterworth('lowpass', hi, fs), Biquad.butterworth('lowpass', hi, fs));
  return fl;
}

class WavGen implements SourceGenerator {
  readonly currentHz = NaN;
  private pos = 0;
  constructor(private readonly samples: Float32Array, private readonly gain: number, private readonly loop: boolean) {}
  addTo(out: Float64Array, n: number): void {
    const s = this.samples;
    for (let i = 0; i < n; i++) {
      if (this.pos >= s.length) {
        if (!this.loop || s.length === 0) return;
        this.pos = 0;
      }
      out[i] = out[i]! + this.gain * s[this.pos++]!;
    }
  }
}

/** Decoded WAV sources, keyed by the `file` string of the scenario. Samples at the scenario's rate. */
export type WavTable = ReadonlyMap<string, Float32Array>;

export function createSource(spec: SourceSpec, index: number, sampleRate: number, seed: number, wavs: WavTable, maxBlock: number): SourceGenerator {
  switch (spec.kind) {
    case 'tone':
      return new ToneGen(spec.hz, spec.amplitude, spec.driftHzPerS ?? 0, spec.phaseDeg ?? 0, sampleRate, maxBlock, spec.steps);
    case 'harmonics':
      return new HarmonicsGen(spec.fundamentalHz, spec.amplitudes, spec.driftHzPerS ?? 0, sampleRate, maxBlock);
    case 'noise':
      return new NoiseGen(spec.color, spec.rms, spec.bandHz, sampleRate, (seed + 7919 * (index + 1)) >>> 0);
    case 'wav': {
      const data = wavs.get(spec.file);
      if (!data) throw new Error(`sources[${index}].file: "${spec.file}" was not loaded`);
      return new WavGen(data, spec.gain ?? 1, spec.loop ?? false);
    }
  }
}
