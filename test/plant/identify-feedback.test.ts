import { describe, expect, it } from 'vitest';
import { identifySimulated } from '../../src/plant/identify-sim.ts';
import { noiseScenario } from '../helpers/scenarios.ts';
import { simulate } from '../../src/plant/simulate.ts';

// The feedback path (loudspeaker → reference mic) is measured in the same run as the secondary path:
// the probe is heard by both microphones, and NLMS with a white probe converges to the path itself
// (Haykin, Adaptive Filter Theory, 4th ed., 2002, ch. 6: the Wiener solution of a white-input system
// identification is the system's impulse response; from memory). The true path is known here.
describe('identifySimulated', () => {
  describe('with a loudspeaker that reaches the reference mic', () => {
    const FB = { delayMs: 6, gain: 1.5, fir: [1, 0.5] };
    // zero-latency sample-peak stage: the default true-peak filter would shape both paths by their own
    // spectra and move the energy ratio below away from the plain calculation
    const sc = noiseScenario({ paths: { feedback: FB }, limiter: { truePeak: false } });
    it('should identify the feedback path in the same run, say it is strong, and its model should neutralise it', () => {
      const r = identifySimulated(sc, { method: 'noise' });
      expect(r.feedback).not.toBeNull();
      const fb = r.feedback!;
      expect(fb.misalignmentTimeDb!).toBeLessThan(-30);
      expect(fb.delayMs).toBeCloseTo(6, 3); // 48 samples at 8 kHz, as the scenario sets it
      // the energy ratio calculated from the scenario: (1.5² · 1.25) / (0.8² · 1.09) → +5.3 dB
      expect(fb.relativeLevelDb!).toBeCloseTo(10 * Math.log10((2.25 * 1.25) / (0.64 * 1.09)), 1);
      const neutralised = (how: string | boolean) => noiseScenario({ paths: { feedback: FB }, limiter: { truePeak: false }, controller: { algorithm: 'fxnlms', taps: 96, stepSize: 0.05, feedbackNeutralisation: how } });
      const withModel = simulate(neutralised('fb.json'), { feedbackPathModel: Float32Array.from(fb.taps) });
      const withTruth = simulate(neutralised(true));
      expect(withModel.diverged).toBe(false);
      // the identified model neutralises as well as the true path does
      expect(withTruth.attenuationDb!).toBeGreaterThan(30);
      expect(Math.abs(withModel.attenuationDb! - withTruth.attenuationDb!)).toBeLessThan(1);
    });
  });
  describe('with no feedback path', () => {
    it('should report none', () => {
      expect(identifySimulated(noiseScenario(), { method: 'noise', durationS: 0.5 }).feedback).toBeNull();
    });
  });
});
