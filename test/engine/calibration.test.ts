import { describe, it, expect } from 'vitest';
import {
  createOutputCalibration,
  outputSensitivityAt,
  dbfsToDbSpl,
  dbSplToDbfs,
  ceilingDbfsForPeakSpl,
  micCalibrationFromLevel,
  micCalibrationFromRecording,
  micDbfsToDbSpl,
  micDbSplToDbfs,
  SINE_CREST_DB,
  type LevelResult,
} from '../../src/engine/calibration.ts';
import { expectClose } from '../helpers/tolerance.ts';

function value(r: LevelResult): number {
  if (r.value === null) throw new Error(`expected a value, got null: ${r.reason}`);
  return r.value;
}

// A loudspeaker measured at three frequencies (invented example): sine at −20 dBFS reads 80, 86 and 83 dB SPL.
const points = [
  { hz: 1000, dbfs: -20, measuredDbSpl: 86 },
  { hz: 100, dbfs: -20, measuredDbSpl: 80 },
  { hz: 4000, dbfs: -10, measuredDbSpl: 93 },
];

describe('output calibration', () => {
  it('should compute the sensitivity (SPL of a full-scale sine) per frequency and interpolate in log-frequency', () => {
    // Levels in dB add: SPL = dBFS + sensitivity (definition of a linear system's gain in dB).
    const cal = createOutputCalibration(points);
    expect(cal.points.map((p) => p.hz)).toEqual([100, 1000, 4000]);
    expectClose(value(outputSensitivityAt(cal, 100)), 100, 1e-12, 'S(100 Hz)');
    expectClose(value(outputSensitivityAt(cal, 1000)), 106, 1e-12, 'S(1 kHz)');
    expectClose(value(outputSensitivityAt(cal, 4000)), 103, 1e-12, 'S(4 kHz)');
    // √(100·1000) = 316.2 Hz lies halfway in log-frequency: (100 + 106)/2.
    expectClose(value(outputSensitivityAt(cal, Math.sqrt(1e5))), 103, 1e-9, 'S at the log midpoint');
    // 2 kHz is half of the octaves from 1 to 4 kHz: (106 + 103)/2.
    expectClose(value(outputSensitivityAt(cal, 2000)), 104.5, 1e-9, 'S(2 kHz)');
  });

  it('should round-trip dBFS → dB SPL → dBFS inside the calibrated range', () => {
    const cal = createOutputCalibration(points);
    for (const hz of [100, 250, 1000, 3000, 4000]) {
      for (const dbfs of [-60, -20.5, 0]) {
        const spl = value(dbfsToDbSpl(cal, dbfs, hz));
        expectClose(value(dbSplToDbfs(cal, spl, hz)), dbfs, 1e-9, `round trip at ${hz} Hz`);
      }
    }
    expectClose(value(dbfsToDbSpl(cal, -20, 1000)), 86, 1e-12, 'the measured point itself');
  });

  it('should return null with a reason outside the calibrated range, never an invented SPL', () => {
    const cal = createOutputCalibration(points);
    for (const hz of [50, 99.9, 4000.1, 10000]) {
      const r = dbfsToDbSpl(cal, -20, hz);
      expect(r.value).toBeNull();
      expect(r.reason).toMatch(/outside the calibrated range 100 … 4000 Hz/);
      expect(dbSplToDbfs(cal, 80, hz).value).toBeNull();
    }
    expect(dbfsToDbSpl(cal, NaN, 1000).reason).toMatch(/dbfs must be a number/);
    const single = createOutputCalibration([{ hz: 1000, dbfs: -20, measuredDbSpl: 86 }]);
    expect(value(dbfsToDbSpl(single, 0, 1000))).toBe(106);
    expect(dbfsToDbSpl(single, 0, 1001).value).toBeNull();
  });

  it('should set the ceiling from the highest sensitivity, with the sine crest factor for peak SPL', () => {
    // Peak level of a sine = RMS level + 20·log10(√2) = 3.01 dB (definition of the crest factor).
    expectClose(SINE_CREST_DB, 3.0103, 1e-4, 'sine crest factor dB');
    const cal = createOutputCalibration(points);
    const c = ceilingDbfsForPeakSpl(cal, 100);
    expect(c.limitingHz).toBe(1000);
    expectClose(c.peakSensitivityDbSpl, 106 + 3.0103, 1e-4, 'peak sensitivity');
    expectClose(c.ceilingDbfs, 100 - 109.0103, 1e-4, 'ceiling dBFS');
    // The strictest-ceiling rule: at that ceiling no calibrated frequency exceeds the peak SPL.
    for (const hz of [100, 200, 500, 1000, 2000, 4000]) {
      const peakSpl = value(dbfsToDbSpl(cal, c.ceilingDbfs, hz)) + SINE_CREST_DB;
      expect(peakSpl).toBeLessThanOrEqual(100 + 1e-9);
    }
    const loudCeiling = ceilingDbfsForPeakSpl(cal, 120);
    expect(loudCeiling.ceilingDbfs).toBe(0);
    expectClose(loudCeiling.uncappedDbfs, 120 - 109.0103, 1e-4, 'uncapped ceiling');
    expect(loudCeiling.note).toMatch(/100 … 4000 Hz/);
  });

  it('should refuse malformed calibration points with the field, range and value', () => {
    expect(() => createOutputCalibration([])).toThrow(/points must be a non-empty array.*empty array/);
    expect(() => createOutputCalibration([{ hz: 0, dbfs: -20, measuredDbSpl: 80 }])).toThrow(/points\[0\]\.hz.*\(0, 1000000\] Hz, got 0/);
    expect(() => createOutputCalibration([{ hz: 100, dbfs: 3, measuredDbSpl: 80 }])).toThrow(/points\[0\]\.dbfs.*\[-150, 0\] dBFS, got 3/);
    expect(() =>
      createOutputCalibration([
        { hz: 100, dbfs: -20, measuredDbSpl: 80 },
        { hz: 100, dbfs: -10, measuredDbSpl: 90 },
      ]),
    ).toThrow(/must not repeat a frequency, got 100 Hz twice/);
    expect(() => ceilingDbfsForPeakSpl(createOutputCalibration(points), NaN)).toThrow(/peakCeilingDbSpl.*got NaN/);
  });
});

describe('microphone calibration', () => {
  it('should calibrate from a 94 dB SPL recording and convert levels both ways within its range', () => {
    // A sound calibrator gives 94 dB SPL at 1 kHz (≈ 1 Pa: 20·log10(1 / 20 µPa) = 93.98 dB; common
    // practice). A recorded sine of amplitude 0.1 reads −20 dBFS (AES17: full-scale sine = 0 dBFS),
    // so 0 dBFS at the input corresponds to 94 + 20 = 114 dB SPL.
    const n = 48000;
    const samples = Float64Array.from({ length: n }, (_, i) => 0.1 * Math.sin((2 * Math.PI * 1000 * i) / 48000));
    const cal = micCalibrationFromRecording({ samples, knownDbSpl: 94, hz: 1000, validFromHz: 20, validToHz: 10000 });
    expectClose(cal.sensitivityDbSpl, 114, 1e-6, 'mic sensitivity');
    expectClose(value(micDbfsToDbSpl(cal, -40, 500)), 74, 1e-6, 'SPL of −40 dBFS');
    expectClose(value(micDbSplToDbfs(cal, value(micDbfsToDbSpl(cal, -33.3, 200)), 200)), -33.3, 1e-9, 'round trip');
    expect(micDbfsToDbSpl(cal, -40, 15000).reason).toMatch(/outside the microphone's calibrated range 20 … 10000 Hz/);
    const byLevel = micCalibrationFromLevel({ knownDbSpl: 94, measuredDbfs: -20, hz: 1000 });
    expect(byLevel.sensitivityDbSpl).toBe(114);
    expect(micDbfsToDbSpl(byLevel, -20, 1000).value).toBe(94);
    expect(micDbfsToDbSpl(byLevel, -20, 2000).value).toBeNull();
  });

  it('should refuse a silent recording and an inconsistent range', () => {
    expect(() => micCalibrationFromRecording({ samples: new Float32Array(100), knownDbSpl: 94, hz: 1000 })).toThrow(/digital silence/);
    expect(() => micCalibrationFromLevel({ knownDbSpl: 94, measuredDbfs: -20, hz: 1000, validToHz: 500 })).toThrow(/validToHz.*\[1000, 1000000\] Hz, got 500/);
    expect(() => micCalibrationFromLevel({ knownDbSpl: 250, measuredDbfs: -20, hz: 1000 })).toThrow(/knownDbSpl.*\[0, 200\] dB SPL, got 250/);
  });
});
