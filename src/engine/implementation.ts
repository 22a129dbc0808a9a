import type { Controller } from '../dsp/controller.ts';
import { FD_MAX_PARTITION, FdFxlmsController, type GradientConstraint } from '../dsp/fd-fxlms.ts';
import { FxlmsController, type FxlmsConfig } from '../dsp/fxlms.ts';
import { WasmFxlmsController } from '../dsp/wasm-fxlms.ts';
import { wasmSimdSupported } from '../dsp/wasm-module.ts';

/**
 * Which code runs an FxLMS / FxNLMS controller. All three compute the equations of src/dsp/fxlms.ts:
 *
 * - 'js'   the TypeScript time-domain reference (per-sample or block update); runs everywhere.
 * - 'wasm' the same time-domain algorithm in the WebAssembly SIMD kernel (needs WebAssembly SIMD).
 * - 'fd'   partitioned frequency-domain FxLMS (block update only; partition = block size, a power of
 *          two): its spectral loops run in the WebAssembly SIMD kernel when the platform has it, in
 *          TypeScript otherwise.
 *
 * The automatic choice keeps the reference behaviour: the wasm SIMD time domain wherever SIMD runs,
 * else the frequency domain with the full gradient constraint (exactly block LMS) for long filters;
 * an explicit `update: 'sample'` keeps the time domain at any length. The alternating constraint,
 * faster but slower to converge, is chosen only by `fdConstraint: 'alternating'`.
 */
export type FxlmsImplementation = 'js' | 'wasm' | 'fd';
export type ImplementationRequest = FxlmsImplementation | 'auto';

export const FXLMS_IMPLEMENTATIONS: readonly FxlmsImplementation[] = ['js', 'wasm', 'fd'];

/**
 * FD_THRESHOLD_TAPS_JS: taps (L + M) from which the automatic choice takes the frequency domain when
 * WebAssembly SIMD is missing. FD_THRESHOLD_TAPS_WASM: where the alternating FD path overtakes the
 * SIMD time domain (kept for users choosing by hand; the automatic choice no longer uses it). From `npm run bench` on
 * the project's 2-core machines (48 kHz, block 128, controller alone, 2026-12-02): with SIMD the
 * time-domain kernel and the FD path tie at (L, M) = (512, 256) (167x and 173x real time) and the FD
 * path is ahead from there on ((1024, 512): 100x against 172x), so the time domain, which keeps the
 * per-sample update, is kept up to L + M = 1023. Without SIMD the FD path in TypeScript is already
 * far ahead at (256, 128) (318x against 24x); the smallest filters stay in the time domain.
 */
export const FD_THRESHOLD_TAPS_WASM = 1024;
export const FD_THRESHOLD_TAPS_JS = 384;

export interface PlatformInfo {
  /** Whether WebAssembly SIMD runs here (see wasmSimdSupported in src/dsp/wasm-module.ts). */
  wasmSimd: boolean;
  /** The user's choice; absent or 'auto' lets the lengths decide. */
  force?: ImplementationRequest | undefined;
  /** Secondary-path model length M (taps); default: the control filter length. */
  modelTaps?: number | undefined;
  /** The engine's maximum block size; the FD path needs a power of two. Default 128. */
  maxBlockSize?: number | undefined;
}

function isPow2Block(n: number): boolean {
  return Number.isInteger(n) && n >= 2 && n <= FD_MAX_PARTITION && (n & (n - 1)) === 0;
}

/**
 * Pick the implementation for a controller configuration on a platform. A forced choice the platform
 * or the configuration cannot honour is refused with a message naming the field and the reason.
 */
export function chooseFxlmsImplementation(config: FxlmsConfig, platform: PlatformInfo): FxlmsImplementation {
  const force = platform.force ?? 'auto';
  const block = platform.maxBlockSize ?? 128;
  const fdBlocker =
    config.update === 'sample'
      ? 'controller.update is "sample" and the frequency-domain FxLMS updates once per block'
      : !isPow2Block(block)
        ? `the frequency-domain FxLMS needs a block size that is a power of two from 2 to ${FD_MAX_PARTITION}, got ${block}`
        : null;
  switch (force) {
    case 'js':
      return 'js';
    case 'wasm':
      if (!platform.wasmSimd) throw new RangeError('controller.implementation "wasm" needs WebAssembly SIMD, which this platform does not have (use "js" or "auto")');
      return 'wasm';
    case 'fd':
      if (fdBlocker) throw new RangeError(`controller.implementation "fd" cannot run here: ${fdBlocker}`);
      return 'fd';
    case 'auto': {
      // Exact reference behaviour first: the wasm SIMD time-domain kernel computes the same per-sample
      // (or block) update as src/dsp/fxlms.ts and, through the whole engine, is the fastest exact option
      // at every size benchmarked. Without SIMD the frequency-domain path (full constraint, exactly block
      // LMS) takes over from FD_THRESHOLD_TAPS_JS taps. The alternating constraint is faster still but
      // converges more slowly with many partitions (room demo: 8.2 against 13.5 dB after 15 s), so it is
      // used only when asked for.
      if (platform.wasmSimd) return 'wasm';
      const total = config.taps + (platform.modelTaps ?? config.taps);
      if (!fdBlocker && total >= FD_THRESHOLD_TAPS_JS) return 'fd';
      return 'js';
    }
    default: {
      const bad: never = force;
      throw new RangeError(`controller.implementation must be one of "auto", "js", "wasm", "fd", got ${String(bad)}`);
    }
  }
}

export interface CreateOptions {
  /** FD gradient constraint (default 'full'). */
  constraint?: GradientConstraint;
  /** Whether the FD path may use the wasm kernel; default: wasmSimdSupported(). */
  wasmSimd?: boolean;
}

/** A controller together with the name of the code that runs it. */
export type ImplementedController = Controller & { readonly implementation: FxlmsImplementation };

/** Build the controller for an implementation chosen by chooseFxlmsImplementation. */
export function createFxlmsController(
  config: FxlmsConfig,
  secondaryPathModel: Float32Array,
  maxBlockSize: number,
  implementation: FxlmsImplementation,
  options: CreateOptions = {},
): ImplementedController {
  switch (implementation) {
    case 'js': {
      const c = new FxlmsController(config, secondaryPathModel, maxBlockSize);
      return Object.assign(c, { implementation: 'js' as const });
    }
    case 'wasm':
      return new WasmFxlmsController(config, secondaryPathModel, maxBlockSize);
    case 'fd': {
      const simd = options.wasmSimd ?? wasmSimdSupported();
      return new FdFxlmsController(config, secondaryPathModel, maxBlockSize, {
        ...(options.constraint ? { constraint: options.constraint } : {}),
        kernel: simd ? 'wasm' : 'js',
      });
    }
    default: {
      const bad: never = implementation;
      throw new RangeError(`unknown FxLMS implementation ${String(bad)}`);
    }
  }
}

/** The implementation fields a scenario's FxLMS controller may carry (see the scenario schema). */
export interface FxlmsImplementationSettings {
  /** 'auto' (default) lets filter lengths and platform decide; the others force a choice. */
  implementation?: ImplementationRequest | undefined;
  /** Gradient constraint of the frequency-domain path (default 'full'). */
  fdConstraint?: GradientConstraint | undefined;
}

/**
 * Choose and build in one step: what the engine's controller factory calls for 'fxlms' / 'fxnlms'.
 * `wasmSimd` defaults to what this platform supports.
 */
export function buildFxlmsController(
  config: FxlmsConfig & FxlmsImplementationSettings,
  secondaryPathModel: Float32Array,
  maxBlockSize: number,
  wasmSimd: boolean = wasmSimdSupported(),
): ImplementedController {
  const implementation = chooseFxlmsImplementation(config, { wasmSimd, force: config.implementation, modelTaps: secondaryPathModel.length, maxBlockSize });
  return createFxlmsController(config, secondaryPathModel, maxBlockSize, implementation, { wasmSimd, ...(config.fdConstraint ? { constraint: config.fdConstraint } : {}) });
}

/** A short human description for the panel and the CLI summary, e.g. "frequency domain (wasm SIMD, alternating constraint)". */
export function describeImplementation(c: Controller): string {
  if (c instanceof FdFxlmsController) {
    return `frequency domain (${c.kernel === 'wasm' ? 'wasm SIMD' : 'TypeScript'} spectral loops, ${c.constraint} constraint, partition ${c.partitionSize})`;
  }
  if (c instanceof WasmFxlmsController) return `time domain (wasm SIMD, ${c.update} update)`;
  if (c instanceof FxlmsController) return `time domain (TypeScript, ${c.update} update)`;
  return c.kind;
}
