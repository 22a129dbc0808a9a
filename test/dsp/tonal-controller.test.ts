import { describe, expect, it } from 'vitest';
import {
  createHarmonicReadout,
  TonalController,
  type TonalControllerConfig,
} from '../../src/dsp/tonal-controller.ts';
import { Random } from '../../src/dsp/random.ts';
import { expectClose, expectRelClose } from '../helpers/tolerance.ts';
import {
  chirp,
  meanSquare,
  runTonalLoop,
  secondaryPathImpulse,
  tone,
  toneAmplitude,
} from '../helpers/tonal-loop.ts';

const FIR = [0.8, 0.3, -0.2];

function config(over: Partial<TonalControllerConfig>): TonalControllerConfig {
  return {
    sampleRate: 8000,
    maxBlockSize: 64,
    secondaryPathModel: secondaryPathImpulse(64, FIR),
    harmonics: 1,
    stepSize: 0.01,
    frequencySource: 'fixed',
    hz: 100,
    ...over,
  };
}

/** Sum of harmonics Σ A_k cos(2π k f0 t + φ_k) plus Gaussian noise. */
function periodic(length: number, fs: number, f0: number, amps: number[], phases: number[], noise: number, seed: number): Float32Array {
  const x = new Float32Array(length);
  const rng = new Random(seed);
  for (let i = 0; i < length; i++) {
    let s = 0;
    for (let k = 0; k < amps.length; k++) s += amps[k]! * Math.cos((2 * Math.PI * (k + 1) * f0 * i) / fs + phases[k]!);
    x[i] = s + noise * rng.gaussian();
  }
  return x;
}

function db(ratio: number): number {
  return 20 * Math.log10(ratio);
}

describe('TonalController', () => {
  describe('with an invalid configuration', () => {
    it('should refuse it with a message naming the field, range and value', () => {
      const cases: Array<[Partial<TonalControllerConfig>, RegExp]> = [
        [{ sampleRate: 100 }, /sampleRate must be a number in \[4000, 384000\] Hz, got 100/],
        [{ maxBlockSize: 0 }, /maxBlockSize must be an integer in \[1, 65536\], got 0/],
        [{ secondaryPathModel: new Float32Array(4) }, /secondaryPathModel must be not all zero/],
        [{ secondaryPathModel: new Float32Array([0, Number.NaN]) }, /secondaryPathModel must be finite taps, got NaN at tap 1/],
        [{ harmonics: 9 }, /harmonics must be an integer in \[1, 8\], got 9/],
        [{ stepSize: 0 }, /stepSize must be a number in \(0, 2\), got 0/],
        [{ stepSize: 0.5, leakage: 3 }, /leakage must be a number ≥ 0 with stepSize·leakage < 1 \(leakage < 2\), got 3/],
        [{ regularization: -1 }, /regularization must be a finite number ≥ 0, got -1/],
        [{ frequencySource: 'tacho' as never }, /frequencySource must be one of reference, error, fixed, external, got tacho/],
        [{ hz: undefined }, /hz must be a number in \[minHz, maxHz\] = \[20, 2000\] Hz, got undefined/],
        [{ hz: 5000 }, /hz must be .* got 5000/],
        [{ maxHz: 3000 }, /maxHz must be a number in \[1.25·minHz, sampleRate\/4\] = \[25, 2000\] Hz, got 3000/],
      ];
      for (const [over, msg] of cases) expect(() => new TonalController(config(over))).toThrow(msg);
      const c = new TonalController(config({}));
      expect(() => c.setHarmonics(0)).toThrow(/harmonics must be an integer in \[1, 8\], got 0/);
      expect(() => c.setFrequencySource('fixed')).toThrow(/hz must be .* got undefined/);
    });
  });

  describe('on a steady tone', () => {
    // Target: ≥ 30 dB within 3 s of switching on (common practice for demonstrators, no published source).
    it('should attenuate a 55 Hz tone by ≥ 30 dB within 3 s, tracking the reference microphone', () => {
      const fs = 8000;
      const total = 4 * fs;
      const d = periodic(total, fs, 55, [0.5], [0.3], 0.001, 1);
      const ref = periodic(total, fs, 55, [0.3], [1], 0.03, 2);
      const c = new TonalController(config({ frequencySource: 'reference', hz: undefined, stepSize: 0.01 }));
      c.adapt = false;
      const { error } = runTonalLoop(c, { blockSize: 64, delaySamples: 64, fir: FIR }, d, ref, (s) => {
        c.adapt = s >= fs;
      });
      const before = toneAmplitude(error, 0.5 * fs, 0.5 * fs, 55, fs);
      const after = toneAmplitude(error, 3.9 * fs, 0.1 * fs, 55, fs);
      // measured: about 55 dB
      expect(db(before / after)).toBeGreaterThanOrEqual(30);
      expect(c.trackerLocked).toBe(true);
      expectClose(c.frequencyHz, 55, 0.1, 'tracked fundamental');
    });

    it('should reach ≥ 20 dB with a single microphone (frequency tracked on the error signal)', () => {
      const fs = 8000;
      const total = 4 * fs;
      const d = periodic(total, fs, 70, [0.5], [0.3], 0.001, 3);
      const c = new TonalController(config({ frequencySource: 'error', hz: undefined, stepSize: 0.01 }));
      c.adapt = false;
      const { error } = runTonalLoop(c, { blockSize: 64, delaySamples: 64, fir: FIR }, d, null, (s) => {
        c.adapt = s >= fs;
      });
      const before = toneAmplitude(error, 0.5 * fs, 0.5 * fs, 70, fs);
      const after = toneAmplitude(error, 3.5 * fs, 0.5 * fs, 70, fs);
      // measured: about 80 dB; the tracker stays locked on the reconstructed disturbance
      expect(db(before / after)).toBeGreaterThanOrEqual(20);
      expect(c.trackerLocked).toBe(true);
      expectClose(c.frequencyHz, 70, 0.1, 'tracked fundamental');
    });

    it('should keep tracking from the error signal with an imperfect model (gain 1.5×, delay 8 samples long)', () => {
      // the reconstructed disturbance d̂ = e − ŝ*y still carries the tone when ŝ is wrong, so the
      // tracker does not lose the frequency that control removes; steady 4 s, then a 5 Hz/s drift
      const fs = 8000;
      const total = 8 * fs;
      const { signal: d } = chirp(total, fs, (t) => (t < 4 ? 70 : 70 + 5 * (t - 4)), 0.5);
      const model = secondaryPathImpulse(64 + 8, FIR.map((x) => 1.5 * x));
      const c = new TonalController(config({ frequencySource: 'error', hz: undefined, secondaryPathModel: model }));
      c.adapt = false;
      const { error } = runTonalLoop(c, { blockSize: 64, delaySamples: 64, fir: FIR }, d, null, (s) => {
        c.adapt = s >= fs;
      });
      // measured: > 100 dB steady, 24 dB while drifting
      for (const t of [2, 3, 5, 7]) {
        const att = 10 * Math.log10(meanSquare(d, t * fs, fs) / meanSquare(error, t * fs, fs));
        expect(att, `attenuation in second ${t}`).toBeGreaterThanOrEqual(20);
      }
      expect(c.trackerLocked).toBe(true);
      expectClose(c.frequencyHz, 90, 0.5, 'tracked fundamental at the end of the drift');
    });

    it('should attenuate three harmonics by ≥ 20 dB each', () => {
      const fs = 8000;
      const total = 5 * fs;
      const f0 = 50;
      const d = periodic(total, fs, f0, [0.5, 0.3, 0.2], [0, 1, 2], 0.001, 4);
      const ref = periodic(total, fs, f0, [0.3, 0.18, 0.12], [1, 3, 5], 0.03, 5);
      const c = new TonalController(config({ harmonics: 3, frequencySource: 'reference', hz: undefined }));
      c.adapt = false;
      const { error } = runTonalLoop(c, { blockSize: 64, delaySamples: 64, fir: FIR }, d, ref, (s) => {
        c.adapt = s >= fs;
      });
      for (let k = 1; k <= 3; k++) {
        const before = toneAmplitude(error, 0.5 * fs, 0.5 * fs, k * f0, fs);
        const after = toneAmplitude(error, 4 * fs, fs, k * f0, fs);
        // measured: 47, 41, 37 dB
        expect(db(before / after), `harmonic ${k}`).toBeGreaterThanOrEqual(20);
      }
    });
  });

  describe('on a drifting tone with a 12 ms secondary path', () => {
    it.each(['reference', 'error'] as const)('should hold ≥ 20 dB while the tone drifts at 5 Hz/s (%s source)', (source) => {
      const fs = 8000;
      const delay = Math.round(0.012 * fs);
      const total = 10 * fs;
      const { signal: d, hz } = chirp(total, fs, (t) => 50 + 5 * t, 0.5);
      const ref = new Float32Array(total);
      const rng = new Random(6);
      let phase = 0.7;
      for (let i = 0; i < total; i++) {
        ref[i] = 0.3 * Math.cos(phase) + 0.03 * rng.gaussian();
        phase += (2 * Math.PI * hz[i]!) / fs;
        d[i] = d[i]! + 0.001 * rng.gaussian();
      }
      const c = new TonalController(
        config({ frequencySource: source, hz: undefined, secondaryPathModel: secondaryPathImpulse(delay, FIR) }),
      );
      expect(c.stepSize).toBeLessThan(c.stepSizeLimit / 2);
      c.adapt = false;
      const { error } = runTonalLoop(c, { blockSize: 64, delaySamples: delay, fir: FIR }, d, ref, (s) => {
        c.adapt = s >= fs;
      });
      // every second from 2 s to 10 s (60 → 100 Hz); measured 26 → 28 dB
      for (let t = 2; t < 10; t++) {
        const att = 10 * Math.log10(meanSquare(d, t * fs, fs) / meanSquare(error, t * fs, fs));
        expect(att, `attenuation in second ${t}`).toBeGreaterThanOrEqual(20);
      }
    });
  });

  describe('convergence rate with a perfect model', () => {
    // Theory (derived in tonal-controller.ts): with Ŝ = S and δ = 0 the error phasor at the
    // harmonic decays by (1 − μ/2) per sample, time constant τ = 2/μ samples, whatever the path
    // gain. This is the single-sinusoid adaptive canceller of Widrow et al., "Adaptive noise
    // cancelling: principles and applications", Proc. IEEE 63(12), 1975 (from memory): pole radius
    // 1 − μ_W C² (notch 3 dB bandwidth 2μ_W C² rad/sample) in the convention w ← w + 2μ_W e x with
    // reference amplitude C; the normalised step here is μ = 2μ_W C². The loop delay Δ = 16 samples
    // shifts the dominant root of z^{Δ+1} − z^Δ + μ/2 by about Δμ/2 (≤ 1.6 % here).
    it.each([
      [0.002, 1],
      [0.01, 0.1],
    ])('should decay with time constant 2/stepSize within 20 percent (stepSize %s, path gain %s)', (mu, gain) => {
      const fs = 8000;
      const f = 100; // 80 samples per period: the amplitude fit over one period is exact
      const fir = [0.7 * gain, -0.4 * gain];
      const delay = 16;
      const c = new TonalController(
        config({
          maxBlockSize: 16,
          secondaryPathModel: secondaryPathImpulse(delay, fir),
          stepSize: mu,
          regularization: 0,
          hz: f,
        }),
      );
      const total = Math.round((12 / mu) * 1.5);
      const d = tone(total, fs, f, 1, 0.4);
      const { error } = runTonalLoop(c, { blockSize: 16, delaySamples: delay, fir }, d, null);
      // least-squares line through ln(amplitude) over windows where the amplitude is 0.5 … 1e-3
      let sx = 0;
      let sy = 0;
      let sxx = 0;
      let sxy = 0;
      let n = 0;
      for (let start = 0; start + 80 <= total; start += 80) {
        const a = toneAmplitude(error, start, 80, f, fs);
        if (a < 0.5 && a > 1e-3) {
          const x = start + 40;
          const y = Math.log(a);
          sx += x;
          sy += y;
          sxx += x * x;
          sxy += x * y;
          n++;
        }
      }
      expect(n).toBeGreaterThan(10);
      const slope = (n * sxy - sx * sy) / (n * sxx - sx * sx);
      const tauMeasured = -1 / slope;
      expectRelClose(tauMeasured, 2 / mu, 0.2, 'error time constant (samples)');
    });
  });

  describe('with a model phase error', () => {
    // Tonal FxLMS converges for a model phase error within ±90° and not beyond (Morgan, IEEE TASSP
    // 28(4), 1980; Boucher, Elliott & Nelson, IEE Proc. F 138(4), 1991; from memory). The error is
    // made by a model delay that is 20 or 40 samples too long at 66.67 Hz (120-sample period):
    // exactly 60° and 120°.
    const fs = 8000;
    const f = fs / 120;
    const total = 4 * fs;
    function run(extraDelay: number): number {
      const c = new TonalController(
        config({ secondaryPathModel: secondaryPathImpulse(32 + extraDelay, [1]), stepSize: 0.005, hz: f }),
      );
      const d = tone(total, fs, f, 0.5, 0.2);
      const { error } = runTonalLoop(c, { blockSize: 32, delaySamples: 32, fir: [1] }, d, null);
      return db(0.5 / toneAmplitude(error, total - 0.25 * fs, 0.25 * fs, f, fs));
    }

    it('should converge with a 60° phase error', () => {
      // measured: beyond 100 dB (cos 60° halves the rate)
      expect(run(20)).toBeGreaterThan(30);
    });

    it('should diverge (or at least fail to attenuate) with a 120° phase error', () => {
      const att = run(40);
      expect(att > 0).toBe(false);
    });
  });

  describe('step size limit', () => {
    // Delayed-LMS bound (Long, Ling & Proakis, IEEE TASSP 37(9), 1989; from memory): the averaged
    // error E(n+1) = E(n) − (μ/2)E(n−Δ) is stable for μ/2 < 2 sin(π/(2(2Δ+1))). The largest stable g
    // of z^{Δ+1} − z^Δ + g was confirmed by polynomial roots for Δ = 0 … 200 (calc).
    it('should report 4 sin(π/(2(2Δ+1))) and converge below it, diverge above it', () => {
      const fs = 8000;
      const delay = 32;
      const model = secondaryPathImpulse(delay, [1]);
      const limit = 4 * Math.sin(Math.PI / (2 * (2 * delay + 1)));
      const probe = new TonalController(config({ secondaryPathModel: model }));
      expect(probe.modelDelay).toBe(delay);
      expectClose(probe.stepSizeLimit, limit, 1e-12, 'stepSizeLimit');
      const results: number[] = [];
      for (const factor of [0.8, 1.25]) {
        const c = new TonalController(
          config({ maxBlockSize: 32, secondaryPathModel: model, stepSize: factor * limit, regularization: 0 }),
        );
        const d = tone(3 * fs, fs, 100, 0.5);
        const { error } = runTonalLoop(c, { blockSize: 32, delaySamples: delay, fir: [1] }, d, null);
        results.push(db(0.5 / toneAmplitude(error, 2.5 * fs, 0.5 * fs, 100, fs)));
      }
      expect(results[0]).toBeGreaterThan(40);
      expect(results[1]! > 0).toBe(false);
    });
  });

  describe('with leakage', () => {
    // Derived in tonal-controller.ts from the leaky-LMS equilibrium (Haykin, Adaptive Filter Theory;
    // from memory): the residual is 2γ/(1 + 2γ) of the disturbance.
    it.each([0.01, 0.1])('should leave a residual of 2γ/(1 + 2γ) (γ = %f)', (gamma) => {
      const fs = 8000;
      const c = new TonalController(config({ leakage: gamma, regularization: 0, maxBlockSize: 32, secondaryPathModel: secondaryPathImpulse(32, [0.8, 0.3]) }));
      const d = tone(4 * fs, fs, 100, 0.5);
      const { error } = runTonalLoop(c, { blockSize: 32, delaySamples: 32, fir: [0.8, 0.3] }, d, null);
      const att = db(0.5 / toneAmplitude(error, 3 * fs, fs, 100, fs));
      // measured: 34.156 dB (γ = 0.01), 15.605 dB (γ = 0.1)
      expectClose(att, -db((2 * gamma) / (1 + 2 * gamma)), 0.1, 'attenuation with leakage (dB)');
    });
  });

  describe('meters', () => {
    it('should report disturbance, residual, anti-phase and attenuation per harmonic', () => {
      const fs = 8000;
      const gamma = 0.005; // residual 2γ/(1 + 2γ): 40.09 dB
      const c = new TonalController(config({ harmonics: 2, leakage: gamma, regularization: 0, hz: 80 }));
      const d = periodic(3 * fs, fs, 80, [0.5, 0.2], [0.3, 2], 0, 1);
      runTonalLoop(c, { blockSize: 64, delaySamples: 64, fir: FIR }, d, null);
      const r = createHarmonicReadout();
      const expected = [0.5, 0.2];
      for (let k = 1; k <= 2; k++) {
        expect(c.readHarmonic(k, r)).toBe(true);
        expectClose(r.frequencyHz, 80 * k, 1e-9, 'frequency');
        expectRelClose(r.disturbanceAmplitude, expected[k - 1]!, 0.02, `disturbance amplitude, harmonic ${k}`);
        expectRelClose(r.residualAmplitude, expected[k - 1]! * ((2 * gamma) / (1 + 2 * gamma)), 0.05, `residual, harmonic ${k}`);
        expectClose(Math.abs(r.counterPhaseDeg), 180, 1, `counter-signal phase, harmonic ${k}`);
        expectClose(r.attenuationDb, -db((2 * gamma) / (1 + 2 * gamma)), 0.5, `attenuation, harmonic ${k}`);
        // the output amplitude needed is |D| / |S(kω)|
        const w = (2 * Math.PI * 80 * k) / fs;
        let re = 0;
        let im = 0;
        for (let j = 0; j < FIR.length; j++) {
          re += FIR[j]! * Math.cos(w * (64 + j));
          im -= FIR[j]! * Math.sin(w * (64 + j));
        }
        expectRelClose(r.counterAmplitude, expected[k - 1]! / Math.hypot(re, im) / (1 + 2 * gamma), 0.02, `counter amplitude, harmonic ${k}`);
      }
      expect(c.readHarmonic(3, r)).toBe(false);
      expect(c.readHarmonic(0, r)).toBe(false);
      const weights = new Float32Array(8);
      expect(c.copyWeights(weights)).toBe(4);
      expectClose(weights[0]! ** 2 + weights[1]! ** 2 + weights[2]! ** 2 + weights[3]! ** 2, c.weightNormSquared(), 1e-6, 'weight norm');
    });
  });

  describe('runtime changes', () => {
    /** Largest |y(n) − y(n−1)| for n in [from, to). */
    function maxStep(y: Float32Array, from: number, to: number): number {
      let m = 0;
      for (let i = Math.max(1, from); i < to; i++) m = Math.max(m, Math.abs(y[i]! - y[i - 1]!));
      return m;
    }

    it('should not step the output when the frequency source or the harmonic count changes', () => {
      const fs = 8000;
      const block = 64;
      const total = 6 * fs;
      const d = periodic(total, fs, 60, [0.5, 0.3, 0.2], [0, 1, 2], 0.001, 9);
      const ref = periodic(total, fs, 60, [0.5], [0.5], 0.01, 10);
      const c = new TonalController(config({ harmonics: 3, hz: 60 }));
      const weights = new Float32Array(6);
      const amps = [0, 0, 0];
      // block boundaries at instants where the synthesized phase is not a whole number of cycles
      const at = (seconds: number): number => Math.round((seconds * fs) / block) * block;
      const switches: Array<[number, () => void, number]> = [
        [at(2.1), () => c.setFrequencySource('fixed', 66), 66], // f0 jumps by 10 %
        [at(3.23), () => c.setHarmonics(1), 66], // harmonics 2 and 3 fade out
        [at(4.37), () => c.setFrequencySource('reference'), 66], // holds 66 Hz, then follows the tracker to 60 Hz
        [at(5.11), () => c.setFrequencySource('external', 63), 66],
      ];
      const { output } = runTonalLoop(c, { blockSize: block, delaySamples: block, fir: FIR }, d, ref, (start) => {
        // learn for 2 s, then freeze the weights so that only the synthesis can move the output
        c.adapt = start < 2 * fs;
        for (const [when, action] of switches) {
          if (start === when) {
            c.copyWeights(weights);
            for (let k = 0; k < 3; k++) amps[k] = Math.hypot(weights[2 * k] ?? 0, weights[2 * k + 1] ?? 0);
            action();
          }
        }
      });
      expect(c.frequencyHz).toBe(63);
      const ramp = 1 / Math.round(0.02 * fs);
      for (const [when, , fMax] of switches) {
        // a sum of sinusoids A_k cos(kφ + θ_k) advancing by ω changes by at most Σ 2 A_k sin(kω/2)
        // per sample; a fading harmonic adds A_k/rampSamples. A phase jump could change it by 2 Σ A_k.
        const w = (2 * Math.PI * fMax) / fs;
        let bound = 0;
        let jump = 0;
        for (let k = 0; k < 3; k++) {
          bound += amps[k]! * (2 * Math.sin(((k + 1) * w) / 2) + ramp);
          jump += 2 * amps[k]!;
        }
        const step = maxStep(output, when - block, when + 4 * block);
        expect(step, `step around sample ${when}`).toBeLessThanOrEqual(1.05 * bound);
        expect(bound).toBeLessThan(0.25 * jump); // the check is sharp enough to see a phase jump
      }
    });

    it('should follow an external frequency, ignoring non-finite values and clamping to the range', () => {
      const c = new TonalController(config({ frequencySource: 'external', hz: undefined, minHz: 30, maxHz: 500 }));
      const x = new Float32Array(64);
      const y = new Float32Array(64);
      c.process(x, x, y, 64);
      expect(c.frequencyKnown).toBe(false);
      c.setFrequencyHz(70);
      c.process(x, x, y, 64);
      expect(c.frequencyHz).toBe(70);
      c.setFrequencyHz(Number.NaN);
      c.process(x, x, y, 64);
      expect(c.frequencyHz).toBe(70);
      c.setFrequencyHz(9000);
      c.process(x, x, y, 64);
      expect(c.frequencyHz).toBe(500);
    });

    it('should freeze the weights when adapt is false and clear them on reset', () => {
      const fs = 8000;
      const c = new TonalController(config({}));
      const d = tone(fs, fs, 100, 0.5);
      runTonalLoop(c, { blockSize: 64, delaySamples: 64, fir: FIR }, d, null);
      const w1 = new Float32Array(2);
      const w2 = new Float32Array(2);
      c.copyWeights(w1);
      expect(c.weightNormSquared()).toBeGreaterThan(0.01);
      c.adapt = false;
      const { output } = runTonalLoop(c, { blockSize: 64, delaySamples: 64, fir: FIR }, d, null);
      c.copyWeights(w2);
      expect(Array.from(w2)).toEqual(Array.from(w1));
      expect(meanSquare(output, 0, fs)).toBeGreaterThan(0.01); // still producing the counter-signal
      c.reset();
      expect(c.weightNormSquared()).toBe(0);
    });
  });
});
