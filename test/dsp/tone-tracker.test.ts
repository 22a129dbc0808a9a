import { describe, expect, it } from 'vitest';
import { ToneTracker, type ToneTrackerOptions } from '../../src/dsp/tone-tracker.ts';
import { Random } from '../../src/dsp/random.ts';
import { chirp } from '../helpers/tonal-loop.ts';

/** White Gaussian noise of variance σ² such that SNR = A²/(2σ²) (the Rife & Boorstyn definition). */
function noiseRms(amplitude: number, snrDb: number): number {
  return Math.sqrt((amplitude * amplitude) / (2 * Math.pow(10, snrDb / 10)));
}

interface Trace {
  /** time at the end of each block (s) */
  t: Float64Array;
  est: Float64Array;
  truth: Float64Array;
  locked: Uint8Array;
}

/** Feed `signal` block by block and record the estimate and the true frequency at each block end. */
function track(tracker: ToneTracker, signal: Float32Array, hz: Float64Array, block: number, sampleRate: number): Trace {
  const blocks = Math.floor(signal.length / block);
  const trace: Trace = {
    t: new Float64Array(blocks),
    est: new Float64Array(blocks),
    truth: new Float64Array(blocks),
    locked: new Uint8Array(blocks),
  };
  for (let b = 0; b < blocks; b++) {
    tracker.process(signal.subarray(b * block, (b + 1) * block), block);
    const end = (b + 1) * block - 1;
    trace.t[b] = (end + 1) / sampleRate;
    trace.est[b] = tracker.frequencyHz;
    trace.truth[b] = hz[end]!;
    trace.locked[b] = tracker.locked ? 1 : 0;
  }
  return trace;
}

function addNoise(x: Float32Array, rms: number, seed: number): Float32Array {
  const rng = new Random(seed);
  for (let i = 0; i < x.length; i++) x[i] = x[i]! + rms * rng.gaussian();
  return x;
}

describe('ToneTracker', () => {
  describe('with invalid options', () => {
    it('should refuse them with a message naming the field, range and value', () => {
      const bad: Array<[Partial<ToneTrackerOptions>, RegExp]> = [
        [{ sampleRate: 1000 }, /sampleRate must be a number in \[4000, 384000\], got 1000/],
        [{ sampleRate: 8000, maxHz: 3000 }, /maxHz must be a number in \[25, 2000\], got 3000/],
        [{ sampleRate: 48000, minHz: 0 }, /minHz .* got 0/],
        [{ sampleRate: 48000, minHz: 100, maxHz: 110 }, /maxHz .* got 110/],
        [{ sampleRate: 48000, notchQ: 0.5 }, /notchQ .* got 0.5/],
        [{ sampleRate: 48000, lockThreshold: 0.4, unlockThreshold: 0.5 }, /unlockThreshold must be a number in \[0, 0.4\], got 0.5/],
        [{ sampleRate: 48000, harmonicThresholdDb: 6 }, /harmonicThresholdDb .* got 6/],
        [{ sampleRate: Number.NaN }, /sampleRate .* got NaN/],
      ];
      for (const [opts, msg] of bad) {
        expect(() => new ToneTracker(opts as ToneTrackerOptions)).toThrow(msg);
      }
    });
  });

  describe('with a swept tone', () => {
    it('should track a 40 → 400 Hz sweep at 5 Hz/s in white noise (SNR 10 dB) with RMS error < 1 Hz after lock', () => {
      const fs = 8000;
      const seconds = 73;
      const { signal, hz } = chirp(seconds * fs, fs, (t) => Math.min(400, 40 + 5 * t), 0.5);
      addNoise(signal, noiseRms(0.5, 10), 11);
      const tracker = new ToneTracker({ sampleRate: fs, minHz: 30, maxHz: 500 });
      const tr = track(tracker, signal, hz, 64, fs);
      const first = tr.locked.indexOf(1);
      expect(first).toBeGreaterThanOrEqual(0);
      expect(tr.t[first]!).toBeLessThan(0.5);
      let sum = 0;
      let count = 0;
      let lockedCount = 0;
      for (let b = first; b < tr.t.length && tr.t[b]! <= 72; b++) {
        const d = tr.est[b]! - tr.truth[b]!;
        sum += d * d;
        count++;
        lockedCount += tr.locked[b]!;
      }
      const rms = Math.sqrt(sum / count);
      // measured: 0.24 Hz RMS, no lost lock
      expect(rms).toBeLessThan(1);
      expect(lockedCount / count).toBeGreaterThan(0.99);
    });
  });

  describe('after a 20 % frequency step', () => {
    it.each([40, 100, 300])('should re-lock within 0.5 s (from %d Hz, SNR 10 dB)', (f0) => {
      const fs = 8000;
      const { signal, hz } = chirp(4 * fs, fs, (t) => (t < 2 ? f0 : 1.2 * f0), 0.5);
      addNoise(signal, noiseRms(0.5, 10), 5);
      const tracker = new ToneTracker({ sampleRate: fs, minHz: 30, maxHz: 500 });
      const tr = track(tracker, signal, hz, 64, fs);
      // re-locked = locked and within 1 % of the new frequency from then on
      let relockS = Number.NaN;
      for (let b = tr.t.length - 1; b >= 0; b--) {
        const ok = tr.locked[b] === 1 && Math.abs(tr.est[b]! - tr.truth[b]!) < 0.01 * tr.truth[b]!;
        if (!ok) {
          relockS = tr.t[b]! - 2;
          break;
        }
      }
      // measured: 0.19 s (40 Hz), 0.13 s (100 Hz), 0.07 s (300 Hz)
      expect(relockS).toBeGreaterThan(0);
      expect(relockS).toBeLessThan(0.5);
    });

    it('should re-acquire after a jump far outside the notch (100 → 300 Hz and 300 → 60 Hz)', () => {
      const fs = 8000;
      for (const [a, b] of [[100, 300], [300, 60]] as const) {
        const { signal, hz } = chirp(3 * fs, fs, (t) => (t < 1.5 ? a : b), 0.5);
        addNoise(signal, noiseRms(0.5, 10), 9);
        const tr = track(new ToneTracker({ sampleRate: fs, minHz: 30, maxHz: 500 }), signal, hz, 128, fs);
        const last = tr.t.length - 1;
        expect(tr.locked[last]).toBe(1);
        expect(Math.abs(tr.est[last]! - b)).toBeLessThan(0.01 * b);
      }
    });
  });

  describe('over its range', () => {
    it.each([8000, 48000, 96000])('should lock on 20 Hz, 200 Hz and 2 kHz at %d Hz sampling', (fs) => {
      for (const f of [20, 200, 2000]) {
        const { signal, hz } = chirp(3 * fs, fs, () => f, 0.5);
        addNoise(signal, noiseRms(0.5, 10), 3);
        const tracker = new ToneTracker({ sampleRate: fs });
        const tr = track(tracker, signal, hz, 128, fs);
        const first = tr.locked.indexOf(1);
        expect(first, `${f} Hz at ${fs} Hz locks`).toBeGreaterThanOrEqual(0);
        // measured: 0.31 … 0.49 s at 20 Hz (the lowest bank band rings for 0.14 s), ≤ 0.11 s above
        expect(tr.t[first]!, `${f} Hz at ${fs} Hz lock time`).toBeLessThan(1);
        let mean = 0;
        let n = 0;
        for (let b = 0; b < tr.t.length; b++) {
          if (tr.t[b]! > 2) {
            mean += tr.est[b]!;
            n++;
            expect(tr.locked[b]).toBe(1);
          }
        }
        mean /= n;
        // measured: ≤ 0.06 % off (2 kHz at 8 kHz sits on the range edge, where the clamp biases it inwards)
        expect(Math.abs(mean - f) / f, `${f} Hz at ${fs} Hz mean`).toBeLessThan(0.002);
      }
    });
  });

  describe('in steady state in white noise', () => {
    // Cramér–Rao bound for one real sinusoid in white Gaussian noise, N samples:
    //   var(ω̂) ≥ 12 / (SNR·N·(N² − 1)) rad²/sample², SNR = A²/(2σ²)
    // (Rife & Boorstyn, "Single-tone parameter estimation from discrete-time observations",
    // IEEE Trans. Inf. Theory 20(5), 1974; from memory).
    // The tracker is recursive, so N is an effective window. A block estimator of N samples lags a
    // linear chirp by (N − 1)/2 samples (it estimates the mid-window frequency); we measure the
    // tracker's lag L on a noise-free chirp and take N_eff = 2L + 1. This is a comparison, not a
    // theorem: a recursive estimator with a long tail could in principle beat the block bound of
    // the same lag (matching the 50 % step-response time instead gave ratios near 0.8 in early
    // versions, which is why the lag is used). Measured at 8 kHz, SNR 10 dB: ratio 1.20 at 100 Hz,
    // 1.17 at 300 Hz (N_eff = 561 and 349 samples).
    it.each([100, 300])('should have a variance between 1× and 2× the CRB of its effective window (%d Hz)', (f0) => {
      const fs = 8000;
      const amplitude = 0.5;
      const snrDb = 10;
      const snr = Math.pow(10, snrDb / 10);
      const opts = { sampleRate: fs, minHz: 30, maxHz: 500 };

      // lag on a noise-free chirp: f0 for 1 s, then rising at 1 % of f0 per second
      const rate = 0.01 * f0;
      const sweep = chirp(4 * fs, fs, (t) => (t < 1 ? f0 : f0 + rate * (t - 1)), amplitude);
      const lagTrace = track(new ToneTracker(opts), sweep.signal, sweep.hz, 16, fs);
      let lagS = 0;
      let n = 0;
      for (let b = 0; b < lagTrace.t.length; b++) {
        if (lagTrace.t[b]! > 2.5) {
          lagS += (lagTrace.truth[b]! - lagTrace.est[b]!) / rate;
          n++;
        }
      }
      lagS /= n;
      const nEff = 2 * lagS * fs + 1;

      const steady = chirp(40 * fs, fs, () => f0, amplitude);
      addNoise(steady.signal, noiseRms(amplitude, snrDb), 7);
      const tr = track(new ToneTracker(opts), steady.signal, steady.hz, 32, fs);
      let mean = 0;
      let m = 0;
      for (let b = 0; b < tr.t.length; b++) {
        if (tr.t[b]! > 2) {
          mean += tr.est[b]!;
          m++;
        }
      }
      mean /= m;
      let variance = 0;
      for (let b = 0; b < tr.t.length; b++) {
        if (tr.t[b]! > 2) variance += (tr.est[b]! - mean) ** 2;
      }
      variance /= m;
      const crbOmega = 12 / (snr * nEff * (nEff * nEff - 1));
      const crbHz2 = crbOmega * (fs / (2 * Math.PI)) ** 2;
      const ratio = variance / crbHz2;
      expect(Math.abs(mean - f0)).toBeLessThan(0.01);
      expect(ratio).toBeGreaterThanOrEqual(1);
      expect(ratio).toBeLessThan(2);
    });
  });

  describe('with harmonics', () => {
    const fs = 8000;
    function periodic(amps: number[], f0: number, check: boolean): ToneTracker {
      const { signal } = chirp(3 * fs, fs, () => f0, 0);
      for (let i = 0; i < signal.length; i++) {
        let s = 0;
        for (let k = 0; k < amps.length; k++) s += amps[k]! * Math.cos((2 * Math.PI * (k + 1) * f0 * i) / fs + k);
        signal[i] = s;
      }
      addNoise(signal, 0.02, 4);
      const tracker = new ToneTracker({ sampleRate: fs, minHz: 30, maxHz: 1000, harmonicsCheck: check });
      for (let b = 0; b + 128 <= signal.length; b += 128) tracker.process(signal.subarray(b, b + 128), 128);
      return tracker;
    }

    it('should report the fundamental below a stronger second harmonic when the check is on', () => {
      const on = periodic([0.3, 1], 60, true);
      expect(on.locked).toBe(true);
      expect(on.harmonicNumber).toBe(2);
      expect(on.dominantHz).toBeCloseTo(120, 0);
      expect(on.frequencyHz).toBeCloseTo(60, 0);
      const est = new Float64Array(6);
      on.copyEstimate(est, 1);
      expect(Array.from(est.subarray(1))).toEqual([on.frequencyHz, on.dominantHz, on.confidence, 1, 2]);
      const off = periodic([0.3, 1], 60, false);
      expect(off.harmonicNumber).toBe(1);
      expect(off.frequencyHz).toBeCloseTo(120, 0);
    });

    it('should find a third-harmonic-dominant fundamental and leave a pure tone alone', () => {
      const third = periodic([0.2, 0.3, 1], 50, true);
      expect(third.harmonicNumber).toBe(3);
      expect(third.frequencyHz).toBeCloseTo(50, 0);
      const pure = periodic([0, 1], 60, true);
      expect(pure.harmonicNumber).toBe(1);
      expect(pure.frequencyHz).toBeCloseTo(120, 0);
    });

    it('should follow the fundamental when it dominates, with little bias from the harmonics', () => {
      const t = periodic([1, 0.5, 0.3], 50, false);
      expect(t.locked).toBe(true);
      // measured: +0.02 Hz
      expect(Math.abs(t.frequencyHz - 50)).toBeLessThan(0.1);
    });
  });

  describe('lock rules', () => {
    it('should lose lock when the tone stops and report zero confidence in silence', () => {
      const fs = 16000;
      const { signal, hz } = chirp(3 * fs, fs, () => 250, 0.5);
      const rng = new Random(2);
      for (let i = 0; i < signal.length; i++) {
        if (i >= 1.5 * fs) signal[i] = 0.05 * rng.gaussian();
      }
      const tr = track(new ToneTracker({ sampleRate: fs }), signal, hz, 128, fs);
      const at = (s: number): number => Math.round((s * fs) / 128) - 1;
      expect(tr.locked[at(1.4)]).toBe(1);
      expect(tr.locked[at(1.7)]).toBe(0);
      expect(tr.locked[at(3)]).toBe(0);

      const silent = new ToneTracker({ sampleRate: fs });
      silent.process(new Float32Array(4096), 4096);
      expect(silent.locked).toBe(false);
      expect(silent.confidence).toBe(0);
    });

    it('should give the same estimate whatever the block size (streaming)', () => {
      const fs = 8000;
      const { signal } = chirp(fs, fs, (t) => 90 + 20 * t, 0.5);
      addNoise(signal, 0.1, 8);
      const results: number[] = [];
      for (const block of [1, 37, 128, fs]) {
        const tracker = new ToneTracker({ sampleRate: fs });
        for (let s = 0; s < signal.length; s += block) {
          const n = Math.min(block, signal.length - s);
          tracker.process(signal.subarray(s, s + n), n);
        }
        results.push(tracker.frequencyHz);
      }
      expect(results[0]).toBeGreaterThan(105);
      for (const r of results) expect(r).toBe(results[0]);
    });

    it('should reset to an unlocked state', () => {
      const fs = 8000;
      const { signal } = chirp(fs, fs, () => 150, 0.5);
      const tracker = new ToneTracker({ sampleRate: fs });
      tracker.process(signal, signal.length);
      expect(tracker.locked).toBe(true);
      tracker.reset();
      expect(tracker.locked).toBe(false);
      expect(tracker.confidence).toBe(0);
    });
  });
});
