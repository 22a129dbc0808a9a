/**
 * One audio session as the panel drives it: the simulated plant (no microphone) or live
 * microphones; identification of the secondary path; control on and off; stop. Independent of the
 * panel's elements, so tests can drive it directly.
 *
 * Live flow: open devices → identify (a sweep at a safe level through the output stage; the model
 * spans the whole round trip, bulk delay + FIR) → causality verdict → control on → watch → stop.
 * Everything that starts or stops sound is ramped: the engine ramps its output, and a master gain
 * after the worklet ramps the whole output (the simulated plant's listening signal too).
 */
import './zod-jitless.ts';
import type { IAudioContext, IAudioWorkletNode, GainNode } from 'standardized-audio-context';
import { parseScenario, type Scenario } from '../plant/scenario.ts';
import { trueSecondaryPath } from '../plant/simulate.ts';
import type { ControllerConfig } from '../engine/controller-factory.ts';
import type { PanelEvent, ProbeSpec, WorkletMessage } from '../engine/messages.ts';
import type { IdentificationResult } from '../analysis/live-analysis.ts';
import { TelemetryChannel, buildMicGraph, createLiveNode, createMaster, createSimNode, openContext, rampGain, type AnyContext, type MicGraph } from './audio-graph.ts';
import { analysis, connectAudioToAnalysis } from './analysis-client.ts';
import { closeInputs, openInputs, type DeviceChoice, type OpenedInputs } from './devices.ts';
import { LatencyWatch } from './latency-watch.ts';
import { canChooseOutput, contextStats, setOutputDevice } from './native-context.ts';

/** Fade of the master gain at start and stop, s. */
export const MASTER_RAMP_S = 0.05;
/** Listening level cap of the simulated plant, dBFS sample peak. */
export const MONITOR_CEILING_DBFS = -20;
/** Default probe: a 1.5 s sweep 40 Hz … 0.45·fs at −30 dBFS peak, 0.5 s tail. */
export function defaultProbe(sampleRate: number): ProbeSpec {
  return { startHz: 40, endHz: Math.min(16000, 0.45 * sampleRate), durationS: 1.5, amplitude: 0.03, tailS: 0.5 };
}

export interface ControlSettings {
  controller: ControllerConfig;
  ceilingDbfs: number;
  adaptation: boolean;
}

export interface ModelInfo {
  taps: Float32Array;
  truePath: Float32Array | null;
  sampleRate: number;
  source: 'scenario' | 'identified' | 'none';
}

export interface SessionHandlers {
  frame(f: Float64Array): void;
  event(e: PanelEvent): void;
  model(m: ModelInfo): void;
  /** The model may no longer match the acoustics (adaptation has been frozen). */
  stale(reason: string): void;
  warning(text: string): void;
}

/** The scenario's controller with the panel's settings in place (its model-imperfection fields kept). */
export function scenarioController(sc: Scenario, c: ControllerConfig): Scenario['controller'] {
  const o = sc.controller;
  // modelFile is left out: the page cannot read files; the model comes from the true path
  const keep = {
    ...(o.modelTaps !== undefined ? { modelTaps: o.modelTaps } : {}),
    ...(o.modelPhaseErrorDeg !== undefined ? { modelPhaseErrorDeg: o.modelPhaseErrorDeg } : {}),
    ...(o.modelGainErrorDb !== undefined ? { modelGainErrorDb: o.modelGainErrorDb } : {}),
  };
  const leak = c.leakage !== undefined ? { leakage: c.leakage } : {};
  if (c.algorithm === 'tonal') {
    const source = c.frequencySource === 'external' ? 'reference' : c.frequencySource;
    return {
      algorithm: 'tonal',
      harmonics: c.harmonics,
      stepSize: c.stepSize,
      frequencySource: source,
      ...(c.hz !== undefined ? { hz: c.hz } : {}),
      ...(c.minHz !== undefined ? { minHz: c.minHz } : {}),
      ...(c.maxHz !== undefined ? { maxHz: c.maxHz } : {}),
      ...leak,
      ...keep,
    };
  }
  return { algorithm: c.algorithm, taps: c.taps, stepSize: c.stepSize, ...leak, ...keep };
}

/**
 * The scenario as the panel runs it: its own rate and block size (the worklet splits each render
 * quantum into steps of at most one block; when the block divides the quantum, as 32 … 128 do 128,
 * the run matches the command-line simulator's block for block), with the panel's controller
 * settings and output cap.
 */
export function scenarioForPanel(sc: Scenario, settings: ControlSettings): Scenario {
  return parseScenario({ ...sc, outputCeilingDbfs: settings.ceilingDbfs, controller: scenarioController(sc, settings.controller) });
}

/** Whether going from one controller setting to another needs a new engine (weights start again). */
export function needsRebuild(a: ControllerConfig, b: ControllerConfig): boolean {
  if (a.algorithm !== b.algorithm) return true;
  if (a.algorithm !== 'tonal' && b.algorithm !== 'tonal') return a.taps !== b.taps;
  return false;
}

/** Scenarios whose sources drift or come from files cannot run forever: they stop at durationS. */
export function isStationary(sc: Scenario): boolean {
  return sc.sources.every((s) => s.kind !== 'wav' && !('driftHzPerS' in s && s.driftHzPerS));
}

/** The acoustic delay from the reference mic to the error mic in a scenario, and the secondary delay (ms). */
export function scenarioDelays(sc: Scenario): { primaryMs: number; secondaryMs: number } {
  return { primaryMs: sc.paths.primary.delayMs - sc.paths.reference.delayMs, secondaryMs: sc.paths.secondary.delayMs };
}

export class Session {
  kind: 'sim' | 'live' | null = null;
  ctx: IAudioContext | null = null;
  telemetryKind: 'shared' | 'posted' | null = null;
  scenario: Scenario | null = null;
  inputs: OpenedInputs | null = null;
  identified: IdentificationResult | null = null;
  /** True while the acoustics may have changed since the last identification. */
  stale = false;
  private node: IAudioWorkletNode<AnyContext> | null = null;
  private master: GainNode<AnyContext> | null = null;
  private mic: MicGraph | null = null;
  private telemetry: TelemetryChannel | null = null;
  private watch: LatencyWatch | null = null;
  private settings: ControlSettings | null = null;
  private waiters: { type: string; resolve: (m: WorkletMessage) => void; reject: (e: Error) => void }[] = [];
  private endTimer: ReturnType<typeof setTimeout> | null = null;
  /** Force posted telemetry (tests of the fallback path). */
  forcePosted = false;

  constructor(private readonly handlers: SessionHandlers) {}

  get sampleRate(): number {
    return this.ctx?.sampleRate ?? NaN;
  }

  get running(): boolean {
    return this.node !== null;
  }

  private async context(rate: number | undefined): Promise<IAudioContext> {
    if (this.ctx && (rate === undefined || this.ctx.sampleRate === rate)) {
      if (this.ctx.state !== 'running') await this.ctx.resume();
      return this.ctx;
    }
    if (this.ctx) await this.ctx.close();
    this.ctx = await openContext(rate);
    if (this.ctx.state !== 'running') await this.ctx.resume();
    return this.ctx;
  }

  private message(type: string, timeoutMs: number): Promise<WorkletMessage> {
    return new Promise((resolve, reject) => {
      const w = { type, resolve, reject };
      this.waiters.push(w);
      setTimeout(() => {
        const i = this.waiters.indexOf(w);
        if (i >= 0) {
          this.waiters.splice(i, 1);
          reject(new Error(`no "${type}" from the audio thread within ${timeoutMs / 1000} s (is the audio context running?)`));
        }
      }, timeoutMs);
    });
  }

  private onWorkletMessage(m: WorkletMessage): void {
    if (m.type === 'model') {
      this.handlers.model({ taps: m.taps, truePath: m.truePath, sampleRate: m.sampleRate, source: m.source });
    } else if (m.type === 'error') {
      this.handlers.warning(m.message);
      for (const w of this.waiters.splice(0)) w.reject(new Error(m.message));
      return;
    }
    const rest: typeof this.waiters = [];
    for (const w of this.waiters) {
      if (w.type === m.type) w.resolve(m);
      else rest.push(w);
    }
    this.waiters = rest;
  }

  private async wire(node: IAudioWorkletNode<AnyContext>, ctx: IAudioContext, telemetry: TelemetryChannel): Promise<void> {
    this.node = node;
    this.telemetry = telemetry;
    this.telemetryKind = telemetry.kind;
    telemetry.onMessage = (m) => this.onWorkletMessage(m);
    const ready = this.message('ready', 10000);
    telemetry.attach(node);
    node.onprocessorerror = () => this.handlers.warning('the audio processor stopped with an error; press Stop, then Start again');
    const master = createMaster(ctx);
    node.connect(master).connect(ctx.destination);
    this.master = master;
    await ready;
    await analysis().reset();
    const port = await connectAudioToAnalysis();
    node.port.postMessage({ type: 'attach-analysis', port }, [port]);
    rampGain(master, ctx, 1, MASTER_RAMP_S);
  }

  /** Run a scenario's simulated plant; control starts off. */
  async startSim(sc: Scenario, settings: ControlSettings, monitorGainDb: number): Promise<void> {
    await this.stop();
    const ctx = await this.context(sc.sampleRate);
    const scenario = scenarioForPanel(sc, settings);
    const telemetry = new TelemetryChannel(30, 4096, this.forcePosted);
    const node = createSimNode(ctx, {
      scenario,
      monitorGainDb,
      monitorCeilingDbfs: MONITOR_CEILING_DBFS,
      startMode: 'idle',
      telemetry: telemetry.options,
    });
    this.kind = 'sim';
    this.scenario = scenario;
    this.settings = settings;
    this.stale = false;
    await this.wire(node, ctx, telemetry);
    if (!settings.adaptation) this.post({ type: 'set-adaptation', on: false });
    if (!isStationary(scenario)) {
      this.endTimer = setTimeout(() => {
        this.handlers.warning(`end of the scenario (${scenario.durationS} s): its tone drifts, so it does not run for ever. Press Start to play it again`);
        void this.stop();
      }, scenario.durationS * 1000);
    }
  }

  /** Open the microphones and run the live processor with control off. */
  async startLive(choice: DeviceChoice, settings: ControlSettings): Promise<void> {
    await this.stop();
    const ctx = await this.context(undefined);
    const inputs = await openInputs(choice);
    for (const w of inputs.warnings) this.handlers.warning(w);
    if (choice.outputDeviceId) {
      if (canChooseOutput(ctx)) await setOutputDevice(ctx, choice.outputDeviceId);
      else this.handlers.warning('this browser cannot choose the output device here: the system default plays');
    }
    const errOnly = choice.layout === 'err-only';
    const mic = buildMicGraph(ctx, inputs, errOnly);
    const telemetry = new TelemetryChannel(30, 4096, this.forcePosted);
    const fs = ctx.sampleRate;
    const model = this.identified && this.identified.sampleRate === fs ? this.identified.model : new Float32Array(1);
    const node = createLiveNode(ctx, {
      controller: settings.controller,
      secondaryPathModel: model,
      ceilingDbfs: settings.ceilingDbfs,
      startMode: 'idle',
      inputLayout: errOnly ? 'err-only' : 'ref-err',
      maxQuantum: 128,
      telemetry: telemetry.options,
    });
    mic.merger.connect(node);
    this.kind = 'live';
    this.inputs = inputs;
    this.mic = mic;
    this.settings = settings;
    await this.wire(node, ctx, telemetry);
    if (!settings.adaptation) this.post({ type: 'set-adaptation', on: false });
    this.handlers.model({ taps: model, truePath: null, sampleRate: fs, source: this.identified ? 'identified' : 'none' });
    this.watch = new LatencyWatch(ctx, (e, stale) => {
      this.handlers.event(e);
      if (stale) this.markStale(e.cause === 'error-rise' ? 'the error level rose above the control-off level' : e.cause === 'device-change' ? 'the audio devices changed' : 'the audio latency changed');
    });
    this.watch.start();
  }

  private markStale(reason: string): void {
    if (this.stale) return;
    this.stale = true;
    this.post({ type: 'set-adaptation', on: false });
    this.handlers.stale(reason);
  }

  post(m: object, transfer: Transferable[] = []): void {
    this.node?.port.postMessage(m, transfer);
  }

  /**
   * Identify the secondary path (live only): play the probe and deconvolve in the analysis worker.
   * The result is not loaded: call `loadModel` (the panel does at once for a usable result, and only
   * on the user's say-so otherwise). Control is off afterwards.
   */
  async identify(probe: ProbeSpec, firTaps: number): Promise<IdentificationResult> {
    if (this.kind !== 'live' || !this.node || !this.settings) throw new Error('identification needs live microphones: switch to live mode first');
    const got = this.message('identify-recording', (probe.durationS + probe.tailS) * 1000 + 10000);
    this.post({ type: 'identify', probe });
    const rec = (await got) as Extract<WorkletMessage, { type: 'identify-recording' }>;
    return analysis().identify(rec, { firTaps });
  }

  /** Load an identified model into the engine (a new engine: weights start from zero, control off). */
  async loadModel(result: IdentificationResult): Promise<void> {
    if (this.kind !== 'live' || !this.node || !this.settings) throw new Error('no live session to load the model into');
    if (result.sampleRate !== this.sampleRate) throw new Error(`the model was measured at ${result.sampleRate} Hz, the audio now runs at ${this.sampleRate} Hz: identify again`);
    const configured = this.message('configured', 5000);
    this.post({ type: 'configure', controller: this.settings.controller, secondaryPathModel: result.model, startMode: 'idle' });
    await configured;
    if (!this.settings.adaptation) this.post({ type: 'set-adaptation', on: false });
    this.identified = result;
    this.stale = false;
    this.handlers.model({ taps: result.model, truePath: null, sampleRate: result.sampleRate, source: 'identified' });
  }

  setControl(on: boolean): void {
    this.post({ type: 'set-mode', mode: on ? 'control' : 'idle' });
  }

  setAdaptation(on: boolean): void {
    if (this.settings) this.settings.adaptation = on;
    if (on && this.stale) return; // stays frozen until re-identified
    this.post({ type: 'set-adaptation', on });
  }

  resetWeights(): void {
    this.post({ type: 'reset-weights' });
  }

  setMonitor(gainDb: number, source: 'on' | 'off'): void {
    if (this.kind === 'sim') this.post({ type: 'set-monitor', gainDb, source });
  }

  /**
   * Apply control settings. Step size, leakage and cap change in place; algorithm or filter length
   * rebuild the engine (live: with the current model; simulated: the plant restarts).
   */
  async applySettings(next: ControlSettings, monitorGainDb: number): Promise<'in-place' | 'rebuilt'> {
    const prev = this.settings;
    this.settings = { ...next, controller: { ...next.controller } };
    if (!this.node || !prev) return 'in-place';
    const c = next.controller;
    const p = prev.controller;
    if (needsRebuild(p, c)) {
      if (this.kind === 'sim' && this.scenario) {
        await this.startSim(this.scenario, this.settings, monitorGainDb);
      } else {
        const model = this.identified?.model ?? new Float32Array(1);
        const configured = this.message('configured', 5000);
        this.post({ type: 'configure', controller: c, secondaryPathModel: model, startMode: 'idle' });
        await configured;
        if (!next.adaptation || this.stale) this.post({ type: 'set-adaptation', on: false });
      }
      return 'rebuilt';
    }
    if (c.algorithm === 'tonal' && p.algorithm === 'tonal') {
      if (c.harmonics !== p.harmonics) this.post({ type: 'set-harmonics', harmonics: c.harmonics });
      if (c.frequencySource !== p.frequencySource || c.hz !== p.hz) {
        const source = c.frequencySource === 'external' ? 'reference' : c.frequencySource;
        this.post(source === 'fixed' ? { type: 'set-frequency-source', source, hz: c.hz } : { type: 'set-frequency-source', source });
      }
    }
    if (c.stepSize !== prev.controller.stepSize) this.post({ type: 'set-step-size', value: c.stepSize });
    if ((c.leakage ?? 0) !== (prev.controller.leakage ?? 0)) this.post({ type: 'set-leakage', value: c.leakage ?? 0 });
    if (next.ceilingDbfs !== prev.ceilingDbfs) this.post({ type: 'set-ceiling', dbfs: next.ceilingDbfs });
    if (next.adaptation !== prev.adaptation) this.setAdaptation(next.adaptation);
    return 'in-place';
  }

  /** Deliver new meter frames and events (call from the display loop). */
  poll(): void {
    this.telemetry?.poll(
      (f) => {
        this.watch?.checkFrame(f);
        this.handlers.frame(f);
      },
      (e) => this.handlers.event(e),
    );
  }

  stats(): ReturnType<typeof contextStats> | null {
    return this.ctx ? contextStats(this.ctx) : null;
  }

  /** The true secondary path of the running scenario (simulated plant only). */
  truePath(): Float64Array | null {
    return this.scenario ? trueSecondaryPath(this.scenario) : null;
  }

  async stop(): Promise<void> {
    if (this.endTimer !== null) clearTimeout(this.endTimer);
    this.endTimer = null;
    this.watch?.stop();
    this.watch = null;
    const node = this.node;
    const ctx = this.ctx;
    if (node && ctx && this.master) {
      rampGain(this.master, ctx, 0, MASTER_RAMP_S);
      node.port.postMessage({ type: 'shutdown' });
      await new Promise((r) => setTimeout(r, MASTER_RAMP_S * 1000 + 30));
      node.disconnect();
      this.master.disconnect();
      node.port.onmessage = null;
    }
    this.mic?.disconnect();
    closeInputs(this.inputs);
    for (const w of this.waiters.splice(0)) w.reject(new Error('stopped'));
    this.node = null;
    this.master = null;
    this.mic = null;
    this.inputs = null;
    this.telemetry = null;
    this.kind = null;
  }
}
