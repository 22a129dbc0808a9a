/**
 * Click-free output gain: fades in on start/resume, fades out on stop, mutes instantly on reset.
 * `process` multiplies in place; once settled at 0 it writes exact zeros (even over NaN input).
 *
 * Shape: raised cosine (the default) or linear. A raised-cosine ramp from g0 to g1 over N samples is
 *   g[k] = g0 + (g1 − g0)·(1 − cos(π·k/N)) / 2,   k = 1 … N,
 * whose slope is zero at both ends, so the fade adds no step in the first derivative (common
 * practice for audio fades). The cosine is advanced by a rotation recurrence (no trigonometry per
 * sample) and the ramp snaps to g1 exactly at its last sample. A new target starts a new ramp from
 * the current gain.
 *
 * No allocation after construction; `process` never throws.
 */
import { checkNumber } from './check.ts';

export type RampShape = 'raised-cosine' | 'linear';

export interface GainRampConfig {
  /** Sample rate in Hz, 8000 … 384000. */
  sampleRate: number;
  /** Gain at construction, 0 … 10. Default 0 (silent until started). */
  initialGain?: number;
  /** Fade shape. Default 'raised-cosine'. */
  shape?: RampShape;
  /** Fade-in time used by `start()`, ms, 0 … 10000. Default 50 ms. */
  fadeInMs?: number;
  /** Fade-out time used by `stop()`, ms, 0 … 10000. Default 50 ms. */
  fadeOutMs?: number;
}

export const DEFAULT_FADE_MS = 50;

/** Largest gain a ramp accepts (+20 dB): the ramp is a fader, not an amplifier. */
export const MAX_RAMP_GAIN = 10;


export class GainRamp {
  readonly sampleRate: number;
  readonly shape: RampShape;
  readonly fadeInMs: number;
  readonly fadeOutMs: number;
  private current: number;
  private from = 0;
  private to = 0;
  private left = 0;
  // Linear ramp: step per sample. Raised cosine: cos/sin of π·k/N advanced by a rotation of π/N.
  private linStep = 0;
  private cosK = 1;
  private sinK = 0;
  private cosD = 1;
  private sinD = 0;

  constructor(config: GainRampConfig) {
    if (typeof config !== 'object' || config === null) throw new TypeError('GainRamp config must be an object');
    this.sampleRate = checkNumber('sampleRate', config.sampleRate, 8000, 384000, 'Hz');
    const initialGain = checkNumber('initialGain', config.initialGain ?? 0, 0, MAX_RAMP_GAIN);
    const shape = config.shape ?? 'raised-cosine';
    if (shape !== 'raised-cosine' && shape !== 'linear') {
      throw new RangeError(`shape must be 'raised-cosine' or 'linear', got ${String(shape)}`);
    }
    this.shape = shape;
    this.fadeInMs = checkNumber('fadeInMs', config.fadeInMs ?? DEFAULT_FADE_MS, 0, 10000, 'ms');
    this.fadeOutMs = checkNumber('fadeOutMs', config.fadeOutMs ?? DEFAULT_FADE_MS, 0, 10000, 'ms');
    this.current = initialGain;
    this.to = initialGain;
  }

  /** Instant mute: gain 0 at once, no ramp in progress (a fault or a reset of the engine). */
  reset(): void {
    this.current = 0;
    this.to = 0;
    this.left = 0;
  }

  /** Fade in to unity over `fadeInMs`. */
  start(): void {
    this.target(1, this.fadeInMs);
  }

  /** Fade out to silence over `fadeOutMs`. */
  stop(): void {
    this.target(0, this.fadeOutMs);
  }

  /**
   * Ramp from the current gain to `gain` (0 … 10, linear) over `timeMs` (0 … 10000; 0 = jump).
   * Takes effect from the next `process` call. Throws a RangeError for values out of range.
   */
  target(gain: number, timeMs: number): void {
    checkNumber('gain', gain, 0, MAX_RAMP_GAIN);
    checkNumber('timeMs', timeMs, 0, 10000, 'ms');
    const n = Math.round((timeMs * this.sampleRate) / 1000);
    this.from = this.current;
    this.to = gain;
    if (n <= 0 || gain === this.current) {
      this.current = gain;
      this.left = 0;
      return;
    }
    this.left = n;
    this.linStep = (gain - this.current) / n;
    this.cosK = 1;
    this.sinK = 0;
    this.cosD = Math.cos(Math.PI / n);
    this.sinD = Math.sin(Math.PI / n);
  }

  /** Multiply n samples of `buf` in place by the (ramping) gain. n is clamped to buf.length. */
  process(buf: Float32Array, n: number): void {
    const count = n < buf.length ? n : buf.length;
    let i = 0;
    if (this.left > 0) {
      const cosine = this.shape === 'raised-cosine';
      const span = this.to - this.from;
      let g = this.current;
      let c = this.cosK;
      let s = this.sinK;
      const cd = this.cosD;
      const sd = this.sinD;
      let left = this.left;
      for (; i < count && left > 0; i++) {
        left--;
        if (left === 0) {
          g = this.to;
        } else if (cosine) {
          const c2 = c * cd - s * sd;
          s = s * cd + c * sd;
          c = c2;
          g = this.from + span * 0.5 * (1 - c);
        } else {
          g += this.linStep;
        }
        buf[i] = buf[i]! * g;
      }
      this.current = g;
      this.cosK = c;
      this.sinK = s;
      this.left = left;
    }
    const g = this.current;
    if (g === 1) return;
    if (g === 0) {
      for (; i < count; i++) buf[i] = 0;
      return;
    }
    for (; i < count; i++) buf[i] = buf[i]! * g;
  }

  /** Current gain (linear). */
  get gain(): number {
    return this.current;
  }

  /** Gain the ramp is heading to (equal to `gain` once settled). */
  get targetGain(): number {
    return this.to;
  }

  /** No ramp in progress. */
  get isSettled(): boolean {
    return this.left === 0;
  }

  /** Settled at gain 0: the output is exactly silent. */
  get isSilent(): boolean {
    return this.left === 0 && this.current === 0;
  }
}
