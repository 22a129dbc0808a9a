import { describe, expect, it } from 'vitest';
import {
  buildFxlmsController,
  chooseFxlmsImplementation,
  createFxlmsController,
  describeImplementation,
  FD_THRESHOLD_TAPS_JS,
  FD_THRESHOLD_TAPS_WASM,
  FXLMS_IMPLEMENTATIONS,
} from '../../src/engine/implementation.ts';
import type { FxlmsConfig } from '../../src/dsp/fxlms.ts';
import { Random } from '../../src/dsp/random.ts';
import { normRelError } from '../helpers/tolerance.ts';

const short: FxlmsConfig = { algorithm: 'fxnlms', taps: 64, stepSize: 0.1 };
const long: FxlmsConfig = { algorithm: 'fxnlms', taps: 4096, stepSize: 0.01 };

describe('chooseFxlmsImplementation', () => {
  it('should keep short filters in the time domain, in wasm when SIMD is there', () => {
    expect(chooseFxlmsImplementation(short, { wasmSimd: true, modelTaps: 64 })).toBe('wasm');
    expect(chooseFxlmsImplementation(short, { wasmSimd: false, modelTaps: 64 })).toBe('js');
  });

  it('should keep the exact time domain with SIMD, and take the frequency domain without it from the documented length on', () => {
    const at = (taps: number, wasmSimd: boolean): string => chooseFxlmsImplementation({ ...short, taps }, { wasmSimd, modelTaps: taps, maxBlockSize: 128 });
    // with SIMD the time-domain kernel is the fastest exact implementation at every size benchmarked
    expect(at(FD_THRESHOLD_TAPS_WASM, true)).toBe('wasm');
    expect(at(8192, true)).toBe('wasm');
    // without SIMD, taps + modelTaps against the threshold: one below stays in the time domain, at it goes FD
    expect(at(Math.floor((FD_THRESHOLD_TAPS_JS - 1) / 2), false)).toBe('js');
    expect(at(FD_THRESHOLD_TAPS_JS / 2, false)).toBe('fd');
  });

  it('should stay in the time domain when per-sample updates are asked for or the block is not a power of two', () => {
    expect(chooseFxlmsImplementation({ ...long, update: 'sample' }, { wasmSimd: true, modelTaps: 2048 })).toBe('wasm');
    expect(chooseFxlmsImplementation(long, { wasmSimd: false, modelTaps: 2048, maxBlockSize: 96 })).toBe('js');
    expect(chooseFxlmsImplementation({ ...long, update: 'block' }, { wasmSimd: false, modelTaps: 2048, maxBlockSize: 256 })).toBe('fd');
  });

  it('should honour a forced choice and refuse one that cannot run, naming the reason', () => {
    expect(chooseFxlmsImplementation(long, { wasmSimd: true, force: 'js' })).toBe('js');
    expect(chooseFxlmsImplementation(short, { wasmSimd: true, force: 'fd' })).toBe('fd');
    expect(() => chooseFxlmsImplementation(short, { wasmSimd: false, force: 'wasm' })).toThrow(/"wasm" needs WebAssembly SIMD/);
    expect(() => chooseFxlmsImplementation({ ...short, update: 'sample' }, { wasmSimd: true, force: 'fd' })).toThrow(/controller\.update is "sample"/);
    expect(() => chooseFxlmsImplementation(short, { wasmSimd: true, force: 'fd', maxBlockSize: 100 })).toThrow(/power of two from 2 to 16384, got 100/);
    const bad = { wasmSimd: true, force: 'gpu' } as unknown as Parameters<typeof chooseFxlmsImplementation>[1];
    expect(() => chooseFxlmsImplementation(short, bad)).toThrow(/must be one of "auto", "js", "wasm", "fd", got gpu/);
  });
});

describe('createFxlmsController', () => {
  it('should build controllers that compute the same FIR output from the same frozen weights', () => {
    // With adaptation off every implementation is the FIR y(n) = Σ_k w_k·x(n − k) (the definition of
    // the control output in src/dsp/fxlms.ts); the FD path computes it by overlap-save
    // (Shynk, IEEE SP Magazine 9(1), 1992, from memory).
    const rng = new Random(30);
    const cfg: FxlmsConfig = { algorithm: 'fxlms', taps: 300, stepSize: 1e-3, update: 'block' };
    const model = new Float32Array(50).map(() => rng.gaussian() * 0.1);
    const w = new Float32Array(cfg.taps).map(() => rng.gaussian() * 0.05);
    const P = 64;
    const controllers = FXLMS_IMPLEMENTATIONS.map((impl) => {
      const c = createFxlmsController(cfg, model, P, impl, { wasmSimd: true });
      expect(c.implementation).toBe(impl);
      (c as unknown as { setWeights(w: ArrayLike<number>): void }).setWeights(w);
      c.adapt = false;
      return c;
    });
    const ref = new Float32Array(P);
    const err = new Float32Array(P);
    const outs = controllers.map(() => new Float32Array(P));
    let worst = 0;
    for (let b = 0; b < 20; b++) {
      rng.fillGaussian(ref, 0.5);
      controllers.forEach((c, i) => c.process(ref, err, outs[i]!, P));
      worst = Math.max(worst, normRelError(outs[1]!, outs[0]!), normRelError(outs[2]!, outs[0]!));
    }
    expect(worst).toBeLessThanOrEqual(1e-5);
    let energy = 0;
    for (const v of outs[0]!) energy += v * v;
    expect(energy).toBeGreaterThan(0.1);
  });

  it('should choose and build in one step from the scenario fields', () => {
    const model = new Float32Array(2048).map((_, i) => Math.exp(-i / 100) * 0.1);
    expect(buildFxlmsController(long, model, 128, true).implementation).toBe('wasm');
    const auto = buildFxlmsController(long, model, 128, false);
    expect(auto.implementation).toBe('fd');
    expect(describeImplementation(auto)).toMatch(/frequency domain \(TypeScript spectral loops, full constraint/);
    const alt = buildFxlmsController({ ...long, implementation: 'fd', fdConstraint: 'alternating' }, model, 128, true);
    expect(describeImplementation(alt)).toMatch(/alternating constraint/);
    expect(buildFxlmsController({ ...long, implementation: 'js' }, model, 128, true).implementation).toBe('js');
    expect(() => buildFxlmsController({ ...long, implementation: 'wasm' }, model, 128, false)).toThrow(/needs WebAssembly SIMD/);
  });

  it('should describe each implementation in words for the panel and the CLI', () => {
    const model = new Float32Array([0, 0.5]);
    const words = FXLMS_IMPLEMENTATIONS.map((impl) => describeImplementation(createFxlmsController({ ...short, update: 'block' }, model, 128, impl, { wasmSimd: true })));
    expect(words[0]).toMatch(/time domain \(TypeScript, block update\)/);
    expect(words[1]).toMatch(/time domain \(wasm SIMD, block update\)/);
    expect(words[2]).toMatch(/frequency domain \(wasm SIMD spectral loops, full constraint, partition 128\)/);
  });
});
