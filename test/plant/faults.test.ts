import { describe, it, expect } from 'vitest';
import { simulate, type SimulationResult } from '../../src/plant/simulate.ts';
import type { EngineEvent } from '../../src/engine/events.ts';
import { toneScenario, noiseScenario } from '../helpers/scenarios.ts';

// Fault injection through simulate() (issue 5): each fault must be detected within 100 ms of its symptom
// crossing the guard's detection threshold, the output must never exceed the cap, and the run must recover
// or mute as configured, with the cause named in the event log. The symptom crossings are measured here
// from the recorded signals, independently of the guard:
//  - error rise: the mean-square error over a sliding 20 ms window (the guard's window) rising above the
//    control-off power of the preceding second (from the recorded control-off error) × 10^(6/10)
//    (the default riseDb); the crossing is the start of the run above the threshold that ends in the
//    detection;
//  - NaN: the first non-finite error sample (the fault's start);
//  - drop-out: the first sample of digital silence.
// 100 ms is the issue's requirement; the guard documents its own worst case as hold + window = 80 ms.
// Scenarios (test fixtures): toneScenario is a 100 Hz tone at 8 kHz, primary path 10 ms, secondary path
// 5 ms (40 samples) with gain 0.8, FxNLMS with 32 taps and μ = 0.01; noiseScenario is white noise,
// secondary path 5 ms with FIR [1, −0.3] × 0.8, FxNLMS with 96 taps and μ = 0.05. Blocks of 32 samples.

const CEILING_DBFS = -6;
const CAP = Math.pow(10, CEILING_DBFS / 20);
// The white-noise runs below control up to fs/2, where the default output stage's true-peak filter
// attenuates (−17.5 dB at fs/2): the controller then drives the cap before any fault. Their fault timings
// were set with the sample-peak stage, which they ask for.
const SAMPLE_PEAK_STAGE = { truePeak: false };
const DETECT_S = 0.1;

function sig(r: SimulationResult) {
  const s = r.signals;
  if (!s) throw new Error('run simulate with record: true');
  return s;
}

/** Largest |output| and the count of non-finite outputs. */
function outputStats(out: Float32Array): { peak: number; nonFinite: number } {
  let peak = 0;
  let nonFinite = 0;
  for (const v of out) {
    if (!Number.isFinite(v)) nonFinite++;
    else peak = Math.max(peak, Math.abs(v));
  }
  return { peak, nonFinite };
}

function expectCapHeld(r: SimulationResult): void {
  const { peak, nonFinite } = outputStats(sig(r).output);
  expect(nonFinite).toBe(0);
  expect(peak).toBeLessThanOrEqual(CAP);
}

/** Mean square of x over [from, to) samples. */
function meanSquare(x: Float32Array, from: number, to: number): number {
  let s = 0;
  for (let i = from; i < to; i++) s += x[i]! * x[i]!;
  return s / (to - from);
}

/**
 * Where the error power over a sliding 20 ms window last crossed above baseline·10^(riseDb/10) before
 * `beforeS` (searching from `fromS`), with the baseline taken from the control-off error over the second
 * before `fromS`. NaN when it never crossed.
 */
function errorRiseCrossing(r: SimulationResult, fromS: number, beforeS: number, riseDb = 6): { atS: number; baseline: number } {
  const fs = r.sampleRate;
  const { errorOn, errorOff } = sig(r);
  const from = Math.round(fromS * fs);
  const baseline = meanSquare(errorOff, from - fs, from);
  const threshold = baseline * Math.pow(10, riseDb / 10);
  const W = Math.round(0.02 * fs);
  let sum = 0;
  for (let i = from - W; i < from; i++) sum += errorOn[i]! * errorOn[i]!;
  let above = false;
  let atS = NaN;
  const end = Math.min(errorOn.length, Math.round(beforeS * fs) + 1);
  for (let i = from; i < end; i++) {
    sum += errorOn[i]! * errorOn[i]! - errorOn[i - W]! * errorOn[i - W]!;
    const now = sum / W > threshold;
    if (now && !above) atS = i / fs;
    above = now;
  }
  return { atS: above ? atS : NaN, baseline };
}

function first(events: EngineEvent[], cause: string, afterS = 0): EngineEvent {
  const e = events.find((x) => x.cause === cause && x.timeS >= afterS);
  if (!e) throw new Error(`no ${cause} event after ${afterS} s; events: ${events.map((x) => `${x.timeS.toFixed(3)} ${x.cause}`).join(', ')}`);
  return e;
}

/** Attenuation (dB) of the error, control off vs on, over [fromS, toS). */
function attenuationDb(r: SimulationResult, fromS: number, toS: number): number {
  const fs = r.sampleRate;
  const { errorOn, errorOff } = sig(r);
  const a = Math.round(fromS * fs);
  const b = Math.round(toS * fs);
  return 10 * Math.log10(meanSquare(errorOff, a, b) / meanSquare(errorOn, a, b));
}

describe('fault injection in the simulator', () => {
  it('should mute within 100 ms of the error rising after a secondary-path model sign flip, and stay muted until the user acknowledges', () => {
    // Tone, FxNLMS μ = 0.01, secondary path 5 ms. A flipped model turns the gradient round: the weights
    // drift away from the solution at the adaptation rate, so the error rises only some 0.2 s after the
    // flip; the detection delay is measured from the rise, not from the flip.
    const r = simulate(
      toneScenario({ durationS: 5, outputCeilingDbfs: CEILING_DBFS, faults: [{ kind: 'model-sign-flip', atS: 3 }], guard: { resume: { mode: 'user' } } }),
      { record: true },
    );
    const ev = first(r.events, 'error-rise', 3);
    const crossing = errorRiseCrossing(r, 3, ev.timeS);
    expect(crossing.atS).toBeGreaterThan(3.05); // the weights needed time to drift
    expect(ev.timeS - crossing.atS).toBeGreaterThanOrEqual(0);
    expect(ev.timeS - crossing.atS).toBeLessThanOrEqual(DETECT_S);
    expect(ev.action).toBe('mute');
    expect(ev.values.baselinePower! / crossing.baseline).toBeGreaterThan(0.8); // the guard's baseline is the control-off power
    expect(ev.values.baselinePower! / crossing.baseline).toBeLessThan(1.25);
    expectCapHeld(r);
    // muted: after the 50 ms fade the loudspeaker is silent to the end; no resume without the user
    const out = sig(r).output;
    const silentFrom = Math.ceil((ev.timeS + 0.05) * r.sampleRate) + r.sampleRate / 100;
    expect(out.subarray(silentFrom).every((v) => v === 0)).toBe(true);
    expect(r.events.some((e) => e.cause === 'resume')).toBe(false);
    expect(r.diverged).toBe(true);
    expect(r.divergenceReasons.join(' ')).toMatch(/error-rise/);
  });

  it('should mute within 100 ms of the error rising after a ×100 step size, and resume and reconverge once the step size is restored', () => {
    // White noise, FxNLMS μ = 0.05 → 5 (NLMS needs μ < 2), secondary path 5 ms; μ goes back to 0.05 at
    // 3.5 s, and the guard resumes by itself after its 2 s hold-off (at most once).
    const r = simulate(
      noiseScenario({
        durationS: 9,
        outputCeilingDbfs: CEILING_DBFS,
        limiter: SAMPLE_PEAK_STAGE,
        faults: [
          { kind: 'step-size-scale', atS: 3, factor: 100 },
          { kind: 'step-size-scale', atS: 3.5, factor: 0.01 },
        ],
        guard: { resume: { mode: 'auto', maxAutoResumes: 1 } },
      }),
      { record: true },
    );
    const ev = first(r.events, 'error-rise', 3);
    const crossing = errorRiseCrossing(r, 3, ev.timeS);
    expect(ev.timeS - crossing.atS).toBeGreaterThanOrEqual(0);
    expect(ev.timeS - crossing.atS).toBeLessThanOrEqual(DETECT_S);
    expect(ev.action).toBe('mute');
    expectCapHeld(r);
    const resume = first(r.events, 'resume', ev.timeS);
    expect(resume.values.byUser).toBe(0);
    expect(resume.timeS - ev.timeS).toBeGreaterThanOrEqual(2);
    // recovered: the weights were reset at the mute and converge again
    expect(attenuationDb(r, 2, 3)).toBeGreaterThan(20);
    expect(attenuationDb(r, 8, 9)).toBeGreaterThan(20);
  });

  it('should freeze at the first NaN in the error signal, keep it from the controller, and resume after the hold-off', () => {
    // Tone, FxNLMS μ = 0.01: 50 ms of NaN at the error microphone from 3 s.
    const r = simulate(toneScenario({ durationS: 7, outputCeilingDbfs: CEILING_DBFS, faults: [{ kind: 'nan-error', atS: 3, durationS: 0.05 }] }), { record: true });
    const ev = first(r.events, 'non-finite', 3);
    expect(ev.timeS - 3).toBeGreaterThanOrEqual(0);
    expect(ev.timeS - 3).toBeLessThanOrEqual(DETECT_S);
    expect(ev.values.source).toBe(1); // the error microphone
    expect(ev.action).toBe('freeze-adaptation');
    expectCapHeld(r);
    // the NaN never reached the weights: with adaptation frozen, control went on after the fault
    // (the recorded error is 0 during it: the guard replaced the NaN in place)
    expect(sig(r).errorOn.subarray(3 * 8000, 3 * 8000 + 400).every((v) => v === 0)).toBe(true);
    expect(attenuationDb(r, 3.1, 5)).toBeGreaterThan(25);
    const resume = first(r.events, 'resume', ev.timeS);
    expect(resume.timeS - 3.05).toBeGreaterThanOrEqual(2);
    expect(attenuationDb(r, 6, 7)).toBeGreaterThan(25);
    expect(r.diverged).toBe(false);
  });

  for (const mic of ['error', 'reference'] as const) {
    it(`should freeze within 100 ms of a ${mic}-microphone drop-out, and resume once the microphone is back`, () => {
      // White noise, FxNLMS μ = 0.05, secondary path 5 ms: 0.5 s of digital silence from 3 s.
      const r = simulate(
        noiseScenario({ durationS: 8, outputCeilingDbfs: CEILING_DBFS, limiter: SAMPLE_PEAK_STAGE, faults: [{ kind: 'mic-dropout', atS: 3, durationS: 0.5, mic }] }),
        { record: true },
      );
      const ev = first(r.events, 'dead-microphone', 3);
      // the silence starts at the fault (the recorded microphone signal shows it)
      const x = mic === 'error' ? sig(r).errorOn : sig(r).reference;
      const at = Math.round(3 * r.sampleRate);
      expect(x[at - 1]).not.toBe(0);
      expect(x.subarray(at, at + Math.round(0.5 * r.sampleRate)).every((v) => v === 0)).toBe(true);
      expect(ev.timeS - 3).toBeGreaterThanOrEqual(0);
      expect(ev.timeS - 3).toBeLessThanOrEqual(DETECT_S);
      expect(ev.values.channel).toBe(mic === 'error' ? 1 : 0);
      expect(ev.action).toBe('freeze-adaptation');
      expectCapHeld(r);
      const resume = first(r.events, 'resume', ev.timeS);
      expect(resume.timeS).toBeGreaterThanOrEqual(3.5 + 2);
      expect(attenuationDb(r, 7, 8)).toBeGreaterThan(20);
    });
  }
});
