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

// WebAssembly: types/webassembly-core.d.ts (shared with the core's type check, tsconfig.core.json).
