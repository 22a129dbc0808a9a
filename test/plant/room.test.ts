import { describe, expect, it } from 'vitest';
import {
  eyringT60,
  reverberationTime,
  roomImpulseResponse,
  sabineT60,
  schroederDecayDb,
} from '../../src/plant/room.ts';
import { realSpectrum } from '../../src/dsp/fft.ts';
import { expectClose } from '../helpers/tolerance.ts';

describe('sabineT60 and eyringT60', () => {
  it('should give the worked values for a 5×4×3 m room with mean absorption 0.2', () => {
    // Sabine T60 = 0.161·V/A (W. C. Sabine, Collected Papers on Acoustics, Harvard University Press, 1922,
    // from memory); Eyring (JASA 1(2), 1930) T60 = 0.161·V/(−S·ln(1 − ᾱ)). Values calculated from these formulas
    // for V = 60 m³, S = 94 m², ᾱ = 0.2, with 0.161 = 24·ln10/343 s/m: Sabine 0.514 s, Eyring 0.461 s (to 1 ms).
    const room = { dimensionsM: [5, 4, 3] as const, absorption: 0.2 };
    expectClose(sabineT60(room), 0.514, 0.0006, 'Sabine T60');
    expectClose(eyringT60(room), 0.461, 0.0006, 'Eyring T60');
  });

  it('should weight per-wall absorption by wall area (Sabine: A = Σ S_i·α_i)', () => {
    // Floor 20 m² fully absorbing, rest 0.1: A = 20·1 + 74·0.1 = 27.4 m²; T60 = 0.1611·60/27.4.
    const t = sabineT60({ dimensionsM: [5, 4, 3], absorption: [0.1, 0.1, 0.1, 0.1, 1, 0.1] });
    expectClose(t, ((24 * Math.LN10) / 343) * 60 / 27.4, 1e-12, 'Sabine T60');
  });
});

describe('schroederDecayDb', () => {
  it('should fall at the rate of an exponential decay with a known T60', () => {
    // Energy of h = exp(−6.9078·t/T60) falls 60 dB in T60; its backward integral (Schroeder, JASA 37, 1965)
    // falls at the same rate. T60 = 0.3 s at 1 kHz, 2 s long so truncation does not bend the fitted range.
    const fs = 1000;
    const h = new Float64Array(2000);
    for (let n = 0; n < h.length; n++) h[n] = Math.exp((-3 * Math.LN10 * n) / (fs * 0.3));
    const fit = reverberationTime(h, fs, 'T30');
    expectClose(fit.t60S, 0.3, 0.001, 'T30 of an exponential');
    const decay = schroederDecayDb(h);
    expect(decay[0]).toBe(0);
    expectClose(decay[150]! - decay[300]!, 30, 0.05, 'decay over 0.15 s');
  });

  it('should refuse a T30 fit when the decay never falls 35 dB', () => {
    const h = new Float64Array(100).map((_, n) => Math.exp(-n / 100));
    expect(() => reverberationTime(h, 1000, 'T30')).toThrow(/-35 dB/);
  });
});

describe('roomImpulseResponse', () => {
  it('should decay with T20 between 0.9 × Eyring and 1.1 × Sabine for uniform absorption', () => {
    // Sabine; Eyring 1930; Schroeder 1965; T20 fit −5…−25 dB (ISO 3382-2, from memory). The bounds are the
    // project's choice. Image-source decays run a little longer than Sabine (Lehmann & Johansson, JASA 124(1),
    // 2008, from memory), so the 100 Hz high-pass removes the in-phase low-frequency part of the image sum,
    // which decays more slowly still. 8 kHz keeps the run short.
    const room = { dimensionsM: [5, 4, 3] as const, absorption: 0.2 };
    const lo = 0.9 * eyringT60(room);
    const hi = 1.1 * sabineT60(room);
    const positions = [
      { source: [1.2, 0.9, 1.1], receiver: [3.9, 3.1, 1.6] },
      { source: [2.6, 1.4, 0.7], receiver: [0.8, 2.9, 2.2] },
    ] as const;
    for (const p of positions) {
      const ir = roomImpulseResponse({ ...room, ...p, sampleRate: 8000, highPassHz: 100 });
      const fit = reverberationTime(ir, 8000, 'T20');
      expect(fit.t60S, `T20 at ${JSON.stringify(p)}`).toBeGreaterThan(lo);
      expect(fit.t60S, `T20 at ${JSON.stringify(p)}`).toBeLessThan(hi);
    }
  });

  it('should show the first axial modes n·c/(2·Lx) as peaks of the magnitude response', () => {
    // Axial modes of a rectangular room, f = n·c/(2·L) (Kuttruff, Room Acoustics, from memory). A 10 m long room:
    // 17.15, 34.30, 51.45 Hz come before the first cross mode (57.2 Hz). Source and receiver near opposite
    // corners excite every mode. At 2 kHz the response is 0.48 s long, a resolution of about 2 Hz: each peak
    // must lie within ±1 Hz (half that) and stand 6 dB above the dips on either side.
    const fs = 2000;
    const c = 343;
    const ir = roomImpulseResponse({
      dimensionsM: [10, 3, 2.5],
      absorption: 0.2,
      source: [0.4, 0.4, 0.4],
      receiver: [9.5, 2.6, 2.1],
      sampleRate: fs,
      speedOfSound: c,
    });
    const size = 1 << 16;
    const X = realSpectrum(ir, size);
    const binHz = fs / size;
    const magDb = (f: number): number => {
      const k = Math.round(f / binHz);
      return 10 * Math.log10(X[2 * k]! ** 2 + X[2 * k + 1]! ** 2);
    };
    for (const n of [1, 2, 3]) {
      const f = (n * c) / (2 * 10);
      let bestF = 0;
      let best = -Infinity;
      for (let k = Math.round((f - 5) / binHz); k <= Math.round((f + 5) / binHz); k++) {
        const level = magDb(k * binHz);
        if (level > best) {
          best = level;
          bestF = k * binHz;
        }
      }
      expectClose(bestF, f, 1, `axial mode ${n}`);
      // Prominence: the lowest level on each side, within half the mode spacing, lies 6 dB or more below the peak.
      const half = c / (4 * 10);
      let below = Infinity;
      let above = Infinity;
      for (let g = f - half; g < bestF; g += binHz) below = Math.min(below, magDb(g));
      for (let g = bestF + binHz; g <= f + half; g += binHz) above = Math.min(above, magDb(g));
      expect(best - below, `mode ${n} against the dip below`).toBeGreaterThan(6);
      expect(best - above, `mode ${n} against the dip above`).toBeGreaterThan(6);
    }
  });

  it('should put the direct sound at d/c with amplitude 1/(4π·d) when the walls absorb everything', () => {
    // α = 1 → β = 0: only the direct path remains (Allen & Berkley, JASA 65(4), 1979). 3 m at 343 m/s and
    // 3430 Hz is exactly 30 samples, a whole delay, so one tap holds it.
    const ir = roomImpulseResponse({
      dimensionsM: [6, 4, 3],
      absorption: 1,
      source: [1, 2, 1.5],
      receiver: [4, 2, 1.5],
      sampleRate: 3430,
      maxTimeS: 0.05,
    });
    expectClose(ir[30]!, 1 / (4 * Math.PI * 3), 1e-15, 'direct sound');
    let rest = 0;
    for (let i = 0; i < ir.length; i++) if (i !== 30) rest += Math.abs(ir[i]!);
    expect(rest).toBe(0);
  });

  it('should add the first reflection off one wall with gain √(1 − α) at the mirror-image distance', () => {
    // Only the wall x = 0 reflects (α = 0.36 → β = 0.8); maxOrder 1. Source at x = 1, receiver at x = 4:
    // image at x = −1, 5 m away = 50 samples at 3430 Hz.
    const ir = roomImpulseResponse({
      dimensionsM: [6, 4, 3],
      absorption: [0.36, 1, 1, 1, 1, 1],
      source: [1, 2, 1.5],
      receiver: [4, 2, 1.5],
      sampleRate: 3430,
      maxOrder: 1,
      maxTimeS: 0.05,
    });
    expectClose(ir[50]!, 0.8 / (4 * Math.PI * 5), 1e-15, 'first reflection');
  });

  it('should refuse positions outside the room and absorption outside (0, 1], naming the field', () => {
    const base = {
      dimensionsM: [5, 4, 3] as const,
      absorption: 0.2 as number | readonly [number, number, number, number, number, number],
      source: [1, 1, 1] as const,
      receiver: [2, 2, 2] as const,
      sampleRate: 8000,
      maxTimeS: 0.01,
    };
    expect(() => roomImpulseResponse({ ...base, source: [1, 5, 1] })).toThrow(/source\[1\].*\(0, 4\).*5/);
    expect(() => roomImpulseResponse({ ...base, receiver: [0, 1, 1] })).toThrow(/receiver\[0\]/);
    expect(() => roomImpulseResponse({ ...base, absorption: 0 })).toThrow(/absorption must be in \(0, 1\], got 0/);
    expect(() => roomImpulseResponse({ ...base, absorption: [0.2, 0.2, 1.5, 0.2, 0.2, 0.2] })).toThrow(/absorption\[2\]/);
    expect(() => roomImpulseResponse({ ...base, dimensionsM: [5, -4, 3] })).toThrow(/dimensionsM\[1\]/);
    expect(() => roomImpulseResponse({ ...base, maxOrder: 1.5 })).toThrow(/maxOrder/);
    expect(() => roomImpulseResponse({ ...base, highPassHz: 5000 })).toThrow(/highPassHz/);
  });

  it('should cut the default length where the image count reaches maxImages in a very live room', () => {
    // Images fill space at one per room volume, so N(t) = (4/3)·π·(c·t)³/V reaches maxImages = 1e4 at
    // t = ∛(3·1e4·V/(4π))/c: 2×2×2 m → 26.7 ms, far below this room's Sabine T60 of 5.4 s.
    const room = { dimensionsM: [2, 2, 2] as const, absorption: 0.01 };
    const t = Math.cbrt((3 * 1e4 * 8) / (4 * Math.PI)) / 343;
    const ir = roomImpulseResponse({ ...room, source: [0.5, 0.5, 0.5], receiver: [1.5, 1.2, 1], sampleRate: 8000, maxImages: 1e4 });
    expect(ir.length).toBe(Math.ceil(t * 8000));
    expect(sabineT60(room)).toBeGreaterThan(5);
  });

  it('should bound the default length by the Sabine T60', () => {
    const room = { dimensionsM: [3, 3, 2.5] as const, absorption: 0.5 };
    const ir = roomImpulseResponse({ ...room, source: [1, 1, 1], receiver: [2, 2, 1.5], sampleRate: 1000 });
    expect(ir.length).toBe(Math.ceil(sabineT60(room) * 1000));
  });
});

describe('roomImpulseResponse', () => {
  describe('with a response length that needs more image sources than the tool computes', () => {
    it('should refuse it at once, naming the estimate and the way out', () => {
      // N(t) ≈ (4/3)·π·(c·t)³ / V image sources (one per room volume; Allen & Berkley, JASA 65(4), 1979, from memory):
      // 10 s in a 2×2×2 m room: (4/3)·π·3430³ / 8 ≈ 2.1e10 (calculated)
      expect(() => roomImpulseResponse({ dimensionsM: [2, 2, 2], absorption: 0.2, source: [0.5, 0.5, 0.5], receiver: [1.5, 1.5, 1.5], sampleRate: 8000, maxTimeS: 10 }))
        .toThrow(/maxTimeS: 10 s in a room of 8\.00 m³ reaches about 2\.1e\+10 image sources, more than the 2e\+7 .*shorten maxTimeS or set maxOrder/);
    });
  });
});
