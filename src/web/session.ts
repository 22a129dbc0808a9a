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
import { scenarioForPanel, type ControlSettings } from './panel-settings.ts';
export { scenarioController, scenarioForPanel, panelSettingsFromScenario, type ControlSettings } from './panel-settings.ts';
import { DEFAULT_OUTPUT_CONSTRAINT } from '../dsp/output-constraint.ts';
import type { IAudioContext, IAudioWorkletNode, GainNode } from 'standardized-audio-context';
import type { Scenario } from '../plant/scenario.ts';
import { engineControllerConfig, trueSecondaryPath } from '../plant/simulate.ts';
import { createController, type ControllerConfig } from '../engine/controller-factory.ts';
import { DEFAULT_CROSSFADE_MS } from '../engine/engine.ts';
import type { HandedToOutput, LevelCheckRequest, PanelEvent, ProbeSpec, WorkletMessage } from '../protocol/messages.ts';
import type { LevelCapResult } from '../engine/level-cap-check.ts';
import type { IdentificationResult } from '../analysis/live-analysis.ts';
import { TelemetryChannel, buildMicGraph, createLiveNode, createMaster, createSimNode, openContext, rampGain, type AnyContext, type MicGraph } from './audio-graph.ts';
import { analysis, connectAudioToAnalysis } from './analysis-client.ts';
import { closeInputs, openInputs, type DeviceChoice, type OpenedInputs } from './devices.ts';
import { LatencyWatch } from './latency-watch.ts';
import { canChooseOutput, contextStats, setOutputDevice } from './native-context.ts';

/**
 * Largest render quantum the live engine is built for (Web Audio's default quantum; a larger one is
 * split by the processor). It is also the frequency-domain FxLMS partition, live.
 */
export const LIVE_MAX_QUANTUM = 128;
/** Fade of the master gain at start and stop, s. */
export const MASTER_RAMP_S = 0.05;
/** Listening level cap of the simulated plant, dBFS sample peak. */
export const MONITOR_CEILING_DBFS = -20;
/** Default probe: a 1.5 s sweep 40 Hz … 0.45·fs at −30 dBFS peak, 0.5 s tail. */
export function defaultProbe(sampleRate: number): ProbeSpec {
  return { startHz: 40, endHz: Math.min(16000, 0.45 * sampleRate), durationS: 1.5, amplitude: 0.03, tailS: 0.5 };
}

/** Crossfade between the two controllers when the user switches algorithm, ms. */
export const SWITCH_CROSSFADE_MS = DEFAULT_CROSSFADE_MS;

/** What a calibration tone left behind: its nominal level and the AES17 level handed to the output. */
export interface ToneResult {
  hz: number;
  dbfs: number;
  measuredDbfs: number;
  samples: number;
}

export interface LevelCheckOutcome {
  result: LevelCapResult;
  output: HandedToOutput;
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
  /** What runs the controller in charge, reported by the audio thread on every (re)configuration and switch. */
  implementation(text: string): void;
}

/**
 * The fixed parts of a broadband configuration, with the defaults written out: what decides which
 * code runs it (src/engine/implementation.ts) and how it updates.
 */
function broadbandBuild(c: Exclude<ControllerConfig, { algorithm: 'tonal' }>): string {
  return `${c.taps}/${c.update ?? 'sample'}/${c.implementation ?? 'auto'}/${c.fdConstraint ?? 'full'}`;
}

/** The output constraint is fixed when a controller is built: a different one needs a new controller. */
function sameConstraint(a: ControllerConfig, b: ControllerConfig): boolean {
  return (a.outputConstraint ?? DEFAULT_OUTPUT_CONSTRAINT) === (b.outputConstraint ?? DEFAULT_OUTPUT_CONSTRAINT) && a.outputMarginDb === b.outputMarginDb;
}

/** Whether going from one controller setting to another needs a new engine (weights start again). */
export function needsRebuild(a: ControllerConfig, b: ControllerConfig): boolean {
  if (a.algorithm !== b.algorithm) return true;
  if (!sameConstraint(a, b)) return true;
  if (a.algorithm !== 'tonal' && b.algorithm !== 'tonal') return broadbandBuild(a) !== broadbandBuild(b);
  return false;
}

/**
 * Whether a controller built as `built` can become `target` by in-place changes alone (step size,
 * leakage, and for the tone follower harmonics and frequency source): then a standby controller
 * built as `built` can take over by a crossfade. Sizes and fixed options must match.
 */
export function inPlaceReachable(built: ControllerConfig, target: ControllerConfig): boolean {
  if (built.algorithm !== target.algorithm || !sameConstraint(built, target)) return false;
  if (built.algorithm === 'tonal' && target.algorithm === 'tonal') {
    return built.minHz === target.minHz && built.maxHz === target.maxHz && built.harmonicsCheck === target.harmonicsCheck && built.regularization === target.regularization;
  }
  if (built.algorithm !== 'tonal' && target.algorithm !== 'tonal') {
    return broadbandBuild(built) === broadbandBuild(target) && built.regularization === target.regularization;
  }
  return false;
}

/** Controller family: the tone follower or broadband FxLMS/FxNLMS. */
export function family(c: ControllerConfig): 'tonal' | 'broadband' {
  return c.algorithm === 'tonal' ? 'tonal' : 'broadband';
}

/** A standby configuration the engine can build for this model, block and rate, or null (with no switch offered). */
export function usableStandby(standby: ControllerConfig | undefined, active: ControllerConfig, model: Float32Array, block: number, rate: number): ControllerConfig | null {
  if (!standby || family(standby) === family(active)) return null;
  try {
    createController(standby, model, block, rate);
    return standby;
  } catch {
    return null;
  }
}

/**
 * Build the controller the audio thread would build, here on the page, and throw its refusal (a
 * RangeError naming the field and the reason, e.g. a forced frequency-domain implementation with a
 * block size that is not a power of two). Run before anything is stopped, so a refused setting
 * leaves the running engine alone. The page and the worklet share the platform's WebAssembly
 * support and the page's Content-Security-Policy, so they choose alike.
 */
export function checkController(c: ControllerConfig, model: Float32Array, block: number, rate: number): void {
  createController(c, model, block, rate);
}

/** The scenario as the panel would run it (scenarioForPanel), after checkController has accepted its controller. */
export function checkedSimScenario(sc: Scenario, settings: ControlSettings): Scenario {
  const scenario = scenarioForPanel(sc, settings);
  checkController(engineControllerConfig(scenario), Float32Array.from(trueSecondaryPath(scenario)), scenario.blockSize, scenario.sampleRate);
  return scenario;
}

/**
 * Whether the simulated plant can run without end: drifting sources would leave the band and file
 * sources end, so those stop at durationS (frequency steps hold their last value and may run on).
 * Not the statistical stationarity of src/plant/scenario.ts `isStationary`.
 */
export function runsWithoutEnd(sc: Scenario): boolean {
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
  /** The controllers the running engine was built with (active, and its standby), kept in step with in-place changes. */
  private built: { active: ControllerConfig; standby: ControllerConfig | null } | null = null;
  /** Force posted telemetry (tests of the fallback path). */
  forcePosted = false;
  /** The model the running engine uses, as the worklet last reported it (recordings keep it). */
  lastModel: ModelInfo | null = null;
  /** Where the recording tap's messages go (src/ui/recording-panel.ts). */
  onRecordMessage: ((m: WorkletMessage) => void) | null = null;

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
    if (m.type === 'ready' || m.type === 'configured' || m.type === 'switched') {
      this.handlers.implementation(m.implementation);
    } else if (m.type === 'record-chunk' || m.type === 'record-stopped') {
      this.onRecordMessage?.(m);
      return;
    } else if (m.type === 'model') {
      this.lastModel = { taps: m.taps, truePath: m.truePath, sampleRate: m.sampleRate, source: m.source };
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
    const scenario = checkedSimScenario(sc, settings);
    await this.stop();
    const ctx = await this.context(sc.sampleRate);
    const telemetry = new TelemetryChannel(30, 4096, this.forcePosted);
    const standby = usableStandby(settings.standby, settings.controller, Float32Array.from(trueSecondaryPath(scenario)), scenario.blockSize, scenario.sampleRate);
    const node = createSimNode(ctx, {
      scenario,
      monitorGainDb,
      monitorCeilingDbfs: MONITOR_CEILING_DBFS,
      startMode: 'idle',
      ...(standby ? { standbyController: standby } : {}),
      telemetry: telemetry.options,
    });
    this.kind = 'sim';
    this.scenario = scenario;
    this.settings = settings;
    this.built = { active: { ...settings.controller }, standby };
    this.stale = false;
    await this.wire(node, ctx, telemetry);
    if (!settings.adaptation) this.post({ type: 'set-adaptation', on: false });
    if (!runsWithoutEnd(scenario)) {
      this.endTimer = setTimeout(() => {
        this.handlers.warning(`end of the scenario (${scenario.durationS} s): its tone drifts, so it does not run for ever. Press Start to play it again`);
        void this.stop();
      }, scenario.durationS * 1000);
    }
  }

  /** Open the microphones and run the live processor with control off. */
  async startLive(choice: DeviceChoice, settings: ControlSettings): Promise<void> {
    const ctx = await this.context(undefined);
    const fs = ctx.sampleRate;
    const model = this.identified && this.identified.sampleRate === fs ? this.identified.model : new Float32Array(1);
    checkController(settings.controller, model, LIVE_MAX_QUANTUM, fs);
    await this.stop();
    const inputs = await openInputs(choice);
    for (const w of inputs.warnings) this.handlers.warning(w);
    if (choice.outputDeviceId) {
      if (canChooseOutput(ctx)) await setOutputDevice(ctx, choice.outputDeviceId);
      else this.handlers.warning('this browser cannot choose the output device here: the system default plays');
    }
    const errOnly = choice.layout === 'err-only';
    const mic = buildMicGraph(ctx, inputs, errOnly);
    const telemetry = new TelemetryChannel(30, 4096, this.forcePosted);
    const standby = usableStandby(settings.standby, settings.controller, model, LIVE_MAX_QUANTUM, fs);
    const node = createLiveNode(ctx, {
      controller: settings.controller,
      ...(standby ? { standbyController: standby } : {}),
      secondaryPathModel: model,
      ceilingDbfs: settings.ceilingDbfs,
      startMode: 'idle',
      inputLayout: errOnly ? 'err-only' : 'ref-err',
      maxQuantum: LIVE_MAX_QUANTUM,
      telemetry: telemetry.options,
    });
    mic.merger.connect(node);
    this.kind = 'live';
    this.inputs = inputs;
    this.mic = mic;
    this.settings = settings;
    this.built = { active: { ...settings.controller }, standby };
    await this.wire(node, ctx, telemetry);
    if (!settings.adaptation) this.post({ type: 'set-adaptation', on: false });
    this.lastModel = { taps: model, truePath: null, sampleRate: fs, source: this.identified ? 'identified' : 'none' };
    this.handlers.model(this.lastModel);
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
    // the response may come back at any time within the probe's tail: a large output buffer or a
    // wireless loudspeaker makes the round trip longer than the analysis' default search (0.25 s)
    const maxDelayS = Math.max(0.25, probe.tailS - (firTaps + 64) / rec.sampleRate);
    return analysis().identify(rec, { firTaps, maxDelayS });
  }

  /** Load an identified model into the engine (a new engine: weights start from zero, control off). */
  async loadModel(result: IdentificationResult): Promise<void> {
    if (this.kind !== 'live' || !this.node || !this.settings) throw new Error('no live session to load the model into');
    if (result.sampleRate !== this.sampleRate) throw new Error(`the model was measured at ${result.sampleRate} Hz, the audio now runs at ${this.sampleRate} Hz: identify again`);
    await this.configureLive(this.settings, result.model);
    if (!this.settings.adaptation) this.post({ type: 'set-adaptation', on: false });
    this.identified = result;
    this.stale = false;
    this.watch?.rebase();
    this.lastModel = { taps: result.model, truePath: null, sampleRate: result.sampleRate, source: 'identified' };
    this.handlers.model(this.lastModel);
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

  /** A new live engine with the settings' controller (and standby) on `model`; control off. */
  private async configureLive(settings: ControlSettings, model: Float32Array): Promise<void> {
    const standby = usableStandby(settings.standby, settings.controller, model, LIVE_MAX_QUANTUM, this.sampleRate);
    const configured = this.message('configured', 5000);
    this.post({ type: 'configure', controller: settings.controller, secondaryPathModel: model, startMode: 'idle', ...(standby ? { standbyController: standby } : {}) });
    await configured;
    this.built = { active: { ...settings.controller }, standby };
  }

  /** Post the in-place differences between two settings of the same controller. */
  private postInPlace(p: ControllerConfig, c: ControllerConfig): void {
    if (c.algorithm === 'tonal' && p.algorithm === 'tonal') {
      if (c.harmonics !== p.harmonics) this.post({ type: 'set-harmonics', harmonics: c.harmonics });
      if (c.frequencySource !== p.frequencySource || c.hz !== p.hz) {
        const source = c.frequencySource === 'external' ? 'reference' : c.frequencySource;
        this.post(source === 'fixed' ? { type: 'set-frequency-source', source, hz: c.hz } : { type: 'set-frequency-source', source });
      }
    }
    if (c.stepSize !== p.stepSize) this.post({ type: 'set-step-size', value: c.stepSize });
    if ((c.leakage ?? 0) !== (p.leakage ?? 0)) this.post({ type: 'set-leakage', value: c.leakage ?? 0 });
  }

  /**
   * Apply control settings. Step size, leakage and cap change in place. A switch between broadband
   * FxLMS and the tone follower hands over to the engine's standby controller with a crossfade
   * (SWITCH_CROSSFADE_MS; no restart, no click) when the standby was built for the requested
   * settings; otherwise algorithm, filter length, update or implementation rebuild the engine (live:
   * with the current model; simulated: the plant restarts). A rebuild the platform or the
   * configuration refuses (a forced implementation that cannot run here) rejects with the engine's
   * message and leaves the running engine and these settings as they were.
   */
  async applySettings(next: ControlSettings, monitorGainDb: number): Promise<'in-place' | 'rebuilt' | 'switched'> {
    const prev = this.settings;
    this.settings = { ...next, controller: { ...next.controller } };
    try {
      return await this.apply(prev, next, monitorGainDb);
    } catch (e) {
      this.settings = prev;
      throw e;
    }
  }

  private async apply(prev: ControlSettings | null, next: ControlSettings, monitorGainDb: number): Promise<'in-place' | 'rebuilt' | 'switched'> {
    if (!this.node || !prev || !this.built) return 'in-place';
    const c = next.controller;
    const built = this.built;
    let how: 'in-place' | 'rebuilt' | 'switched' = 'in-place';
    if (family(c) !== family(built.active) && built.standby && inPlaceReachable(built.standby, c)) {
      const switched = this.message('switched', 5000);
      this.post({ type: 'switch-controller', crossfadeMs: SWITCH_CROSSFADE_MS });
      await switched;
      // queued after the switch: they reach the incoming controller
      this.postInPlace(built.standby, c);
      this.built = { active: { ...c }, standby: built.active };
      how = 'switched';
    } else if (needsRebuild(built.active, c)) {
      if (this.kind === 'sim' && this.scenario) {
        // startSim checks the controller before it stops the running plant
        await this.startSim(this.scenario, this.settings!, monitorGainDb);
      } else {
        // the live processor builds the new engine beside the old one and keeps the old on a refusal
        await this.configureLive(this.settings!, this.identified?.model ?? new Float32Array(1));
        if (!next.adaptation || this.stale) this.post({ type: 'set-adaptation', on: false });
      }
      return 'rebuilt';
    } else {
      this.postInPlace(built.active, c);
      this.built = { active: { ...c }, standby: built.standby };
    }
    if (next.ceilingDbfs !== prev.ceilingDbfs) this.post({ type: 'set-ceiling', dbfs: next.ceilingDbfs });
    if (next.adaptation !== prev.adaptation) this.setAdaptation(next.adaptation);
    return how;
  }

  /** Whether a switch to the other controller family would crossfade (true) or rebuild (false). */
  canSwitchTo(target: ControllerConfig): boolean {
    const b = this.built;
    return b !== null && b.standby !== null && family(target) !== family(b.active) && inPlaceReachable(b.standby, target);
  }

  private requireLive(what: string): void {
    if (this.kind !== 'live' || !this.node) throw new Error(`${what} needs live microphones and a loudspeaker: switch to live mode and press Start`);
  }

  /**
   * Play a calibration tone (live only): a sine of `dbfs` (AES17) at `hz` through the output stage,
   * until `stopTone`. Control goes off first (the engine fades out).
   */
  playTone(hz: number, dbfs: number): void {
    this.requireLive('a calibration tone');
    this.post({ type: 'calibration-tone', hz, dbfs });
  }

  /** Fade the tone out; resolves with the level that was handed to the output over its steady part. */
  async stopTone(): Promise<ToneResult> {
    this.requireLive('a calibration tone');
    const stopped = this.message('tone-stopped', 5000);
    this.post({ type: 'stop-tone' });
    const m = (await stopped) as Extract<WorkletMessage, { type: 'tone-stopped' }>;
    return { hz: m.hz, dbfs: m.dbfs, measuredDbfs: m.measuredDbfs, samples: m.samples };
  }

  /** Record both microphones for `seconds` (microphone calibration). */
  async record(seconds: number): Promise<{ err: Float32Array; ref: Float32Array; sampleRate: number }> {
    this.requireLive('a microphone recording');
    const got = this.message('recording', seconds * 1000 + 5000);
    this.post({ type: 'record', seconds });
    const m = (await got) as Extract<WorkletMessage, { type: 'recording' }>;
    return { err: m.err, ref: m.ref, sampleRate: m.sampleRate };
  }

  /**
   * Run the level-cap check on the live output (control goes off first). Resolves with the check's
   * result and the processor's own count of what it handed to the output; `cancelLevelCheck` ends it
   * early (the result then says it did not complete).
   */
  async levelCheck(request: LevelCheckRequest, expectedS: number): Promise<LevelCheckOutcome> {
    this.requireLive('the level-cap check');
    const got = this.message('level-check-result', (expectedS + 15) * 1000);
    this.post({ type: 'level-check', request });
    const m = (await got) as Extract<WorkletMessage, { type: 'level-check-result' }>;
    return { result: m.result as LevelCapResult, output: m.output };
  }

  cancelLevelCheck(): void {
    this.post({ type: 'cancel-level-check' });
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
    this.built = null;
  }
}
