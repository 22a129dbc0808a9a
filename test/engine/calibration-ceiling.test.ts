import { describe, it, expect } from 'vitest';
import { createOutputCalibration, dbfsToDbSpl, SINE_CREST_DB, type LevelResult } from '../../src/engine/calibration.ts';
import { effectiveCeiling, runLevelCapCheck } from '../../src/engine/level-cap-check.ts';
import { expectClose } from '../helpers/tolerance.ts';
import { TRUE_PEAK_FILTER } from '../../src/dsp/limiter.ts';

/** Gain of the true-peak filter at hz, dB. */
function filterGainDb(hz: number, fs: number): number {
  const w = (2 * Math.PI * hz) / fs;
  let re = 0;
  let im = 0;
  TRUE_PEAK_FILTER.forEach((b, k) => {
    re += b * Math.cos(w * k);
    im -= b * Math.sin(w * k);
  });
  return 20 * Math.log10(Math.hypot(re, im));
}

// The ceiling rule of issue 5: set in dBFS and, with an output calibration, in dB SPL at the listening
// position; the stricter applies, the SPL one through the highest sensitivity measured (peak-based: a sine's
// peak level is its RMS level + 20·log10(√2) = 3.01 dB, the definition of its crest factor; common practice). The
// calibration arithmetic itself is tested in calibration.test.ts; here: which rule wins, and that the output
// stage, driven past the cap, holds the SPL ceiling at every calibrated frequency.

function value(r: LevelResult): number {
  if (r.value === null) throw new Error(`expected a value, got null: ${r.reason}`);
  return r.value;
}

// A small loudspeaker measured at three frequencies (invented example): most sensitive at 1 kHz,
// where a full-scale sine gives 100 dB SPL RMS.
const cal = createOutputCalibration([
  { hz: 200, dbfs: -20, measuredDbSpl: 70 },
  { hz: 1000, dbfs: -20, measuredDbSpl: 80 },
  { hz: 3000, dbfs: -20, measuredDbSpl: 76 },
]);

describe('the stricter of the dBFS and the SPL ceiling', () => {
  it('should take the SPL ceiling when it is lower, converted with the highest peak sensitivity', () => {
    // 95 dB SPL peak − (100 + 3.01) dB = −8.01 dBFS, below the −6 dBFS setting
    const c = effectiveCeiling(-6, cal, 95);
    expect(c.limitedBy).toBe('spl');
    expectClose(c.ceilingDbfs, 95 - 100 - SINE_CREST_DB, 1e-9, 'ceiling dBFS');
    expect(c.spl!.limitingHz).toBe(1000);
    expect(c.dbfsCeiling).toBe(-6);
  });

  it('should keep the dBFS ceiling when it is the lower one, and with no calibration', () => {
    const c = effectiveCeiling(-12, cal, 95);
    expect(c.limitedBy).toBe('dbfs');
    expect(c.ceilingDbfs).toBe(-12);
    expect(c.spl!.ceilingDbfs).toBeGreaterThan(-12); // the SPL rule alone would allow more
    const none = effectiveCeiling(-12);
    expect(none).toEqual({ ceilingDbfs: -12, limitedBy: 'dbfs', dbfsCeiling: -12, spl: null });
  });

  it('should hold the SPL ceiling at every calibrated frequency when a tone is ramped 12 dB past the cap', () => {
    const peakCeilingDbSpl = 95;
    for (const hz of [200, 1000, 3000]) {
      const r = runLevelCapCheck({
        sampleRate: 16000,
        blockSize: 128,
        limiter: { ceilingDbfs: -3 },
        highPassHz: 0,
        dcBlockerHz: 0,
        outputCalibration: cal,
        peakCeilingDbSpl,
        signal: { kinds: ['tone'], toneHz: hz, rampS: 1, holdS: 0.5 },
      });
      expect(r.ceiling.limitedBy).toBe('spl');
      expect(r.passed).toBe(true);
      // the largest sample of a limited sine is its peak; through the calibration at its frequency:
      const peakSpl = value(dbfsToDbSpl(cal, r.maxSamplePeakDbfs, hz)) + SINE_CREST_DB;
      expect(peakSpl).toBeLessThanOrEqual(peakCeilingDbSpl + 1e-9);
      // the most sensitive frequency meets the ceiling itself (the ramp did reach the cap), less the default
      // stage's true-peak filter gain at 1 kHz, |Σ b_k e^{−jωk}| (calculated from its taps, src/dsp/limiter.ts)
      if (hz === 1000) expectClose(peakSpl, peakCeilingDbSpl + filterGainDb(1000, 16000), 0.01, 'peak SPL at 1 kHz');
      else expect(peakSpl).toBeLessThan(peakCeilingDbSpl - 3);
      // the reported bound is the peak SPL at the most sensitive frequency
      expect(r.maxPeakDbSplBound!).toBeGreaterThanOrEqual(peakSpl - 1e-9);
      expect(r.maxPeakDbSplBound!).toBeLessThanOrEqual(peakCeilingDbSpl + 1e-9);
    }
  });
});
