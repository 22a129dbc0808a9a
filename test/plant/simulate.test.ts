import { describe, expect, it } from 'vitest';
import { simulate, PlantLoop } from '../../src/plant/simulate.ts';
import { ScenarioError } from '../../src/plant/scenario.ts';
import { fftConvolve } from '../../src/dsp/fft.ts';
import { pathResponse } from '../../src/plant/scenario.ts';
import { denseResponse } from '../../src/plant/fractional-delay.ts';
import { noiseScenario, toneScenario } from '../helpers/scenarios.ts';

describe('simulate', () => {
  describe('with the closed block loop', () => {
    it('should make the control-on error equal d + s * y sample for sample', () => {
      const sc = toneScenario({ durationS: 0.5, sensorNoiseRms: 0, paths: { secondary: { delayMs: 5, gain: 0.8, fir: [1, 0.3, -0.2] } } });
      const r = simulate(sc, { record: true });
      const s = denseResponse(pathResponse(sc.paths.secondary, sc.sampleRate));
      const sy = fftConvolve(r.signals!.output, s);
      let maxErr = 0;
      for (let i = 0; i < r.signals!.errorOn.length; i++) {
        const expected = r.signals!.errorOff[i]! + sy[i]!;
        maxErr = Math.max(maxErr, Math.abs(r.signals!.errorOn[i]! - expected));
      }
      expect(maxErr).toBeLessThan(1e-6);
    });

    it('should refuse a secondary path shorter than one block, naming the field and the minimum', () => {
      expect(() => toneScenario({ paths: { secondary: { delayMs: 2, gain: 1 } } })).toThrow(ScenarioError);
      expect(() => toneScenario({ paths: { secondary: { delayMs: 2, gain: 1 } } })).toThrow(/paths\.secondary\.delayMs: .*at least one block, 32 samples \(4\.000 ms at 8000 Hz\)/);
    });

    it('should run a block at a time without allocating in PlantLoop.step', () => {
      const loop = new PlantLoop(toneScenario({ durationS: 1 }));
      for (let i = 0; i < 50; i++) loop.step(32);
      expect(loop.time).toBe(1600);
      expect(Number.isFinite(loop.errOn[31]!)).toBe(true);
    });
  });

  describe('with a secondary-path model phase error on a tonal scenario (guard off)', () => {
    // Morgan, IEEE TASSP 28(4), 1980; Boucher, Elliott & Nelson, IEE Proc. F 138(4), 1991 (from memory):
    // tonal FxLMS converges for a model phase error within ±90° and diverges beyond.
    const base = { controller: { algorithm: 'fxlms', taps: 16, stepSize: 0.01, modelTaps: 160 }, durationS: 8 };

    it('should converge at 60°', () => {
      const r = simulate(toneScenario({ ...base, controller: { ...base.controller, modelPhaseErrorDeg: 60 } }));
      expect(r.diverged).toBe(false);
      expect(r.attenuationDb!).toBeGreaterThan(20);
    });

    it('should diverge at 120°', () => {
      const r = simulate(toneScenario({ ...base, controller: { ...base.controller, modelPhaseErrorDeg: 120 } }));
      expect(r.diverged).toBe(true);
      expect(r.attenuationDb ?? -Infinity).toBeLessThan(0);
    });
  });

  describe('against the Wiener bound', () => {
    // Widrow & Stearns, *Adaptive Signal Processing*, 1985; Elliott, *Signal Processing for Active
    // Control*, 2001, ch. 3: the optimal causal L-tap filter bounds a converged FxLMS on stationary data.
    it('should reach within 1 dB of the bound on a stationary tone with error-mic noise', () => {
      const r = simulate(toneScenario({ controller: { algorithm: 'fxnlms', taps: 32, stepSize: 0.005 }, durationS: 8 }));
      expect(r.wienerBoundDb).not.toBeNull();
      expect(r.wienerBoundIsBound).toBe(true);
      expect(Math.abs(r.attenuationDb! - r.wienerBoundDb!)).toBeLessThan(1);
    });

    it('should reach within 3 dB of the bound on causal broadband noise', () => {
      const r = simulate(noiseScenario());
      expect(r.wienerBoundDb!).toBeGreaterThan(20);
      expect(r.attenuationDb!).toBeGreaterThan(r.wienerBoundDb! - 3);
      expect(r.attenuationDb!).toBeLessThan(r.wienerBoundDb! + 1);
    });

    it('should find almost no broadband attenuation when the primary path is shorter than the secondary path', () => {
      // Kuo & Morgan, Proc. IEEE 87(6), 1999 (from memory): white noise with a causality deficit gives ≈ 0 dB.
      const r = simulate(noiseScenario({ paths: { primary: { delayMs: 2, gain: 0.7, fir: [1] } }, controller: { algorithm: 'fxnlms', taps: 96, stepSize: 0.005 } }));
      expect(r.wienerBoundDb!).toBeLessThan(1);
      expect(r.attenuationDb!).toBeLessThan(1.5);
    });
  });

  describe('with non-stationary sources', () => {
    it('should report the Wiener figure as not a bound for a drifting tone', () => {
      const r = simulate(toneScenario({ sources: [{ kind: 'tone', hz: 100, amplitude: 0.3, driftHzPerS: 5 }], durationS: 3 }));
      expect(r.wienerBoundIsBound).toBe(false);
      expect(r.notes.wienerBound).toMatch(/not stationary/);
    });
  });

  describe('with image-source room paths', () => {
    const room = {
      room: { dimensionsM: [4, 3, 2.5], absorption: 0.6, source: [0.5, 1.5, 1], referenceMic: [0.9, 1.5, 1], errorMic: [3.5, 1.5, 1.2], speaker: [3.1, 1.2, 1.1], maxTimeS: 0.05 },
      ioLatencyMs: 5,
    };

    it('should turn the room into explicit paths whose direct sound arrives at distance / c (Allen & Berkley, 1979)', () => {
      const sc = toneScenario({ paths: room, durationS: 1 });
      expect(sc.room).toBeDefined();
      const d = Math.hypot(3.5 - 3.1, 1.5 - 1.2, 1.2 - 1.1); // speaker → error mic
      const expectedMs = (d / 343) * 1000 + 5;
      const r = pathResponse(sc.paths.secondary, sc.sampleRate);
      let peak = 0;
      for (let i = 1; i < r.taps.length; i++) if (Math.abs(r.taps[i]!) > Math.abs(r.taps[peak]!)) peak = i;
      expect(Math.abs(((r.offset + peak) / sc.sampleRate) * 1000 - expectedMs)).toBeLessThan(1.5 / 8);
      expect(simulate(sc).attenuationDb!).toBeGreaterThan(20);
    });

    it('should name ioLatencyMs when the room secondary path is shorter than a block', () => {
      expect(() => toneScenario({ paths: { ...room, ioLatencyMs: 0 } })).toThrow(/paths\.ioLatencyMs \(the room's secondary path\)/);
    });
  });

  describe('with microphones beyond full scale', () => {
    it('should clip at ±1 and say so', () => {
      const r = simulate(toneScenario({ sources: [{ kind: 'tone', hz: 100, amplitude: 3 }], durationS: 0.5 }));
      expect(r.clipping.referenceSamples).toBeGreaterThan(0);
      expect(r.notes.clipping).toMatch(/clipped at full scale/);
    });
  });
});

describe('simulate', () => {
  describe('with a secondary path that changes mid-run', () => {
    it('should not call the Wiener figure a bound, and say why', () => {
      const fixed = simulate(noiseScenario({ durationS: 2 }));
      const moved = simulate(noiseScenario({ durationS: 2, faults: [{ kind: 'secondary-path-change', atS: 1, path: { delayMs: 6, gain: 0.8 } }] }));
      expect(fixed.wienerBoundIsBound).toBe(true);
      expect(moved.wienerBoundIsBound).toBe(false);
      expect(moved.notes.wienerBound).toMatch(/secondary path changes during the run/);
    });
  });
});
