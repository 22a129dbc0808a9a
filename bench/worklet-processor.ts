/**
 * The AudioWorklet side of `npm run bench -- --worklet`: an engine like the Node benchmark's, run by
 * a real-time AudioContext, timing its own `process` calls. The scope has no `performance.now()`, so
 * each call is timed with Date.now(): at 1 ms resolution one reading is 0 or 1 ms, but with the call's
 * start at a random phase of the millisecond its mean is the true duration, and over tens of
 * thousands of render quanta the average is good to a few microseconds.
 *
 * Bundled by bench/worklet-run.ts; registers one processor and exports nothing.
 */
import { buildBenchEngine, benchStimulus, variantByName } from './bench-engine.ts';

// The globals of the AudioWorkletGlobalScope this file uses (there is no TypeScript library for it).
declare abstract class AudioWorkletProcessor {
  readonly port: { postMessage(message: unknown): void };
  constructor(options?: unknown);
}
declare function registerProcessor(name: string, ctor: new (options: { processorOptions?: unknown }) => AudioWorkletProcessor): void;

interface BenchOptions {
  variant: string;
  taps: number;
  modelTaps: number;
  /** Post the running totals every this many quanta. */
  reportEvery: number;
}

class EngineBenchProcessor extends AudioWorkletProcessor {
  private readonly engine;
  private readonly refs: Float32Array[];
  private readonly errs: Float32Array[];
  private readonly y: Float32Array;
  private readonly reportEvery: number;
  private quanta = 0;
  private busyMs = 0;
  private k = 0;

  constructor(options: { processorOptions?: unknown }) {
    super(options);
    const o = options.processorOptions as BenchOptions;
    const { engine, host } = buildBenchEngine(variantByName(o.variant), o.taps, o.modelTaps);
    this.engine = engine;
    const s = benchStimulus(o.taps * 31 + o.modelTaps);
    this.refs = s.refs;
    this.errs = s.errs;
    this.y = new Float32Array(4096);
    this.reportEvery = o.reportEvery;
    this.port.postMessage({ type: 'ready', host });
  }

  process(_inputs: Float32Array[][], outputs: Float32Array[][]): boolean {
    const t0 = Date.now();
    const out = outputs[0]![0]!;
    const n = out.length;
    const k = this.k;
    this.engine.process(this.refs[k]!, this.errs[k]!, this.y, n);
    this.k = k + 1 === this.refs.length ? 0 : k + 1;
    out.fill(0); // the loudspeaker stays silent: the output only has to be computed
    this.busyMs += Date.now() - t0;
    if (++this.quanta % this.reportEvery === 0) this.port.postMessage({ type: 'totals', quanta: this.quanta, busyMs: this.busyMs, quantum: n });
    return true;
  }
}

registerProcessor('ancbench-engine-bench', EngineBenchProcessor);
