import { describe, expect, it } from 'vitest';
import { readdirSync, readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { join } from 'node:path';
import { parseScenario, type Scenario } from '../../src/plant/scenario.ts';
import { simulate, trueSecondaryPath } from '../../src/plant/simulate.ts';
import { parseReplaySettings, replay, ReplayError, type ReplaySettings } from '../../src/plant/replay.ts';
import { decodeWav, encodeWavFloat32 } from '../../src/io/wav.ts';
import { Random } from '../../src/dsp/random.ts';
import { plainFxnlms } from '../fixtures/replay/plain-fxnlms.ts';
import { expectClose } from '../helpers/tolerance.ts';

const demoDir = fileURLToPath(new URL('../../demo/scenarios/', import.meta.url));

function settingsOf(sc: Scenario): ReplaySettings {
  return {
    controller: sc.controller,
    ...(sc.limiter ? { limiter: sc.limiter } : {}),
    ...(sc.outputCeilingDbfs !== undefined ? { outputCeilingDbfs: sc.outputCeilingDbfs } : {}),
    ...(sc.highPassHz !== undefined ? { highPassHz: sc.highPassHz } : {}),
  };
}

/** 10·log10 of the control-off over the control-on error power, last 25 % (the simulator's steady state). */
function steadyAttenuationDb(off: ArrayLike<number>, on: ArrayLike<number>): number {
  let po = 0, pn = 0;
  for (let i = Math.floor(0.75 * off.length); i < off.length; i++) {
    po += off[i]! ** 2;
    pn += on[i]! ** 2;
  }
  return 10 * Math.log10(po / pn);
}

describe('replay', () => {
  describe('with the control-off channels of each demo scenario and its true secondary path', () => {
    // Every demo without a feedback path (replay assumes none) and without injected faults. The check is
    // internal consistency: the replay's loop e = d + s*y must reproduce the simulator's closed loop.
    const demos = readdirSync(demoDir).filter((f) => f.endsWith('.json')).map((f) => [f, parseScenario(JSON.parse(readFileSync(join(demoDir, f), 'utf8')))] as const)
      .filter(([, sc]) => !sc.paths.feedback && !sc.faults?.length && !sc.loudspeaker && !sc.sources.some((s) => s.kind === 'wav'));

    it('should cover most demos', () => {
      expect(demos.length).toBeGreaterThanOrEqual(10);
    });

    for (const [file, sc] of demos) {
      it(`should give the simulation's attenuation within 0.1 dB for ${file}`, () => {
        const sim = simulate(sc, { record: true, wienerMaxS: 0.5 });
        // through a float32 WAV, as `simulate --out` writes it and `replay` reads it
        const wav = decodeWav(encodeWavFloat32([sim.signals!.referenceOff, sim.signals!.errorOff], sc.sampleRate));
        const r = replay({
          sampleRate: sc.sampleRate,
          blockSize: sc.blockSize,
          reference: wav.channels[0]!,
          disturbance: wav.channels[1]!,
          model: trueSecondaryPath(sc),
          settings: settingsOf(sc),
        }, { wienerMaxS: 0.5 });
        expect(sim.attenuationDb).not.toBeNull();
        expectClose(r.attenuationDb!, sim.attenuationDb!, 0.1, `${file} attenuation`);
        expect(r.diverged).toBe(sim.diverged);
        expectClose(r.errorOffDbfs!, sim.errorOffDbfs!, 0.01, `${file} control-off level`);
      }, 300_000);
    }
  });

  describe('against a plain FxNLMS written from the equations (test/fixtures/replay/plain-fxnlms.ts)', () => {
    // Recordings generated here: a reference x and the error d = P*x + noise it produces through an
    // invented primary path; the true and model secondary paths are invented too. Both implementations
    // must agree on the steady-state attenuation within 1 dB.
    const fs = 8000, B = 32, N = 8 * fs;
    const s = new Float64Array(60);
    s[40] = 0.8; s[41] = -0.3; s[42] = 0.1; // 5 ms bulk delay, then a short response
    const cases: [string, (i: number, rnd: Random) => number][] = [
      ['white noise', (_i, rnd) => 0.1 * rnd.gaussian()],
      ['two tones in noise', (i, rnd) => 0.2 * Math.sin((2 * Math.PI * 120 * i) / fs) + 0.1 * Math.sin((2 * Math.PI * 310 * i) / fs + 1) + 0.02 * rnd.gaussian()],
    ];
    for (const [what, gen] of cases) {
      it(`should agree within 1 dB on ${what}`, () => {
        const rnd = new Random(7);
        const x = new Float32Array(N);
        for (let i = 0; i < N; i++) x[i] = gen(i, rnd);
        const d = new Float32Array(N);
        const prim = [0, 0, 0, 0.6, 0.3, -0.1]; // primary path: 3 samples late, then a short response
        for (let n = 0; n < N; n++) {
          let v = 0.0005 * rnd.gaussian();
          for (let k = 0; k < prim.length; k++) if (n >= k + 80) v += prim[k]! * x[n - k - 80]!;
          d[n] = v;
        }
        const L = 128, mu = 0.02;
        // the plain FxNLMS has no output stage: replay runs with the zero-latency sample-peak limiter (no true-peak filter)
        const plain = plainFxnlms(x, d, s, s, L, mu);
        const expected = steadyAttenuationDb(d, plain);
        const r = replay({ sampleRate: fs, blockSize: B, reference: x, disturbance: d, model: s, settings: { controller: { algorithm: 'fxnlms', taps: L, stepSize: mu }, outputCeilingDbfs: 0, limiter: { truePeak: false } } }, { wienerMaxS: 0.5 });
        expect(expected).toBeGreaterThan(10); // the fixture itself controls
        expectClose(r.attenuationDb!, expected, 1, `${what}: replay vs plain FxNLMS`);
      }, 120_000);
    }
  });

  describe('with a model that leaves out part of the true path', () => {
    it('should control less when the true path differs from the model (--true-path)', () => {
      const fs = 8000, N = 4 * fs;
      const rnd = new Random(3);
      const x = new Float32Array(N).map(() => 0.1 * rnd.gaussian());
      const d = new Float32Array(N);
      for (let n = 100; n < N; n++) d[n] = 0.5 * x[n - 100]!;
      const s = new Float64Array(50); s[40] = 1;
      const wrong = new Float64Array(50); wrong[40] = -1; // sign flipped: FxLMS then drives the error up
      // white noise up to fs/2: the zero-latency sample-peak stage, so no true-peak filter shapes the treble
      const settings = { controller: { algorithm: 'fxnlms' as const, taps: 64, stepSize: 0.05 }, outputCeilingDbfs: 0, limiter: { truePeak: false } };
      const good = replay({ sampleRate: fs, blockSize: 32, reference: x, disturbance: d, model: s, settings }, { wienerMaxS: 0.2 });
      const bad = replay({ sampleRate: fs, blockSize: 32, reference: x, disturbance: d, model: s, truePath: wrong, settings }, { wienerMaxS: 0.2 });
      expect(good.attenuationDb!).toBeGreaterThan(20);
      expect(bad.diverged).toBe(true);
    });
  });

  describe('with bad input', () => {
    it('should name the field, its range and the value of a bad setting', () => {
      expect(() => parseReplaySettings({ controller: { algorithm: 'fxnlms', taps: 0, stepSize: 0.1 } })).toThrow(/controller\.taps: must be an integer ≥ 1 and ≤ 65536 \(taps\), got 0/);
      expect(() => parseReplaySettings({ controller: { algorithm: 'fxnlms', taps: 8, stepSize: 0.1 }, highPassHz: 5000 })).toThrow(/highPassHz: .*≤ 1000.*got 5000/);
      expect(() => parseReplaySettings({ controller: { algorithm: 'fxnlms', taps: 8, stepSize: 0.1 }, limiter: { ceilingDb: -3 } })).toThrow(/limiter: unknown field\(s\) "ceilingDb"/);
    });

    it('should refuse a path with most of its energy inside the first block', () => {
      const x = new Float32Array(1000), d = new Float32Array(1000);
      expect(() => replay({ sampleRate: 8000, blockSize: 64, reference: x, disturbance: d, model: [0, 1], settings: { controller: { algorithm: 'fxnlms', taps: 8, stepSize: 0.1 } } }))
        .toThrow(ReplayError);
      expect(() => replay({ sampleRate: 8000, blockSize: 64, reference: x, disturbance: d, model: [0, 1], settings: { controller: { algorithm: 'fxnlms', taps: 8, stepSize: 0.1 } } }))
        .toThrow(/100\.0 % of its energy in its first 64 samples.*smaller block size/);
    });
  });
});
