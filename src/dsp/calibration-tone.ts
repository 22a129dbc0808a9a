/**
 * The calibration tone of the live processor: a sine of peak amplitude 10^(dBFS/20), which reads that
 * many dBFS by AES17 (a full-scale sine reads 0 dBFS), with raised-cosine ends so that starting and
 * stopping do not click, and a time limit. The processor plays what `process` writes through the
 * engine's output stage (Engine.processProbe) and hands the result back with `measure`, which keeps
 * the AES17 level of the steady part (envelope fully open, output ramp open): the level actually
 * handed to the output, which the calibration stores.
 *
 * Allocates nothing after construction; `start` may be called again for the next tone.
 */
import { powerToDbfs } from './units.ts';

export class CalibrationTone {
  hz = 0;
  dbfs = 0;
  /** True once `stop` was called or the time limit passed; the tone then fades out. */
  stopping = false;
  private amp = 0;
  private phase = 0;
  private step = 0;
  /** Linear envelope 0 … 1 (the raised cosine is taken of it). */
  private env = 0;
  private readonly envStep: number;
  private elapsed = 0;
  private readonly maxSamples: number;
  private sumSq = 0;
  private steady = 0;

  /** fadeS: raised-cosine fade at each end, s (> 0); maxS: the tone stops by itself after this, s. */
  constructor(
    private readonly sampleRate: number,
    fadeS: number,
    maxS: number,
  ) {
    if (!(fadeS > 0)) throw new RangeError(`fadeS must be above 0 s, got ${fadeS}`);
    if (!(maxS > fadeS)) throw new RangeError(`maxS must be above fadeS (${fadeS} s), got ${maxS}`);
    this.envStep = 1 / Math.max(1, Math.round(fadeS * sampleRate));
    this.maxSamples = Math.round(maxS * sampleRate);
  }

  start(hz: number, dbfs: number): void {
    this.hz = hz;
    this.dbfs = dbfs;
    this.amp = Math.pow(10, dbfs / 20);
    this.phase = 0;
    this.step = (2 * Math.PI * hz) / this.sampleRate;
    this.env = 0;
    this.stopping = false;
    this.elapsed = 0;
    this.sumSq = 0;
    this.steady = 0;
  }

  stop(): void {
    this.stopping = true;
  }

  /** True when a stopped tone has faded out completely. */
  get done(): boolean {
    return this.stopping && this.env === 0;
  }

  /** True when the envelope is fully open and the tone is not stopping. */
  get open(): boolean {
    return !this.stopping && this.env >= 1;
  }

  /** Write the next n samples. */
  process(x: Float32Array, n: number): void {
    if (this.elapsed >= this.maxSamples) this.stopping = true;
    const stopping = this.stopping;
    const d = this.envStep;
    const a = this.amp;
    const twoPi = 2 * Math.PI;
    let env = this.env;
    let ph = this.phase;
    for (let i = 0; i < n; i++) {
      env = stopping ? (env - d > 0 ? env - d : 0) : env + d < 1 ? env + d : 1;
      x[i] = a * (0.5 - 0.5 * Math.cos(Math.PI * env)) * Math.sin(ph);
      ph += this.step;
      if (ph > twoPi) ph -= twoPi;
    }
    this.env = env;
    this.phase = ph;
    this.elapsed += n;
  }

  /** Count n output samples towards the steady level (call only while `open` and the output stage's ramp is open). */
  measure(out: Float32Array, n: number): void {
    let s = 0;
    for (let i = 0; i < n; i++) s += out[i]! * out[i]!;
    this.sumSq += s;
    this.steady += n;
  }

  /** AES17 level of the steady samples measured, dBFS (NaN before any). */
  get measuredDbfs(): number {
    return this.steady > 0 ? powerToDbfs(this.sumSq / this.steady) : NaN;
  }

  get measuredSamples(): number {
    return this.steady;
  }
}
