import { describe, it, expect } from 'vitest';
import {
  LevelCapCheck,
  NYQUIST_FLIP_PATTERN,
  levelCapConfigFromScenario,
  runLevelCapCheck,
  TRUE_PEAK_TOLERANCE_DB,
  type LevelCapCheckConfig,
} from '../../src/engine/level-cap-check.ts';
import { PlantLoop } from '../../src/plant/simulate.ts';
import { BS1770_INTERPOLATOR, TruePeakMeter } from '../../src/dsp/true-peak.ts';
import { TRUE_PEAK_FILTER_BOUND_DB } from '../../src/dsp/limiter.ts';
import type { Controller } from '../../src/dsp/controller.ts';
import { Random } from '../../src/dsp/random.ts';
import { toneScenario, noiseScenario } from '../helpers/scenarios.ts';

const db = (v: number): number => 20 * Math.log10(v);

/** Short ramps keep each run to a fraction of a second; the adversarial segment is always there. */
const QUICK = { rampS: 0.6, holdS: 0.3, gapS: 0.1 };

function cfg(over: Partial<LevelCapCheckConfig> = {}): LevelCapCheckConfig {
  return { sampleRate: 8000, blockSize: 64, limiter: { ceilingDbfs: -6 }, signal: QUICK, ...over };
}

/** Replace the limiter's processing by a copy (test only): an output stage that does not limit. */
function disableLimiter(chk: LevelCapCheck, clampSamplesTo?: number): void {
  const lim = chk.engine.limiter as unknown as { process: (x: Float32Array, y: Float32Array, n: number) => void };
  lim.process = (x, y, n) => {
    for (let i = 0; i < n; i++) {
      const v = x[i]!;
      y[i] = clampSamplesTo === undefined ? v : Math.max(-clampSamplesTo, Math.min(clampSamplesTo, v));
    }
  };
}

function runToEnd(chk: LevelCapCheck, sizes: (k: number) => number = () => chk.blockSize): Float32Array {
  const all = new Float32Array(chk.totalSamples);
  const out = new Float32Array(chk.blockSize);
  let k = 0;
  while (!chk.done) {
    const n = Math.min(sizes(k++), chk.totalSamples - chk.samplesDone);
    const at = chk.samplesDone;
    chk.process(out, n);
    all.set(out.subarray(0, n), at);
  }
  return all;
}

describe('level-cap check', () => {
  describe('test signal', () => {
    it('should use the sign pattern that drives the BS.1770-4 interpolator to the sum of its |coefficients| (+6.1 dB)', () => {
      // ITU-R BS.1770-4 Annex 2: the largest interpolated value a ±1 sequence can produce is the
      // L1 norm of the phase with the largest one; NYQUIST_FLIP_PATTERN is that phase's sign pattern.
      const norms = [0, 1, 2, 3].map((p) => {
        let s = 0;
        for (let k = 0; k < 12; k++) s += Math.abs(BS1770_INTERPOLATOR[p * 12 + k]!);
        return s;
      });
      const l1 = Math.max(...norms);
      const meter = new TruePeakMeter();
      const x = new Float32Array(240).map((_, i) => NYQUIST_FLIP_PATTERN[i % 12]!);
      meter.process(x, x.length);
      expect(meter.peak).toBeCloseTo(l1, 9);
      expect(db(meter.peak)).toBeGreaterThan(6);
    });
  });

  describe('in each limiter mode', () => {
    const modes = [
      { name: 'true-peak-filter', limiter: { ceilingDbfs: -6 } }, // the default
      { name: 'zero-latency', limiter: { ceilingDbfs: -6, truePeak: false } },
      { name: 'look-ahead', limiter: { ceilingDbfs: -6, lookaheadMs: 2, truePeak: false } },
      { name: 'true-peak', limiter: { ceilingDbfs: -6, truePeak: true } },
    ] as const;
    for (const fs of [8000, 48000]) {
      for (const m of modes) {
        it(`should hold the ${m.name} cap at ${fs} Hz with the ramp 12 dB past it, and drive the output to the cap`, () => {
          const r = runLevelCapCheck(cfg({ sampleRate: fs, blockSize: 128, limiter: m.limiter }));
          expect(r.limiterMode).toBe(m.name);
          expect(r.passed).toBe(true);
          expect(r.reasons).toEqual([]);
          expect(r.samplesOverCeiling).toBe(0);
          expect(r.nonFiniteOutputSamples).toBe(0);
          expect(r.maxSamplePeakDbfs).toBeLessThanOrEqual(-6);
          // the ramp really reached the cap (a check that never got there would pass vacuously); the
          // true-peak filter averages a clamped sample with its neighbours, so isolated peaks read a little lower
          expect(r.maxSamplePeakDbfs).toBeGreaterThan(m.name === 'true-peak-filter' ? -6.25 : -6.01);
          expect(r.topDbfs).toBe(6);
          expect(r.maxGainReductionDb).toBeGreaterThan(12);
          // NaN, +∞, −∞ of the adversarial hold were silenced by the limiter and logged
          expect(r.nonFiniteInputSamples).toBe(3);
          expect(r.events.some((e) => e.cause === 'non-finite')).toBe(true);
          expect(r.events.some((e) => e.cause === 'output-at-ceiling')).toBe(true);
          // the check's meter and the limiter's own agree (the same stream, two meters)
          expect(r.limiterTruePeakDbtp).toBeCloseTo(r.maxTruePeakDbtp, 5); // the limiter meters in f32 SIMD: 1e-6 dB of rounding
          if (m.name === 'true-peak' || m.name === 'true-peak-filter') {
            expect(r.truePeakToleranceDb).toBe(TRUE_PEAK_TOLERANCE_DB);
            expect(r.maxTruePeakDbtp).toBeLessThanOrEqual(-6 + TRUE_PEAK_TOLERANCE_DB);
            // the filter's bound (the ℓ∞ gain of the Annex 2 phases convolved with it, src/dsp/limiter.ts) holds
            if (m.name === 'true-peak-filter') expect(r.maxTruePeakDbtp).toBeLessThanOrEqual(-6 + TRUE_PEAK_FILTER_BOUND_DB + 1e-6);
          } else {
            // sample-peak modes report the inter-sample peaks of the Nyquist pattern: ≈ +6 dB (BS.1770-4 Annex 2)
            expect(r.truePeakToleranceDb).toBeNull();
            expect(r.maxTruePeakDbtp - -6).toBeGreaterThan(5);
            expect(r.notes.join(' ')).toMatch(/true peak is reported, not limited/);
          }
        });
      }
    }
  });

  it('should fail, naming the reason, when the output stage does not limit', () => {
    const chk = new LevelCapCheck(cfg());
    disableLimiter(chk);
    runToEnd(chk);
    const r = chk.result();
    expect(r.passed).toBe(false);
    expect(r.samplesOverCeiling).toBeGreaterThan(0);
    expect(r.maxSamplePeakDbfs).toBeGreaterThan(-6);
    expect(r.nonFiniteOutputSamples).toBe(3);
    expect(r.reasons.join(' ')).toMatch(/exceeded the -6\.00 dBFS ceiling/);
    expect(r.reasons.join(' ')).toMatch(/3 output samples were not finite/);
  });

  it('should fail in true-peak mode when only sample peaks are held', () => {
    const chk = new LevelCapCheck(cfg({ limiter: { ceilingDbfs: -6, truePeak: true } }));
    disableLimiter(chk, Math.pow(10, -6 / 20) * (1 - 2 ** -23));
    runToEnd(chk);
    const r = chk.result();
    expect(r.samplesOverCeiling).toBe(0);
    expect(r.passed).toBe(false);
    expect(r.maxTruePeakDbtp).toBeGreaterThan(-6 + TRUE_PEAK_TOLERANCE_DB);
    expect(r.reasons.join(' ')).toMatch(/true peak/);
  });

  it('should measure what a direct pass over the output finds', () => {
    const chk = new LevelCapCheck(cfg({ sampleRate: 16000, blockSize: 128, limiter: { ceilingDbfs: -3, lookaheadMs: 1 } }));
    const all = runToEnd(chk);
    const r = chk.result();
    let peak = 0;
    for (const v of all) peak = Math.max(peak, Math.abs(v));
    const tp = new TruePeakMeter();
    tp.process(all, all.length);
    expect(r.maxSamplePeakDbfs).toBe(db(peak));
    expect(r.maxTruePeakDbtp).toBeCloseTo(tp.peakDbtp, 9);
    // the history's maxima are the run's maxima
    expect(Math.max(...r.history.samplePeakDbfs)).toBe(r.maxSamplePeakDbfs);
    expect(Math.max(...r.history.truePeakDbtp)).toBeCloseTo(r.maxTruePeakDbtp, 9);
    // one entry per 10 ms, or per whole blocks when a block does not divide it (2 × 8 ms here)
    expect(r.history.timeS.length).toBe(Math.ceil(chk.totalSamples / 256));
    // the nominal level ramps from the start level to the top
    const lv = Array.from(r.history.levelDbfs).filter(Number.isFinite);
    expect(Math.min(...lv)).toBeLessThan(r.startDbfs + 1);
    expect(Math.max(...lv)).toBe(r.topDbfs);
  });

  it('should give the same output whatever block sizes the host uses', () => {
    const a = new LevelCapCheck(cfg({ blockSize: 128, limiter: { ceilingDbfs: -6, truePeak: true } }));
    const b = new LevelCapCheck(cfg({ blockSize: 128, limiter: { ceilingDbfs: -6, truePeak: true } }));
    const rng = new Random(5);
    const ya = runToEnd(a);
    const yb = runToEnd(b, () => 1 + Math.floor(rng.uniform() * 128));
    expect(yb).toEqual(ya);
    expect(b.result().maxTruePeakDbtp).toBe(a.result().maxTruePeakDbtp);
  });

  it("should build the same output stage as the simulator's closed loop for a scenario", () => {
    // Drive both engines with one known signal through a stand-in controller: outputs must match.
    for (const sc of [
      toneScenario({ outputCeilingDbfs: -9, highPassHz: 40 }),
      noiseScenario({ outputCeilingDbfs: undefined, limiter: { ceilingDbfs: -4, lookaheadMs: 3, truePeak: true, releaseMs: 20 } }),
    ]) {
      const loop = new PlantLoop(sc);
      const chk = new LevelCapCheck(levelCapConfigFromScenario(sc));
      const rng = new Random(9);
      const signal = new Float32Array(8000).map(() => 2 * rng.gaussian());
      let pos = 0;
      const make = (): Controller => {
        let p = 0;
        return {
          kind: 'stand-in',
          adapt: false,
          reset() {},
          weightNormSquared: () => 0,
          copyWeights: () => 0,
          setStepSize() {},
          setLeakage() {},
          process(_r, _e, out, n) {
            for (let i = 0; i < n; i++) out[i] = signal[p++]!;
          },
        };
      };
      loop.engine.controller = make();
      chk.engine.controller = make();
      const B = sc.blockSize;
      const z = new Float32Array(B);
      const ya = new Float32Array(B);
      const yb = new Float32Array(B);
      for (; pos + B <= signal.length; pos += B) {
        loop.engine.process(z.slice(), z.slice(), ya, B);
        chk.engine.process(z.slice(), z.slice(), yb, B);
        expect(yb).toEqual(ya);
      }
      expect(chk.engine.latencySamples).toBe(loop.engine.latencySamples);
    }
  });

  it('should measure the error microphone when the host gives it, in dB SPL with a microphone calibration', () => {
    // Peak SPL of a sine = its RMS SPL + 20·log10(√2) = +3.01 dB (definition of peak level); the mic
    // sensitivity is the RMS SPL that reads 0 dBFS (AES17), as in src/engine/calibration.ts.
    const micCalibration = { hz: 1000, sensitivityDbSpl: 110, validFromHz: 100, validToHz: 4000 };
    const chk = new LevelCapCheck(cfg({ micCalibration, signal: { ...QUICK, kinds: ['tone'] } }));
    const out = new Float32Array(64);
    const mic = new Float32Array(64);
    let peak = 0;
    while (!chk.done) {
      // a mic hearing the previous block at half amplitude (a crude acoustic path)
      for (let i = 0; i < 64; i++) {
        mic[i] = 0.5 * out[i]!;
        peak = Math.max(peak, Math.abs(mic[i]!));
      }
      chk.process(out, Math.min(64, chk.totalSamples - chk.samplesDone), mic);
    }
    const r = chk.result();
    expect(r.errorMic).not.toBeNull();
    expect(r.errorMic!.maxSamplePeakDbfs).toBeCloseTo(db(peak), 9);
    expect(r.errorMic!.maxPeakDbSpl).toBeCloseTo(db(peak) + 10 * Math.log10(2) + 110, 9);
    expect(r.errorMic!.withinSplCeiling).toBeNull(); // no SPL ceiling was given
    expect(r.history.errorMicPeakDbfs.some(Number.isFinite)).toBe(true);
  });

  it('should fail when the calibrated error mic reads above the SPL ceiling', () => {
    const outputCalibration = { points: [{ hz: 1000, dbfs: -20, measuredDbSpl: 80, sensitivityDbSpl: 100 }], minHz: 1000, maxHz: 1000 };
    const chk = new LevelCapCheck(
      cfg({ outputCalibration, peakCeilingDbSpl: 95, micCalibration: { hz: 1000, sensitivityDbSpl: 120, validFromHz: 1000, validToHz: 1000 }, signal: { ...QUICK, kinds: ['tone'] } }),
    );
    const out = new Float32Array(64);
    while (!chk.done) chk.process(out, Math.min(64, chk.totalSamples - chk.samplesDone), out.slice());
    const r = chk.result();
    // the output held its cap, but the mic (20 dB more sensitive than the loudspeaker's calibration) read above it
    expect(r.samplesOverCeiling).toBe(0);
    expect(r.errorMic!.withinSplCeiling).toBe(false);
    expect(r.passed).toBe(false);
    expect(r.reasons.join(' ')).toMatch(/error mic read .* dB SPL peak, above the 95 dB SPL ceiling/);
  });

  it('should stop early on abort, fall silent within the look-ahead and report the run incomplete', () => {
    const chk = new LevelCapCheck(cfg({ limiter: { ceilingDbfs: -6, lookaheadMs: 5 } }));
    const out = new Float32Array(64);
    for (let k = 0; k < 40; k++) chk.process(out, 64);
    chk.abort();
    const tail: number[] = [];
    while (!chk.done) {
      chk.process(out, 64);
      tail.push(...out);
    }
    // after the stop ramp (50 ms, 400 samples at 8 kHz), the look-ahead (40 samples) and the true-peak filter (1), only silence
    expect(chk.engine.limiter.latencySamples).toBe(41);
    expect(tail.length).toBeGreaterThan(441);
    expect(tail.slice(441).every((v) => v === 0)).toBe(true);
    expect(tail.slice(0, 100).some((v) => v !== 0)).toBe(true);
    expect(chk.samplesDone).toBeLessThan(chk.totalSamples);
    const r = chk.result();
    expect(r.completed).toBe(false);
    expect(r.passed).toBe(false);
    expect(r.reasons.join(' ')).toMatch(/stopped before the end/);
  });

  it('should log a guard set to mute as freeze-adaptation, so the ramp keeps going', () => {
    const r = runLevelCapCheck(cfg({ guard: { outputAtCeiling: { action: 'mute', gainReductionDb: 1 } } }));
    const atCeiling = r.events.filter((e) => e.cause === 'output-at-ceiling');
    expect(atCeiling.length).toBeGreaterThan(0);
    expect(atCeiling.every((e) => e.action === 'freeze-adaptation')).toBe(true);
    expect(r.mutesObserved).toBe(atCeiling.length);
    expect(r.maxSamplePeakDbfs).toBeGreaterThan(-6.25); // the output kept reaching the cap (the true-peak filter smooths isolated peaks a little): no mute
    expect(r.notes.join(' ')).toMatch(/set to mute on outputAtCeiling/);
  });

  it('should refuse invalid settings, naming the field, the range and the value', () => {
    expect(() => new LevelCapCheck(cfg({ signal: { overDb: 50 } }))).toThrow(/signal\.overDb must be a number in \[0, 40\] dB, got 50/);
    expect(() => new LevelCapCheck(cfg({ signal: { toneHz: 4000 } }))).toThrow(/signal\.toneHz .*\(0, 4000\).*got 4000/);
    expect(() => new LevelCapCheck(cfg({ signal: { kinds: [] } }))).toThrow(/signal\.kinds/);
    expect(() => new LevelCapCheck(cfg({ limiter: { ceilingDbfs: 3 } }))).toThrow(/ceilingDbfs must be a number in \[-120, 0\] dBFS, got 3/);
    expect(() => new LevelCapCheck(cfg({ blockSize: 0 }))).toThrow(/blockSize/);
    expect(() => new LevelCapCheck(cfg({ peakCeilingDbSpl: 90 }))).toThrow(/outputCalibration and peakCeilingDbSpl go together/);
  });
});
