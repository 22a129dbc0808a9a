import { describe, expect, it } from 'vitest';
import { readdirSync } from 'node:fs';
import { join } from 'node:path';
import { closedLoopAgainstCap } from '../../src/cli/check-limits-command.ts';
import { loadScenarioFile } from '../../src/io/scenario-file-node.ts';
import { levelCapConfigFromScenario, limitsTruePeak, runLevelCapCheck, TRUE_PEAK_TOLERANCE_DB } from '../../src/engine/level-cap-check.ts';

// `check-limits` in its default mode (no flags) on every demo scenario: the test-signal ramp (tone, noise and
// the adversarial patterns, 12 dB past the cap) and the scenario's own closed loop. Requirement: no output
// sample above the cap, and the 4× true peak (ITU-R BS.1770-4, Annex 2 interpolator) at most 0.5 dB above it.

const DIR = join(import.meta.dirname, '../../demo/scenarios');
const files = readdirSync(DIR).filter((f) => f.endsWith('.json')).sort();

describe('check-limits on the demo scenarios (default mode)', () => {
  it('should find the demo scenarios', () => {
    expect(files.length).toBeGreaterThanOrEqual(10);
  });

  for (const f of files) {
    it(`should hold the sample peak and the true peak within ${TRUE_PEAK_TOLERANCE_DB} dB of the cap: ${f}`, () => {
      const loaded = loadScenarioFile(join(DIR, f));
      const sc = loaded.scenario;
      const r = runLevelCapCheck(levelCapConfigFromScenario(sc));
      const c = r.ceilingDbfs;
      expect(limitsTruePeak(r.limiterMode)).toBe(true);
      expect(r.passed).toBe(true);
      expect(r.samplesOverCeiling).toBe(0);
      expect(r.maxSamplePeakDbfs).toBeLessThanOrEqual(c);
      expect(r.maxTruePeakDbtp).toBeLessThanOrEqual(c + TRUE_PEAK_TOLERANCE_DB);
      // the ramp reached the cap (a check that never got there would pass vacuously)
      expect(r.maxSamplePeakDbfs).toBeGreaterThan(c - 0.5);
      // added latency within 0.5 ms, the default's and the scenario's own true-peak mode alike
      if (sc.limiter?.lookaheadMs === undefined) expect((1000 * r.latencySamples) / sc.sampleRate).toBeLessThanOrEqual(0.5);
      const cl = closedLoopAgainstCap(sc, c, true, {
        wavs: loaded.wavs,
        ...(loaded.secondaryPathModel ? { secondaryPathModel: loaded.secondaryPathModel } : {}),
      });
      expect(cl.samplesOverCeiling).toBe(0);
      expect(cl.nonFiniteOutputSamples).toBe(0);
      expect(cl.peakOutputDbfs ?? -Infinity).toBeLessThanOrEqual(c);
      expect(cl.truePeakDbtp ?? -Infinity).toBeLessThanOrEqual(c + TRUE_PEAK_TOLERANCE_DB);
      expect(cl.withinCap).toBe(true);
    });
  }
});
