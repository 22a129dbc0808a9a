import { describe, expect, it } from 'vitest';
import { decodeWav, encodeWavFloat32, encodeWavInt16, WavError } from '../../src/io/wav.ts';

/**
 * A WAV file built byte by byte (RIFF/WAVE with a 'fmt ' and a 'data' chunk; Microsoft/IBM "Multimedia
 * Programming Interface and Data Specifications 1.0", 1991, from memory), so each test controls every field.
 */
function wavBytes(o: { format: number; channels: number; sampleRate: number; bits: number; data: Uint8Array; extension?: Uint8Array }): Uint8Array {
  const ext = o.extension ?? new Uint8Array(0);
  const fmtSize = 16 + ext.length;
  const buf = new Uint8Array(12 + 8 + fmtSize + 8 + o.data.length + (o.data.length & 1));
  const v = new DataView(buf.buffer);
  const tag = (at: number, s: string) => { for (let i = 0; i < 4; i++) buf[at + i] = s.charCodeAt(i); };
  tag(0, 'RIFF');
  v.setUint32(4, buf.length - 8, true);
  tag(8, 'WAVE');
  tag(12, 'fmt ');
  v.setUint32(16, fmtSize, true);
  v.setUint16(20, o.format, true);
  v.setUint16(22, o.channels, true);
  v.setUint32(24, o.sampleRate, true);
  v.setUint32(28, (o.sampleRate * o.channels * o.bits) / 8, true);
  v.setUint16(32, Math.max(1, (o.channels * o.bits) / 8), true);
  v.setUint16(34, o.bits, true);
  buf.set(ext, 36);
  const d = 20 + fmtSize;
  tag(d, 'data');
  v.setUint32(d + 4, o.data.length, true);
  buf.set(o.data, d + 8);
  return buf;
}

/** WAVE_FORMAT_EXTENSIBLE tail: cbSize 22, valid bits, channel mask, sub-format GUID {code}-0000-0010-8000-00AA00389B71. */
function extensible(subFormat: number, bits: number): Uint8Array {
  const e = new Uint8Array(24);
  const v = new DataView(e.buffer);
  v.setUint16(0, 22, true);
  v.setUint16(2, bits, true);
  v.setUint32(4, 4, true);
  e.set([subFormat & 0xff, subFormat >> 8, 0, 0, 0, 0, 0x10, 0, 0x80, 0, 0, 0xaa, 0, 0x38, 0x9b, 0x71], 8);
  return e;
}

const bytesOf = (a: Float32Array | Int16Array | Float64Array) => new Uint8Array(a.buffer, a.byteOffset, a.byteLength);

function decodeError(bytes: Uint8Array, name = 'take.wav'): WavError {
  try {
    decodeWav(bytes, name);
  } catch (e) {
    expect(e).toBeInstanceOf(WavError);
    return e as WavError;
  }
  throw new Error('expected decodeWav to refuse the file');
}

describe('decodeWav', () => {
  describe('with bad files', () => {
    it('should refuse an empty file, naming it', () => {
      expect(decodeError(new Uint8Array(0)).message).toBe('take.wav: the file is empty');
    });

    it('should refuse a file that is not a WAV file at all', () => {
      const text = new TextEncoder().encode('time_s,error_off_dbfs\n0.01,-20\n');
      expect(decodeError(text).message).toMatch(/^take\.wav: not a WAV file \(it starts with "time", expected "RIFF…WAVE"\)$/);
    });

    it('should refuse a truncated copy whose data chunk runs past the end', () => {
      const whole = encodeWavInt16([new Float32Array(100).fill(0.25)], 8000);
      const e = decodeError(whole.slice(0, whole.length - 51));
      expect(e.message).toMatch(/truncated: the data chunk declares 200 bytes but only 149 are present/);
    });

    it('should refuse a file cut inside its header', () => {
      const whole = encodeWavInt16([new Float32Array(8)], 8000);
      expect(decodeError(whole.slice(0, 10)).message).toMatch(/too short to be a WAV file \(10 bytes\)/);
      // RIFF header 12 bytes, 'fmt ' chunk 8 + 16, then the 'data' chunk header at byte 36.
      expect(decodeError(whole.slice(0, 30)).message).toMatch(/the "fmt " chunk is damaged \(16 bytes\)/);
      expect(decodeError(whole.slice(0, 40)).message).toMatch(/no "data" chunk: the file holds no audio/);
    });

    it('should refuse a data chunk without samples', () => {
      const e = decodeError(wavBytes({ format: 1, channels: 1, sampleRate: 8000, bits: 16, data: new Uint8Array(0) }));
      expect(e.message).toMatch(/holds no samples/);
    });

    it('should refuse encodings it does not read, saying which it reads', () => {
      // Format codes: 6 A-law, 7 µ-law, 0x11 IMA ADPCM, 0x55 MPEG layer 3 (Microsoft RIFF registry, from memory).
      for (const [format, bits] of [[6, 8], [7, 8], [0x11, 4], [0x55, 16]] as const) {
        const e = decodeError(wavBytes({ format, channels: 1, sampleRate: 8000, bits, data: new Uint8Array(64) }));
        expect(e.message).toBe(`take.wav: format code 0x${format.toString(16)} is compressed or not supported; ancbench reads integer PCM (8/16/24/32-bit) and IEEE float (32/64-bit)`);
      }
      const e12 = decodeError(wavBytes({ format: 1, channels: 1, sampleRate: 8000, bits: 12, data: new Uint8Array(64) }));
      expect(e12.message).toMatch(/12-bit integer PCM is not supported/);
    });

    it('should refuse an implausible sample rate or no channels', () => {
      expect(decodeError(wavBytes({ format: 1, channels: 1, sampleRate: 5, bits: 16, data: new Uint8Array(8) })).message).toMatch(/implausible sample rate 5 Hz/);
      expect(decodeError(wavBytes({ format: 1, channels: 0, sampleRate: 8000, bits: 16, data: new Uint8Array(8) })).message).toMatch(/no channels/);
    });

    it('should refuse NaN and infinite samples, naming the channel and sample', () => {
      const left = new Float32Array([0.1, 0.2, 0.3]);
      const right = new Float32Array([0.1, Number.NaN, 0.3]);
      expect(decodeError(encodeWavFloat32([left, right], 8000)).message).toBe('take.wav: channel 1 sample 1 is not a finite number (NaN)');
      const inf = new Float32Array([0, 0, Number.NEGATIVE_INFINITY]);
      expect(decodeError(encodeWavFloat32([inf], 8000)).message).toMatch(/channel 0 sample 2 is not a finite number \(-Infinity\)/);
    });
  });

  describe('with good files', () => {
    it('should scale integer PCM by 2^(bits − 1), 8-bit with 128 as zero', () => {
      // Two's-complement PCM: −2^(b−1) reads −1.0 and 2^(b−2) reads 0.5 (common practice); 8-bit WAV is unsigned.
      const i24 = new Uint8Array([0x00, 0x00, 0x80, 0x00, 0x00, 0x40, 0xff, 0xff, 0x7f]);
      const w24 = decodeWav(wavBytes({ format: 1, channels: 1, sampleRate: 44100, bits: 24, data: i24 }));
      expect(w24.bitDepth).toBe('24');
      expect(Array.from(w24.channels[0]!)).toEqual([-1, 0.5, Math.fround(1 - 2 ** -23)]);
      const w16 = decodeWav(wavBytes({ format: 1, channels: 1, sampleRate: 8000, bits: 16, data: bytesOf(Int16Array.of(-32768, 16384, -8192)) }));
      expect(Array.from(w16.channels[0]!)).toEqual([-1, 0.5, -0.25]);
      const w8 = decodeWav(wavBytes({ format: 1, channels: 1, sampleRate: 8000, bits: 8, data: Uint8Array.of(0, 128, 192, 64) }));
      expect(Array.from(w8.channels[0]!)).toEqual([-1, 0, 0.5, -0.5]);
    });

    it('should read 32- and 64-bit float samples as they are, per channel', () => {
      const f64 = decodeWav(wavBytes({ format: 3, channels: 1, sampleRate: 96000, bits: 64, data: bytesOf(Float64Array.of(0.25, -0.5)) }));
      expect(Array.from(f64.channels[0]!)).toEqual([0.25, -0.5]);
      const a = Float32Array.of(0.125, -0.75, 0.5);
      const b = Float32Array.of(-0.125, 0.75, 1.5);
      const w = decodeWav(encodeWavFloat32([a, b], 22050));
      expect(w).toMatchObject({ sampleRate: 22050, bitDepth: '32f' });
      expect(Array.from(w.channels[1]!)).toEqual(Array.from(b));
    });

    it('should read WAVE_FORMAT_EXTENSIBLE integer PCM', () => {
      const w = decodeWav(wavBytes({ format: 0xfffe, channels: 1, sampleRate: 48000, bits: 24, data: Uint8Array.of(0, 0, 0x40, 0, 0, 0x80), extension: extensible(1, 24) }));
      expect(Array.from(w.channels[0]!)).toEqual([0.5, -1]);
    });
  });

  // Cases a general-purpose WAV library decoded silently wrong (found while writing these tests; wav.ts now
  // parses the chunks itself).
  describe('with files a library would misread', () => {
    it('should read WAVE_FORMAT_EXTENSIBLE float (sub-format 3) as float, not as 32-bit integers', () => {
      const w = decodeWav(wavBytes({ format: 0xfffe, channels: 1, sampleRate: 48000, bits: 32, data: bytesOf(Float32Array.of(0.25, -0.5)), extension: extensible(3, 32) }));
      expect(w.bitDepth).toBe('32f');
      expect(Array.from(w.channels[0]!)).toEqual([0.25, -0.5]);
    });

    it('should refuse a compressed sub-format inside WAVE_FORMAT_EXTENSIBLE', () => {
      const e = decodeError(wavBytes({ format: 0xfffe, channels: 1, sampleRate: 8000, bits: 16, data: new Uint8Array(8), extension: extensible(0x55, 16) }));
      expect(e.message).toMatch(/format code 0x55 is compressed or not supported/);
    });

    it('should not read the RIFF pad byte after an odd-length data chunk as a sample', () => {
      // RIFF pads odd-length chunks with one byte that is not part of the chunk.
      const w = decodeWav(wavBytes({ format: 1, channels: 1, sampleRate: 8000, bits: 8, data: Uint8Array.of(0, 128, 192) }));
      expect(Array.from(w.channels[0]!)).toEqual([-1, 0, 0.5]);
    });

    it('should refuse a data chunk that ends inside a sample frame', () => {
      // 7 bytes of 16-bit stereo (4-byte frames).
      const e = decodeError(wavBytes({ format: 1, channels: 2, sampleRate: 8000, bits: 16, data: new Uint8Array(7) }));
      expect(e.message).toMatch(/the data chunk \(7 bytes\) ends inside a sample frame of 4 bytes/);
    });
  });
});
