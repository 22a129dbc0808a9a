/**
 * The engines the benchmarks run, shared by the Node benchmark (bench/engine-bench.ts) and the
 * AudioWorklet benchmark processor (bench/worklet-processor.ts): nothing here may use Node APIs.
 */
import { Engine } from '../src/engine/engine.ts';
import type { ControllerConfig } from '../src/engine/controller-factory.ts';
import { createFxlmsController, type FxlmsImplementation, type FxlmsImplementationSettings } from '../src/engine/implementation.ts';
import type { FxlmsConfig } from '../src/dsp/fxlms.ts';
import type { GradientConstraint } from '../src/dsp/fd-fxlms.ts';
import { Random } from '../src/dsp/random.ts';

export const SAMPLE_RATE = 48000;
export const BLOCK = 128;

/** What a bench row runs: an implementation and, for the frequency domain, its options. */
export interface Variant {
  name: string;
  implementation: FxlmsImplementation;
  update: 'sample' | 'block';
  constraint?: GradientConstraint;
  wasmSimd: boolean;
  note: string;
}

export const VARIANTS: Variant[] = [
  { name: 'js', implementation: 'js', update: 'sample', wasmSimd: false, note: 'TypeScript time domain (reference), per-sample update' },
  { name: 'wasm', implementation: 'wasm', update: 'sample', wasmSimd: true, note: 'wasm SIMD time domain, per-sample update' },
  { name: 'fd', implementation: 'fd', update: 'block', constraint: 'alternating', wasmSimd: true, note: 'partitioned FD, alternating constraint, wasm SIMD spectral loops' },
  { name: 'fd-full', implementation: 'fd', update: 'block', constraint: 'full', wasmSimd: true, note: 'partitioned FD, full constraint, wasm SIMD spectral loops' },
  { name: 'fd-js', implementation: 'fd', update: 'block', constraint: 'alternating', wasmSimd: false, note: 'partitioned FD, alternating constraint, TypeScript loops (no-SIMD fallback)' },
];

export function variantByName(name: string): Variant {
  const v = VARIANTS.find((x) => x.name === name);
  if (!v) throw new RangeError(`unknown implementation "${name}" (known: ${VARIANTS.map((x) => x.name).join(', ')})`);
  return v;
}

/** A decaying, oscillating secondary-path model of M taps with a bulk delay of one block. */
export function benchModel(M: number): Float32Array {
  const s = new Float32Array(M);
  const delay = Math.min(BLOCK, M - 1);
  for (let m = delay; m < M; m++) s[m] = 0.3 * Math.exp(-(m - delay) / (M / 6)) * Math.cos(0.05 * m);
  return s;
}

export type EngineHost = 'engine-factory' | 'engine-with-bench-controller';

/**
 * An engine running the variant, FxNLMS adapting with a small step. The engine builds its controller
 * through its factory; when the factory does not build the asked implementation (yet), the bench
 * puts its own controller in the engine's place.
 */
export function buildBenchEngine(v: Variant, L: number, M: number): { engine: Engine; host: EngineHost } {
  const config: FxlmsConfig = { algorithm: 'fxnlms', taps: L, stepSize: 1e-3, regularization: 1e-3, update: v.update };
  const model = benchModel(M);
  // the fields buildFxlmsController (src/engine/implementation.ts) reads; a factory that does not
  // know them yet ignores them
  const settings: FxlmsImplementationSettings = { implementation: v.implementation, ...(v.constraint ? { fdConstraint: v.constraint } : {}) };
  const engine = new Engine({ sampleRate: SAMPLE_RATE, maxBlockSize: BLOCK, controller: { ...config, ...settings } as ControllerConfig, secondaryPathModel: model, startMode: 'control', guard: false });
  const built = engine.controller as { implementation?: string; constraint?: string; kernel?: string };
  const builtName = built.implementation === 'fd' ? (built.constraint === 'full' ? 'fd-full' : built.kernel === 'js' ? 'fd-js' : 'fd') : (built.implementation ?? 'js');
  if (builtName === v.name) return { engine, host: 'engine-factory' };
  const c = createFxlmsController(config, model, BLOCK, v.implementation, { wasmSimd: v.wasmSimd, ...(v.constraint ? { constraint: v.constraint } : {}) });
  Object.defineProperty(engine, 'controller', { value: c });
  return { engine, host: 'engine-with-bench-controller' };
}

/** Precomputed stimulus blocks: reference noise and an independent error signal (open loop). */
export function benchStimulus(seed: number, blocks = 32): { refs: Float32Array[]; errs: Float32Array[] } {
  const rng = new Random(seed);
  const refs: Float32Array[] = [];
  const errs: Float32Array[] = [];
  for (let b = 0; b < blocks; b++) {
    const r = new Float32Array(BLOCK);
    const e = new Float32Array(BLOCK);
    rng.fillGaussian(r, 0.1);
    rng.fillGaussian(e, 0.01);
    refs.push(r);
    errs.push(e);
  }
  return { refs, errs };
}
