/**
 * The globals of the AudioWorkletGlobalScope that our processors use (TypeScript ships no library for
 * this scope, and the DOM library would let code use globals the scope lacks).
 */
interface WorkletMessageEvent {
  readonly data: unknown;
}

interface WorkletPort {
  postMessage(message: unknown, transfer?: ArrayBuffer[]): void;
  onmessage: ((event: WorkletMessageEvent) => void) | null;
  close(): void;
}

interface WorkletNodeOptions {
  numberOfInputs?: number;
  numberOfOutputs?: number;
  outputChannelCount?: number[];
  processorOptions?: unknown;
  parameterData?: Record<string, number>;
}

declare abstract class AudioWorkletProcessor {
  readonly port: WorkletPort;
  constructor(options?: WorkletNodeOptions);
}

declare function registerProcessor(
  name: string,
  processorCtor: new (options: WorkletNodeOptions) => AudioWorkletProcessor & {
    process(inputs: Float32Array[][], outputs: Float32Array[][], parameters: Record<string, Float32Array>): boolean;
  },
): void;

/** Sample rate of the context, Hz. */
declare const sampleRate: number;
/** Context time of the block being processed, s. */
declare const currentTime: number;
/** Frame index of the block being processed. */
declare const currentFrame: number;

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
