import { describe, expect, it } from 'vitest';
import { FxlmsController, type FxlmsConfig } from '../../src/dsp/fxlms.ts';
import { WasmFxlmsController } from '../../src/dsp/wasm-fxlms.ts';
import { Random } from '../../src/dsp/random.ts';
import { normRelError } from '../helpers/tolerance.ts';

// The WebAssembly SIMD kernel must compute what the TypeScript reference computes (src/dsp/fxlms.ts,
// whose equations follow Morgan, IEEE TASSP 28(4), 1980 and Widrow & Stearns, *Adaptive Signal
// Processing*, 1985). Both run in float32 with different summation orders, so outputs are compared
// norm-wise per block (per-sample relative error is meaningless near zero crossings).

interface Case {
  taps: number;
  modelTaps: number;
  config: Omit<FxlmsConfig, 'taps'>;
  block: number;
}

const cases: Case[] = [
  { taps: 16, modelTaps: 32, config: { algorithm: 'fxnlms', stepSize: 0.5 }, block: 64 },
  { taps: 37, modelTaps: 23, config: { algorithm: 'fxnlms', stepSize: 0.3, regularization: 1e-3 }, block: 64 },
  { taps: 130, modelTaps: 48, config: { algorithm: 'fxlms', stepSize: 1e-3, leakage: 0.2 }, block: 50 },
  { taps: 200, modelTaps: 333, config: { algorithm: 'fxnlms', stepSize: 0.2, update: 'block' }, block: 64 },
  { taps: 64, modelTaps: 17, config: { algorithm: 'fxlms', stepSize: 2e-3, leakage: 0.5, update: 'block' }, block: 32 },
  { taps: 3, modelTaps: 1, config: { algorithm: 'fxnlms', stepSize: 0.1 }, block: 16 },
];

describe('WasmFxlmsController', () => {
  for (const cs of cases) {
    const label = `${cs.config.algorithm}, L=${cs.taps}, M=${cs.modelTaps}, ${cs.config.update ?? 'sample'} update, block ${cs.block}`;
    it(`should agree with the TypeScript kernel on random data (${label})`, () => {
      const rng = new Random(cs.taps * 7 + cs.modelTaps);
      const cfg: FxlmsConfig = { ...cs.config, taps: cs.taps };
      const model = new Float32Array(cs.modelTaps);
      for (let m = 0; m < cs.modelTaps; m++) model[m] = rng.gaussian() * Math.exp(-m / 20);
      const js = new FxlmsController(cfg, model, cs.block);
      const wasm = new WasmFxlmsController(cfg, model, cs.block);
      const ref = new Float32Array(cs.block);
      const err = new Float32Array(cs.block);
      const y1 = new Float32Array(cs.block);
      const y2 = new Float32Array(cs.block);
      let worst = 0;
      let loud = 0;
      for (let b = 0; b < 120; b++) {
        // vary the block length now and then: the kernel must handle short blocks too
        const n = b % 7 === 3 ? cs.block - 5 : cs.block;
        rng.fillGaussian(ref, 0.5);
        rng.fillGaussian(err, 0.3);
        js.process(ref, err, y1, n);
        wasm.process(ref, err, y2, n);
        if (b > 0) {
          worst = Math.max(worst, normRelError(y2.subarray(0, n), y1.subarray(0, n)));
          let p = 0;
          for (let i = 0; i < n; i++) p += y1[i]! * y1[i]!;
          if (p > 1e-6 * n) loud++;
        }
      }
      expect(loud).toBeGreaterThan(100); // the outputs compared are not silence
      expect(worst).toBeLessThanOrEqual(1e-5);
      const w1 = new Float32Array(cs.taps);
      const w2 = new Float32Array(cs.taps);
      js.copyWeights(w1);
      wasm.copyWeights(w2);
      expect(normRelError(w2, w1)).toBeLessThanOrEqual(1e-5);
      expect(Math.abs(wasm.weightNormSquared() / js.weightNormSquared() - 1)).toBeLessThanOrEqual(1e-5);
      // padding taps stay frozen at zero
      const padded = new Float32Array(wasm.paddedTaps);
      expect(padded.length % 16).toBe(0);
      wasm.paddedWeights(padded);
      for (let k = cs.taps; k < padded.length; k++) expect(padded[k]).toBe(0);
      // ‖f‖² covers the L newest f only: with the padding included it would be about Lp/L times larger
      expect(Math.abs(wasm.filteredReferenceEnergy() / js.filteredReferenceEnergy() - 1)).toBeLessThanOrEqual(1e-5);
    });
  }

  it('should freeze the weights when adaptation is off and clear everything on reset', () => {
    const rng = new Random(3);
    const cfg: FxlmsConfig = { algorithm: 'fxnlms', taps: 40, stepSize: 0.5 };
    const model = new Float32Array([0, 0.5, 0.25]);
    const wasm = new WasmFxlmsController(cfg, model, 32);
    const ref = new Float32Array(32);
    const err = new Float32Array(32);
    const out = new Float32Array(32);
    for (let b = 0; b < 10; b++) {
      rng.fillGaussian(ref, 0.5);
      rng.fillGaussian(err, 0.3);
      wasm.process(ref, err, out, 32);
    }
    const before = wasm.weightNormSquared();
    expect(before).toBeGreaterThan(0);
    wasm.adapt = false;
    wasm.process(ref, err, out, 32);
    expect(wasm.weightNormSquared()).toBe(before);
    wasm.reset();
    expect(wasm.weightNormSquared()).toBe(0);
    wasm.process(ref, err, out, 32);
    for (const v of out) expect(v).toBe(0);
  });

  it('should follow a secondary-path model replaced in place, as the TypeScript kernel does', () => {
    const rng = new Random(44);
    const cfg: FxlmsConfig = { algorithm: 'fxnlms', taps: 96, stepSize: 0.2 };
    const model = new Float32Array(40).map(() => rng.gaussian() * 0.2);
    const js = new FxlmsController(cfg, model, 64);
    const wasm = new WasmFxlmsController(cfg, model, 64);
    const ref = new Float32Array(64);
    const err = new Float32Array(64);
    const y1 = new Float32Array(64);
    const y2 = new Float32Array(64);
    const replacement = new Float32Array(25).map(() => rng.gaussian() * 0.2); // shorter: the rest is zero
    let worst = 0;
    for (let b = 0; b < 60; b++) {
      if (b === 20) {
        js.setSecondaryPathModel(replacement);
        wasm.setSecondaryPathModel(replacement);
      }
      rng.fillGaussian(ref, 0.5);
      rng.fillGaussian(err, 0.3);
      js.process(ref, err, y1, 64);
      wasm.process(ref, err, y2, 64);
      if (b > 0) worst = Math.max(worst, normRelError(y2, y1));
    }
    expect(worst).toBeLessThanOrEqual(1e-5);
    const back = new Float32Array(40);
    expect(wasm.copySecondaryPathModel(back)).toBe(40);
    expect(Array.from(back.subarray(0, 25))).toEqual(Array.from(replacement));
    expect(Array.from(back.subarray(25))).toEqual(new Array(15).fill(0));
  });

  it('should refuse a model with a non-finite tap', () => {
    const cfg: FxlmsConfig = { algorithm: 'fxlms', taps: 8, stepSize: 0.01 };
    expect(() => new WasmFxlmsController(cfg, new Float32Array([1, Infinity]), 32)).toThrow(/tap 1 is not finite/);
    expect(() => new WasmFxlmsController({ ...cfg, taps: 0 }, new Float32Array([1]), 32)).toThrow(/controller\.taps must be an integer from 1 to 65536, got 0/);
  });
});
