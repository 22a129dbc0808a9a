/**
 * The recording's worker: drains the shared ring (or takes posted chunks) into a RecordingAssembler
 * off the page's main thread, and at Stop builds the bundle (.zip, fflate). Exposed through comlink.
 */
import * as Comlink from 'comlink';
import { RecordingAssembler, type RecordingMeta } from './recording-assembler.ts';
import { RecordRingReader, CHUNK_FRAMES } from '../protocol/record-ring.ts';
import { bundleFiles, zipBundle } from '../io/recording-bundle.ts';

export class RecordWorker {
  private asm: RecordingAssembler | null = null;
  private reader: RecordRingReader | null = null;
  private timer: ReturnType<typeof setInterval> | null = null;

  begin(sampleRate: number, blockSize: number, maxSeconds: number, sab: SharedArrayBuffer | null): void {
    this.asm = new RecordingAssembler(sampleRate, blockSize, maxSeconds);
    this.reader = sab ? new RecordRingReader(sab) : null;
    if (this.timer) clearInterval(this.timer);
    this.timer = this.reader ? setInterval(() => this.drain(), 100) : null;
  }

  drain(): void {
    if (this.asm && this.reader) this.reader.drain(this.asm.push);
  }

  /** A posted chunk; its buffer goes back (for the worklet to reuse). */
  pushChunk(data: Float32Array, frames: number): Float32Array {
    this.asm?.push(data, CHUNK_FRAMES, 0, frames);
    return Comlink.transfer(data, [data.buffer as ArrayBuffer]);
  }

  noteMeters(refPower: number, errPower: number, state: number): void {
    this.asm?.noteMeters(refPower, errPower, state);
  }

  seconds(): number {
    return this.asm?.durationS ?? 0;
  }

  /** Stop draining and return the bundle as .zip bytes. */
  finish(meta: RecordingMeta): Uint8Array {
    if (this.timer) clearInterval(this.timer);
    this.timer = null;
    this.drain();
    if (!this.asm) throw new Error('no recording');
    const zip = zipBundle(bundleFiles(this.asm.finish(meta)));
    this.asm = null;
    this.reader = null;
    return Comlink.transfer(zip, [zip.buffer as ArrayBuffer]);
  }
}

Comlink.expose(new RecordWorker());
