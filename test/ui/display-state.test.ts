import { describe, expect, it } from 'vitest';
import { DisplayState, LAST_SECOND_S, REFERENCE_MIN_S, VERIFY_S } from '../../src/ui/display-state.ts';
import { M, METER_FRAME_LENGTH } from '../../src/protocol/messages.ts';

const FRAME_S = 1 / 30;

function frame(t: number, fields: Partial<Record<keyof typeof M, number>>): Float64Array {
  const f = new Float64Array(METER_FRAME_LENGTH).fill(NaN);
  f[M.timeS] = t;
  f[M.mode] = 0;
  f[M.rampGain] = 0;
  f[M.inputChannels] = 2;
  f[M.outPeak] = 0;
  f[M.maxTruePeak] = 0;
  for (const [k, v] of Object.entries(fields)) f[M[k as keyof typeof M]] = v!;
  return f;
}

/** Push frames from t0 for `seconds`; returns the next time. */
function run(d: DisplayState, t0: number, seconds: number, fields: (t: number) => Partial<Record<keyof typeof M, number>>): number {
  let t = t0;
  for (let i = 0; i < Math.round(seconds / FRAME_S); i++) {
    t += FRAME_S;
    d.push(frame(t, fields(t)));
  }
  return t;
}

describe('DisplayState', () => {
  describe('with the simulated plant', () => {
    it('should make "last second" a plain mean over the last 1 s of control, not a slow exponential', () => {
      const d = new DisplayState();
      d.reset('sim');
      // control off power 1e-2 throughout; control-on power drops by 40 dB at once after 2 s of control
      let t = run(d, 0, 2, () => ({ mode: 1, errPower: 1e-2, errOffPower: 1e-2 }));
      expect(d.attAvgDb).toBeCloseTo(0, 6);
      t = run(d, t, LAST_SECOND_S + 2 * FRAME_S, () => ({ mode: 1, errPower: 1e-6, errOffPower: 1e-2 }));
      // after one second every frame in the window is at −40 dB: the mean reads 40 dB (an exponential with
      // a 1 s time constant would still read about 4 dB here: 10·log10(1/(e^{-1}·1 + (1 − e^{-1})·1e-4)), calculated)
      expect(d.attAvgDb).toBeCloseTo(40, 1);
      expect(d.attBasis).toBe('twin');
      expect(t).toBeGreaterThan(3);
    });
    it('should show no last-second figure before a full second of control', () => {
      const d = new DisplayState();
      d.reset('sim');
      run(d, 0, 0.5, () => ({ mode: 1, errPower: 1e-4, errOffPower: 1e-2 }));
      expect(d.attAvgDb).toBeNaN();
      expect(d.attNowDb).toBeGreaterThan(10);
    });
    it('should keep panel time running forwards when a restarted plant starts its clock again', () => {
      const d = new DisplayState();
      d.reset('sim');
      run(d, 0, 3, () => ({ mode: 1, errPower: 1e-4, errOffPower: 1e-2 }));
      const before = d.timeS;
      run(d, 0, 1, () => ({ mode: 1, errPower: 1e-4, errOffPower: 1e-2 }));
      expect(d.timeOffsetS).toBeGreaterThan(2.9);
      expect(d.timeS).toBeGreaterThan(before);
      for (let i = 1; i < d.histT.length; i++) expect(d.histT[i]!).toBeGreaterThan(d.histT[i - 1]!);
    });
  });

  describe('with live microphones', () => {
    it('should compute no attenuation without a measured control-off level, and say why', () => {
      const d = new DisplayState();
      d.reset('live');
      run(d, 0, 0.5, () => ({ mode: 0, errPower: 1e-2 }));
      run(d, 0.5, 2, () => ({ mode: 1, rampGain: 1, errPower: 1e-4 }));
      expect(d.attBasis).toBe('none');
      expect(d.attNowDb).toBeNaN();
      expect(d.attMissing).toContain(`at least ${REFERENCE_MIN_S} s`);
    });
    it('should measure attenuation against the mean control-off level recorded before control', () => {
      const d = new DisplayState();
      d.reset('live');
      let t = run(d, 0, 3, () => ({ mode: 0, errPower: 1e-2 }));
      // frames while the output still fades out (ramp > 0) are not part of the reference
      t = run(d, t, LAST_SECOND_S + 0.5, () => ({ mode: 1, rampGain: 1, errPower: 1e-5 }));
      expect(d.attBasis).toBe('reference');
      expect(d.referenceSeconds).toBeCloseTo(3, 1);
      expect(d.attAvgDb).toBeCloseTo(30, 1);
      expect(d.controlShownToWork).toBe(false);
      // shown to work once the last-second figure has stayed ≥ VERIFY_DB for VERIFY_S
      run(d, t, VERIFY_S + 0.2, () => ({ mode: 1, rampGain: 1, errPower: 1e-5 }));
      expect(d.controlShownToWork).toBe(true);
    });
    it('should not count a level change below the verification threshold as control shown to work', () => {
      const d = new DisplayState();
      d.reset('live');
      let t = run(d, 0, 2, () => ({ mode: 0, errPower: 1e-2 }));
      t = run(d, t, VERIFY_S + 2, () => ({ mode: 1, rampGain: 1, errPower: 0.9e-2 }));
      expect(d.attAvgDb).toBeCloseTo(0.46, 1);
      expect(d.controlShownToWork).toBe(false);
    });
  });
});
