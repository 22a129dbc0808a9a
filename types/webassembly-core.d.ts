// For hosts typed without the DOM library (the AudioWorklet scope, the pure core's check).
// The JavaScript WebAssembly API exists in AudioWorkletGlobalScope (it is part of the language host,
// not of the DOM), but TypeScript declares it only in the DOM and worker libraries. The part the
// FxLMS kernels use (src/dsp/wasm-module.ts):
declare namespace WebAssembly {
  class Module {
    constructor(bytes: BufferSource);
  }
  class Instance {
    constructor(module: Module, importObject?: Record<string, unknown>);
    readonly exports: Record<string, unknown>;
  }
  class Memory {
    readonly buffer: ArrayBuffer;
  }
  function validate(bytes: BufferSource): boolean;
}
type BufferSource = ArrayBufferView | ArrayBuffer;
