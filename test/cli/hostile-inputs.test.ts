// The cases of a careless or hostile user, one by one: each gets one clear line (or a finished run with a
// note), and no output folder is ever left half-written.
import { describe, expect, it } from 'vitest';
import { mkdirSync, readdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { main } from '../../src/cli/main.ts';
import { describeFailure, fmtNum, nearestFlag, runCommand, UsageError } from '../../src/cli/common.ts';
import { encodeWavInt16 } from '../../src/io/wav.ts';
import { createPathModel, serializePathModel } from '../../src/io/path-model-file.ts';
import { useCliSandbox } from '../helpers/cli.ts';

const scenario = {
  schemaVersion: 1,
  sampleRate: 8000,
  blockSize: 32,
  durationS: 0.5,
  seed: 3,
  sources: [{ kind: 'noise', color: 'white', rms: 0.1 }],
  paths: { reference: { delayMs: 0 }, primary: { delayMs: 10, gain: 0.8 }, secondary: { delayMs: 5, gain: 0.5 } },
  sensorNoiseRms: 0.001,
  controller: { algorithm: 'fxnlms', taps: 16, stepSize: 0.01 },
};

describe('hostile and careless inputs', () => {
  const cli = useCliSandbox('ancbench-hostile-');
  const errLine = () => cli.err.join('');

  describe('output folders', () => {
    it('should refuse --out "" for every command that has it', async () => {
      const s = cli.file(scenario);
      const wav = cli.file(encodeWavInt16([new Float32Array(2048)], 8000), 'r.wav');
      for (const argv of [['simulate', s], ['identify', s], ['check-limits', s], ['analyze', '--ref', wav, '--err', wav]]) {
        cli.err = [];
        expect(await main([...argv, '--out', ''])).toBe(2);
        expect(errLine()).toMatch(/^ancbench [a-z-]+: --out needs a folder or file name, got an empty string/);
      }
    });

    it('should refuse, before the run, an --out folder where an output name is taken by a folder, and leave it as it was', async () => {
      const out = join(cli.dir, 'out');
      mkdirSync(join(out, 'report.html'), { recursive: true });
      writeFileSync(join(out, 'mine.txt'), 'keep');
      // An hour-long scenario: were the check made after the run, this test would time out.
      expect(await main(['simulate', cli.file({ ...scenario, durationS: 3600 }), '--out', out])).toBe(1);
      expect(errLine()).toBe(`ancbench simulate: --out "${out}": "report.html" exists there and is not a file, so it cannot be replaced\n`);
      expect(readdirSync(out).sort()).toEqual(['mine.txt', 'report.html']);
    });

    it('should refuse, before the run, an --out place that cannot be written', async () => {
      writeFileSync(join(cli.dir, 'plain-file'), '');
      const out = join(cli.dir, 'plain-file', 'out');
      expect(await main(['simulate', cli.file({ ...scenario, durationS: 3600 }), '--out', out])).toBe(1);
      expect(errLine()).toBe(`ancbench simulate: --out "${out}" cannot be written: a part of the path is a file, not a folder\n`);
      expect(await main(['identify', cli.file(scenario), '--out', join(cli.dir, 'plain-file', 'model.json')])).toBe(1);
      expect(readdirSync(cli.dir).sort()).toEqual(['plain-file', 's.json']);
    });

    it('should refuse a simulate --out run whose signals.wav would exceed 4 GiB, before running', async () => {
      // 5 channels × 4 bytes × 48000 Hz × 86400 s ≈ 77 GiB
      expect(await main(['simulate', cli.file({ ...scenario, sampleRate: 48000, durationS: 86400 }), '--out', join(cli.dir, 'o')])).toBe(1);
      expect(errLine()).toMatch(/signals\.wav would hold 77\.2 GiB \(5 channels of 86400 s at 48000 Hz\), more than the 4 GiB a WAV file can hold/);
      expect(readdirSync(cli.dir)).toEqual(['s.json']);
    });
  });

  describe('scenario values', () => {
    it('should refuse a misspelt key inside guard, naming it', async () => {
      expect(await main(['simulate', cli.file({ ...scenario, guard: { errorRise: { riseDB: 6 } } })])).toBe(1);
      expect(errLine()).toBe(`ancbench simulate: invalid scenario: guard.errorRise: unknown field(s) "riseDB"\n`);
    });

    it('should refuse finite but absurd gains, phases and guard settings with the allowed range', async () => {
      const bad = {
        ...scenario,
        sources: [{ kind: 'tone', hz: 100, amplitude: 0.1, phaseDeg: 1e308 }],
        paths: { ...scenario.paths, primary: { delayMs: 10, gain: 1e308 } },
        guard: { errorRise: { riseDb: 1e308 }, resume: { mode: 'never' } },
      };
      expect(await main(['simulate', cli.file(bad)])).toBe(1);
      const e = errLine();
      expect(e).toMatch(/sources\[0\]\.phaseDeg: must be from -360 to 360, got 1e\+308/);
      expect(e).toMatch(/paths\.primary\.gain: must be from -1000 to 1000, got 1e\+308/);
      expect(e).toMatch(/guard\.errorRise\.riseDb: must be from 0\.5 to 60, got 1e\+308/);
      expect(e).toMatch(/guard\.resume\.mode: must be "auto" or "user"/);
      expect(e.split('\n')).toHaveLength(2); // one line and the final newline
    });
  });

  describe('recordings and models', () => {
    const fs = 8000;
    const n = 4 * fs;
    const ref = Float32Array.from({ length: n }, (_, i) => 0.2 * Math.sin(i * 0.7) + 0.1 * Math.sin(i * 2.3 + 0.4) + 0.05 * Math.sin(i * 0.11));
    const err = Float32Array.from({ length: n }, (_, i) => (i >= 40 ? 0.5 * ref[i - 40]! : 0));

    it('should give null attenuation with a note for a silent control-on recording', async () => {
      const w = cli.file(encodeWavInt16([ref, err, new Float32Array(n)], fs), 'r.wav');
      expect(await main(['analyze', '--ref', w, '--ref-channel', '0', '--err', w, '--err-channel', '1', '--control-on', w, '--control-on-channel', '2', '--json'])).toBe(0);
      const j = JSON.parse(cli.out.join(''));
      expect(j.overall.attenuationDb).toBeNull();
      expect(j.bands.every((b: { attenuationDb: number | null }) => b.attenuationDb === null)).toBe(true);
      expect(j.notes.silence).toMatch(/the control-on error recording is silent/);
    });

    it('should warn, naming both, when a model states a delay its taps contradict', async () => {
      const w = cli.file(encodeWavInt16([ref, err], fs), 'r.wav');
      const taps = new Array(64).fill(0);
      taps[20] = 1; // onset at 20 samples = 2.5 ms at 8 kHz
      const model = { ...JSON.parse(serializePathModel(createPathModel({ taps, sampleRate: fs, method: 'imported', quality: { snrDb: null } }))), delayMs: 500 };
      const m = cli.file(model, 'm.json');
      expect(await main(['analyze', '--ref', w, '--ref-channel', '0', '--err', w, '--err-channel', '1', '--model', m, '--json'])).toBe(0);
      expect(errLine()).toMatch(/warning: --model ".*m\.json" states a delay of 500\.00 ms but its taps start at 2\.50 ms/);
      expect(JSON.parse(cli.out.join('')).notes.modelDelay).toMatch(/500\.00 ms .* 2\.50 ms/);
    });

    it('should refuse, in one line, a model whose taps are absurd or all zero (resampled or not)', async () => {
      const w = cli.file(encodeWavInt16([ref, err], 16000), 'r.wav');
      const base = JSON.parse(serializePathModel(createPathModel({ taps: [0, 1], sampleRate: fs, method: 'imported', quality: { snrDb: null } })));
      expect(await main(['analyze', '--ref', w, '--ref-channel', '0', '--err', w, '--err-channel', '1', '--model', cli.file({ ...base, taps: [0, 1e308] }, 'm.json')])).toBe(1);
      expect(errLine()).toMatch(/taps\[1\]: must be from −1000 to 1000/);
      cli.err = [];
      expect(await main(['analyze', '--ref', w, '--ref-channel', '0', '--err', w, '--err-channel', '1', '--model', cli.file({ ...base, taps: [0, 0] }, 'z.json')])).toBe(1);
      expect(errLine()).toMatch(/^ancbench analyze: --model ".*z\.json": all taps are zero: the model describes no path\n$/);
    });
  });

  describe('the error path', () => {
    it('should turn an unexpected failure into one line, and add the stack with --debug', async () => {
      const boom = async () => {
        throw new TypeError('x is undefined');
      };
      expect(await runCommand('simulate', boom, [])).toBe(1);
      expect(errLine()).toBe('ancbench simulate: could not finish: x is undefined (an input ancbench did not check, or a fault in ancbench; --debug shows where)\n');
      cli.err = [];
      expect(await runCommand('simulate', boom, ['--debug'])).toBe(1);
      expect(errLine()).toMatch(/^ancbench simulate: could not finish[^\n]*\nTypeError: x is undefined\n\s+at /);
    });

    it('should put a multi-problem message on one line, and usage errors with a pointer to --help', () => {
      expect(describeFailure('analyze', new UsageError('--from must be a number')).message).toBe('ancbench analyze: --from must be a number (ancbench analyze --help lists the options)');
      expect(describeFailure('analyze', new UsageError('x')).status).toBe(2);
      expect(describeFailure('simulate', new UsageError('simulate takes exactly one scenario file, got 2\n\nusage: ancbench simulate\n  --out DIR')).message).toBe(
        'ancbench simulate: simulate takes exactly one scenario file, got 2 (ancbench simulate --help lists the options)',
      );
      expect(describeFailure('simulate', new Error('invalid scenario:\n  a: bad\n  b: worse')).message).toMatch(/^ancbench simulate: could not finish: invalid scenario: a: bad; b: worse /);
    });

    it('should suggest the nearest command and flag', async () => {
      expect(await main(['analyse'])).toBe(2);
      expect(errLine()).toMatch(/^ancbench: unknown command "analyse"; did you mean analyze\?/);
      expect(nearestFlag('contol-on', ['control-on', 'json', 'out'])).toBe('control-on');
      expect(nearestFlag('zzzzzz', ['control-on', 'json', 'out'])).toBeNull();
    });
  });

  describe('printed figures', () => {
    it('should print negative figures with a true minus sign and never −0.0', () => {
      expect(fmtNum(-14.46)).toBe('−14.5');
      expect(fmtNum(-0.04)).toBe('0.0');
      expect(fmtNum(3.25, 2)).toBe('3.25');
      expect(fmtNum(-0, 0)).toBe('0');
    });
  });
});
