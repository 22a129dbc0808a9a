/**
 * WAV reading and writing. Writing goes through the wavefile package; reading parses the RIFF chunks
 * here, because every case a library might decode silently wrong must get a clear error naming the
 * file instead: empty, truncated or damaged files, compressed encodings, non-finite samples.
 *
 * Integer PCM is scaled to floats by 2^(bits − 1) (a full-scale negative sample reads −1.0); 8-bit
 * PCM is unsigned with 128 as zero. Float WAVs (32/64-bit) are taken as they are.
 */
import wavefile from 'wavefile';

const { WaveFile } = wavefile;

export interface DecodedWav {
  sampleRate: number;
  /** One Float32Array per channel. */
  channels: Float32Array[];
  /** Encoding as found: '8', '16', '24', '32' (integer PCM), '32f', '64f'. */
  bitDepth: string;
}

export class WavError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'WavError';
  }
}

interface RiffLayout {
  /** 1 = integer PCM, 3 = IEEE float (after resolving WAVE_FORMAT_EXTENSIBLE). */
  format: 1 | 3;
  channels: number;
  sampleRate: number;
  bits: number;
  blockAlign: number;
  dataOffset: number;
  dataSize: number;
}

/**
 * Walk the RIFF chunks (Microsoft/IBM, "Multimedia Programming Interface and Data Specifications
 * 1.0", 1991) and read the 'fmt ' chunk. Refuses what would otherwise be decoded silently wrong: a
 * truncated data chunk, one that ends inside a sample frame, compressed format codes; resolves
 * WAVE_FORMAT_EXTENSIBLE to its sub-format (integer or float), and never counts the pad byte that
 * follows an odd-length chunk as audio.
 */
function readLayout(bytes: Uint8Array, name: string): RiffLayout {
  if (bytes.length === 0) throw new WavError(`${name}: the file is empty`);
  if (bytes.length < 12) throw new WavError(`${name}: too short to be a WAV file (${bytes.length} bytes)`);
  const tag = String.fromCharCode(bytes[0]!, bytes[1]!, bytes[2]!, bytes[3]!);
  const wave = String.fromCharCode(bytes[8]!, bytes[9]!, bytes[10]!, bytes[11]!);
  if (tag !== 'RIFF' || wave !== 'WAVE') {
    if ((tag === 'RIFX' || tag === 'RF64') && wave === 'WAVE') throw new WavError(`${name}: ${tag} (big-endian or 64-bit) WAV files are not supported; convert to a plain RIFF WAV`);
    throw new WavError(`${name}: not a WAV file (it starts with "${tag}", expected "RIFF…WAVE")`);
  }
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  let p = 12;
  let fmt: Omit<RiffLayout, 'dataOffset' | 'dataSize'> | null = null;
  let dataOffset = -1;
  let dataSize = 0;
  while (p + 8 <= bytes.length) {
    const id = String.fromCharCode(bytes[p]!, bytes[p + 1]!, bytes[p + 2]!, bytes[p + 3]!);
    const size = view.getUint32(p + 4, true);
    const body = p + 8;
    if (id === 'fmt ') {
      if (size < 16 || body + size > bytes.length) throw new WavError(`${name}: the "fmt " chunk is damaged (${size} bytes)`);
      let code = view.getUint16(body, true);
      const channels = view.getUint16(body + 2, true);
      const sampleRate = view.getUint32(body + 4, true);
      const blockAlign = view.getUint16(body + 12, true);
      const bits = view.getUint16(body + 14, true);
      if (code === 0xfffe) {
        if (size < 40) throw new WavError(`${name}: WAVE_FORMAT_EXTENSIBLE header too short (${size} bytes)`);
        code = view.getUint16(body + 24, true); // first two bytes of the sub-format GUID
      }
      if (code !== 1 && code !== 3) {
        throw new WavError(`${name}: format code 0x${code.toString(16)} is compressed or not supported; ancbench reads integer PCM (8/16/24/32-bit) and IEEE float (32/64-bit)`);
      }
      const okBits = code === 1 ? [8, 16, 24, 32].includes(bits) : bits === 32 || bits === 64;
      if (!okBits) throw new WavError(`${name}: ${bits}-bit ${code === 1 ? 'integer PCM' : 'float'} is not supported; ancbench reads 8/16/24/32-bit integer PCM and 32/64-bit float`);
      if (channels < 1) throw new WavError(`${name}: no channels`);
      if (blockAlign !== (channels * bits) / 8) throw new WavError(`${name}: block align ${blockAlign} does not match ${channels} channel(s) of ${bits} bits`);
      fmt = { format: code as 1 | 3, channels, sampleRate, bits, blockAlign };
    } else if (id === 'data') {
      if (body + size > bytes.length) {
        throw new WavError(`${name}: truncated: the data chunk declares ${size} bytes but only ${bytes.length - body} are present`);
      }
      dataOffset = body;
      dataSize = size;
    }
    p = body + size + (size & 1);
  }
  if (!fmt) throw new WavError(`${name}: no "fmt " chunk: not a valid WAV file`);
  if (dataOffset < 0) throw new WavError(`${name}: no "data" chunk: the file holds no audio`);
  if (dataSize % fmt.blockAlign !== 0) {
    throw new WavError(`${name}: the data chunk (${dataSize} bytes) ends inside a sample frame of ${fmt.blockAlign} bytes: the file is damaged`);
  }
  return { ...fmt, dataOffset, dataSize };
}

/**
 * Decode WAV bytes; `name` is used in error messages (usually the file path). The chunk layout and
 * samples are read here directly (wavefile, used for writing, reads WAVE_FORMAT_EXTENSIBLE float as
 * integers and counts an odd chunk's pad byte as a sample).
 */
export function decodeWav(bytes: Uint8Array, name = 'WAV'): DecodedWav {
  const L = readLayout(bytes, name);
  if (!(L.sampleRate >= 1000 && L.sampleRate <= 768000)) throw new WavError(`${name}: implausible sample rate ${L.sampleRate} Hz`);
  const frames = L.dataSize / L.blockAlign;
  if (frames === 0) throw new WavError(`${name}: the file holds no samples`);
  const view = new DataView(bytes.buffer, bytes.byteOffset + L.dataOffset, L.dataSize);
  const channels = Array.from({ length: L.channels }, () => new Float32Array(frames));
  const bps = L.bits / 8;
  for (let f = 0; f < frames; f++) {
    for (let c = 0; c < L.channels; c++) {
      const at = f * L.blockAlign + c * bps;
      let v: number;
      if (L.format === 3) v = L.bits === 32 ? view.getFloat32(at, true) : view.getFloat64(at, true);
      else if (L.bits === 8) v = (view.getUint8(at) - 128) / 128;
      else if (L.bits === 16) v = view.getInt16(at, true) / 32768;
      else if (L.bits === 24) {
        const u = view.getUint8(at) | (view.getUint8(at + 1) << 8) | (view.getInt8(at + 2) << 16);
        v = u / 8388608;
      } else v = view.getInt32(at, true) / 2147483648;
      if (!Number.isFinite(v)) throw new WavError(`${name}: channel ${c} sample ${f} is not a finite number (${v})`);
      channels[c]![f] = v;
    }
  }
  const bitDepth = L.format === 3 ? `${L.bits}f` : String(L.bits);
  return { sampleRate: L.sampleRate, channels, bitDepth };
}

/** Encode channels as a 32-bit float WAV. */
export function encodeWavFloat32(channels: Float32Array[], sampleRate: number): Uint8Array {
  const wav = new WaveFile();
  wav.fromScratch(channels.length, sampleRate, '32f', channels);
  return wav.toBuffer();
}

/** Encode channels as 16-bit integer PCM (values clipped to ±1). */
export function encodeWavInt16(channels: Float32Array[], sampleRate: number): Uint8Array {
  const ints = channels.map((c) => {
    const o = new Int16Array(c.length);
    for (let i = 0; i < c.length; i++) o[i] = Math.max(-32768, Math.min(32767, Math.round(c[i]! * 32768)));
    return o;
  });
  const wav = new WaveFile();
  wav.fromScratch(channels.length, sampleRate, '16', ints);
  return wav.toBuffer();
}
