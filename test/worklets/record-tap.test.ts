import { describe, expect, it } from 'vitest';
import { RecordTap } from '../../worklets/record-tap.ts';
import { parseControlMessage, type PortLike } from '../../src/protocol/messages.ts';
import { CHUNK_FRAMES, createRecordBuffer, RecordRingReader, type RecordChunkMessage } from '../../src/protocol/record-ring.ts';

class FakePort implements PortLike {
  readonly posted: { type: string; frames?: number; data?: Float32Array; dropped?: number }[] = [];
  postMessage(message: unknown): void {
    const m = message as RecordChunkMessage;
    // structured cloning copies the object: keep a snapshot, as the page would receive it
    this.posted.push(m.type === 'record-chunk' ? { ...m, data: m.data.slice() } : (m as { type: string }));
  }
  close(): void {}
}

const block = (v: number, n = 128): Float32Array => new Float32Array(n).fill(v);

describe('RecordTap', () => {
  describe('without a shared ring (posted chunks)', () => {
    it('should post full chunks and the rest at stop, with the state of each block', () => {
      const port = new FakePort();
      const tap = new RecordTap(port);
      expect(tap.handle(parseControlMessage({ type: 'record-start' }, 48000))).toBe(true);
      const blocks = 70; // 8960 frames: one full chunk and 768 frames
      for (let b = 0; b < blocks; b++) tap.write(block(b), block(-b), block(0.5), b < 40 ? 'idle' : 'control', 128);
      tap.handle(parseControlMessage({ type: 'record-stop' }, 48000));
      const chunks = port.posted.filter((m) => m.type === 'record-chunk');
      expect(chunks.map((c) => c.frames)).toEqual([CHUNK_FRAMES, blocks * 128 - CHUNK_FRAMES]);
      const c0 = chunks[0]!.data!;
      expect(c0[129]).toBe(1); // reference of block 1
      expect(c0[CHUNK_FRAMES + 129]).toBe(-1); // error of block 1
      expect(c0[3 * CHUNK_FRAMES + 39 * 128]).toBe(0); // control off
      expect(c0[3 * CHUNK_FRAMES + 40 * 128]).toBe(1); // control on
      expect(port.posted.at(-1)).toEqual({ type: 'record-stopped', frames: blocks * 128, dropped: 0 });
    });

    it('should write nothing while not recording', () => {
      const port = new FakePort();
      const tap = new RecordTap(port);
      tap.write(block(1), block(1), block(1), 'control', 128);
      expect(port.posted).toEqual([]);
    });
  });

  describe('with a shared ring', () => {
    it('should fill the ring the page handed over', () => {
      const sab = createRecordBuffer(48000, 1);
      const tap = new RecordTap(new FakePort());
      tap.handle(parseControlMessage({ type: 'record-start', sharedBuffer: sab }, 48000));
      tap.write(block(0.25), block(0.5), block(0), 'muted', 128);
      let states: number[] = [];
      new RecordRingReader(sab).drain((d, stride, off, n) => {
        states = Array.from(d.subarray(3 * stride + off, 3 * stride + off + n));
      });
      expect(states.length).toBe(128);
      expect(states.every((s) => s === 2)).toBe(true);
    });
  });

  describe('with bad messages', () => {
    it('should name the field', () => {
      expect(() => parseControlMessage({ type: 'record-chunk-return', data: new Float32Array(3) }, 48000)).toThrow(/data must be a Float32Array of 32768 samples.*got 3 samples/);
      expect(() => parseControlMessage({ type: 'record-start', sharedBuffer: new ArrayBuffer(8) }, 48000)).toThrow(/sharedBuffer must be a SharedArrayBuffer/);
    });
  });
});
