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

export interface RiffLayout {
  /** 1 = integer PCM, 3 = IEEE float (after resolving WAVE_FORMAT_EXTENSIBLE). */
  format: 1 | 3;
  channels: number;
  sampleRate: number;
  bits: number;
  blockAlign: number;
  dataOffset: number;
  dataSize: number;
}

/** Reads `length` bytes at `offset` (fewer at the end of the file). */
export type ByteReader = (offset: number, length: number) => Uint8Array;

/** Chunks walked before giving up on a file (a damaged header could otherwise send the walk on for ever). */
const MAX_CHUNKS = 4096;

/**
 * Largest magnitude accepted for a float sample: 1000 (60 dB above full scale). Larger values are no
 * recording of sound (a damaged or foreign file), and their squares would overflow the analysis.
 */
export const MAX_FLOAT_SAMPLE = 1000;

const ascii = (b: Uint8Array, at: number): string => String.fromCharCode(b[at]!, b[at + 1]!, b[at + 2]!, b[at + 3]!);

/**
 * Walk the RIFF chunks (Microsoft/IBM, "Multimedia Programming Interface and Data Specifications
 * 1.0", 1991) and read the 'fmt ' chunk, reading only the chunk headers (so a long file is never read
 * whole here). Refuses what would otherwise be decoded silently wrong: a data chunk that claims more bytes
 * than the file holds, one that ends inside a sample frame, compressed format codes; resolves
 * WAVE_FORMAT_EXTENSIBLE to its sub-format (integer or float), and never counts the pad byte that
 * follows an odd-length chunk as audio.
 */
export function readLayoutFrom(read: ByteReader, fileSize: number, name: string): RiffLayout {
  if (fileSize === 0) throw new WavError(`${name}: the file is empty`);
  if (fileSize < 12) throw new WavError(`${name}: too short to be a WAV file (${fileSize} bytes)`);
  const head = read(0, 12);
  const tag = ascii(head, 0);
  const wave = ascii(head, 8);
  if (tag !== 'RIFF' || wave !== 'WAVE') {
    if ((tag === 'RIFX' || tag === 'RF64') && wave === 'WAVE') throw new WavError(`${name}: ${tag} (big-endian or 64-bit) WAV files are not supported; convert to a plain RIFF WAV`);
    throw new WavError(`${name}: not a WAV file (it starts with ${JSON.stringify(tag.replace(/[^\x20-\x7e]/g, '?'))}, expected "RIFF…WAVE")`);
  }
  let p = 12;
  let fmt: Omit<RiffLayout, 'dataOffset' | 'dataSize'> | null = null;
  let dataOffset = -1;
  let dataSize = 0;
  let chunks = 0;
  while (p + 8 <= fileSize && (fmt === null || dataOffset < 0)) {
    if (++chunks > MAX_CHUNKS) throw new WavError(`${name}: more than ${MAX_CHUNKS} chunks before the audio: the header is damaged`);
    const h = read(p, 8);
    const id = ascii(h, 0);
    const size = new DataView(h.buffer, h.byteOffset, 8).getUint32(4, true);
    const body = p + 8;
    if (id === 'fmt ') {
      if (size < 16 || body + size > fileSize) throw new WavError(`${name}: the "fmt " chunk is damaged (${size} bytes): ${size < 16 ? 'too short' : `the file ends ${Math.max(0, fileSize - body)} bytes into it`}`);
      const f = read(body, Math.min(size, 40));
      const view = new DataView(f.buffer, f.byteOffset, f.byteLength);
      let code = view.getUint16(0, true);
      const channels = view.getUint16(2, true);
      const sampleRate = view.getUint32(4, true);
      const blockAlign = view.getUint16(12, true);
      const bits = view.getUint16(14, true);
      if (code === 0xfffe) {
        if (size < 40) throw new WavError(`${name}: WAVE_FORMAT_EXTENSIBLE header too short (${size} bytes)`);
        code = view.getUint16(24, true); // first two bytes of the sub-format GUID
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
      if (body + size > fileSize) {
        throw new WavError(`${name}: truncated: the data chunk declares ${size} bytes but only ${fileSize - body} are present`);
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
  if (!(fmt.sampleRate >= 1000 && fmt.sampleRate <= 768000)) throw new WavError(`${name}: implausible sample rate ${fmt.sampleRate} Hz (ancbench reads 1000 to 768000 Hz)`);
  if (dataSize === 0) throw new WavError(`${name}: the file holds no samples`);
  return { ...fmt, dataOffset, dataSize };
}

/**
 * Decode one channel of `frames` sample frames from `bytes` (which start at a frame boundary) into
 * `out` (from `outAt`). Throws a WavError naming the file, channel and sample for a non-finite or
 * absurdly large float sample; `firstFrame` is the index of the first frame, for that message.
 */
export function decodeChannel(L: RiffLayout, bytes: Uint8Array, frames: number, channel: number, out: Float32Array | Float64Array, outAt: number, firstFrame: number, name: string): void {
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const bps = L.bits / 8;
  for (let f = 0; f < frames; f++) {
    const at = f * L.blockAlign + channel * bps;
    let v: number;
    if (L.format === 3) {
      v = L.bits === 32 ? view.getFloat32(at, true) : view.getFloat64(at, true);
      if (!(Math.abs(v) <= MAX_FLOAT_SAMPLE)) {
        throw new WavError(
          Number.isFinite(v)
            ? `${name}: channel ${channel} sample ${firstFrame + f} is ${v}, beyond ±${MAX_FLOAT_SAMPLE} (60 dB above full scale): not a recording ancbench can use`
            : `${name}: channel ${channel} sample ${firstFrame + f} is not a finite number (${v})`,
        );
      }
    } else if (L.bits === 8) v = (view.getUint8(at) - 128) / 128;
    else if (L.bits === 16) v = view.getInt16(at, true) / 32768;
    else if (L.bits === 24) v = (view.getUint8(at) | (view.getUint8(at + 1) << 8) | (view.getInt8(at + 2) << 16)) / 8388608;
    else v = view.getInt32(at, true) / 2147483648;
    out[outAt + f] = v;
  }
}

/**
 * Decode WAV bytes; `name` is used in error messages (usually the file path). The chunk layout and
 * samples are read here directly (wavefile, used for writing, reads WAVE_FORMAT_EXTENSIBLE float as
 * integers and counts an odd chunk's pad byte as a sample).
 */
export function decodeWav(bytes: Uint8Array, name = 'WAV'): DecodedWav {
  const L = readLayoutFrom((o, l) => bytes.subarray(o, o + l), bytes.length, name);
  const frames = L.dataSize / L.blockAlign;
  const data = bytes.subarray(L.dataOffset, L.dataOffset + L.dataSize);
  const channels = Array.from({ length: L.channels }, (_, c) => {
    const out = new Float32Array(frames);
    decodeChannel(L, data, frames, c, out, 0, 0, name);
    return out;
  });
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
