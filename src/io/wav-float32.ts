/**
 * 32-bit float WAV (WAVE_FORMAT_IEEE_FLOAT, or EXTENSIBLE with the float subformat), written and read
 * with no library, so the recording bundle works the same in the browser and in Node. Other encodings
 * are refused with a message naming the format found (src/io/wav.ts reads them for the CLI).
 */

export class FloatWavError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'FloatWavError';
  }
}

export function encodeFloat32Wav(channels: Float32Array[], sampleRate: number): Uint8Array {
  const C = channels.length;
  const N = C ? channels[0]!.length : 0;
  const dataBytes = 4 * C * N;
  const out = new Uint8Array(44 + dataBytes);
  const v = new DataView(out.buffer);
  const ascii = (at: number, s: string): void => {
    for (let i = 0; i < 4; i++) out[at + i] = s.charCodeAt(i);
  };
  ascii(0, 'RIFF');
  v.setUint32(4, 36 + dataBytes, true);
  ascii(8, 'WAVE');
  ascii(12, 'fmt ');
  v.setUint32(16, 16, true);
  v.setUint16(20, 3, true); // IEEE float
  v.setUint16(22, C, true);
  v.setUint32(24, sampleRate, true);
  v.setUint32(28, sampleRate * 4 * C, true);
  v.setUint16(32, 4 * C, true);
  v.setUint16(34, 32, true);
  ascii(36, 'data');
  v.setUint32(40, dataBytes, true);
  let at = 44;
  for (let i = 0; i < N; i++) {
    for (let c = 0; c < C; c++) {
      v.setFloat32(at, channels[c]![i]!, true);
      at += 4;
    }
  }
  return out;
}

export function decodeFloat32Wav(bytes: Uint8Array, name: string): { sampleRate: number; channels: Float32Array[] } {
  const v = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const tag = (at: number): string => String.fromCharCode(bytes[at]!, bytes[at + 1]!, bytes[at + 2]!, bytes[at + 3]!);
  if (bytes.length < 12 || tag(0) !== 'RIFF' || tag(8) !== 'WAVE') throw new FloatWavError(`${name}: not a WAV file (no RIFF/WAVE header)`);
  let fmt: { format: number; channels: number; rate: number; bits: number } | null = null;
  let at = 12;
  while (at + 8 <= bytes.length) {
    const id = tag(at);
    const size = v.getUint32(at + 4, true);
    const body = at + 8;
    if (id === 'fmt ') {
      let format = v.getUint16(body, true);
      if (format === 0xfffe && size >= 26) format = v.getUint16(body + 24, true);
      fmt = { format, channels: v.getUint16(body + 2, true), rate: v.getUint32(body + 4, true), bits: v.getUint16(body + 14, true) };
    } else if (id === 'data') {
      if (!fmt) throw new FloatWavError(`${name}: the data chunk comes before the "fmt " chunk`);
      if (fmt.format !== 3 || fmt.bits !== 32) throw new FloatWavError(`${name}: must be 32-bit float, got format ${fmt.format} with ${fmt.bits} bits`);
      const C = fmt.channels;
      const frames = Math.floor(Math.min(size, bytes.length - body) / (4 * C));
      if (C < 1 || frames < 1) throw new FloatWavError(`${name}: holds no samples`);
      const channels = Array.from({ length: C }, () => new Float32Array(frames));
      let p = body;
      for (let i = 0; i < frames; i++) {
        for (let c = 0; c < C; c++) {
          const x = v.getFloat32(p, true);
          if (!Number.isFinite(x)) throw new FloatWavError(`${name}: channel ${c} sample ${i} is not a finite number`);
          channels[c]![i] = x;
          p += 4;
        }
      }
      return { sampleRate: fmt.rate, channels };
    }
    at = body + size + (size & 1);
  }
  throw new FloatWavError(`${name}: no ${fmt ? 'data' : '"fmt "'} chunk`);
}
