import { describe, it, expect } from 'vitest';
import { GainRamp } from '../../src/dsp/gain-ramp.ts';
import { expectClose } from '../helpers/tolerance.ts';

const FS = 48000;

/** Run the ramp over a buffer of ones, in blocks, and return the gain per sample. */
function gains(ramp: GainRamp, n: number, block = 128): Float32Array {
  const buf = new Float32Array(n).fill(1);
  for (let o = 0; o < n; o += block) ramp.process(buf.subarray(o, o + block), Math.min(block, n - o));
  return buf;
}

describe('GainRamp', () => {
  it('should fade along a raised cosine, g0 + (g1 − g0)(1 − cos(πk/N))/2, and land exactly on the target', () => {
    // Raised-cosine fade: the half-period of a Hann window (Harris, Proc. IEEE 66(1), 1978; from memory).
    const ramp = new GainRamp({ sampleRate: FS, fadeInMs: 10 });
    ramp.start();
    const N = 480;
    const g = gains(ramp, 1000, 100);
    for (let k = 1; k <= N; k++) expectClose(g[k - 1]!, (1 - Math.cos((Math.PI * k) / N)) / 2, 1e-6, `gain at k=${k}`);
    for (let k = N; k < 1000; k++) expect(g[k]).toBe(1);
    expect(ramp.isSettled).toBe(true);
    expect(ramp.gain).toBe(1);
  });

  it('should fade linearly when asked to', () => {
    // Linear fade: g[k] = g0 + (g1 − g0)·k/N (definition).
    const ramp = new GainRamp({ sampleRate: FS, shape: 'linear', initialGain: 1 });
    ramp.target(0.25, 5);
    const N = 240;
    const g = gains(ramp, 400, 37);
    for (let k = 1; k <= N; k++) expectClose(g[k - 1]!, 1 - (0.75 * k) / N, 1e-6, `gain at k=${k}`);
    expect(g[399]).toBe(0.25);
  });

  it('should keep the cosine recurrence accurate over a 10 s fade', () => {
    // The rotation recurrence must track cos(πk/N) without drift (formula as above).
    const ramp = new GainRamp({ sampleRate: FS });
    ramp.target(1, 10000);
    const N = 480000;
    const g = gains(ramp, N, 4096);
    let maxErr = 0;
    for (let k = 1; k < N; k += 997) maxErr = Math.max(maxErr, Math.abs(g[k - 1]! - Math.fround((1 - Math.cos((Math.PI * k) / N)) / 2)));
    expect(maxErr).toBeLessThan(1e-6);
  });

  it('should fade out on stop, report silence, and write exact zeros once silent', () => {
    // Output-safety requirement: fade out on stop; silence is exactly 0, even over NaN input.
    const ramp = new GainRamp({ sampleRate: FS, initialGain: 1, fadeOutMs: 2 });
    expect(ramp.isSilent).toBe(false);
    ramp.stop();
    expect(ramp.isSettled).toBe(false);
    expect(ramp.targetGain).toBe(0);
    const g = gains(ramp, 200);
    expect(g[94]!).toBeGreaterThan(0);
    expect(g[95]).toBe(0);
    expect(ramp.isSilent).toBe(true);
    const buf = new Float32Array([NaN, Infinity, 1]);
    ramp.process(buf, 3);
    expect(Array.from(buf)).toEqual([0, 0, 0]);
  });

  it('should mute at once on reset', () => {
    // Output-safety requirement: instant mute on reset.
    const ramp = new GainRamp({ sampleRate: FS, initialGain: 1 });
    ramp.start();
    ramp.target(1, 100);
    ramp.reset();
    expect(ramp.gain).toBe(0);
    expect(ramp.isSilent).toBe(true);
    const g = gains(ramp, 10);
    expect(Array.from(g)).toEqual(new Array(10).fill(0));
  });

  it('should start a new ramp from the current gain without a jump', () => {
    // A click-free fade has no step: a retarget mid-ramp continues from where the gain is.
    const ramp = new GainRamp({ sampleRate: FS });
    ramp.start();
    const a = gains(ramp, 1200);
    const at = ramp.gain;
    expect(at).toBeGreaterThan(0.1);
    expect(at).toBeLessThan(0.9);
    ramp.stop();
    const b = gains(ramp, 10);
    expect(Math.abs(b[0]! - a[1199]!)).toBeLessThan(1e-3);
    expect(b[9]!).toBeLessThan(at);
  });

  it('should give the same gains whatever the block sizes', () => {
    // Streaming contract (DEVELOPERS.md, src/dsp: process(input, output, n) on any block size).
    const one = new GainRamp({ sampleRate: FS });
    one.start();
    const whole = gains(one, 3000, 3000);
    const many = new GainRamp({ sampleRate: FS });
    many.start();
    const parts = gains(many, 3000, 7);
    expect(Array.from(parts)).toEqual(Array.from(whole));
  });

  it('should refuse invalid settings with the field, range and value', () => {
    // ancbench rule: validation messages name the field, the allowed range and the value received.
    expect(() => new GainRamp({ sampleRate: 100 })).toThrow(/sampleRate.*8000.*384000 Hz, got 100/);
    expect(() => new GainRamp({ sampleRate: FS, fadeInMs: -1 })).toThrow(/fadeInMs.*0.*10000 ms, got -1/);
    expect(() => new GainRamp({ sampleRate: FS, shape: 'cubic' as 'linear' })).toThrow(/shape.*raised-cosine.*linear.*got cubic/);
    const ramp = new GainRamp({ sampleRate: FS });
    expect(() => ramp.target(NaN, 10)).toThrow(/gain.*0.*10, got NaN/);
    expect(() => ramp.target(1, 1e6)).toThrow(/timeMs.*0.*10000 ms, got 1000000/);
  });
});
