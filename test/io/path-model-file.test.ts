import { describe, expect, it } from 'vitest';
import {
  createPathModel,
  parsePathModel,
  PathModelError,
  resamplePathModel,
  serializePathModel,
  type PathModel,
} from '../../src/io/path-model-file.ts';

function sample(): PathModel {
  return createPathModel({
    taps: [0, 0, 0, 0.1, -0.75, 0.3333333333333333, 1e-7, -2.5e-12],
    sampleRate: 8000,
    method: 'noise',
    quality: { snrDb: 29.8, misalignmentDb: -31.2, bandHz: [100, 3500] },
    probe: { levelDbfs: -20, durationS: 2, color: 'pink' },
    createdAt: new Date('2024-05-01T12:00:00Z'),
  });
}

/** The problems a bad value raises (fails the test if none). */
function problemsOf(value: unknown, options?: Parameters<typeof parsePathModel>[1]): string {
  try {
    parsePathModel(value, options);
  } catch (e) {
    expect(e).toBeInstanceOf(PathModelError);
    return (e as PathModelError).problems.join('\n');
  }
  throw new Error('expected the model to be refused');
}

describe('path model file', () => {
  it('should round-trip a model exactly through its JSON text', () => {
    const model = sample();
    const text = serializePathModel(model);
    expect(parsePathModel(text)).toEqual(model);
    expect(JSON.parse(text).format).toBe('ancbench-path-model');
  });

  it('should compute delayMs by the onset rule when creating a model', () => {
    // First tap within 20 dB of the peak 0.75 is 0.1 (−17.5 dB), index 3: 3 / 8000 s = 0.375 ms.
    expect(sample().delayMs).toBe(0.375);
  });

  it('should name the field when taps are missing', () => {
    const { taps: _omit, ...rest } = sample();
    expect(problemsOf(rest)).toMatch(/^taps: must be an array of numbers.*got nothing/m);
  });

  it('should name the tap that is not a finite number', () => {
    const model = { ...sample(), taps: [0, 1, Number.NaN, 0.5] };
    expect(problemsOf(model)).toMatch(/^taps\[2\]: .*finite.*got NaN/m);
    // JSON has no NaN: a writer that emits null is caught the same way.
    const text = serializePathModel(sample()).replace('0.1,', 'null,');
    expect(problemsOf(text)).toMatch(/^taps\[3\]: .*got null/m);
  });

  it('should refuse a model of another sample rate, saying both rates', () => {
    expect(problemsOf(sample(), { expectedSampleRate: 48000 })).toMatch(/sampleRate: .*8000 Hz.*48000 Hz/);
    expect(problemsOf({ ...sample(), sampleRate: 'fast' })).toMatch(/^sampleRate: must be a number of Hz/m);
  });

  it('should refuse another version, telling a newer file from a broken one', () => {
    expect(problemsOf({ ...sample(), version: 2 })).toMatch(/version: this file is version 2.*reads version 1/);
    expect(problemsOf({ ...sample(), version: 0 })).toMatch(/^version: must be 1.*got 0/m);
  });

  it('should refuse other files, unknown fields and bad nested fields, naming each', () => {
    expect(problemsOf({ format: 'something-else' })).toMatch(/^format: .*not a path-model file.*"something-else"/m);
    expect(problemsOf('{ not json')).toMatch(/not valid JSON/);
    expect(problemsOf({ ...sample(), tapz: [1] })).toMatch(/unknown field\(s\) "tapz"/);
    expect(problemsOf({ ...sample(), method: 'guess' })).toMatch(/^method: must be one of "noise", "sweep".*got "guess"/m);
    expect(problemsOf({ ...sample(), quality: { snrDb: 'high' } })).toMatch(/^quality\.snrDb: /m);
    expect(problemsOf({ ...sample(), quality: { snrDb: 3, bandHz: [500, 100] } })).toMatch(/^quality\.bandHz: .*low < high/m);
    expect(problemsOf({ ...sample(), createdAt: 'yesterday' })).toMatch(/^createdAt: must be an ISO 8601/m);
    expect(problemsOf({ ...sample(), probe: { levelDbfs: 6, durationS: 1 } })).toMatch(/^probe\.levelDbfs: must be from -120 to 0 dBFS.*got 6/m);
  });

  it('should resample on request and say so in the result', () => {
    // A bulk delay of 20 samples (2.5 ms) clears the interpolation kernel's reach before t = 0 (8/fc = 2 ms).
    const model = { ...sample(), taps: [...new Array<number>(17).fill(0), ...sample().taps] };
    const resampled = parsePathModel(serializePathModel(model), { expectedSampleRate: 16000, resample: true });
    expect(resampled.sampleRate).toBe(16000);
    expect(resampled.resampledFromHz).toBe(8000);
    expect(resampled.notes).toMatch(/resampled from 8000 Hz to 16000 Hz/);
    // The main peak stays at the same time (21 / 8000 s = 42 / 16000 s) and the DC gain Σ taps is kept within 1 %
    // (band-limited interpolation keeps the response below the lower rate's Nyquist).
    const peak = resampled.taps.reduce((best, v, i, a) => (Math.abs(v) > Math.abs(a[best]!) ? i : best), 0);
    expect(peak).toBe(42);
    const dc = (taps: number[]): number => taps.reduce((a, b) => a + b, 0);
    expect(Math.abs(dc(resampled.taps) / dc(model.taps) - 1)).toBeLessThan(0.01);
    expect(resamplePathModel(resampled, 16000)).toBe(resampled);
  });
});
