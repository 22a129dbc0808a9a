/**
 * The embeddable controller node: the live engine (worklets/live-processor.ts) as an AudioWorkletNode
 * any Web Audio graph can hold, with the engine's smooth settings as AudioParams, the rest as
 * methods, and meters, events and state as typed listeners.
 *
 * Input: one input of two channels, channel 0 = reference mic, channel 1 = error mic (or the error mic
 * alone in the 'err-only' layout); `connectInputs(reference, error)` builds that from two nodes.
 * Output: one mono output, the control signal after the output stage (high-pass, ramp, limiter).
 *
 * Works with a native AudioContext and with a standardized-audio-context context: the second is
 * recognised by not being a native BaseAudioContext, and its own AudioWorkletNode class (loaded on
 * demand, the same module instance as the caller's) builds the node, so wrapped and native nodes
 * never mix. Telemetry is always posted on the node's port (no SharedArrayBuffer, so no
 * cross-origin isolation is needed).
 *
 * Nothing here runs at import time (the package declares `sideEffects: false`).
 */
import { EVENT_TEXT } from './event-words.ts';
import type { IAudioContext, IAudioParam, IAudioWorkletNode, IOfflineAudioContext } from 'standardized-audio-context';
import { Engine } from '../engine/engine.ts';
import { checkControllerSettings } from '../engine/settings.ts';
import type { ControllerConfig } from '../engine/controller-factory.ts';
import { LiveAnalysis, type IdentificationResult } from '../analysis/live-analysis.ts';
import {
  LIVE_PARAMETERS,
  MODE_CODES,
  M,
  checkProbe,
  decodeEvent,
  meterFrameToObject,
  type LiveProcessorOptions,
  type MeterField,
  type PanelEvent,
  type PanelMode,
  type ProbeSpec,
  type WorkletMessage,
} from '../protocol/messages.ts';
import { checkNodeOptions, engineController, modelTaps, type CheckedNodeOptions, type ControllerNodeOptions, type ControllerSettings } from './node-controller-options.ts';

/** Name the live processor registers under. */
export const CONTROLLER_PROCESSOR = 'ancbench-live';
/** The built worklet's file name, beside the package's web/index.js. */
export const LIVE_WORKLET_FILE = './ancbench-live-processor.js';

/**
 * Where the worklet is by default: beside this module once built. The library build writes the
 * literal `new URL('./ancbench-live-processor.js', import.meta.url)` here, which bundlers follow and
 * copy (vite.lib.config.ts); from the repository's sources, pass `workletUrl`.
 */
function defaultWorkletUrl(): string {
  return new URL(LIVE_WORKLET_FILE, import.meta.url).href;
}

/** A meter frame as named numbers (src/protocol/messages.ts METER_FIELDS), plus the mode's name. */
export type ControllerMeters = Readonly<Record<MeterField, number>> & {
  /** What the node does now. */
  readonly modeName: PanelMode;
  /** Tone follower, per harmonic k: `h${k}Hz`, `h${k}Before`, `h${k}After`, `h${k}PhaseDeg`, `h${k}AttDb` (NaN when absent). */
  readonly [harmonicField: `h${number}${string}`]: number;
};

/** An engine or host event, with its plain-language text. */
export type ControllerEvent = PanelEvent & { text: string };

/** What the node is doing: its engine's mode, or 'disposed'. */
export type ControllerNodeState = PanelMode | 'disposed';

export interface ControllerNodeEventMap {
  /** About `displayRateHz` frames per second. */
  meters: ControllerMeters;
  /** Guard, limiter, input and probe events, as they happen. */
  event: ControllerEvent;
  /** On every change of mode (control, idle, identify, …) and on dispose. */
  state: ControllerNodeState;
  /** A refusal or fault on the audio thread, or an input wired with the wrong channel count. */
  error: Error;
}

export type ControllerNodeListener<K extends keyof ControllerNodeEventMap> = (value: ControllerNodeEventMap[K]) => void;

/** Anything with a Web Audio `connect` (a native node, or a standardized-audio-context node of the same context). */
export interface ConnectableNode {
  connect(destination: never, output?: number, input?: number): unknown;
  disconnect(): void;
}

export interface IdentifyRequest {
  /** The sweep (default: 40 Hz … min(16 kHz, 0.45·fs), 1.5 s, peak 0.03 (−30 dBFS), 0.5 s tail). */
  probe?: Partial<ProbeSpec>;
  /** FIR taps of the model after the bulk delay (default 256). */
  firTaps?: number;
  /** Load the model when the measurement is usable (default true). */
  load?: boolean;
}

/** What a controller node adds to its AudioWorkletNode. P: the context's AudioParam type. */
export interface ControllerNodeApi<P> {
  /** Step size μ (k-rate; a change reaches the engine at its next block). Same range as `controller.stepSize`. */
  readonly stepSize: P;
  /** Leakage γ (k-rate). */
  readonly leakage: P;
  /** Output cap, dBFS sample peak (k-rate, −120 … 0). */
  readonly ceilingDbfs: P;
  readonly state: ControllerNodeState;
  /** What runs the controller (e.g. "time domain (wasm SIMD, sample update)"), as the audio thread reports it. */
  readonly implementation: string;
  /** True once a secondary-path model is loaded (options, loadModel or identify). */
  readonly hasModel: boolean;
  /** Control on (ramped in). Needs a model. */
  start(): void;
  /** Control off (ramped out); the weights are kept. */
  stop(): void;
  /** Clear the control filter's weights. */
  reset(): void;
  /** A new controller (same vocabulary as the options); the engine is rebuilt and its weights start again. */
  setController(controller: ControllerSettings): Promise<void>;
  /** A new secondary-path model (FIR taps at the context's rate). */
  loadModel(taps: ArrayLike<number>, sampleRate?: number): Promise<void>;
  /** Play a sweep through the output stage, measure the secondary path, and (by default) load the model. */
  identify(request?: IdentifyRequest): Promise<IdentificationResult>;
  /** Feed the reference mic to channel 0 and the error mic to channel 1 (reference may be null in 'err-only'); returns an undo. */
  connectInputs(reference: ConnectableNode | null, error: ConnectableNode): () => void;
  on<K extends keyof ControllerNodeEventMap>(type: K, listener: ControllerNodeListener<K>): () => void;
  off<K extends keyof ControllerNodeEventMap>(type: K, listener: ControllerNodeListener<K>): void;
  /** Ramp out, stop the audio thread, disconnect; every method afterwards throws. */
  dispose(): void;
  // Extension point: record(seconds) belongs here once recordings exist (the processor already has a
  // 'record' message; its reply 'recording' carries both microphones).
}

/** A controller node on a native context. */
export type ControllerNode = AudioWorkletNode & ControllerNodeApi<AudioParam>;
/** A controller node on a standardized-audio-context context. */
export type WrappedControllerNode<C extends IAudioContext | IOfflineAudioContext = IAudioContext> = IAudioWorkletNode<C> & ControllerNodeApi<IAudioParam>;

type AnyContext = BaseAudioContext | IAudioContext | IOfflineAudioContext;
type AnyWorkletNode = AudioWorkletNode | IAudioWorkletNode<IAudioContext | IOfflineAudioContext>;

const loaded = new WeakMap<object, Promise<void>>();

function isNativeContext(ctx: unknown): ctx is BaseAudioContext {
  return typeof BaseAudioContext !== 'undefined' && ctx instanceof BaseAudioContext;
}

/** Register the processor in a context, once per context. A failed load is forgotten, so a retry loads again. */
export function loadControllerWorklet(context: AnyContext, workletUrl?: string | URL): Promise<void> {
  let p = loaded.get(context);
  if (p) return p;
  const url = workletUrl === undefined ? defaultWorkletUrl() : String(workletUrl);
  const worklet = (context as { audioWorklet?: { addModule(u: string): Promise<void> } }).audioWorklet;
  if (!worklet) return Promise.reject(new Error('createControllerNode: this context has no audioWorklet (a secure page, http://localhost or https://, is needed; or the browser lacks AudioWorklet)'));
  p = worklet.addModule(url).catch((e: unknown) => {
    loaded.delete(context);
    throw new Error(
      `createControllerNode: could not load the controller worklet from ${url} (${(e as Error)?.message ?? String(e)}). ` +
        `Serve ancbench-live-processor.js from the package's web folder beside web/index.js, or pass options.workletUrl with its address.`,
    );
  });
  loaded.set(context, p);
  return p;
}

/** The default identification probe at a context's rate. */
export function defaultNodeProbe(sampleRate: number): ProbeSpec {
  return { startHz: 40, endHz: Math.min(16000, 0.45 * sampleRate), durationS: 1.5, amplitude: 0.03, tailS: 0.5 };
}

/** Build the engine the audio thread will build, here, so a refusal is an exception of createControllerNode. */
function checkEngine(o: CheckedNodeOptions, model: Float32Array, sampleRate: number): void {
  try {
    new Engine({ sampleRate, maxBlockSize: o.maxQuantum, controller: o.controller, secondaryPathModel: model, ceilingDbfs: o.ceilingDbfs, rampMs: o.rampMs });
  } catch (e) {
    const msg = (e as Error).message;
    if (/^sampleRate/.test(msg)) {
      throw new RangeError(
        `createControllerNode: the context runs at ${sampleRate} Hz, which the engine refuses (${msg}). ` +
          `Create the context with a rate it takes, e.g. new AudioContext({ sampleRate: 48000 }).`,
      );
    }
    throw new RangeError(`createControllerNode: the engine refuses these settings at ${sampleRate} Hz: ${msg}`);
  }
}

/**
 * Create the controller node on a context: loads the worklet (once per context), checks the options
 * against the settings tables and the engine, and resolves once the audio thread has built its engine.
 * The node starts idle (silent output); call `start()` to control.
 */
export function createControllerNode<C extends IAudioContext | IOfflineAudioContext>(context: C, options: ControllerNodeOptions): Promise<WrappedControllerNode<C>>;
export function createControllerNode(context: BaseAudioContext, options: ControllerNodeOptions): Promise<ControllerNode>;
export async function createControllerNode(context: AnyContext, options: ControllerNodeOptions): Promise<ControllerNode | WrappedControllerNode<IAudioContext>> {
  const o = checkNodeOptions(options);
  const rate = context.sampleRate;
  const model = o.secondaryPathModel ?? new Float32Array(1);
  checkEngine(o, model, rate);
  await loadControllerWorklet(context, o.workletUrl ?? undefined);
  const processorOptions: LiveProcessorOptions = {
    controller: o.controller,
    secondaryPathModel: model,
    ceilingDbfs: o.ceilingDbfs,
    rampMs: o.rampMs,
    startMode: 'idle',
    inputLayout: o.inputLayout,
    maxQuantum: o.maxQuantum,
    telemetry: { displayRateHz: o.displayRateHz, chunkSamples: 0 },
  };
  const c = o.controller;
  const nodeOptions = {
    numberOfInputs: 1,
    numberOfOutputs: 1,
    outputChannelCount: [1],
    // up to two channels, never mixed by speaker rules; a mono source arrives as one channel, which
    // the processor reports ('channel-count') and this node turns into an 'error'
    channelCount: 2,
    channelCountMode: 'clamped-max' as const,
    channelInterpretation: 'discrete' as const,
    parameterData: { stepSize: c.stepSize, leakage: c.leakage ?? 0, ceilingDbfs: o.ceilingDbfs },
    processorOptions,
  };
  let node: AnyWorkletNode;
  if (isNativeContext(context)) node = new AudioWorkletNode(context, CONTROLLER_PROCESSOR, nodeOptions);
  else {
    const sac = await import('standardized-audio-context');
    const Wrapped = sac.AudioWorkletNode;
    if (!sac.isAnyAudioContext(context) || !Wrapped) {
      throw new TypeError('createControllerNode: context must be a native AudioContext/OfflineAudioContext or one made by standardized-audio-context');
    }
    node = new Wrapped(context, CONTROLLER_PROCESSOR, nodeOptions);
  }
  const api = new NodeApi(node, o, rate, o.secondaryPathModel !== null);
  await api.ready;
  return Object.defineProperties(node, api.descriptors()) as unknown as ControllerNode;
}

interface Waiter {
  type: WorkletMessage['type'];
  resolve(m: WorkletMessage): void;
  reject(e: Error): void;
  timer: ReturnType<typeof setTimeout>;
}

/** The state and methods behind a node (kept off the node object; the node gets accessors to them). */
class NodeApi {
  readonly ready: Promise<void>;
  state: ControllerNodeState = 'idle';
  implementation = '';
  hasModel: boolean;
  private controller: ControllerConfig;
  private model: Float32Array;
  private disposed = false;
  private waiters: Waiter[] = [];
  private inputs: (() => void)[] = [];
  private readonly listeners: { [K in keyof ControllerNodeEventMap]: Set<ControllerNodeListener<K>> } = {
    meters: new Set(),
    event: new Set(),
    state: new Set(),
    error: new Set(),
  };

  constructor(
    private readonly node: AnyWorkletNode,
    private readonly o: CheckedNodeOptions,
    private readonly sampleRate: number,
    hasModel: boolean,
  ) {
    this.controller = o.controller;
    this.model = o.secondaryPathModel ?? new Float32Array(1);
    this.hasModel = hasModel;
    this.ready = this.wait('ready', 10000).then(() => undefined);
    node.port.onmessage = (e: MessageEvent) => this.onMessage(e.data as WorkletMessage);
    node.onprocessorerror = () => this.emit('error', new Error('the controller processor stopped with an error; dispose() this node and create a new one'));
  }

  private emit<K extends keyof ControllerNodeEventMap>(type: K, value: ControllerNodeEventMap[K]): void {
    for (const l of this.listeners[type]) (l as ControllerNodeListener<K>)(value);
  }

  private onMessage(m: WorkletMessage): void {
    if (this.disposed) return;
    if (m.type === 'meters') {
      const values = meterFrameToObject(m.frame);
      const modeName = MODE_CODES[m.frame[M.mode]!] ?? 'idle';
      if (modeName !== this.state) {
        this.state = modeName;
        this.emit('state', modeName);
      }
      if (this.listeners.meters.size) this.emit('meters', { ...values, modeName } as unknown as ControllerMeters);
      return;
    }
    if (m.type === 'event') {
      const ev = decodeEvent(m.record);
      this.emit('event', { ...ev, text: EVENT_TEXT[ev.cause] });
      if (ev.cause === 'channel-count') {
        this.emit(
          'error',
          new Error(
            `the controller node's input carries ${ev.values.received} channel; it needs ${ev.values.expected} (channel 0 reference mic, channel 1 error mic). ` +
              `Connect both with node.connectInputs(reference, error) or a ChannelMergerNode, or create the node with inputLayout: 'err-only'.`,
          ),
        );
      }
      return;
    }
    if (m.type === 'ready' || m.type === 'configured' || m.type === 'switched') this.implementation = m.implementation;
    if (m.type === 'error') {
      const err = new Error(`controller node: ${m.message}`);
      const pending = this.waiters.splice(0);
      for (const w of pending) {
        clearTimeout(w.timer);
        w.reject(err);
      }
      if (!pending.length) this.emit('error', err);
      return;
    }
    const rest: Waiter[] = [];
    for (const w of this.waiters) {
      if (w.type === m.type) {
        clearTimeout(w.timer);
        w.resolve(m);
      } else rest.push(w);
    }
    this.waiters = rest;
  }

  private wait(type: WorkletMessage['type'], timeoutMs: number): Promise<WorkletMessage> {
    return new Promise((resolve, reject) => {
      const w: Waiter = {
        type,
        resolve,
        reject,
        timer: setTimeout(() => {
          this.waiters = this.waiters.filter((x) => x !== w);
          reject(new Error(`controller node: no "${type}" from the audio thread within ${timeoutMs / 1000} s; is the AudioContext running (context.resume() after a user gesture)?`));
        }, timeoutMs),
      };
      this.waiters.push(w);
    });
  }

  private alive(method: string): void {
    if (this.disposed) throw new Error(`controller node: ${method}() after dispose(); create a new node with createControllerNode(context, options)`);
  }

  private post(message: unknown, transfer: Transferable[] = []): void {
    this.node.port.postMessage(message, transfer);
  }

  start(): void {
    this.alive('start');
    if (!this.hasModel) throw new Error('controller node: start() needs a secondary-path model: pass options.secondaryPathModel, call loadModel(taps) or identify() first');
    this.post({ type: 'set-mode', mode: 'control' });
  }

  stop(): void {
    this.alive('stop');
    this.post({ type: 'set-mode', mode: 'idle' });
  }

  reset(): void {
    this.alive('reset');
    this.post({ type: 'reset-weights' });
  }

  private async configure(controller: ControllerConfig, model: Float32Array): Promise<void> {
    checkEngine({ ...this.o, controller }, model, this.sampleRate);
    const startMode = this.state === 'control' ? 'control' : 'idle';
    const done = this.wait('configured', 10000);
    this.post({ type: 'configure', controller, secondaryPathModel: model, startMode });
    await done;
    this.controller = controller;
    this.model = model;
  }

  async setController(controller: ControllerSettings): Promise<void> {
    this.alive('setController');
    checkControllerSettings(controller, 'controller.');
    await this.configure(engineController(controller), this.model);
  }

  async loadModel(taps: ArrayLike<number>, sampleRate?: number): Promise<void> {
    this.alive('loadModel');
    if (sampleRate !== undefined && sampleRate !== this.sampleRate) {
      throw new RangeError(`loadModel: the model is at ${sampleRate} Hz but the context runs at ${this.sampleRate} Hz; resample it first (resamplePathModel in the package's main entry)`);
    }
    const m = modelTaps('taps', taps);
    if (typeof m === 'string') throw new RangeError(`loadModel: ${m}`);
    await this.configure(this.controller, m);
    this.hasModel = true;
  }

  async identify(request: IdentifyRequest = {}): Promise<IdentificationResult> {
    this.alive('identify');
    const probe = checkProbe({ ...defaultNodeProbe(this.sampleRate), ...(request.probe ?? {}) }, this.sampleRate);
    const timeoutMs = 1000 * (probe.durationS + probe.tailS + this.o.rampMs / 500 + 5);
    const got = this.wait('identify-recording', timeoutMs);
    this.post({ type: 'identify', probe });
    const rec = (await got) as Extract<WorkletMessage, { type: 'identify-recording' }>;
    const result = new LiveAnalysis().identify(rec, { firTaps: request.firTaps ?? 256 });
    if (request.load !== false && result.usable) await this.loadModel(result.model);
    return result;
  }

  connectInputs(reference: ConnectableNode | null, error: ConnectableNode): () => void {
    this.alive('connectInputs');
    const ctx = this.node.context as { createChannelMerger(n: number): ConnectableNode };
    const merger = ctx.createChannelMerger(2);
    const connect = (from: ConnectableNode, input: number): void => {
      (from.connect as (d: unknown, o: number, i: number) => unknown)(merger, 0, input);
    };
    if (this.o.inputLayout === 'err-only') connect(error, 0);
    else {
      if (!reference) throw new TypeError("connectInputs: a reference node is needed in the 'ref-err' layout (or create the node with inputLayout: 'err-only')");
      connect(reference, 0);
      connect(error, 1);
    }
    (merger.connect as (d: unknown) => unknown)(this.node);
    const undo = (): void => {
      merger.disconnect();
      this.inputs = this.inputs.filter((u) => u !== undo);
    };
    this.inputs.push(undo);
    return undo;
  }

  on<K extends keyof ControllerNodeEventMap>(type: K, listener: ControllerNodeListener<K>): () => void {
    this.alive('on');
    const set = this.listeners[type] as Set<ControllerNodeListener<K>> | undefined;
    if (!set) throw new RangeError(`on: type must be one of ${Object.keys(this.listeners).map((k) => `"${k}"`).join(', ')}, got ${String(type)}`);
    set.add(listener);
    return () => this.off(type, listener);
  }

  off<K extends keyof ControllerNodeEventMap>(type: K, listener: ControllerNodeListener<K>): void {
    (this.listeners[type] as Set<ControllerNodeListener<K>> | undefined)?.delete(listener);
  }

  dispose(): void {
    if (this.disposed) return;
    this.post({ type: 'shutdown' });
    for (const undo of [...this.inputs]) undo();
    for (const w of this.waiters.splice(0)) {
      clearTimeout(w.timer);
      w.reject(new Error('controller node: disposed while waiting for the audio thread'));
    }
    this.state = 'disposed';
    this.emit('state', 'disposed');
    this.disposed = true;
    for (const set of Object.values(this.listeners)) set.clear();
    // the processor ramps out and returns false; disconnecting now would cut the ramp, so wait for it
    const node = this.node;
    setTimeout(() => {
      node.disconnect();
      node.port.close();
    }, this.o.rampMs + 100);
  }

  /** Accessors and methods the node object gets. */
  descriptors(): PropertyDescriptorMap {
    const params = this.node.parameters as unknown as { get(name: string): unknown };
    const d: PropertyDescriptorMap = {};
    for (const p of LIVE_PARAMETERS) {
      const param = params.get(p.name);
      d[p.name] = { get: () => param, enumerable: true };
    }
    d.state = { get: () => this.state, enumerable: true };
    d.implementation = { get: () => this.implementation, enumerable: true };
    d.hasModel = { get: () => this.hasModel, enumerable: true };
    for (const m of ['start', 'stop', 'reset', 'setController', 'loadModel', 'identify', 'connectInputs', 'on', 'off', 'dispose'] as const) {
      d[m] = { value: (this[m] as (...a: unknown[]) => unknown).bind(this) };
    }
    return d;
  }
}
