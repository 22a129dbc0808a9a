import { describe, expect, it } from 'vitest';
import {
  bandMisalignmentDb,
  misalignmentDb,
  onsetDelaySamples,
  pathFrequencyResponse,
  resampleImpulseResponse,
  summarizePathModel,
  windowSnrDb,
} from '../../src/analysis/path-model.ts';
import { Random } from '../../src/dsp/random.ts';
import { buildPathResponse, denseResponse } from '../../src/plant/fractional-delay.ts';
import { expectClose } from '../helpers/tolerance.ts';

describe('onsetDelaySamples', () => {
  it('should return the first tap within 20 dB of the largest one', () => {
    // 0.05 is −26 dB below 1 (ignored); 0.2 is −14 dB (counted): onset at index 4.
    const taps = [0, 0.001, 0, 0.05, 0.2, -1, 0.5];
    expect(onsetDelaySamples(taps)).toBe(4);
    expect(onsetDelaySamples(taps, 30)).toBe(3);
  });

  it('should refuse an all-zero response', () => {
    expect(() => onsetDelaySamples([0, 0, 0])).toThrow(/all be zero/);
  });
});

describe('pathFrequencyResponse', () => {
  it('should give the analytic response of a two-tap FIR, 1 + a·e^{−jω}', () => {
    // H(e^{jω}) = 1 + 0.5·e^{−jω}: |H|² = 1.25 + cos ω, ∠H = −atan(0.5 sin ω / (1 + 0.5 cos ω)) (DTFT definition).
    const fs = 1000;
    const r = pathFrequencyResponse([1, 0.5], fs, 64);
    expect(r.frequencyHz.length).toBe(33);
    for (let k = 0; k <= 32; k++) {
      const w = (2 * Math.PI * k) / 64;
      expectClose(r.frequencyHz[k]!, (k * fs) / 64, 1e-12, `frequency ${k}`);
      expectClose(r.magnitudeDb[k]!, 10 * Math.log10(1.25 + Math.cos(w)), 1e-9, `magnitude ${k}`);
      expectClose(r.phaseRad[k]!, -Math.atan2(0.5 * Math.sin(w), 1 + 0.5 * Math.cos(w)), 1e-9, `phase ${k}`);
    }
  });

  it('should unwrap the linear phase of a pure delay to −ω·D', () => {
    const taps = new Float64Array(40);
    taps[25] = 1;
    const r = pathFrequencyResponse(taps, 8000, 256);
    for (let k = 0; k <= 128; k++) expectClose(r.unwrappedPhaseRad[k]!, (-2 * Math.PI * k * 25) / 256, 1e-9, `phase ${k}`);
  });
});

describe('misalignmentDb and bandMisalignmentDb', () => {
  it('should give 10·log10 of the relative error energy', () => {
    // ŝ = 0.9·s: ‖ŝ − s‖²/‖s‖² = 0.01 → −20 dB in time and in any band.
    const s = [0, 0.3, 1, -0.4, 0.1];
    const e = s.map((v) => 0.9 * v);
    expectClose(misalignmentDb(e, s), -20, 1e-9, 'time-domain');
    expectClose(bandMisalignmentDb(e, s, 8000, [100, 3000]), -20, 1e-9, 'in band');
    // An estimate shorter than the truth counts the missing taps as error.
    expectClose(misalignmentDb([0, 0.3, 1], s), 10 * Math.log10(0.17 / 1.26), 1e-9, 'truncated estimate');
  });

  it('should ignore error outside the band', () => {
    // Error added as a 3.5 kHz tone does not count in [100, 1000] Hz but does in the whole band.
    const fs = 8000;
    const s = new Float64Array(256);
    s[10] = 1;
    s[11] = 0.5;
    const e = s.map((v, n) => v + 0.1 * Math.cos((2 * Math.PI * 3500 * n) / fs) * (0.5 - 0.5 * Math.cos((2 * Math.PI * n) / 256)));
    expect(bandMisalignmentDb(e, s, fs, [100, 1000], 256)).toBeLessThan(-60);
    expect(misalignmentDb(e, s)).toBeGreaterThan(-5);
  });

  it('should refuse a band outside [0, fs/2]', () => {
    expect(() => bandMisalignmentDb([1], [1], 8000, [100, 5000])).toThrow(/bandHz.*5000/);
  });
});

describe('windowSnrDb', () => {
  it('should measure the energy of a response against noise of known power', () => {
    // Response energy 4 (taps 2), noise σ² = 1e-4 over a 100-sample window: SNR = 10·log10(4/(1e-4·100)) = 26.0 dB.
    const rng = new Random(3);
    const x = new Float64Array(100_000).map(() => 0.01 * rng.gaussian());
    x[10] = x[10]! + 2;
    expectClose(windowSnrDb(x, 0, 100, 200, 99_800), 26.02, 0.3, 'SNR (dB)');
  });

  it('should refuse windows outside the signal', () => {
    expect(() => windowSnrDb([1, 2, 3], 0, 4, 0, 1)).toThrow(/signal window/);
  });
});

describe('summarizePathModel', () => {
  it('should report delay in samples and milliseconds, the peak and the energy', () => {
    const s = summarizePathModel([0, 0, 0, 0.3, -0.8, 0.2], 8000);
    expect(s.delaySamples).toBe(3);
    expectClose(s.delayMs, 0.375, 1e-12, 'delay (ms)');
    expect(s.peakIndex).toBe(4);
    expect(s.peakValue).toBe(-0.8);
    expectClose(s.energy, 0.77, 1e-12, 'energy');
  });
});

/** DTFT of an FIR at f Hz: Σ h[n]·e^{−j2πfn/fs}, as [re, im]. */
function dtft(h: ArrayLike<number>, fs: number, f: number): [number, number] {
  let re = 0;
  let im = 0;
  for (let n = 0; n < h.length; n++) {
    re += h[n]! * Math.cos((2 * Math.PI * f * n) / fs);
    im -= h[n]! * Math.sin((2 * Math.PI * f * n) / fs);
  }
  return [re, im];
}

describe('resampleImpulseResponse', () => {
  it('should keep the complex response of a path below 0.9 × the lower Nyquist, going up and down in rate', () => {
    // A continuous-time response sampled at two rates has the same H(f) (in gain and phase, i.e. the same delay in
    // seconds) wherever both rates represent it: the sampling theorem. Error within 0.3 % (−50 dB, the project's
    // choice; runs gave ≤ 0.07 %).
    const path = denseResponse(buildPathResponse({ delaySamples: 40.3, gain: 0.7, fir: [0.25, 0.5, 0.25, -0.1] }));
    for (const [from, to] of [[48000, 44100], [44100, 48000], [16000, 8000]] as const) {
      const source = from === 48000 || from === 16000 ? path : resampleImpulseResponse(path, 48000, 44100);
      const out = resampleImpulseResponse(source, from, to);
      const limit = 0.9 * Math.min(from, to) / 2;
      for (let f = 50; f < limit; f += limit / 7) {
        const [ar, ai] = dtft(source, from, f);
        const [br, bi] = dtft(out, to, f);
        const rel = Math.hypot(br - ar, bi - ai) / Math.hypot(ar, ai);
        expect(rel, `${from} → ${to} Hz at ${f.toFixed(0)} Hz`).toBeLessThan(0.003);
      }
    }
  });

  it('should return a copy when the rates are equal', () => {
    const taps = [0, 1, 0.5];
    expect(Array.from(resampleImpulseResponse(taps, 8000, 8000))).toEqual(taps);
  });
});
