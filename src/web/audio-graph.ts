/**
 * Audio-graph pieces, built with standardized-audio-context only (its wrapped nodes never meet
 * native ones). The worklet bundles are imported as URLs (`?worker&url`): each is one
 * self-contained script that the wrapper's loader fetches and registers.
 */
import {
  AudioContext,
  AudioWorkletNode,
  ChannelMergerNode,
  ChannelSplitterNode,
  GainNode,
  MediaStreamAudioSourceNode,
  type IAudioContext,
  type IAudioNode,
  type IAudioWorkletNode,
  type IOfflineAudioContext,
} from 'standardized-audio-context';
import liveProcessorUrl from '../../worklets/live-processor.ts?worker&url';
import simProcessorUrl from '../../worklets/sim-processor.ts?worker&url';
import {
  TelemetryReader,
  createTelemetryBuffer,
  decodeEvent,
  type LiveProcessorOptions,
  type PanelEvent,
  type SimProcessorOptions,
  type TelemetryOptions,
  type WorkletMessage,
} from '../protocol/messages.ts';
import type { OpenedInputs } from './devices.ts';

export type AnyContext = IAudioContext | IOfflineAudioContext;

export const LIVE_PROCESSOR = 'ancbench-live';
export const SIM_PROCESSOR = 'ancbench-sim';
export { liveProcessorUrl, simProcessorUrl };

const loaded = new WeakMap<object, Promise<void>>();

/** Register both processors in a context (once per context). */
export function loadWorklets(ctx: AnyContext): Promise<void> {
  let p = loaded.get(ctx);
  if (!p) {
    const w = ctx.audioWorklet;
    if (!w) return Promise.reject(new Error('this browser has no AudioWorklet'));
    p = Promise.all([w.addModule(liveProcessorUrl), w.addModule(simProcessorUrl)]).then(() => undefined);
    loaded.set(ctx, p);
  }
  return p;
}

/**
 * A context for live use runs at the device's rate (never forced); a simulated plant runs at its
 * scenario's rate so the run matches the command-line simulator sample for sample.
 */
export async function openContext(sampleRate?: number): Promise<IAudioContext> {
  const ctx = new AudioContext({ latencyHint: 'interactive', ...(sampleRate ? { sampleRate } : {}) });
  await loadWorklets(ctx);
  return ctx;
}

/** True when meters can travel through a SharedArrayBuffer (cross-origin isolated page). */
export function sharedTelemetryAvailable(): boolean {
  return typeof SharedArrayBuffer !== 'undefined' && globalThis.crossOriginIsolated === true;
}

/** Display-rate meter frames and events from a worklet, by ring or by posted messages. */
export class TelemetryChannel {
  readonly kind: 'shared' | 'posted';
  readonly options: TelemetryOptions;
  private reader: TelemetryReader | null = null;
  private readonly frames: Float64Array[] = [];
  private readonly records: Float64Array[] = [];
  /** Other messages from the worklet. */
  onMessage: (m: WorkletMessage) => void = () => {};

  constructor(displayRateHz = 30, chunkSamples = 4096, forcePosted = false) {
    const shared = !forcePosted && sharedTelemetryAvailable();
    this.kind = shared ? 'shared' : 'posted';
    this.options = { displayRateHz, chunkSamples, ...(shared ? { sharedBuffer: createTelemetryBuffer() } : {}) };
  }

  attach(node: IAudioWorkletNode<AnyContext>): void {
    if (this.options.sharedBuffer) this.reader = new TelemetryReader(this.options.sharedBuffer);
    node.port.onmessage = (e: MessageEvent) => {
      const m = e.data as WorkletMessage;
      if (m.type === 'meters') {
        if (this.frames.length < 256) this.frames.push(m.frame);
      } else if (m.type === 'event') {
        if (this.records.length < 256) this.records.push(m.record);
      } else this.onMessage(m);
    };
  }

  /** Deliver every frame and event that arrived since the last call. */
  poll(onFrame: (f: Float64Array) => void, onEvent: (e: PanelEvent) => void): void {
    if (this.reader) {
      this.reader.poll(onFrame, (r) => onEvent(decodeEvent(r)));
      return;
    }
    for (const f of this.frames) onFrame(f);
    this.frames.length = 0;
    for (const r of this.records) onEvent(decodeEvent(r));
    this.records.length = 0;
  }
}

function workletNodeClass(): NonNullable<typeof AudioWorkletNode> {
  if (!AudioWorkletNode) throw new Error('this browser has no AudioWorklet');
  return AudioWorkletNode;
}

export function createSimNode(ctx: AnyContext, options: SimProcessorOptions): IAudioWorkletNode<AnyContext> {
  const AudioWorkletNode = workletNodeClass();
  return new AudioWorkletNode(ctx, SIM_PROCESSOR, {
    numberOfInputs: 0,
    numberOfOutputs: 1,
    outputChannelCount: [1],
    processorOptions: options,
  });
}

export function createLiveNode(ctx: AnyContext, options: LiveProcessorOptions): IAudioWorkletNode<AnyContext> {
  const AudioWorkletNode = workletNodeClass();
  return new AudioWorkletNode(ctx, LIVE_PROCESSOR, {
    numberOfInputs: 1,
    numberOfOutputs: 1,
    outputChannelCount: [1],
    // exactly two channels, never up- or down-mixed by speaker rules: channel 0 reference, 1 error
    channelCount: 2,
    channelCountMode: 'explicit',
    channelInterpretation: 'discrete',
    processorOptions: options,
  });
}

/** A gain stage with ramped changes (no clicks at start and stop). */
export function createMaster(ctx: AnyContext): GainNode<AnyContext> {
  const g = new GainNode(ctx, { gain: 0 });
  return g;
}

export function rampGain(g: GainNode<AnyContext>, ctx: AnyContext, to: number, seconds: number): void {
  const now = ctx.currentTime;
  g.gain.cancelScheduledValues(now);
  g.gain.setValueAtTime(g.gain.value, now);
  g.gain.linearRampToValueAtTime(to, now + seconds);
}

export interface MicGraph {
  sources: MediaStreamAudioSourceNode<IAudioContext>[];
  splitters: ChannelSplitterNode<IAudioContext>[];
  merger: ChannelMergerNode<IAudioContext>;
  disconnect(): void;
}

/**
 * Route the chosen channels into a two-channel merger: input 0 = reference mic (silent in the
 * one-mic layout, where the processor reads the error mic from channel 0), input 1 = error mic.
 */
export function buildMicGraph(ctx: IAudioContext, inputs: OpenedInputs, errOnly: boolean): MicGraph {
  const sources = inputs.streams.map((s) => new MediaStreamAudioSourceNode(ctx, { mediaStream: s }));
  const splitters = sources.map((src) => {
    const sp = new ChannelSplitterNode(ctx, { numberOfOutputs: 2 });
    src.connect(sp);
    return sp;
  });
  const merger = new ChannelMergerNode(ctx, { numberOfInputs: 2 });
  if (errOnly) {
    splitters[inputs.err.stream]!.connect(merger, inputs.err.channel, 0);
  } else {
    if (inputs.ref) splitters[inputs.ref.stream]!.connect(merger, inputs.ref.channel, 0);
    splitters[inputs.err.stream]!.connect(merger, inputs.err.channel, 1);
  }
  return {
    sources,
    splitters,
    merger,
    disconnect(): void {
      for (const s of sources) s.disconnect();
      for (const s of splitters) s.disconnect();
      merger.disconnect();
    },
  };
}

export type { IAudioNode };
