import { afterAll, beforeAll, describe, expect, it, vi } from 'vitest';
import { existsSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import wavefile from 'wavefile';
import { main } from '../../src/cli/main.ts';
import { decodeWav, encodeWavFloat32, encodeWavInt16 } from '../../src/io/wav.ts';
import { captureOutput, useCliSandbox } from '../helpers/cli.ts';

let shared: string; // simulator output, made once
const cli = useCliSandbox('ancbench-analyze-');

// Broadband noise with a causal geometry: reference → error 12 ms, secondary path 5 ms.
const scenario = {
  schemaVersion: 1,
  sampleRate: 8000,
  blockSize: 32,
  durationS: 4,
  seed: 8,
  sources: [{ kind: 'noise', color: 'pink', rms: 0.1, bandHz: [50, 2000] }],
  paths: {
    reference: { delayMs: 1, gain: 1 },
    primary: { delayMs: 13, gain: 0.7, fir: [1, 0.4] },
    secondary: { delayMs: 5, gain: 0.8, fir: [1, -0.3] },
  },
  sensorNoiseRms: { reference: 0.0005, error: 0.0005 },
  controller: { algorithm: 'fxnlms', taps: 96, stepSize: 0.05 },
  outputCeilingDbfs: 0,
};

beforeAll(async () => {
  shared = mkdtempSync(join(tmpdir(), 'ancbench-analyze-sim-'));
  writeFileSync(join(shared, 's.json'), JSON.stringify(scenario));
  captureOutput(cli);
  expect(await main(['simulate', join(shared, 's.json'), '--out', join(shared, 'run')])).toBe(0);
  expect(await main(['identify', join(shared, 's.json'), '--out', join(shared, 'model.json')])).toBe(0);
  vi.restoreAllMocks();
});
afterAll(() => rmSync(shared, { recursive: true, force: true }));

const signals = () => join(shared, 'run', 'signals.wav');
/** The simulator's four channels: reference 0, error on 1, output 2, error off 3. */
const simArgs = () => ['--ref', signals(), '--ref-channel', '0', '--err', signals(), '--err-channel', '3', '--control-on', signals(), '--control-on-channel', '1'];

function channels(): Float32Array[] {
  return decodeWav(new Uint8Array(readFileSync(signals()))).channels;
}

function write(name: string, data: Uint8Array): string {
  return cli.file(data, name);
}

/** 24-bit integer PCM through the WAV library directly (ancbench writes only 16-bit and float). */
function int24(chans: Float32Array[], rate: number): Uint8Array {
  const w = new wavefile.WaveFile();
  w.fromScratch(chans.length, rate, '24', chans.map((c) => Int32Array.from(c, (v) => Math.max(-8388608, Math.min(8388607, Math.round(v * 8388608))))));
  return w.toBuffer();
}

async function analyzeJson(args: string[]): Promise<Record<string, any>> {
  cli.out = [];
  const code = await main(['analyze', ...args, '--json']);
  expect(code, cli.err.join('')).toBe(0);
  return JSON.parse(cli.out.join(''));
}

describe('ancbench analyze', () => {
  describe('on the simulator\'s signals.wav', () => {
    it('should report the documented keys: bound, causality against the model, bands off/on', async () => {
      const j = await analyzeJson([...simArgs(), '--model', join(shared, 'model.json')]);
      expect(typeof j.coherenceBoundDb).toBe('number');
      expect(j.causality).toMatchObject({ verdict: 'broadband' });
      // GCC-PHAT (Knapp & Carter 1976) finds the 12 ms reference → error delay; the model's onset is 5 ms.
      expect(Math.abs(j.causality.primaryDelayMs - 12)).toBeLessThanOrEqual(0.125);
      expect(Math.abs(j.causality.marginMs - 7)).toBeLessThanOrEqual(0.25);
      expect(j.bands.length).toBe(23); // IEC 61260-1 one-third octaves 20 Hz … 3.15 kHz below 4 kHz
      for (const b of j.bands) for (const k of ['centerHz', 'offDb', 'onDb', 'attenuationDb']) expect(b, k).toHaveProperty(k);
      const band = j.bands.find((b: { nominalHz: number }) => b.nominalHz === 250);
      expect(band.centerHz).toBeCloseTo(1000 * 10 ** (-6 / 10), 9);
      // The controller works here: the bands where the noise is attenuate.
      expect(band.attenuationDb).toBeGreaterThan(10);
      expect(j.inputs).toMatchObject({ reference: { channel: 0 }, errorOff: { channel: 3 }, errorOn: { channel: 1 } });
    });

    it('should write analysis.json, bands.csv and a self-contained report.html with --out', async () => {
      const o = join(cli.dir, 'an');
      expect(await main(['analyze', ...simArgs(), '--out', o])).toBe(0);
      expect(readdirSync(o).sort()).toEqual(['analysis.json', 'bands.csv', 'report.html']);
      const j = JSON.parse(readFileSync(join(o, 'analysis.json'), 'utf8'));
      expect(j.causality.verdict).toBe('unknown'); // no model given
      const csv = readFileSync(join(o, 'bands.csv'), 'utf8').trim().split('\n');
      expect(csv[0]).toBe('nominal_hz,center_hz,low_hz,high_hz,off_dbfs,on_dbfs,attenuation_db,bound_db');
      expect(csv.length).toBe(1 + j.bands.length);
      const html = readFileSync(join(o, 'report.html'), 'utf8');
      expect(html).not.toMatch(/\b(?:src|href)\s*=\s*["']?(?:https?:)?\/\//i);
      expect(cli.out.join('')).toMatch(/wrote {9}.*analysis\.json, bands\.csv, report\.html/);
    });

    it('should print a readable summary with the verdict and a band table', async () => {
      expect(await main(['analyze', ...simArgs(), '--model', join(shared, 'model.json')])).toBe(0);
      const text = cli.out.join('');
      expect(text).toMatch(/^causality {5}broadband \(margin 7\.\d\d ms\): The noise needs/m);
      expect(text).toMatch(/^coherence {5}bound \d+\.\d dB over 18–3548 Hz \(unweighted\)/m);
      expect(text).toMatch(/^ {2}250 Hz +−\d+\.\d +−\d+\.\d +\d+\.\d +\d+\.\d$/m);
    });
  });

  describe('with other WAV encodings and files', () => {
    it('should give the same figures from mono 16-bit, 24-bit and float files as from the float channels', async () => {
      const c = channels();
      const base = await analyzeJson(simArgs());
      const cases = [
        ['16-bit', (x: Float32Array) => encodeWavInt16([x], 8000)],
        ['24-bit', (x: Float32Array) => int24([x], 8000)],
        ['float', (x: Float32Array) => encodeWavFloat32([x], 8000)],
      ] as const;
      for (const [name, encode] of cases) {
        const j = await analyzeJson(['--ref', write(`r-${name}.wav`, encode(c[0]!)), '--err', write(`e-${name}.wav`, encode(c[3]!)), '--control-on', write(`o-${name}.wav`, encode(c[1]!))]);
        // 16-bit quantisation noise (about −98 dBFS on the AES17 scale, calculated from q²/12 with q = 2^−15:
        // 10·log10(2·q²/12)) is far below these signals: the figures agree within 0.1 dB.
        expect(Math.abs(j.coherenceBoundDb - base.coherenceBoundDb), name).toBeLessThan(0.1);
        expect(Math.abs(j.overall.attenuationDb - base.overall.attenuationDb), name).toBeLessThan(0.1);
        expect(j.causality.primaryDelayMs).toBeCloseTo(base.causality.primaryDelayMs, 2);
      }
    });

    it('should use the common length of a shorter reference and say so', async () => {
      const c = channels();
      const j = await analyzeJson(['--ref', write('r.wav', encodeWavFloat32([c[0]!.subarray(0, 24000)], 8000)), '--err', write('e.wav', encodeWavFloat32([c[3]!], 8000))]);
      expect(j.durationS).toBe(3);
      expect(j.notes.length).toMatch(/differ in length/);
    });

    it('should resample a model measured at another rate, and say so', async () => {
      const model = JSON.parse(readFileSync(join(shared, 'model.json'), 'utf8'));
      const taps16k = model.taps.flatMap((v: number) => [v, 0]); // the same taps at twice the rate, roughly
      const other = write('m16.json', new TextEncoder().encode(JSON.stringify({ ...model, sampleRate: 16000, taps: taps16k })));
      const j = await analyzeJson([...simArgs(), '--model', other]);
      expect(j.notes.model).toBe("the model was measured at 16000 Hz and resampled to the recordings' 8000 Hz");
      expect(j.model).toMatchObject({ sampleRate: 8000, resampledFromHz: 16000 });
    });
  });

  describe('with bad input', () => {
    it('should ask for the channel of a multichannel file, naming the simulator\'s layout', async () => {
      expect(await main(['analyze', '--ref', signals(), '--ref-channel', '0', '--err', signals()])).toBe(2);
      expect(cli.err.join('')).toMatch(/--err ".*signals\.wav" has 5 channels: choose one with --err-channel N \(counted from 0\); the simulator's signals\.wav holds reference 0, error with control on 1, controller output 2, error with control off 3/);
    });

    it('should refuse a channel the file does not have', async () => {
      expect(await main(['analyze', '--ref', signals(), '--ref-channel', '5', '--err', signals(), '--err-channel', '3'])).toBe(2);
      expect(cli.err.join('')).toMatch(/--ref-channel must be from 0 to 4 \(".*signals\.wav" has 5 channels, counted from 0\), got 5/);
    });

    it('should refuse the same channel as reference and error', async () => {
      expect(await main(['analyze', '--ref', signals(), '--ref-channel', '3', '--err', signals(), '--err-channel', '3'])).toBe(2);
      expect(cli.err.join('')).toMatch(/--ref and --err name the same channel \(3\)/);
    });

    it('should refuse recordings of different sample rates, naming each', async () => {
      const c = channels();
      const r = write('r.wav', encodeWavFloat32([c[0]!], 8000));
      const e = write('e.wav', encodeWavFloat32([c[3]!], 16000));
      expect(await main(['analyze', '--ref', r, '--err', e])).toBe(1);
      expect(cli.err.join('')).toMatch(/different sample rates \(--ref ".*r\.wav" 8000 Hz, --err ".*e\.wav" 16000 Hz\)/);
    });

    it('should name a damaged WAV file and a damaged model file', async () => {
      const whole = encodeWavFloat32([channels()[0]!], 8000);
      const cut = write('cut.wav', whole.slice(0, 5000));
      expect(await main(['analyze', '--ref', cut, '--err', signals(), '--err-channel', '3'])).toBe(1);
      expect(cli.err.join('')).toMatch(/cut\.wav: truncated/);
      cli.err.length = 0;
      const model = write('model.json', new TextEncoder().encode('{"format": "ancbench-path-model", "version": 1}'));
      expect(await main(['analyze', ...simArgs(), '--model', model])).toBe(1);
      expect(cli.err.join('')).toMatch(/--model ".*model\.json": invalid path model: sampleRate: /);
    });

    it('should refuse a comparison start past the end of the recordings', async () => {
      expect(await main(['analyze', ...simArgs(), '--from', '3.9'])).toBe(2);
      expect(cli.err.join('')).toMatch(/--from 3\.9 s leaves less than 1024 samples of the error recordings \(4\.00 s long\)/);
    });

    it('should refuse missing flags and unknown values with status 2', async () => {
      expect(await main(['analyze', '--ref', signals()])).toBe(2);
      expect(cli.err.join('')).toMatch(/analyze needs --err/);
      expect(await main(['analyze', ...simArgs(), '--weighting', 'B'])).toBe(2);
      expect(cli.err.join('')).toMatch(/--weighting must be A, C or Z, got "B"/);
    });

    it('should leave nothing half-written when the output folder cannot be used', async () => {
      const blocker = write('taken', new TextEncoder().encode('a file, not a folder'));
      expect(await main(['analyze', ...simArgs(), '--out', blocker])).toBe(1);
      expect(cli.err.join('')).toMatch(/--out ".*taken" exists and is not a folder/);
      expect(readdirSync(cli.dir)).toEqual(['taken']);
      expect(existsSync(join(cli.dir, 'analysis.json'))).toBe(false);
    });
  });
});
