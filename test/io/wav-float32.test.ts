import { describe, expect, it } from 'vitest';
import { decodeFloat32Wav, encodeFloat32Wav } from '../../src/io/wav-float32.ts';
import { decodeWav, encodeWavFloat32, encodeWavInt16 } from '../../src/io/wav.ts';

// Checked against the other WAV code paths in the project: the wavefile package's writer and the
// project's general reader (both follow the RIFF/WAVE layout, Microsoft "Multimedia Programming
// Interface and Data Specifications 1.0", 1991, from memory: "fmt " chunk, format 3 = IEEE float).
describe('float32 WAV', () => {
  const a = Float32Array.from([0, 0.5, -0.25, 1e-7, -1]);
  const b = Float32Array.from([1, -1, 0.125, 0.3, 0]);

  it('should be read by the general reader exactly as written', () => {
    const w = decodeWav(encodeFloat32Wav([a, b], 44100));
    expect(w.sampleRate).toBe(44100);
    expect(w.bitDepth).toBe('32f');
    expect(Array.from(w.channels[0]!)).toEqual(Array.from(a));
    expect(Array.from(w.channels[1]!)).toEqual(Array.from(b));
  });

  it('should read what the wavefile package writes', () => {
    const w = decodeFloat32Wav(encodeWavFloat32([a, b], 8000), 'x.wav');
    expect(w.sampleRate).toBe(8000);
    expect(Array.from(w.channels[1]!)).toEqual(Array.from(b));
  });

  it('should refuse an integer WAV, naming the format', () => {
    expect(() => decodeFloat32Wav(encodeWavInt16([a], 8000), 'signals.wav')).toThrow(/signals\.wav: must be 32-bit float, got format 1 with 16 bits/);
  });
});
