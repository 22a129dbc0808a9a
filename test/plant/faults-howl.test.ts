import { describe, it, expect } from 'vitest';
import { simulate, type SimulationResult } from '../../src/plant/simulate.ts';
import { parseScenario, type Scenario } from '../../src/plant/scenario.ts';

// A feedback path (paths.feedback) that makes the loop howl (issue 5, fault injection). The scenario is a
// test fixture: pink noise 50–500 Hz at 16 kHz, blocks of 64; secondary path 5 ms, FIR [1, 0.25] × 0.8;
// feedback path loudspeaker → reference mic 4 ms, FIR [1, 0.5] × 3; FxNLMS with 128 taps and μ = 0.01.
// Control starts at 1 s and the loop howls within 50 ms.
//
// The limiter holds the howl at the ceiling; a howl settles where the limiter's gain reduction brings the
// loop gain back to one, here about 1.5–3 dB, below the guard's default 3 dB output-at-ceiling threshold,
// so these tests set the threshold to 1 dB (see the report on the default).
//
// Symptom from the recorded output, independently of the guard: the start of the run of consecutive 10 ms
// windows whose output peak is within 0.5 dB of the ceiling that ends in the detection. The output reaches
// the ceiling before the gain reduction passes 1 dB, so the delay measured from it is an upper bound.

const FS = 16000;
const CEILING_DBFS = -6;
const CAP = Math.pow(10, CEILING_DBFS / 20);

function howlScenario(guard: Record<string, unknown>, durationS: number, outputConstraint = 'none'): Scenario {
  return parseScenario({
    schemaVersion: 1,
    sampleRate: FS,
    blockSize: 64,
    durationS,
    seed: 21,
    sources: [{ kind: 'noise', color: 'pink', rms: 0.08, bandHz: [50, 500] }],
    paths: {
      reference: { delayMs: 0.5, gain: 1 },
      primary: { delayMs: 9, gain: 0.7, fir: [1, 0.3] },
      secondary: { delayMs: 5, gain: 0.8, fir: [1, 0.25] },
      feedback: { delayMs: 4, gain: 3, fir: [1, 0.5] },
    },
    sensorNoiseRms: { reference: 0.0005, error: 0.0005 },
    // The limiter alone holds the howl at the cap here, which is what these tests check (with the
    // default output constraint the controller holds it under the cap itself and the error-rise
    // detector mutes it: see the last test).
    controller: { algorithm: 'fxnlms', taps: 128, stepSize: 0.01, outputConstraint },
    controlStartS: 1,
    outputCeilingDbfs: CEILING_DBFS,
    // the howl timings below were measured with the sample-peak stage; the default true-peak filter sits
    // in the feedback loop too and changes when a howl builds up again (later, here), not whether it is caught
    limiter: { truePeak: false },
    guard,
  });
}

/** Start of the run of 10 ms windows at the ceiling (within 0.5 dB) that ends at `untilS`; NaN if none. */
function atCeilingSince(r: SimulationResult, fromS: number, untilS: number): number {
  const out = r.signals!.output;
  const W = Math.round(0.01 * FS);
  const level = CAP * Math.pow(10, -0.5 / 20);
  let start = NaN;
  for (let k = Math.floor((fromS * FS) / W); (k + 1) * W <= Math.round(untilS * FS); k++) {
    let p = 0;
    for (let i = k * W; i < (k + 1) * W; i++) p = Math.max(p, Math.abs(out[i]!));
    if (p >= level) {
      if (Number.isNaN(start)) start = (k * W) / FS;
    } else start = NaN;
  }
  return start;
}

function expectCapHeld(r: SimulationResult): void {
  let peak = 0;
  for (const v of r.signals!.output) {
    expect(Number.isFinite(v)).toBe(true);
    peak = Math.max(peak, Math.abs(v));
  }
  expect(peak).toBeLessThanOrEqual(CAP);
  expect(peak).toBeGreaterThan(CAP * 0.99); // the howl did drive the output to the cap
}

const CEILING_DETECTOR = { gainReductionDb: 1, holdMs: 60, action: 'mute' };

describe('a howling feedback loop', () => {
  it('should not be sustained at the cap once adaptation goes on: the burst ends within 100 ms without any guard action', () => {
    // Before issue 10 the engine froze adaptation while the limiter reduced gain, which kept the
    // weights that made the loop howl: the howl then sat at the cap until the output-at-ceiling
    // detector muted it. Without the freeze the FxNLMS update itself pulls the loop back.
    const r = simulate(
      howlScenario({ errorRise: { enabled: false }, inputClipping: { enabled: false }, outputAtCeiling: CEILING_DETECTOR, resume: { mode: 'user' } }, 2.5),
      { record: true },
    );
    expect(r.events.some((e) => e.action === 'mute')).toBe(false);
    const out = r.signals!.output;
    const W = Math.round(0.01 * FS);
    let windowsAtCap = 0;
    for (let k = 0; (k + 1) * W <= out.length; k++) {
      let p = 0;
      for (let i = k * W; i < (k + 1) * W; i++) p = Math.max(p, Math.abs(out[i]!));
      if (p >= CAP * Math.pow(10, -0.5 / 20)) windowsAtCap++;
    }
    expect(windowsAtCap).toBeGreaterThan(0); // the howl did reach the cap
    expect(windowsAtCap).toBeLessThanOrEqual(10); // and left it within 100 ms in all
    expectCapHeld(r);
  });

  it('should be caught within 100 ms by whichever detector sees it first when all run, the log naming each', () => {
    const r = simulate(howlScenario({ outputAtCeiling: CEILING_DETECTOR, resume: { mode: 'user' } }, 2), { record: true });
    const mute = r.events.find((e) => e.action === 'mute');
    expect(mute).toBeDefined();
    const since = atCeilingSince(r, 1, mute!.timeS);
    expect(mute!.timeS - since).toBeLessThanOrEqual(0.1);
    // the feedback also overdrives the reference microphone, and the error rises
    const causes = new Set(r.events.map((e) => e.cause));
    expect(causes.has('input-clipping')).toBe(true);
    expect(causes.has('error-rise') || causes.has('output-at-ceiling')).toBe(true);
    expectCapHeld(r);
  });

  it('should still be muted within 100 ms of control starting by the error-rise detector with the default output constraint', () => {
    const r = simulate(howlScenario({ resume: { mode: 'user' } }, 2, 'rescale'), { record: true });
    const mute = r.events.find((e) => e.action === 'mute');
    expect(mute).toBeDefined();
    expect(mute!.cause).toBe('error-rise');
    expect(mute!.timeS - 1).toBeLessThanOrEqual(0.15); // control starts at 1 s; the howl builds within 50 ms
    expect(r.diverged).toBe(true);
    let peak = 0;
    for (const v of r.signals!.output) peak = Math.max(peak, Math.abs(v));
    expect(peak).toBeLessThanOrEqual(CAP);
  });

  it('should resume automatically after the hold-off, catch every howl again within 150 ms, and stay muted after the last allowed resume', () => {
    const r = simulate(
      howlScenario(
        { inputClipping: { enabled: false }, resume: { mode: 'auto', holdOffMs: 1000, maxAutoResumes: 2 } },
        5.5,
      ),
      { record: true },
    );
    // the error-rise detector mutes (output at the cap is the output-limited state, not a fault);
    // after a resume the weights start from zero and the loop may or may not howl again
    const mutes = r.events.filter((e) => e.action === 'mute');
    const resumes = r.events.filter((e) => e.cause === 'resume');
    expect(mutes.length).toBeGreaterThanOrEqual(1);
    expect(resumes.length).toBeLessThanOrEqual(2);
    expect(mutes.length === resumes.length || mutes.length === resumes.length + 1).toBe(true);
    const starts = [1, ...resumes.map((e) => e.timeS)];
    mutes.forEach((m, k) => {
      expect(m.cause).toBe('error-rise');
      expect(m.timeS - starts[k]!).toBeLessThanOrEqual(0.15);
      if (k < resumes.length) expect(resumes[k]!.timeS - m.timeS).toBeGreaterThanOrEqual(1);
    });
    expectCapHeld(r);
    if (mutes.length === 3) {
      const out = r.signals!.output;
      expect(out.subarray(Math.ceil((mutes[2]!.timeS + 0.06) * FS)).every((v) => v === 0)).toBe(true);
    }
  });
});
