// WAV files read piece by piece and written block by block: the same samples as the whole-file decoder and
// the wavefile package (an independent RIFF writer), header sizes checked against the file, and the
// recording analysis giving the same figures from files on disk as from arrays in memory.
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import wavefile from 'wavefile';
import { openWavFile, WavFileWriter } from '../../src/io/wav-file-node.ts';
import { decodeWav, encodeWavFloat32, encodeWavInt16 } from '../../src/io/wav.ts';
import { analyzeRecordings } from '../../src/analysis/recording-analysis.ts';
import { Random } from '../../src/dsp/random.ts';

let dir = '';
beforeEach(() => {
  dir = mkdtempSync(join(tmpdir(), 'ancbench-wavfile-'));
});
afterEach(() => rmSync(dir, { recursive: true, force: true }));

function noise(n: number, seed: number, scale = 0.3): Float32Array {
  const r = new Random(seed);
  return Float32Array.from({ length: n }, () => scale * r.gaussian());
}

describe('openWavFile', () => {
  it('should read any run of frames of a channel as the whole-file decoder does (16-bit, 24-bit, 64-bit float)', () => {
    const a = noise(5000, 1);
    const b = noise(5000, 2);
    const w24 = new wavefile.WaveFile();
    w24.fromScratch(2, 8000, '24', [Array.from(a, (v) => Math.round(v * 8388607)), Array.from(b, (v) => Math.round(v * 8388607))]);
    const w64 = new wavefile.WaveFile();
    w64.fromScratch(2, 8000, '64', [Array.from(a), Array.from(b)]);
    for (const [name, bytes] of [['16', encodeWavInt16([a, b], 8000)], ['24', w24.toBuffer()], ['64f', w64.toBuffer()]] as const) {
      const p = join(dir, `${name}.wav`);
      writeFileSync(p, bytes);
      const whole = decodeWav(readFileSync(p), p);
      const f = openWavFile(p, 'test file');
      expect(f.frames).toBe(5000);
      expect(f.channelCount).toBe(2);
      expect(f.bitDepth).toBe(whole.bitDepth);
      const part = new Float64Array(1234);
      f.read(1, 3210, part);
      for (let i = 0; i < part.length; i++) expect(part[i]).toBe(whole.channels[1]![3210 + i]);
      expect(Array.from(f.loadChannel(0, 1e6, 'x'))).toEqual(Array.from(whole.channels[0]!));
      expect(() => f.loadChannel(0, 4999, 'the 4999 allowed')).toThrow(/holds 5000 samples per channel, more than the 4999 allowed/);
      f.close();
    }
  });

  it('should refuse a header whose data size is larger than the file, without reading the audio', () => {
    const bytes = encodeWavFloat32([noise(1000, 3)], 8000);
    const view = new DataView(bytes.buffer, bytes.byteOffset);
    view.setUint32(40, 0x7ffffff0, true); // data chunk claims about 2 GiB
    const p = join(dir, 'claims.wav');
    writeFileSync(p, bytes);
    expect(() => openWavFile(p, 'test file')).toThrow(/truncated: the data chunk declares 2147483632 bytes but only 4000 are present/);
  });

  it('should name a float sample that is not finite or beyond ±1000 when it is read', () => {
    const x = new Float64Array(2000);
    x[1500] = 1e300;
    const w = new wavefile.WaveFile();
    w.fromScratch(1, 8000, '64', [Array.from(x)]);
    const p = join(dir, 'huge.wav');
    writeFileSync(p, w.toBuffer());
    const f = openWavFile(p, 'test file', 'huge.wav');
    expect(() => f.read(0, 1000, new Float64Array(1000))).toThrow(/huge\.wav: channel 0 sample 1500 is 1e\+300, beyond ±1000/);
    f.close();
  });
});

describe('WavFileWriter', () => {
  const writeInBlocks = (p: string, chans: Float32Array[]): void => {
    const w = new WavFileWriter(p, chans.length, 16000, 256);
    for (let t = 0; t < chans[0]!.length; t += 128) {
      const n = Math.min(128, chans[0]!.length - t);
      w.write(chans.map((c) => c.subarray(t, t + n)), n);
    }
    w.close();
  };

  it('should write two channels block by block as the same bytes as the wavefile package', () => {
    const chans = [noise(3001, 4), noise(3001, 5)];
    const p = join(dir, 'w.wav');
    writeInBlocks(p, chans);
    // encodeWavFloat32 writes through the wavefile package.
    expect(Buffer.from(readFileSync(p)).equals(Buffer.from(encodeWavFloat32(chans, 16000)))).toBe(true);
  });

  it('should write five channels as WAVE_FORMAT_EXTENSIBLE float that reads back exactly', () => {
    const chans = [4, 5, 6, 7, 8].map((s) => noise(3001, s));
    const p = join(dir, 'w5.wav');
    writeInBlocks(p, chans);
    const bytes = readFileSync(p);
    const v = new DataView(bytes.buffer, bytes.byteOffset);
    expect(v.getUint16(20, true)).toBe(0xfffe);
    expect(v.getUint32(4, true)).toBe(bytes.length - 8); // RIFF size
    expect(v.getUint32(64, true)).toBe(3001 * 5 * 4); // data size
    const back = decodeWav(bytes, p);
    expect(back.bitDepth).toBe('32f');
    back.channels.forEach((c, i) => expect(Array.from(c)).toEqual(Array.from(chans[i]!)));
  });
});

describe('analysis of files on disk', () => {
  it('should give the same figures from file sources as from arrays in memory', () => {
    const fs = 8000;
    const n = 8 * fs;
    const ref = noise(n, 7);
    const err = new Float32Array(n);
    for (let i = 40; i < n; i++) err[i] = 0.5 * ref[i - 40]! + 0.01 * Math.sin(i);
    const on = Float32Array.from(err, (v) => 0.1 * v);
    const p = join(dir, 'rec.wav');
    writeFileSync(p, encodeWavFloat32([ref, err, on], fs));
    const f = openWavFile(p, 'test file');
    const fromFile = analyzeRecordings({ sampleRate: fs, reference: f.channelSource(0), errorOff: f.channelSource(1), errorOn: f.channelSource(2) }, { comparisonStartS: 1 });
    f.close();
    const inMemory = analyzeRecordings({ sampleRate: fs, reference: ref, errorOff: err, errorOn: on }, { comparisonStartS: 1 });
    expect(fromFile.causality.primaryDelayMs).toBeCloseTo(5, 4); // 40 samples at 8 kHz
    expect(fromFile.causality.primaryDelayMs).toBe(inMemory.causality.primaryDelayMs);
    expect(fromFile.coherenceBoundDb).toBe(inMemory.coherenceBoundDb);
    expect(fromFile.overall.attenuationDb).toBeCloseTo(20, 1); // 0.1 × the error: 20 dB
    expect(fromFile.bands.map((b) => b.attenuationDb)).toEqual(inMemory.bands.map((b) => b.attenuationDb));
  });
});
