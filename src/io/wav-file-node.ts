/**
 * WAV files on disk read and written piece by piece, so that memory does not grow with their length:
 * `openWavFile` checks the header against the file's size and then reads any run of frames of one
 * channel on demand (`channelSource` gives a SampleSource for the analysis); `WavFileWriter` writes
 * 32-bit float frames block by block and fills in the sizes when closed.
 */
import { closeSync, openSync, readSync, writeSync } from 'node:fs';
import type { SampleSource } from '../analysis/welch.ts';
import { InputError, openRegularFile } from './files-node.ts';
import { decodeChannel, readLayoutFrom, WavError, type RiffLayout } from './wav.ts';

/** Frames decoded per read when a whole channel is loaded (bounded scratch memory). */
const READ_FRAMES = 65536;

export interface WavFile {
  path: string;
  sampleRate: number;
  channelCount: number;
  /** Sample frames (samples per channel). */
  frames: number;
  /** '8', '16', '24', '32' (integer PCM), '32f', '64f'. */
  bitDepth: string;
  /** Decode frames [start, start + out.length) of one channel into `out`. */
  read(channel: number, start: number, out: Float32Array | Float64Array): void;
  /** One channel as a SampleSource (read on demand). */
  channelSource(channel: number): SampleSource;
  /** One whole channel in memory (refused above `maxFrames`). */
  loadChannel(channel: number, maxFrames: number, limitText: string): Float32Array;
  close(): void;
}

/** Open a WAV file for reading piece by piece; `name` is how messages name it. Refuses non-regular files. */
export function openWavFile(path: string, what: string, name = path): WavFile {
  const { fd, size } = openRegularFile(path, what);
  let scratch = new Uint8Array(0);
  const readAt = (offset: number, length: number): Uint8Array => {
    if (scratch.length < length) scratch = new Uint8Array(Math.max(length, 64));
    const buf = scratch.subarray(0, length);
    let got = 0;
    while (got < length) {
      const n = readSync(fd, buf, got, length - got, offset + got);
      if (n === 0) break;
      got += n;
    }
    return buf.subarray(0, got);
  };
  let L: RiffLayout;
  try {
    L = readLayoutFrom((o, l) => readAt(o, l).slice(), size, name);
  } catch (e) {
    closeSync(fd);
    if (e instanceof WavError) throw e;
    throw new InputError(`${what} "${path}" cannot be read: ${(e as Error).message}`);
  }
  const frames = L.dataSize / L.blockAlign;
  let open = true;
  const file: WavFile = {
    path,
    sampleRate: L.sampleRate,
    channelCount: L.channels,
    frames,
    bitDepth: L.format === 3 ? `${L.bits}f` : String(L.bits),
    read(channel, start, out) {
      if (!open) throw new Error(`${name} is closed`);
      if (start < 0 || start + out.length > frames) throw new RangeError(`frames ${start}…${start + out.length} are outside ${name} (${frames} frames)`);
      for (let done = 0; done < out.length; ) {
        const n = Math.min(READ_FRAMES, out.length - done);
        const bytes = readAt(L.dataOffset + (start + done) * L.blockAlign, n * L.blockAlign);
        if (bytes.length < n * L.blockAlign) throw new WavError(`${name}: the file became shorter while it was being read`);
        decodeChannel(L, bytes, n, channel, out, done, start + done, name);
        done += n;
      }
    },
    channelSource(channel) {
      return { length: frames, read: (start, out) => file.read(channel, start, out) };
    },
    loadChannel(channel, maxFrames, limitText) {
      if (frames > maxFrames) throw new InputError(`${name} holds ${frames} samples per channel, more than ${limitText}`);
      const out = new Float32Array(frames);
      file.read(channel, 0, out);
      return out;
    },
    close() {
      if (open) closeSync(fd);
      open = false;
    },
  };
  return file;
}

/** Largest data size a RIFF WAV can describe (its size fields are 32-bit). */
export const MAX_WAV_DATA_BYTES = 0xffffffff - 60;

/**
 * Writes a 32-bit float WAV block by block; the header's sizes are filled in by `close()`. One or two
 * channels get the plain IEEE-float header (format 3, 16-byte 'fmt '); more get WAVE_FORMAT_EXTENSIBLE with
 * the IEEE-float sub-format, as the RIFF specification's multichannel addendum asks (Microsoft, "Multiple
 * channel audio data and WAVE files", 2001), speaker mask 0 (channels not tied to speaker positions).
 */
export class WavFileWriter {
  private readonly fd: number;
  private frames = 0;
  private buffer: Float32Array;
  private fill = 0;
  private closed = false;

  private readonly headerBytes: number;

  constructor(readonly path: string, readonly channels: number, readonly sampleRate: number, bufferFrames = 8192) {
    this.headerBytes = WavFileWriter.headerBytesFor(channels);
    this.fd = openSync(path, 'w');
    this.buffer = new Float32Array(bufferFrames * channels);
    writeSync(this.fd, this.header(0));
  }

  static headerBytesFor(channels: number): number {
    return channels > 2 ? 68 : 44;
  }

  /** Bytes a file of `frames` frames and `channels` channels takes (header included). */
  static bytesFor(frames: number, channels: number): number {
    return WavFileWriter.headerBytesFor(channels) + frames * channels * 4;
  }

  private header(frames: number): Uint8Array {
    const extensible = this.channels > 2;
    const fmtSize = extensible ? 40 : 16;
    const h = new Uint8Array(this.headerBytes);
    const v = new DataView(h.buffer);
    const dataBytes = frames * this.channels * 4;
    const put = (at: number, s: string) => {
      for (let i = 0; i < 4; i++) h[at + i] = s.charCodeAt(i);
    };
    put(0, 'RIFF');
    v.setUint32(4, this.headerBytes - 8 + dataBytes, true);
    put(8, 'WAVE');
    put(12, 'fmt ');
    v.setUint32(16, fmtSize, true);
    v.setUint16(20, extensible ? 0xfffe : 3, true); // IEEE float, or extensible with the float sub-format
    v.setUint16(22, this.channels, true);
    v.setUint32(24, this.sampleRate, true);
    v.setUint32(28, this.sampleRate * this.channels * 4, true);
    v.setUint16(32, this.channels * 4, true);
    v.setUint16(34, 32, true);
    if (extensible) {
      v.setUint16(36, 22, true); // cbSize
      v.setUint16(38, 32, true); // valid bits per sample
      v.setUint32(40, 0, true); // channel mask
      // KSDATAFORMAT_SUBTYPE_IEEE_FLOAT, 00000003-0000-0010-8000-00aa00389b71
      h.set([0x03, 0x00, 0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xaa, 0x00, 0x38, 0x9b, 0x71], 44);
    }
    put(20 + fmtSize, 'data');
    v.setUint32(24 + fmtSize, dataBytes, true);
    return h;
  }

  /** Append n frames: channel c's samples are signals[c][0 … n). */
  write(signals: readonly ArrayLike<number>[], n: number): void {
    const C = this.channels;
    if ((this.frames + n) * C * 4 > MAX_WAV_DATA_BYTES) throw new InputError(`${this.path}: more than 4 GiB of audio, the most a WAV file can hold`);
    for (let i = 0; i < n; i++) {
      if (this.fill === this.buffer.length) this.flush();
      for (let c = 0; c < C; c++) this.buffer[this.fill + c] = signals[c]![i]!;
      this.fill += C;
    }
    this.frames += n;
  }

  private flush(): void {
    if (this.fill === 0) return;
    const bytes = new Uint8Array(this.buffer.buffer, 0, this.fill * 4);
    let at = 0;
    while (at < bytes.length) at += writeSync(this.fd, bytes, at, bytes.length - at);
    this.fill = 0;
  }

  close(): void {
    if (this.closed) return;
    this.closed = true;
    try {
      this.flush();
      writeSync(this.fd, this.header(this.frames), 0, this.headerBytes, 0);
    } finally {
      closeSync(this.fd);
    }
  }

  /** Close without finishing (the caller removes the file). */
  discard(): void {
    if (this.closed) return;
    this.closed = true;
    closeSync(this.fd);
  }
}
