/**
 * The recording tap both processors carry: off until `record-start`, then each block's reference,
 * error, output and control state (0 off, 1 on, 2 muted) go to the shared ring or, without one, to
 * posted chunks (src/protocol/record-ring.ts). `write` allocates nothing; the chunk pool is made on
 * the first start (in the message handler, not in process()).
 */
import { RecordChunkWriter, RecordRingWriter, type RecordControlMessage } from '../src/protocol/record-ring.ts';
import type { EngineMode } from '../src/engine/engine.ts';
import type { PortLike } from '../src/protocol/messages.ts';

export class RecordTap {
  private ring: RecordRingWriter | null = null;
  private chunks: RecordChunkWriter | null = null;
  private on = false;
  private frames = 0;

  constructor(private readonly port: PortLike) {}

  /** Handle a recording message; true when it was one. */
  handle(msg: { type: string }): boolean {
    const m = msg as RecordControlMessage;
    switch (m.type) {
      case 'record-start':
        this.frames = 0;
        if (m.sharedBuffer) this.ring = new RecordRingWriter(m.sharedBuffer);
        else {
          this.ring = null;
          this.chunks ??= new RecordChunkWriter((c, transfer) => this.port.postMessage(c, transfer));
        }
        this.on = true;
        return true;
      case 'record-stop':
        if (!this.on) return true;
        this.on = false;
        if (!this.ring) this.chunks?.flush();
        this.port.postMessage({ type: 'record-stopped', frames: this.frames, dropped: this.chunks && !this.ring ? this.chunks.dropped : 0 });
        return true;
      case 'record-chunk-return':
        this.chunks?.returnChunk(m.data);
        return true;
      default:
        return false;
    }
  }

  write(ref: Float32Array, err: Float32Array, out: Float32Array, mode: EngineMode, n: number): void {
    if (!this.on) return;
    const state = mode === 'control' ? 1 : mode === 'muted' ? 2 : 0;
    if (this.ring) this.ring.write(ref, err, out, state, n);
    else this.chunks!.write(ref, err, out, state, n);
    this.frames += n;
  }
}
