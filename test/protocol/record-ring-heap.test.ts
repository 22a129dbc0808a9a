import { describe, expect, it } from 'vitest';
import { CHUNK_FRAMES, createRecordBuffer, RecordChunkWriter, RecordRingReader, RecordRingWriter, type RecordChunkMessage } from '../../src/protocol/record-ring.ts';
import { Random } from '../../src/dsp/random.ts';
import { HEAP_BUDGET_BYTES, heapGrowth } from '../helpers/heap.ts';

// No allocation per block in the recording path's audio-thread side (the project's rule for real-time
// code), measured by the new-space harness in test/helpers/heap.ts; the control step proves it sees one.

const N = 128;

function blocks(seed: number): Float32Array[] {
  const rng = new Random(seed);
  return Array.from({ length: 3 }, () => rng.fillGaussian(new Float32Array(N), 0.1) as Float32Array);
}

describe('recording tap', () => {
  it('should be visible to the harness when a step allocates (control)', () => {
    const sink: number[][] = [[]];
    expect(heapGrowth(() => {
      sink[0] = [1, 2];
    })).toBeGreaterThan(HEAP_BUDGET_BYTES);
  });

  describe('with the shared ring', () => {
    it('should not allocate per block while writing, with a worker draining now and then', () => {
      const sab = createRecordBuffer(48000, 1);
      const w = new RecordRingWriter(sab);
      const r = new RecordRingReader(sab);
      const [ref, err, out] = blocks(1);
      const st = { k: 0, got: 0 };
      const sink = (_d: Float32Array, _s: number, _o: number, n: number): void => {
        st.got += n;
      };
      const growth = heapGrowth(() => {
        w.write(ref!, err!, out!, st.k & 1, N);
        if ((++st.k & 15) === 0) r.drain(sink);
      });
      expect(st.got).toBeGreaterThan(0);
      expect(r.dropped).toBe(0);
      expect(growth).toBeLessThan(HEAP_BUDGET_BYTES);
    });

    it('should hand over every frame in order across the wrap-around, and count a full ring as dropped', () => {
      const sab = createRecordBuffer(8000, 0.05); // 400 frames
      const w = new RecordRingWriter(sab);
      const r = new RecordRingReader(sab);
      const got: number[] = [];
      const states: number[] = [];
      let t = 0;
      for (let b = 0; b < 20; b++) {
        const ref = new Float32Array(96).map(() => t++);
        expect(w.write(ref, ref, ref, b % 3, 96)).toBe(true);
        r.drain((d, stride, off, n) => {
          for (let i = 0; i < n; i++) {
            got.push(d[off + i]!);
            states.push(d[3 * stride + off + i]!);
          }
        });
      }
      expect(got).toEqual(Array.from({ length: 20 * 96 }, (_, i) => i));
      expect(states.filter((_, i) => i % 96 === 0)).toEqual(Array.from({ length: 20 }, (_, b) => b % 3));
      const blk = new Float32Array(96);
      for (let b = 0; b < 4; b++) w.write(blk, blk, blk, 0, 96); // 384 of 400 frames
      expect(w.write(blk, blk, blk, 0, 96)).toBe(false);
      expect(r.dropped).toBe(96);
    });
  });

  describe('with the posted fallback', () => {
    it('should not allocate per block when the receiver hands chunks back', () => {
      const st = { posts: 0, frames: 0 };
      const writer: RecordChunkWriter = new RecordChunkWriter((m: RecordChunkMessage) => {
        st.posts++;
        st.frames += m.frames;
        writer.returnChunk(m.data);
      });
      const [ref, err, out] = blocks(2);
      const growth = heapGrowth(() => writer.write(ref!, err!, out!, 1, N));
      expect(st.posts).toBeGreaterThan(10);
      expect(st.frames % CHUNK_FRAMES).toBe(0);
      expect(writer.dropped).toBe(0);
      expect(growth).toBeLessThan(HEAP_BUDGET_BYTES);
    });
  });
});
