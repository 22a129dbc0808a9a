/**
 * The recording tap's transport, audio thread → a draining worker, at the audio rate: four channels
 * per frame (reference, error, output, state: 0 control off, 1 on, 2 muted, per block). Two
 * transports with the same numbers, as for telemetry (messages.ts):
 *
 *  - shared: a SharedArrayBuffer ring. Layout: Int32 header [0] frames written, [1] frames read,
 *    [2] frames dropped (ring full), [3] capacity; then Float32 planar data, RECORD_CHANNELS ×
 *    capacity. One writer (`RecordRingWriter`, the audio thread) publishes its count with
 *    Atomics.store after copying; one reader (`RecordRingReader`, a worker) copies between the
 *    counts and publishes how far it read. A full ring drops the whole block and counts it, so a
 *    gap is known, never silent;
 *  - posted: `RecordChunkWriter` fills preallocated chunks (CHUNK_FRAMES frames, planar) and posts
 *    each full one with its buffer transferred; the receiver sends the buffer back
 *    (`returnChunk`) to be reused, so after the first chunks nothing is allocated but the message
 *    object, once per chunk (not per block). No free chunk: the block is dropped and counted.
 *
 * `write` allocates nothing (test/protocol/record-ring-heap.test.ts).
 */

export const RECORD_CHANNELS = 4;
/** Frames of one posted chunk. */
export const CHUNK_FRAMES = 8192;
/** Chunks a posted writer keeps (in flight or free). */
export const CHUNK_POOL = 8;

const H_WRITTEN = 0, H_READ = 1, H_DROPPED = 2, H_CAPACITY = 3;
const HEADER_BYTES = 16;

/** A ring able to hold `seconds` of audio at `sampleRate` (a worker drains it well within that). */
export function createRecordBuffer(sampleRate: number, seconds = 4): SharedArrayBuffer {
  const capacity = Math.ceil(sampleRate * seconds);
  const sab = new SharedArrayBuffer(HEADER_BYTES + 4 * RECORD_CHANNELS * capacity);
  new Int32Array(sab, 0, 4)[H_CAPACITY] = capacity;
  return sab;
}

function ringViews(sab: SharedArrayBuffer): { header: Int32Array; data: Float32Array; capacity: number } {
  const header = new Int32Array(sab, 0, 4);
  const capacity = header[H_CAPACITY]!;
  if (!(capacity > 0) || sab.byteLength < HEADER_BYTES + 4 * RECORD_CHANNELS * capacity) throw new RangeError(`record buffer: header says ${capacity} frames but it holds ${sab.byteLength} bytes`);
  return { header, data: new Float32Array(sab, HEADER_BYTES, RECORD_CHANNELS * capacity), capacity };
}

/** Copy n samples of four sources into planar storage at frame `at` of `stride` frames per channel. */
function copyFrames(dst: Float32Array, stride: number, at: number, ref: Float32Array, err: Float32Array, out: Float32Array, state: number, from: number, n: number): void {
  for (let i = 0; i < n; i++) {
    dst[at + i] = ref[from + i]!;
    dst[stride + at + i] = err[from + i]!;
    dst[2 * stride + at + i] = out[from + i]!;
    dst[3 * stride + at + i] = state;
  }
}

/** The audio thread's side of the shared ring. */
export class RecordRingWriter {
  private readonly header: Int32Array;
  private readonly data: Float32Array;
  private readonly capacity: number;
  private written = 0;

  constructor(sab: SharedArrayBuffer) {
    const v = ringViews(sab);
    this.header = v.header;
    this.data = v.data;
    this.capacity = v.capacity;
    this.written = Atomics.load(this.header, H_WRITTEN);
  }

  /** Append one block (n frames) with the block's control state; false when the ring was full (dropped). */
  write(ref: Float32Array, err: Float32Array, out: Float32Array, state: number, n: number): boolean {
    const cap = this.capacity;
    const read = Atomics.load(this.header, H_READ);
    if (this.written - read + n > cap) {
      Atomics.add(this.header, H_DROPPED, n);
      return false;
    }
    const at = this.written % cap;
    const first = Math.min(n, cap - at);
    copyFrames(this.data, cap, at, ref, err, out, state, 0, first);
    if (first < n) copyFrames(this.data, cap, 0, ref, err, out, state, first, n - first);
    this.written = (this.written + n) | 0;
    Atomics.store(this.header, H_WRITTEN, this.written);
    return true;
  }
}

/** Where drained frames go: `n` frames, planar, channel c at c·stride … c·stride + n − 1 from `offset`. */
export type FrameSink = (data: Float32Array, stride: number, offset: number, n: number) => void;

/** The worker's side of the shared ring. */
export class RecordRingReader {
  private readonly header: Int32Array;
  private readonly data: Float32Array;
  private readonly capacity: number;
  private read: number;

  constructor(sab: SharedArrayBuffer) {
    const v = ringViews(sab);
    this.header = v.header;
    this.data = v.data;
    this.capacity = v.capacity;
    this.read = Atomics.load(this.header, H_READ);
  }

  /** Frames the writer dropped because the ring was full. */
  get dropped(): number {
    return Atomics.load(this.header, H_DROPPED);
  }

  /** Hand every frame written since the last call to `sink` (in at most two pieces); returns the count. */
  drain(sink: FrameSink): number {
    const written = Atomics.load(this.header, H_WRITTEN);
    const n = (written - this.read) | 0;
    if (n <= 0) return 0;
    const cap = this.capacity;
    const at = this.read % cap;
    const first = Math.min(n, cap - at);
    sink(this.data, cap, at, first);
    if (first < n) sink(this.data, cap, 0, n - first);
    this.read = written;
    Atomics.store(this.header, H_READ, this.read);
    return n;
  }
}

/** A posted chunk: planar frames, CHUNK_FRAMES per channel, `frames` of them valid. */
export interface RecordChunkMessage {
  type: 'record-chunk';
  data: Float32Array;
  frames: number;
  dropped: number;
}

/** The audio thread's side of the posted fallback (recycled chunks). */
export class RecordChunkWriter {
  private readonly free: Float32Array[] = [];
  private current: Float32Array | null;
  private fill = 0;
  /** Frames dropped since construction (no free chunk). */
  dropped = 0;
  private readonly message: RecordChunkMessage = { type: 'record-chunk', data: new Float32Array(0), frames: 0, dropped: 0 };

  constructor(private readonly post: (m: RecordChunkMessage, transfer: ArrayBuffer[]) => void) {
    for (let i = 0; i < CHUNK_POOL; i++) this.free.push(new Float32Array(RECORD_CHANNELS * CHUNK_FRAMES));
    this.current = this.free.pop()!;
  }

  /** A chunk's buffer handed back by the receiver. */
  returnChunk(data: Float32Array): void {
    if (data.length === RECORD_CHANNELS * CHUNK_FRAMES && this.free.length < CHUNK_POOL) {
      if (this.current === null) this.current = data;
      else this.free.push(data);
    }
  }

  write(ref: Float32Array, err: Float32Array, out: Float32Array, state: number, n: number): boolean {
    let from = 0;
    while (from < n) {
      if (this.current === null) {
        this.dropped += n - from;
        return false;
      }
      const k = Math.min(n - from, CHUNK_FRAMES - this.fill);
      copyFrames(this.current, CHUNK_FRAMES, this.fill, ref, err, out, state, from, k);
      this.fill += k;
      from += k;
      if (this.fill === CHUNK_FRAMES) this.flush();
    }
    return true;
  }

  /** Post what the current chunk holds (at Stop, or when full). */
  flush(): void {
    const c = this.current;
    if (c === null || this.fill === 0) return;
    const m = this.message;
    m.data = c;
    m.frames = this.fill;
    m.dropped = this.dropped;
    this.post(m, [c.buffer as ArrayBuffer]);
    this.fill = 0;
    this.current = this.free.pop() ?? null;
  }
}

// ---------------------------------------------------------------------------------------------
// Messages of the recording tap (part of ControlMessage / WorkletMessage in messages.ts)
// ---------------------------------------------------------------------------------------------

/**
 * Page → worklet: `record-start` turns the tap on (into the shared ring when `sharedBuffer` is given,
 * else posted chunks), `record-stop` flushes and turns it off (the worklet answers `record-stopped`),
 * `record-chunk-return` hands a posted chunk's buffer back for reuse.
 */
export type RecordControlMessage =
  | { type: 'record-start'; sharedBuffer?: SharedArrayBuffer }
  | { type: 'record-stop' }
  | { type: 'record-chunk-return'; data: Float32Array };

/** Validate a recording message (throws RangeError naming the field). */
export function parseRecordMessage(m: Record<string, unknown>): RecordControlMessage {
  switch (m.type) {
    case 'record-start': {
      const sab = m.sharedBuffer;
      if (sab === undefined) return { type: 'record-start' };
      if (!(typeof SharedArrayBuffer !== 'undefined' && sab instanceof SharedArrayBuffer)) throw new RangeError('sharedBuffer must be a SharedArrayBuffer when given');
      ringViews(sab);
      return { type: 'record-start', sharedBuffer: sab };
    }
    case 'record-stop':
      return { type: 'record-stop' };
    case 'record-chunk-return':
      if (!(m.data instanceof Float32Array) || m.data.length !== RECORD_CHANNELS * CHUNK_FRAMES) {
        throw new RangeError(`data must be a Float32Array of ${RECORD_CHANNELS * CHUNK_FRAMES} samples (a returned chunk), got ${m.data instanceof Float32Array ? `${m.data.length} samples` : String(m.data)}`);
      }
      return { type: 'record-chunk-return', data: m.data };
    default:
      throw new RangeError(`unknown recording message type "${String(m.type)}"`);
  }
}
