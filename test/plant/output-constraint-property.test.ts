import { describe, it, expect } from 'vitest';
import fc from 'fast-check';
import { PlantLoop } from '../../src/plant/simulate.ts';
import { toneScenario } from '../helpers/scenarios.ts';

// Property (issue 10, "no lock-up"): over random plants, caps, step sizes and constraint methods, the
// controller still adapts in the last quarter of every run, and nothing but real divergence stops it.
// Nothing the output cap does may freeze adaptation: the guard stays 'running' (its real-divergence
// detectors did not fire) and the engine hands `adapt = true` to the controller on every block.
// Step sizes stay below half the delayed-LMS limit (Long, Ling & Proakis, IEEE TASSP 37(9), 1989,
// from memory), so a freeze or mute here could only come from the cap.

const plant = fc.record({
  hz: fc.integer({ min: 60, max: 400 }),
  amplitude: fc.double({ min: 0.05, max: 0.6, noNaN: true }),
  primaryGain: fc.double({ min: 0.2, max: 1, noNaN: true }),
  primaryMs: fc.double({ min: 6, max: 15, noNaN: true }),
  secondaryGain: fc.double({ min: 0.2, max: 1, noNaN: true }),
  secondaryMs: fc.integer({ min: 4, max: 5 }),
  noise: fc.double({ min: 0, max: 0.05, noNaN: true }),
  capDbfs: fc.double({ min: -30, max: 0, noNaN: true }),
  stepFraction: fc.double({ min: 0.05, max: 0.5, noNaN: true }),
  method: fc.constantFrom('rescale', 'effort', 'none'),
  algorithm: fc.constantFrom('fxnlms', 'tonal'),
  seed: fc.integer({ min: 0, max: 1000 }),
});

describe('output-constrained adaptation (property)', () => {
  it('should keep adapting through the last quarter of every run, with no freeze or mute caused by the cap', () => {
    fc.assert(
      fc.property(plant, (p) => {
        const delay = Math.round((p.secondaryMs / 1000) * 8000);
        const tonalLimit = 4 * Math.sin(Math.PI / (2 * (2 * delay + 1)));
        const controller =
          p.algorithm === 'tonal'
            ? { algorithm: 'tonal', harmonics: 1, stepSize: p.stepFraction * tonalLimit, hz: p.hz, outputConstraint: p.method }
            : { algorithm: 'fxnlms', taps: 32, stepSize: p.stepFraction * 0.1, outputConstraint: p.method };
        const sc = toneScenario({
          durationS: 1.2,
          seed: p.seed,
          sources: [{ kind: 'tone', hz: p.hz, amplitude: p.amplitude }, { kind: 'noise', color: 'white', rms: p.noise }],
          paths: {
            reference: { delayMs: 0, gain: 1 },
            primary: { delayMs: p.primaryMs, gain: p.primaryGain },
            secondary: { delayMs: p.secondaryMs, gain: p.secondaryGain },
          },
          outputCeilingDbfs: p.capDbfs,
          controller,
        });
        const loop = new PlantLoop(sc);
        const total = Math.round(sc.durationS * sc.sampleRate);
        const lastQuarter = Math.floor(total * 0.75);
        let adaptingBlocks = 0;
        let lateBlocks = 0;
        for (let t = 0; t < total; t += sc.blockSize) {
          loop.step(Math.min(sc.blockSize, total - t));
          if (t >= lastQuarter) {
            lateBlocks++;
            if (loop.engine.controller.adapt) adaptingBlocks++;
          }
        }
        expect(loop.engine.guard!.state).toBe('running');
        expect(adaptingBlocks).toBe(lateBlocks);
        expect(Number.isFinite(loop.engine.meters.weightNormSquared)).toBe(true);
      }),
      { numRuns: 24, seed: 10 },
    );
  });
});
