// Heap-growth check: the controller's process() (tracker included) must not allocate per block.
import { setFlagsFromString } from 'node:v8';
import { runInNewContext } from 'node:vm';
import { describe, expect, it } from 'vitest';
import { TonalController, type FrequencySource } from '../../src/dsp/tonal-controller.ts';
import { secondaryPathImpulse } from '../helpers/tonal-loop.ts';

setFlagsFromString('--expose-gc');
const gc = runInNewContext('gc') as () => void;

const fs = 48000;
const block = 128;
const blocks = 10000;

/**
 * Smallest heap growth (bytes) over three windows of `blocks` calls of `body`, each after a full
 * collection. A real per-block allocation shows in every window (one 16-byte number per block is
 * 160 kB here); compiler and inline-cache bookkeeping shows in one window at most.
 */
function minGrowth(body: (b: number) => void): number {
  for (let b = 0; b < blocks; b++) body(b); // warm up: let the optimising compiler settle
  let least = Infinity;
  for (let r = 0; r < 3; r++) {
    gc();
    const before = process.memoryUsage().heapUsed;
    for (let b = 0; b < blocks; b++) body(b);
    least = Math.min(least, process.memoryUsage().heapUsed - before);
  }
  return least;
}

describe('TonalController heap use', () => {
  const limit = 64 * 1024;
  const model = secondaryPathImpulse(150, [0.8, 0.3, -0.2]);
  const ref = new Float32Array(block);
  const err = new Float32Array(block);
  const out = new Float32Array(block);
  const w = (2 * Math.PI * 97) / fs;

  function loop(c: TonalController): (b: number) => void {
    return (b) => {
      const o = b * block;
      for (let i = 0; i < block; i++) {
        ref[i] = Math.cos(w * (o + i));
        err[i] = 0.5 * Math.cos(w * (o + i) + 1) + 0.3 * out[i]!;
      }
      c.process(ref, err, out, block);
    };
  }

  it('should detect an allocation of one small object per block (the check itself can fail)', () => {
    const keep: unknown[] = [];
    const growth = minGrowth((b) => {
      keep[b % 4] = { b };
    });
    expect(growth).toBeGreaterThan(limit);
  });

  it.each<FrequencySource>(['reference', 'error', 'fixed', 'external'])(
    'should not grow the heap over %s-source blocks',
    (source) => {
      const c = new TonalController({
        sampleRate: fs,
        maxBlockSize: block,
        secondaryPathModel: model,
        harmonics: 3,
        stepSize: 0.002,
        frequencySource: source,
        hz: 97,
        minHz: 40,
        maxHz: 400,
      });
      const body = loop(c);
      const growth = minGrowth((b) => {
        if (source === 'external') c.setFrequencyHz(97.25);
        body(b);
      });
      expect(c.frequencyKnown).toBe(true);
      expect(growth).toBeLessThan(limit);
    },
  );
});
