/**
 * Browser-test harness: renders the live processor in an OfflineAudioContext (built with
 * standardized-audio-context, as the panel builds its graphs) and reports its output, meter frames,
 * events and whether the processor threw. The Node tests call `window.harness.renderLive(...)`.
 */
import { AudioBuffer, AudioBufferSourceNode, OfflineAudioContext } from 'standardized-audio-context';
import { TelemetryChannel, createLiveNode, loadWorklets } from '../../../src/web/audio-graph.ts';
import { meterFrameToObject, type PanelEvent } from '../../../src/protocol/messages.ts';
import type { ControllerConfig } from '../../../src/engine/controller-factory.ts';

export interface RenderRequest {
  sampleRate: number;
  /** Reference and error mic samples (same length); numbers, NaN allowed (sent as null → NaN). */
  ref: (number | null)[];
  err: (number | null)[];
  controller: ControllerConfig;
  model: number[];
  ceilingDbfs: number;
  startMode: 'idle' | 'control' | 'muted';
  /** false: leave the processor's input unconnected. */
  connectInput: boolean;
  /** Use posted telemetry even when shared memory is available. */
  forcePosted: boolean;
}

export interface RenderResult {
  output: number[];
  nonFiniteOutput: number;
  events: PanelEvent[];
  lastFrame: Record<string, number> | null;
  frames: number;
  processorError: boolean;
  telemetry: 'shared' | 'posted';
  crossOriginIsolated: boolean;
}

async function renderLive(r: RenderRequest): Promise<RenderResult> {
  const n = r.ref.length;
  const ctx = new OfflineAudioContext({ numberOfChannels: 1, length: n, sampleRate: r.sampleRate });
  await loadWorklets(ctx);
  const telemetry = new TelemetryChannel(30, 0, r.forcePosted);
  const node = createLiveNode(ctx, {
    controller: r.controller,
    secondaryPathModel: Float32Array.from(r.model),
    ceilingDbfs: r.ceilingDbfs,
    startMode: r.startMode,
    inputLayout: 'ref-err',
    maxQuantum: 128,
    telemetry: telemetry.options,
  });
  let processorError = false;
  node.onprocessorerror = () => {
    processorError = true;
  };
  telemetry.attach(node);
  if (r.connectInput) {
    const buf = new AudioBuffer({ numberOfChannels: 2, length: n, sampleRate: r.sampleRate });
    buf.copyToChannel(Float32Array.from(r.ref, (v) => (v === null ? NaN : v)), 0);
    buf.copyToChannel(Float32Array.from(r.err, (v) => (v === null ? NaN : v)), 1);
    const src = new AudioBufferSourceNode(ctx, { buffer: buf });
    // channel 0 reference, channel 1 error: the node takes exactly two channels, discrete
    src.connect(node);
    src.start(0);
  }
  node.connect(ctx.destination);
  const rendered = await ctx.startRendering();
  // posted telemetry arrives as messages after rendering: give them a moment
  await new Promise((res) => setTimeout(res, 300));
  const events: PanelEvent[] = [];
  let last: Float64Array | null = null;
  let frames = 0;
  telemetry.poll(
    (f) => {
      last = Float64Array.from(f);
      frames++;
    },
    (e) => events.push(e),
  );
  const out = rendered.getChannelData(0);
  let bad = 0;
  for (let i = 0; i < out.length; i++) if (!Number.isFinite(out[i]!)) bad++;
  return {
    output: Array.from(out),
    nonFiniteOutput: bad,
    events,
    lastFrame: last ? meterFrameToObject(last) : null,
    frames,
    processorError,
    telemetry: telemetry.kind,
    crossOriginIsolated: globalThis.crossOriginIsolated === true,
  };
}

(globalThis as unknown as { harness: unknown }).harness = { renderLive };
