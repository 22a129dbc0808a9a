import { describe, expect, it } from 'vitest';
import { simulate, PlantLoop } from '../../src/plant/simulate.ts';
import { Engine } from '../../src/engine/engine.ts';
import { toneScenario } from '../helpers/scenarios.ts';

describe('Engine', () => {
  describe('with a narrowband and a broadband controller on a stationary tone', () => {
    // Equivalence (our requirement, after Widrow et al., Proc. IEEE 63(12), 1975, who show the
    // single-sinusoid LMS canceller is the two-weight case of the FIR one): with a perfect model both
    // converge to the same residual, set by the error-mic noise.
    it('should reach the same steady state within 1 dB, both near the Wiener bound', () => {
      const broad = simulate(toneScenario({ controller: { algorithm: 'fxnlms', taps: 32, stepSize: 0.005 }, durationS: 8 }));
      const narrow = simulate(toneScenario({ controller: { algorithm: 'tonal', harmonics: 1, stepSize: 0.01 }, durationS: 8 }));
      expect(Math.abs(narrow.attenuationDb! - broad.attenuationDb!)).toBeLessThan(1);
      expect(Math.abs(broad.attenuationDb! - broad.wienerBoundDb!)).toBeLessThan(1);
    });
  });

  describe('when switching controllers at runtime', () => {
    function run(crossfadeMs: number): { maxStep: number; tail: number } {
      const sc = toneScenario({ controller: { algorithm: 'fxnlms', taps: 32, stepSize: 0.005 }, durationS: 6, sensorNoiseRms: 0 });
      const loop = new PlantLoop(sc);
      // replace the loop's engine by one with a tonal standby; same plant and model
      const engine = new Engine({
        sampleRate: sc.sampleRate,
        maxBlockSize: sc.blockSize,
        controller: { algorithm: 'fxnlms', taps: 32, stepSize: 0.005 },
        standbyController: { algorithm: 'tonal', harmonics: 1, stepSize: 0.01, frequencySource: 'reference' },
        secondaryPathModel: loop.secondaryPathModel,
        ceilingDbfs: 0,
        startMode: 'control',
      });
      (loop as unknown as { engine: Engine }).engine = engine;
      let prev = 0;
      let maxStep = 0;
      let tail = 0;
      const blocks = (6 * sc.sampleRate) / sc.blockSize;
      for (let b = 0; b < blocks; b++) {
        // switch 0.8 of a period after a zero crossing of the 100 Hz tone, where the output is large
        if (b === blocks / 2 + 2) engine.switchController(crossfadeMs);
        loop.step(sc.blockSize);
        for (let i = 0; i < sc.blockSize; i++) {
          const v = loop.out[i]!;
          if (b > 10) maxStep = Math.max(maxStep, Math.abs(v - prev));
          prev = v;
          if (b > blocks - 200) tail = Math.max(tail, Math.abs(loop.errOn[i]!));
        }
      }
      return { maxStep, tail };
    }

    it('should not step the output by more than the tone itself moves between samples', () => {
      // threshold (ours): the largest sample-to-sample change of the converged counter-tone,
      // 2π·f/fs·A ≈ 0.0785·0.19 at 100 Hz, 8 kHz, plus 20 % margin
      const { maxStep, tail } = run(200);
      expect(maxStep).toBeLessThan(1.2 * ((2 * Math.PI * 100) / 8000) * 0.1875);
      expect(tail).toBeLessThan(0.01); // still cancelling after the switch
    });

    it('should be caught by the same threshold without a crossfade (the check can fail)', () => {
      const { maxStep } = run(0);
      expect(maxStep).toBeGreaterThan(1.2 * ((2 * Math.PI * 100) / 8000) * 0.1875);
    });
  });
});
