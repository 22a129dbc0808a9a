/**
 * WAV reading and writing through the wavefile package, with the checks it leaves to us: empty and
 * truncated files, unsupported encodings and non-finite samples get a clear error naming the file.
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

/** Walk the RIFF chunks and refuse a file whose chunks run past its end (a truncated copy). */
function checkRiff(bytes: Uint8Array, name: string): void {
  if (bytes.length === 0) throw new WavError(`${name}: the file is empty`);
  if (bytes.length < 12) throw new WavError(`${name}: too short to be a WAV file (${bytes.length} bytes)`);
  const tag = String.fromCharCode(bytes[0]!, bytes[1]!, bytes[2]!, bytes[3]!);
  const wave = String.fromCharCode(bytes[8]!, bytes[9]!, bytes[10]!, bytes[11]!);
  if ((tag !== 'RIFF' && tag !== 'RIFX' && tag !== 'RF64') || wave !== 'WAVE') {
    throw new WavError(`${name}: not a WAV file (it starts with "${tag}", expected "RIFF…WAVE")`);
  }
  if (tag !== 'RIFF') return; // big-endian and 64-bit files: leave the checks to wavefile
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  let p = 12;
  let sawFmt = false;
  let sawData = false;
  while (p + 8 <= bytes.length) {
    const id = String.fromCharCode(bytes[p]!, bytes[p + 1]!, bytes[p + 2]!, bytes[p + 3]!);
    const size = view.getUint32(p + 4, true);
    if (id === 'fmt ') sawFmt = true;
    if (id === 'data') {
      sawData = true;
      if (p + 8 + size > bytes.length) {
        throw new WavError(`${name}: truncated: the data chunk declares ${size} bytes but only ${bytes.length - p - 8} are present`);
      }
    }
    p += 8 + size + (size & 1);
  }
  if (!sawFmt) throw new WavError(`${name}: no "fmt " chunk: not a valid WAV file`);
  if (!sawData) throw new WavError(`${name}: no "data" chunk: the file holds no audio`);
}

/** Decode WAV bytes; `name` is used in error messages (usually the file path). */
export function decodeWav(bytes: Uint8Array, name = 'WAV'): DecodedWav {
  checkRiff(bytes, name);
  let wav: InstanceType<typeof WaveFile>;
  try {
    wav = new WaveFile(bytes);
  } catch (e) {
    throw new WavError(`${name}: unsupported or damaged WAV (${(e as Error).message}); ancbench reads 8/16/24/32-bit integer PCM and 32/64-bit float`);
  }
  const fmt = wav.fmt as { numChannels: number; sampleRate: number; audioFormat: number };
  const bitDepth = wav.bitDepth;
  if (!['8', '16', '24', '32', '32f', '64'].includes(bitDepth) && bitDepth !== '64f') {
    throw new WavError(`${name}: unsupported encoding (bit depth "${bitDepth}", format ${fmt.audioFormat}); ancbench reads 8/16/24/32-bit integer PCM and 32/64-bit float`);
  }
  if (!(fmt.sampleRate >= 1000 && fmt.sampleRate <= 768000)) throw new WavError(`${name}: implausible sample rate ${fmt.sampleRate} Hz`);
  if (!(fmt.numChannels >= 1)) throw new WavError(`${name}: no channels`);
  const raw = wav.getSamples(false, Float64Array) as unknown as Float64Array | Float64Array[];
  const chans: Float64Array[] = fmt.numChannels === 1 ? [raw as Float64Array] : (raw as Float64Array[]);
  const isFloat = bitDepth === '32f' || bitDepth === '64' || bitDepth === '64f';
  const bits = parseInt(bitDepth, 10);
  const scale = isFloat ? 1 : 1 / Math.pow(2, bits - 1);
  const zero = bitDepth === '8' ? 128 : 0;
  const channels = chans.map((c, ci) => {
    const out = new Float32Array(c.length);
    for (let i = 0; i < c.length; i++) {
      const v = (c[i]! - zero) * scale;
      if (!Number.isFinite(v)) throw new WavError(`${name}: channel ${ci} sample ${i} is not a finite number (${c[i]})`);
      out[i] = v;
    }
    return out;
  });
  if (channels[0]!.length === 0) throw new WavError(`${name}: the file holds no samples`);
  return { sampleRate: fmt.sampleRate, channels, bitDepth };
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
