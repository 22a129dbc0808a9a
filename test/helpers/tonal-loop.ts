// A small closed loop for tonal-control tests: disturbance d at the error microphone, secondary path
// s = (integer delay of at least one block) followed by a short FIR, e = d + s * y, run block by block.
// Also: signal generators and a least-squares tone-amplitude fit used to measure attenuation.
import type { Controller } from '../../src/dsp/controller.ts';

export interface TonalLoopOptions {
  /** Block size handed to the controller. */
  blockSize: number;
  /** Bulk delay of the secondary path (samples, ≥ blockSize so the loop is causal block by block). */
  delaySamples: number;
  /** Short FIR after the delay. */
  fir: ArrayLike<number>;
}

export interface TonalLoopRun {
  /** Error microphone signal e = d + s * y. */
  error: Float32Array;
  /** Controller output y. */
  output: Float32Array;
}

/** Impulse response of the loop's secondary path: `delaySamples` zeros then the FIR. */
export function secondaryPathImpulse(delaySamples: number, fir: ArrayLike<number>): Float32Array {
  const h = new Float32Array(delaySamples + fir.length);
  for (let j = 0; j < fir.length; j++) h[delaySamples + j] = fir[j]!;
  return h;
}

/**
 * Run `controller` over the whole `disturbance`. `reference` (same length) is what the reference
 * microphone hears; pass null to feed zeros. `beforeBlock(start)` runs before each block (switch
 * adaptation on, change the source ...).
 */
export function runTonalLoop(
  controller: Controller,
  options: TonalLoopOptions,
  disturbance: Float32Array,
  reference: Float32Array | null,
  beforeBlock?: (start: number) => void,
): TonalLoopRun {
  const { blockSize, delaySamples, fir } = options;
  if (!(Number.isInteger(blockSize) && blockSize >= 1)) throw new Error(`blockSize must be a positive integer, got ${blockSize}`);
  if (!(Number.isInteger(delaySamples) && delaySamples >= blockSize)) {
    throw new Error(`delaySamples must be an integer ≥ blockSize (${blockSize}), got ${delaySamples}`);
  }
  const total = disturbance.length;
  const error = new Float32Array(total);
  const output = new Float32Array(total);
  const ref = reference ?? new Float32Array(total);
  const L = fir.length;
  for (let start = 0; start < total; start += blockSize) {
    const n = Math.min(blockSize, total - start);
    // every output sample that reaches this block is from an earlier block (delay ≥ block size)
    for (let i = start; i < start + n; i++) {
      let acc = disturbance[i]!;
      for (let j = 0; j < L; j++) {
        const t = i - delaySamples - j;
        if (t < 0) break;
        acc += fir[j]! * output[t]!;
      }
      error[i] = acc;
    }
    beforeBlock?.(start);
    controller.process(
      ref.subarray(start, start + n),
      error.subarray(start, start + n),
      output.subarray(start, start + n),
      n,
    );
  }
  return { error, output };
}

/** A sinusoid A·cos(2π f t + phase) of `length` samples. */
export function tone(length: number, sampleRate: number, hz: number, amplitude = 1, phase = 0): Float32Array {
  const x = new Float32Array(length);
  const w = (2 * Math.PI * hz) / sampleRate;
  for (let i = 0; i < length; i++) x[i] = amplitude * Math.cos(w * i + phase);
  return x;
}

/**
 * A tone whose instantaneous frequency is `hzAt(t)` (t in seconds), by phase accumulation.
 * Returns the signal and the instantaneous frequency per sample.
 */
export function chirp(
  length: number,
  sampleRate: number,
  hzAt: (t: number) => number,
  amplitude = 1,
): { signal: Float32Array; hz: Float64Array } {
  const signal = new Float32Array(length);
  const hz = new Float64Array(length);
  let phase = 0;
  for (let i = 0; i < length; i++) {
    const f = hzAt(i / sampleRate);
    hz[i] = f;
    signal[i] = amplitude * Math.cos(phase);
    phase += (2 * Math.PI * f) / sampleRate;
  }
  return { signal, hz };
}

/**
 * Amplitude of the sinusoid at `hz` in x[start … start+length) by a least-squares fit of
 * a·cos + b·sin (the 2×2 normal equations, so it is exact for a pure tone over any length).
 */
export function toneAmplitude(x: ArrayLike<number>, start: number, length: number, hz: number, sampleRate: number): number {
  const w = (2 * Math.PI * hz) / sampleRate;
  let cc = 0;
  let ss = 0;
  let cs = 0;
  let xc = 0;
  let xs = 0;
  for (let i = start; i < start + length; i++) {
    const c = Math.cos(w * i);
    const s = Math.sin(w * i);
    cc += c * c;
    ss += s * s;
    cs += c * s;
    xc += x[i]! * c;
    xs += x[i]! * s;
  }
  const det = cc * ss - cs * cs;
  const a = (xc * ss - xs * cs) / det;
  const b = (xs * cc - xc * cs) / det;
  return Math.hypot(a, b);
}

/** Mean square of x[start … start+length). */
export function meanSquare(x: ArrayLike<number>, start: number, length: number): number {
  let s = 0;
  for (let i = start; i < start + length; i++) s += x[i]! * x[i]!;
  return s / length;
}
