import { describe, expect, it } from 'vitest';
import { PerformanceObserver } from 'node:perf_hooks';
import type { Controller } from '../../src/dsp/controller.ts';
import { FdFxlmsController, type FdFxlmsOptions } from '../../src/dsp/fd-fxlms.ts';
import { WasmFxlmsController } from '../../src/dsp/wasm-fxlms.ts';
import { Random } from '../../src/dsp/random.ts';

/**
 * Per-block allocation shows up in V8 as heap growth and, sooner or later, as minor collections
 * (scavenges) during a long synchronous loop. Both are watched while a controller processes many
 * blocks: the number of collections that start inside the loop and the growth of `heapUsed`.
 * (Common practice for JavaScript allocation checks; the last test shows the check does fail.)
 */
async function allocationSigns(blocks: number, step: (i: number) => void): Promise<{ collections: number; growthBytes: number }> {
  const starts: number[] = [];
  const observer = new PerformanceObserver((list) => {
    for (const entry of list.getEntries()) starts.push(entry.startTime);
  });
  observer.observe({ entryTypes: ['gc'] });
  await new Promise((r) => setTimeout(r, 10));
  const heap0 = process.memoryUsage().heapUsed;
  const t0 = performance.now();
  for (let i = 0; i < blocks; i++) step(i);
  const t1 = performance.now();
  const heap1 = process.memoryUsage().heapUsed;
  await new Promise((r) => setTimeout(r, 40));
  observer.disconnect();
  return { collections: starts.filter((t) => t >= t0 && t <= t1).length, growthBytes: heap1 - heap0 };
}

function driver(c: Controller, P: number): (i: number) => void {
  const rng = new Random(4);
  const ref = new Float32Array(P).map(() => 0.2 * rng.gaussian());
  const err = new Float32Array(P).map(() => 0.01 * rng.gaussian());
  const out = new Float32Array(P);
  return (i) => {
    c.adapt = i % 97 !== 0; // the frozen-weights path too
    c.process(ref, err, out, P);
  };
}

const P = 64;
const model = new Float32Array(300).map((_, i) => 0.1 * Math.exp(-i / 50) * Math.cos(i));
const fdCases: [string, FdFxlmsOptions][] = [
  ['alternating, TypeScript loops', { constraint: 'alternating', kernel: 'js' }],
  ['full, TypeScript loops, float32', { constraint: 'full', kernel: 'js', precision: 'float32' }],
  ['alternating, wasm loops', { constraint: 'alternating', kernel: 'wasm' }],
  ['full, wasm loops', { constraint: 'full', kernel: 'wasm' }],
];

describe('per-block allocation of the fast FxLMS paths', () => {
  for (const [name, options] of fdCases) {
    it(`should not allocate per block in the frequency-domain FxLMS (${name})`, async () => {
      const c = new FdFxlmsController({ algorithm: 'fxnlms', taps: 700, stepSize: 0.01, leakage: 1e-4 }, model, P, options);
      const step = driver(c, P);
      for (let i = 0; i < 3000; i++) step(i); // let the JIT settle
      const signs = await allocationSigns(25000, step);
      expect(signs.collections).toBe(0);
      expect(signs.growthBytes).toBeLessThan(64 * 1024);
    });
  }

  it('should not allocate per block in the wasm time-domain FxLMS', async () => {
    const c = new WasmFxlmsController({ algorithm: 'fxnlms', taps: 200, stepSize: 0.01, leakage: 1e-4, update: 'block' }, model, P);
    const step = driver(c, P);
    for (let i = 0; i < 3000; i++) step(i);
    const signs = await allocationSigns(25000, step);
    expect(signs.collections).toBe(0);
    expect(signs.growthBytes).toBeLessThan(64 * 1024);
  });

  it('should see a block step that allocates a small array (the check can fail)', async () => {
    const c = new FdFxlmsController({ algorithm: 'fxlms', taps: 128, stepSize: 1e-3 }, model, P);
    const step = driver(c, P);
    let sink = 0;
    const signs = await allocationSigns(25000, (i) => {
      step(i);
      const scratch = new Float64Array(16); // 16 × 8 bytes + header per block
      scratch[i & 15] = i;
      sink += scratch[3]!;
    });
    expect(sink).toBeGreaterThanOrEqual(0);
    expect(signs.collections > 0 || signs.growthBytes > 64 * 1024).toBe(true);
  });
});
