import { FXLMS_WASM_BASE64 } from './fxlms-wasm-bytes.ts';

/**
 * Loading the WebAssembly SIMD kernels (asm/fxlms.ts, embedded by scripts/build-wasm.mjs).
 *
 * The bytes are compiled synchronously (`new WebAssembly.Module`), which works in Node, in workers
 * and inside an AudioWorklet, where there is no fetch and no await in `process`. A host that already
 * holds a compiled module (for example one passed through `processorOptions`) hands it to
 * `useFxlmsWasmModule` instead. The module has no imports; each controller instantiates it once, so
 * each has its own linear memory.
 */

/** The kernel exports, as asm/fxlms.ts declares them (pointers are byte offsets into `memory`). */
export interface FxlmsKernelExports {
  readonly memory: WebAssembly.Memory;
  heapBase(): number;
  reserve(bytes: number): number;
  tdInit(taps: number, modelTaps: number, blockSize: number): number;
  tdWeights(): number;
  tdModel(): number;
  tdRef(): number;
  tdErr(): number;
  tdOut(): number;
  tdParams(): number;
  tdPaddedTaps(): number;
  tdPaddedModelTaps(): number;
  tdEnergy(): number;
  tdReset(): void;
  tdResetWeights(): void;
  tdWeightNormSquared(): number;
  tdProcess(n: number, adapt: number, normalized: number, blockUpdate: number): void;
  cmacPartitions(accR: number, accI: number, hR: number, hI: number, xR: number, xI: number, K: number, head: number, KX: number, bins: number): void;
  packPair(z: number, aR: number, aI: number, bR: number, bI: number, P: number): void;
  unpackPair(z: number, aR: number, aI: number, bR: number, bI: number, P: number): void;
  unpackReal(z: number, dR: number, dI: number, P: number): void;
  cupdateUnconstrained(wR: number, wI: number, fR: number, fI: number, eR: number, eI: number, K: number, fHead: number, bins: number, P: number, lossPtr: number, norms: number): void;
  tpBlockMax(win: number, coef: number, n: number, out: number): void;
}

const B64 = 'ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/';

/** Decode standard base64 (RFC 4648 §4) without atob or Buffer, which an AudioWorklet scope may lack. */
export function decodeBase64(text: string): Uint8Array {
  const lookup = new Int16Array(128).fill(-1);
  for (let i = 0; i < B64.length; i++) lookup[B64.charCodeAt(i)] = i;
  let len = text.length;
  while (len > 0 && text[len - 1] === '=') len--;
  const out = new Uint8Array(Math.floor((len * 3) / 4));
  let acc = 0;
  let bits = 0;
  let o = 0;
  for (let i = 0; i < len; i++) {
    const c = text.charCodeAt(i);
    const v = c < 128 ? lookup[c]! : -1;
    if (v < 0) throw new RangeError(`invalid base64 character at ${i}`);
    acc = (acc << 6) | v;
    bits += 6;
    if (bits >= 8) {
      bits -= 8;
      out[o++] = (acc >> bits) & 0xff;
    }
  }
  return out;
}

let bytes: Uint8Array | null = null;
let compiled: WebAssembly.Module | null = null;
let simd: boolean | null = null;

/** The kernel module's bytes (decoded once). */
export function fxlmsWasmBytes(): Uint8Array {
  if (!bytes) bytes = decodeBase64(FXLMS_WASM_BASE64);
  return bytes;
}

/**
 * Whether this platform runs the kernels: WebAssembly exists, validates the module (which uses
 * 128-bit SIMD, so validation is the feature test) and may compile it: a page whose
 * Content-Security-Policy lacks 'wasm-unsafe-eval' validates but refuses to compile, and then the
 * TypeScript implementations run instead.
 */
export function wasmSimdSupported(): boolean {
  if (simd === null) {
    try {
      simd = typeof WebAssembly === 'object' && WebAssembly.validate(fxlmsWasmBytes() as BufferSource);
      if (simd && !compiled) compiled = new WebAssembly.Module(fxlmsWasmBytes() as BufferSource);
    } catch {
      simd = false;
    }
  }
  return simd;
}

/** Use an already compiled module (e.g. received through AudioWorkletNode processorOptions). */
export function useFxlmsWasmModule(module: WebAssembly.Module): void {
  compiled = module;
  simd = true;
}

/** The compiled kernel module (compiled synchronously on first use, then cached). */
export function fxlmsWasmModule(): WebAssembly.Module {
  if (!compiled) {
    if (!wasmSimdSupported()) throw new Error('WebAssembly SIMD is not available on this platform');
    compiled = new WebAssembly.Module(fxlmsWasmBytes() as BufferSource);
  }
  return compiled;
}

/** A fresh instance of the kernels with its own memory. */
export function instantiateFxlmsKernels(module: WebAssembly.Module = fxlmsWasmModule()): FxlmsKernelExports {
  const instance = new WebAssembly.Instance(module, {});
  return instance.exports as unknown as FxlmsKernelExports;
}
