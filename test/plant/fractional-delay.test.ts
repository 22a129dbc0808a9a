import { describe, expect, it } from 'vitest';
import { buildPathResponse, denseResponse, fractionalDelayTaps } from '../../src/plant/fractional-delay.ts';
import { expectClose } from '../helpers/tolerance.ts';

/** Convolve a sampled sine with sparse taps and return the worst error against the analytic delayed sine. */
function worstSineError(delaySamples: number, cyclesPerSample: number, halfWidth?: number): number {
  const { offset, taps } = fractionalDelayTaps(delaySamples, halfWidth);
  const w = 2 * Math.PI * cyclesPerSample;
  let worst = 0;
  for (let n = 100; n < 400; n++) {
    let y = 0;
    for (let i = 0; i < taps.length; i++) y += taps[i]! * Math.sin(w * (n - offset - i));
    worst = Math.max(worst, Math.abs(y - Math.sin(w * (n - delaySamples))));
  }
  return worst;
}

describe('fractionalDelayTaps', () => {
  it('should delay a sine at 0.1·fs to within 1e-3 of the analytically delayed sine', () => {
    // Band-limited interpolation by a windowed sinc (Peterson, JASA 80(5), 1986): a sine well below Nyquist
    // delayed by D samples must equal sin(ω(n − D)). Tolerance 1e-3 (−60 dB) is the project's choice for
    // W = 16; a run gave ≤ 1e-4.
    for (const d of [20.3, 20.5, 37.77]) {
      const err = worstSineError(d, 0.1);
      expect(err, `delay ${d}`).toBeLessThan(1e-3);
    }
  });

  it('should be less accurate with a shorter kernel, so the half-width matters', () => {
    // The kernel shortens for small delays to stay causal; at 0.3·fs a 2-tap kernel is far off.
    expect(worstSineError(0.5, 0.3)).toBeGreaterThan(0.1);
    expect(worstSineError(20.5, 0.3)).toBeLessThan(1e-3);
  });

  it('should give a single unit tap at whole-sample delays, exactly', () => {
    for (const d of [0, 1, 7, 100]) {
      const r = fractionalDelayTaps(d);
      expect(r.offset).toBe(d);
      expect(Array.from(r.taps)).toEqual([1]);
    }
  });

  it('should stay causal and pass DC at unit gain for delays shorter than the half-width', () => {
    const r = fractionalDelayTaps(2.25);
    expect(r.offset).toBe(0);
    let sum = 0;
    for (const t of r.taps) sum += t;
    expectClose(sum, 1, 1e-12, 'DC gain');
  });

  it('should refuse negative or non-finite delays and bad half-widths, naming the field', () => {
    expect(() => fractionalDelayTaps(-1)).toThrow(/delaySamples.*-1/);
    expect(() => fractionalDelayTaps(Number.NaN)).toThrow(/delaySamples/);
    expect(() => fractionalDelayTaps(3.5, 0)).toThrow(/halfWidth.*0/);
  });
});

describe('buildPathResponse', () => {
  it('should equal gain × fir delayed by a whole number of samples, stored from the first non-zero tap', () => {
    const r = buildPathResponse({ delaySamples: 12, gain: -0.5, fir: [0, 0, 1, 0.5, -0.25, 0] });
    expect(r.offset).toBe(14);
    expect(Array.from(r.taps)).toEqual([-0.5, -0.25, 0.125]);
  });

  it('should delay an FIR by a fractional amount like the FIR filtered by the delay kernel', () => {
    const fir = [1, -0.6, 0.3];
    const r = buildPathResponse({ delaySamples: 30.4, gain: 2, fir });
    const k = fractionalDelayTaps(30.4);
    const dense = denseResponse(r, 80);
    const kd = denseResponse(k, 80);
    for (let n = 2; n < 80; n++) {
      const expected = 2 * (kd[n]! * fir[0]! + kd[n - 1]! * fir[1]! + kd[n - 2]! * fir[2]!);
      expectClose(dense[n]!, expected, 1e-12, `tap ${n}`);
    }
  });

  it('should refuse a non-finite gain, an empty fir and a NaN fir tap', () => {
    expect(() => buildPathResponse({ delaySamples: 1, gain: Number.POSITIVE_INFINITY })).toThrow(/gain/);
    expect(() => buildPathResponse({ delaySamples: 1, gain: 1, fir: [] })).toThrow(/fir/);
    expect(() => buildPathResponse({ delaySamples: 1, gain: 1, fir: [1, Number.NaN] })).toThrow(/fir\[1\]/);
  });
});
