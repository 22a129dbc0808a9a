import { describe, expect, it } from 'vitest';
import { existsSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { zipSync } from 'fflate';
import { main } from '../../src/cli/main.ts';
import { createPathModel, serializePathModel } from '../../src/io/path-model-file.ts';
import { decodeWav } from '../../src/io/wav.ts';
import { parseScenario } from '../../src/plant/scenario.ts';
import { trueSecondaryPath } from '../../src/plant/simulate.ts';
import { useCliSandbox } from '../helpers/cli.ts';
import { expectClose } from '../helpers/tolerance.ts';

const cli = useCliSandbox('ancbench-replay-');

const scenario = {
  schemaVersion: 1,
  sampleRate: 8000,
  blockSize: 32,
  durationS: 2,
  seed: 4,
  sources: [{ kind: 'noise', color: 'white', rms: 0.1 }],
  paths: { reference: { delayMs: 0 }, primary: { delayMs: 12, gain: 0.7, fir: [1, 0.5] }, secondary: { delayMs: 5, gain: 0.8 } },
  sensorNoiseRms: 0.0005,
  controller: { algorithm: 'fxnlms', taps: 64, stepSize: 0.05 },
};

/** simulate --out, the scenario's true path as a model file, and its controller as controller.json. */
async function simulated(): Promise<{ out: string; model: string; controller: string; summary: Record<string, unknown> }> {
  const out = join(cli.dir, 'sim');
  expect(await main(['simulate', cli.file(scenario, 'scenario.json'), '--out', out])).toBe(0);
  const m = createPathModel({ taps: trueSecondaryPath(parseScenario(scenario)), sampleRate: 8000, method: 'simulated', quality: { snrDb: null } });
  const model = cli.file(serializePathModel(m), 'model.json');
  const controller = cli.file(scenario.controller, 'controller.json');
  cli.out = [];
  return { out, model, controller, summary: JSON.parse(readFileSync(join(out, 'summary.json'), 'utf8')) };
}

function replayArgs(s: { out: string; model: string; controller: string }): string[] {
  const wav = join(s.out, 'signals.wav');
  return ['replay', '--ref', wav, '--ref-channel', '4', '--err', wav, '--err-channel', '3', '--model', s.model, '--controller', s.controller, '--block-size', '32'];
}

describe('ancbench replay', () => {
  describe('with --ref, --err, --model and --controller', () => {
    it('should print the simulate summary keys and the simulation\'s attenuation', async () => {
      const s = await simulated();
      expect(await main([...replayArgs(s), '--json'])).toBe(0);
      const j = JSON.parse(cli.out.join(''));
      for (const k of Object.keys(s.summary)) expect(j, k).toHaveProperty(k);
      expectClose(j.attenuationDb, s.summary.attenuationDb as number, 0.1, 'attenuation');
      expect(j.stamp.command).toBe('replay');
    });

    it('should write the same files as simulate --out', async () => {
      const s = await simulated();
      const o = join(cli.dir, 'out');
      expect(await main([...replayArgs(s), '--out', o])).toBe(0);
      expect(readdirSync(o).sort()).toEqual(readdirSync(s.out).sort());
      expect(decodeWav(new Uint8Array(readFileSync(join(o, 'signals.wav')))).channels.length).toBe(5);
    });

    it('should name the field of a bad controller.json and write nothing', async () => {
      const s = await simulated();
      writeFileSync(s.controller, JSON.stringify({ algorithm: 'fxnlms', taps: 64, stepSize: -1 }));
      const o = join(cli.dir, 'out');
      expect(await main([...replayArgs(s), '--out', o])).toBe(1);
      expect(cli.err.join('')).toMatch(/--controller ".*controller\.json": controller\.stepSize: .*> 0.*got -1/);
      expect(existsSync(o)).toBe(false);
    });

    it('should ask for what is missing', async () => {
      expect(await main(['replay', '--ref', 'a.wav'])).toBe(2);
      expect(cli.err.join('')).toMatch(/replay needs a recording bundle, or --err, --model, --controller/);
    });
  });

  describe('with a recording bundle', () => {
    async function bundle(): Promise<{ dir: string; s: Awaited<ReturnType<typeof simulated>> }> {
      const s = await simulated();
      const dir = join(cli.dir, 'rec');
      expect(await main([...replayArgs(s), '--bundle', dir])).toBe(0);
      cli.out = [];
      return { dir, s };
    }

    it('should replay a bundle folder and the same bundle zipped to the same figures', async () => {
      const { dir, s } = await bundle();
      expect(readdirSync(dir).sort()).toEqual(['events.json', 'model.json', 'recording.json', 'report.html', 'signals.wav']);
      expect(await main(['replay', dir, '--json'])).toBe(0);
      const fromDir = JSON.parse(cli.out.join(''));
      expectClose(fromDir.attenuationDb, s.summary.attenuationDb as number, 0.1, 'bundle replay');
      const zip = zipSync(Object.fromEntries(readdirSync(dir).map((f) => [`rec/${f}`, new Uint8Array(readFileSync(join(dir, f)))])));
      cli.out = [];
      expect(await main(['replay', cli.file(zip, 'rec.zip'), '--json'])).toBe(0);
      expect(JSON.parse(cli.out.join('')).attenuationDb).toBe(fromDir.attenuationDb);
    });

    it('should take other settings over the bundle\'s', async () => {
      const { dir } = await bundle();
      expect(await main(['replay', dir, '--json'])).toBe(0);
      const base = JSON.parse(cli.out.join(''));
      cli.out = [];
      expect(await main(['replay', dir, '--controller', cli.file({ algorithm: 'fxnlms', taps: 4, stepSize: 0.05 }, 'short.json'), '--json'])).toBe(0);
      const short = JSON.parse(cli.out.join(''));
      // 4 taps cannot reach the primary path's 12 ms (96 samples) beyond the secondary's 5 ms: far less attenuation
      expect(short.attenuationDb).toBeLessThan(base.attenuationDb - 10);
    });

    const damage: [string, (dir: string) => void, RegExp][] = [
      ['a missing model.json', (d) => rmSync(join(d, 'model.json')), /recording bundle ".*": model\.json: missing/],
      ['a manifest with a wrong format marker', (d) => {
        const m = JSON.parse(readFileSync(join(d, 'recording.json'), 'utf8'));
        writeFileSync(join(d, 'recording.json'), JSON.stringify({ ...m, format: 'something-else' }));
      }, /recording\.json: format: must be "ancbench-recording"/],
      ['settings the tables refuse', (d) => {
        const m = JSON.parse(readFileSync(join(d, 'recording.json'), 'utf8'));
        writeFileSync(join(d, 'recording.json'), JSON.stringify({ ...m, settings: { ...m.settings, controller: { ...m.settings.controller, taps: 1e9 } } }));
      }, /recording\.json: settings\.controller\.taps: .*got 1000000000/],
      ['a channel count that disagrees with the manifest', (d) => {
        const m = JSON.parse(readFileSync(join(d, 'recording.json'), 'utf8'));
        writeFileSync(join(d, 'recording.json'), JSON.stringify({ ...m, channels: ['reference', 'error', 'state'] }));
      }, /signals\.wav: 4 channel\(s\), but recording\.json names 3/],
      ['events that are not events', (d) => writeFileSync(join(d, 'events.json'), '[{"timeS": 1}]'), /events\.json: \[0\]\.cause: must be one of/],
      ['a damaged WAV', (d) => writeFileSync(join(d, 'signals.wav'), 'RIFF'), /signals\.wav/],
    ];
    for (const [what, harm, message] of damage) {
      it(`should name the part for ${what}`, async () => {
        const { dir } = await bundle();
        harm(dir);
        expect(await main(['replay', dir, '--json'])).toBe(1);
        expect(cli.err.join('')).toMatch(message);
        expect(cli.err.join('').trim().split('\n').length).toBe(1);
        expect(cli.out.join('')).toBe('');
      });
    }
  });
});
