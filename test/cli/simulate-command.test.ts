import { describe, expect, it } from 'vitest';
import { readdirSync, readFileSync, writeFileSync, existsSync } from 'node:fs';
import { join } from 'node:path';
import { main } from '../../src/cli/main.ts';
import { decodeWav, encodeWavInt16 } from '../../src/io/wav.ts';
import { createPathModel, serializePathModel } from '../../src/io/path-model-file.ts';
import { useCliSandbox } from '../helpers/cli.ts';

const cli = useCliSandbox('ancbench-cli-');

const good = {
  schemaVersion: 1,
  sampleRate: 8000,
  blockSize: 32,
  durationS: 1,
  seed: 1,
  sources: [{ kind: 'tone', hz: 100, amplitude: 0.3 }],
  paths: { reference: { delayMs: 0 }, primary: { delayMs: 10, gain: 0.5 }, secondary: { delayMs: 5, gain: 0.8 } },
  sensorNoiseRms: 0.001,
  controller: { algorithm: 'fxnlms', taps: 16, stepSize: 0.01 },
};

describe('ancbench simulate', () => {
  describe('with a valid scenario', () => {
    it('should print one JSON object with the documented keys', async () => {
      const code = await main(['simulate', cli.file(good), '--json']);
      expect(code).toBe(0);
      const j = JSON.parse(cli.out.join(''));
      for (const k of ['attenuationDb', 'convergenceS', 'wienerBoundDb', 'peakOutputDbfs', 'diverged']) expect(j).toHaveProperty(k);
      expect(j.stamp).toMatchObject({ tool: 'ancbench', schemaVersion: 1, seed: 1 });
      expect(j.stamp.scenarioSha256).toMatch(/^[0-9a-f]{64}$/);
      expect(j.attenuationDb).toBeGreaterThan(10);
    });

    it('should write summary, CSV, report and a float WAV whose first four channels keep their documented order', async () => {
      const o = join(cli.dir, 'out');
      expect(await main(['simulate', cli.file(good), '--out', o])).toBe(0);
      expect(readdirSync(o).sort()).toEqual(['attenuation.csv', 'report.html', 'signals.wav', 'summary.json']);
      const w = decodeWav(new Uint8Array(readFileSync(join(o, 'signals.wav'))));
      expect(w.channels.length).toBe(5);
      // 0 reference, 1 error on, 2 output, 3 error off, 4 reference off: with no feedback path 4 equals 0,
      // and 1 − 3 is what the controller added, so it is zero before the output reaches the error mic
      expect(Array.from(w.channels[4]!.subarray(0, 100))).toEqual(Array.from(w.channels[0]!.subarray(0, 100)));
      expect(w.channels[1]![0]).toBe(w.channels[3]![0]);
      expect(w.bitDepth).toBe('32f');
      expect(w.channels[0]!.length).toBe(8000);
      const csv = readFileSync(join(o, 'attenuation.csv'), 'utf8').split('\n');
      expect(csv[0]).toBe('time_s,error_off_dbfs,error_on_dbfs,attenuation_db');
    });

    it('should play a WAV source given relative to the scenario file', async () => {
      const tone = new Float32Array(8000).map((_, i) => 0.2 * Math.sin((2 * Math.PI * 80 * i) / 8000));
      writeFileSync(join(cli.dir, 'hum.wav'), encodeWavInt16([tone], 8000));
      const code = await main(['simulate', cli.file({ ...good, sources: [{ kind: 'wav', file: 'hum.wav', loop: true }] }), '--json']);
      expect(code).toBe(0);
      expect(JSON.parse(cli.out.join('')).attenuationDb).toBeGreaterThan(10);
    });
  });

  describe('with a secondary-path model file', () => {
    function modelFile(taps: number[], sampleRate = 8000): string {
      const m = createPathModel({ taps, sampleRate, method: 'imported', quality: { snrDb: null } });
      const p = join(cli.dir, 'model.json');
      writeFileSync(p, serializePathModel(m));
      return 'model.json';
    }

    it('should control with a good model and fail with a sign-flipped one', async () => {
      const truth = new Array(41).fill(0);
      truth[40] = 0.8; // the true path: 5 ms at 8 kHz, gain 0.8
      cli.file({ ...good, controller: { ...good.controller, modelFile: modelFile(truth) } }, 'a.json');
      expect(await main(['simulate', join(cli.dir, 'a.json'), '--json'])).toBe(0);
      const okAtt = JSON.parse(cli.out.join('')).attenuationDb;
      cli.out.length = 0;
      cli.file({ ...good, controller: { ...good.controller, modelFile: modelFile(truth.map((v) => -v)) } }, 'b.json');
      expect(await main(['simulate', join(cli.dir, 'b.json'), '--json'])).toBe(0);
      const flipped = JSON.parse(cli.out.join(''));
      expect(okAtt).toBeGreaterThan(20);
      // the wrong-signed model makes the error grow; the guard mutes the output and says why
      expect(flipped.diverged).toBe(true);
      expect(flipped.events.some((e: { cause: string; action: string }) => e.cause === 'error-rise' && e.action === 'mute')).toBe(true);
      expect(flipped.attenuationDb ?? -99).toBeLessThan(1);
    });

    it('should refuse a model of another sample rate, naming both rates', async () => {
      const code = await main(['simulate', cli.file({ ...good, controller: { ...good.controller, modelFile: modelFile([0, 1], 48000) } })]);
      expect(code).toBe(1);
      expect(cli.err.join('')).toMatch(/controller\.modelFile "model\.json".*48000.*8000|controller\.modelFile "model\.json".*8000.*48000/s);
    });
  });

  describe('with bad input', () => {
    const cases: [string, unknown, RegExp][] = [
      ['a missing field', { ...good, sampleRate: undefined }, /sampleRate: must be an integer from 8000 to 192000, got nothing/],
      ['a wrong type', { ...good, durationS: 'long' }, /durationS: must be a duration in seconds from 0\.01 to 86400, got "long"/],
      ['a negative delay', { ...good, paths: { ...good.paths, primary: { delayMs: -1 } } }, /paths\.primary\.delayMs: must be from 0 to 10000, got -1/],
      ['an unknown source kind', { ...good, sources: [{ kind: 'siren', hz: 5 }] }, /sources\[0\]\.kind: kind must be one of "tone", "harmonics", "noise", "wav"/],
      ['an unknown field', { ...good, stepsize: 1 }, /unknown field\(s\) "stepsize"/],
      ['a block size that is not a power of two', { ...good, blockSize: 100 }, /blockSize: must be a power of two/],
      ['a missing WAV file', { ...good, sources: [{ kind: 'wav', file: 'nope.wav' }] }, /sources\[0\]\.file "?.*nope\.wav"? does not exist/],
      ['not JSON at all', '{ "schemaVersion": 1, ', /is not valid JSON/],
    ];
    for (const [what, value, message] of cases) {
      it(`should name the problem for ${what}, exit non-zero and write nothing`, async () => {
        const o = join(cli.dir, 'out');
        const code = await main(['simulate', cli.file(value), '--out', o]);
        expect(code).not.toBe(0);
        expect(cli.err.join('')).toMatch(message);
        expect(existsSync(o)).toBe(false);
        expect(cli.out.join('')).toBe('');
      });
    }

    it('should refuse an unreadable (damaged) WAV with a clear message', async () => {
      writeFileSync(join(cli.dir, 'bad.wav'), 'RIFF\x10\x00\x00\x00WAVEjunkjunk');
      const code = await main(['simulate', cli.file({ ...good, sources: [{ kind: 'wav', file: 'bad.wav' }] })]);
      expect(code).toBe(1);
      expect(cli.err.join('')).toMatch(/bad\.wav.*(no "fmt " chunk|not a valid WAV)/);
    });

    it('should refuse a WAV at another sample rate, naming both rates', async () => {
      writeFileSync(join(cli.dir, 'fast.wav'), encodeWavInt16([new Float32Array(100)], 44100));
      const code = await main(['simulate', cli.file({ ...good, sources: [{ kind: 'wav', file: 'fast.wav' }] })]);
      expect(code).toBe(1);
      expect(cli.err.join('')).toMatch(/44100 Hz but the scenario runs at 8000 Hz/);
    });

    it('should refuse an unknown option in one line naming the nearest valid one', async () => {
      const code = await main(['simulate', cli.file(good), '--jsn']);
      expect(code).toBe(2);
      expect(cli.err.join('')).toBe('ancbench simulate: unknown option "--jsn"; did you mean --json? (ancbench simulate --help lists the options)\n');
      cli.err = [];
      expect(await main(['simulate', cli.file(good), '--frobnicate'])).toBe(2);
      expect(cli.err.join('')).toMatch(/^ancbench simulate: unknown option "--frobnicate"; the options are --out, --json, --help \(/);
    });

    it('should refuse a file that does not exist', async () => {
      expect(await main(['simulate', join(cli.dir, 'missing.json')])).toBe(1);
      expect(cli.err.join('')).toMatch(/scenario file ".*missing\.json" does not exist/);
    });

    it('should leave an existing output folder as it was when a run fails', async () => {
      const o = join(cli.dir, 'keep');
      expect(await main(['simulate', cli.file(good), '--out', o])).toBe(0);
      const before = readFileSync(join(o, 'summary.json'), 'utf8');
      expect(await main(['simulate', cli.file({ ...good, seed: -1 }), '--out', o])).toBe(1);
      expect(readFileSync(join(o, 'summary.json'), 'utf8')).toBe(before);
      expect(readdirSync(o).filter((f) => f.startsWith('.'))).toEqual([]);
    });
  });
});
