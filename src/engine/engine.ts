import { checkSetting, LIMITER_SETTINGS, OUTPUT_STAGE_SETTINGS } from './settings.ts';
import type { Controller } from '../dsp/controller.ts';
import { GainRamp } from '../dsp/gain-ramp.ts';
import { PlantTrackingController } from '../dsp/plant-tracking.ts';
import { HighPass } from '../dsp/highpass.ts';
import { OutputLimiter } from '../dsp/limiter.ts';
import { createController, type ControllerConfig } from './controller-factory.ts';
import { ACTION, CAUSE, EventRing } from './events.ts';
import { DivergenceGuard, GuardBlockInfo, type GuardConfig } from './guard.ts';

/**
 * The real-time pipeline for one reference and one error microphone:
 *
 *   guard → controller → high-pass → start/stop ramp → limiter (look-ahead, ceiling) → meters
 *
 * Every output sample passes the limiter, whose hard ceiling no sample can exceed (non-finite
 * values become silence and are counted). Contract (DEVELOPERS.md, src/dsp): the constructor allocates everything
 * for the largest block; `process` handles one block with no allocation, no closures, no exceptions
 * and no logging. Parameter and mode changes are queued and applied at the next block boundary;
 * starts and stops are ramped.
 *
 * The high-pass and the limiter sit inside the acoustic loop: their delay is part of the secondary
 * path (identify the path with them in place). While the limiter reduces gain the effective secondary
 * path differs from the model, so the controllers keep their own output below the cap instead
 * (`controller.outputConstraint`, src/dsp/output-constraint.ts): the engine hands them the ceiling at
 * construction and on every change. Adaptation is never frozen because the output is limited: a
 * freeze would hold the weights that drive the output into the limiter, and so sustain itself.
 */
export type EngineMode = 'idle' | 'control' | 'muted';

export interface LimiterSettings {
  /** Sample-peak ceiling in dBFS, −120 … 0. Default −6 dBFS. */
  ceilingDbfs?: number;
  /** Look-ahead in ms (0 = zero latency, the default inside the control loop). */
  lookaheadMs?: number;
  /** Limit the 4×-oversampled true peak (ITU-R BS.1770-4 Annex 2) with a look-ahead detector (≥ 18 samples). */
  truePeak?: boolean;
  /**
   * The true-peak filter after the limiter (src/dsp/limiter.ts: one sample of delay, 4× true peak
   * within +0.41 dB of the ceiling). Default: on unless `truePeak` is given; `truePeak: false` alone
   * asks for the zero-latency sample-peak mode.
   */
  truePeakFilter?: boolean;
  attackMs?: number;
  releaseMs?: number;
}

export interface EngineConfig {
  /** Sample rate in Hz (8000 … 192000). */
  sampleRate: number;
  /** Largest block `process` will be given (1 … 16384 samples). */
  maxBlockSize: number;
  controller: ControllerConfig;
  /** Secondary-path model ŝ (taps at the engine's sample rate, bulk delay included). */
  secondaryPathModel: Float32Array;
  /** Loudspeaker → reference-mic model, for `controller.feedbackNeutralisation` (src/dsp/plant-tracking.ts). */
  feedbackPathModel?: Float32Array | undefined;
  /** Shorthand for limiter.ceilingDbfs. Default −6 dBFS. */
  ceilingDbfs?: number;
  limiter?: LimiterSettings;
  /** High-pass corner in Hz protecting small speakers (0 = off). Default 20 Hz. */
  highPassHz?: number;
  /** DC blocker corner in Hz (0 = off). Default 2 Hz. */
  dcBlockerHz?: number;
  /** Fade-in / fade-out time in ms for starts and stops (0 … 5000). Default 50 ms. */
  rampMs?: number;
  /** Mode at construction. Default 'idle'. */
  startMode?: EngineMode;
  /**
   * A second controller to switch to at runtime (for example the narrowband one beside a broadband
   * FxLMS). It runs frozen while on standby so its delay lines (and tone tracker) stay current.
   */
  standbyController?: ControllerConfig;
  /** Divergence and fault guard settings (src/engine/guard.ts), or false to run without it. */
  guard?: Omit<GuardConfig, 'sampleRate' | 'maxBlockSize'> | false;
  /** Events the ring holds before the oldest is overwritten. Default 256. */
  eventCapacity?: number;
}

export const DEFAULT_CEILING_DBFS: number = LIMITER_SETTINGS.ceilingDbfs.default;
export const DEFAULT_RAMP_MS: number = OUTPUT_STAGE_SETTINGS.rampMs.default;
export const DEFAULT_HIGHPASS_HZ: number = OUTPUT_STAGE_SETTINGS.highPassHz.default;
/** Default crossfade between controllers, ms. */
export const DEFAULT_CROSSFADE_MS = 200;

/** Meters, updated every block into this preallocated object (the host copies what it shows). */
export class EngineMeters {
  /** Blocks processed since construction. */
  blocks = 0;
  /** Seconds of audio processed. */
  timeS = 0;
  /** Mean-square power of the last block, per signal. */
  refPower = 0;
  errPower = 0;
  outPower = 0;
  /** Sample peaks (absolute value) of the last block. */
  refPeak = 0;
  errPeak = 0;
  outPeak = 0;
  /** Largest output sample peak since the last reset of the meters. */
  maxOutPeak = 0;
  /** Largest 4×-oversampled true peak of the output since construction (linear). */
  maxOutTruePeak = 0;
  /** Error power averaged with a ~125 ms time constant (IEC 61672 "F"-like exponential). */
  errPowerFast = 0;
  /** Error power averaged with a ~1 s time constant. */
  errPowerSlow = 0;
  /** Control-off error power: the slow average held from the last time control was off. */
  baselineErrPower = 0;
  /** 10·log10(baseline / fast) and 10·log10(baseline / slow); NaN until a baseline exists. */
  attenuationDb = NaN;
  attenuationSlowDb = NaN;
  /** Current output gain of the start/stop ramp, 0 … 1. */
  rampGain = 0;
  /** Limiter gain reduction now and its maximum since construction, dB (≥ 0). */
  gainReductionDb = 0;
  maxGainReductionDb = 0;
  /** Output ceiling now, linear. */
  ceiling = 0;
  /** Non-finite output samples replaced by silence (cumulative). */
  nonFiniteOut = 0;
  /** ‖w‖² of the control filter after the last block. */
  weightNormSquared = 0;
  /** Guard state: 0 running, 1 frozen, 2 muted. */
  guardState = 0;
  /**
   * 1 while the output is limited: the controller's output constraint acts (within the last 100 ms)
   * or the limiter has held the output at the cap for the guard's hold time. Not a fault.
   */
  outputLimited = 0;
  /** Events recorded since construction (including ones since overwritten in the ring). */
  events = 0;
}

/** A controller's slot for the output stage's gain, or a scratch one. */
function stageGainOf(c: Controller): Float64Array {
  // (typed: the slot is only ever written, one number per block)
  return c instanceof PlantTrackingController ? c.stageGain : new Float64Array(1);
}

export class Engine {
  readonly sampleRate: number;
  readonly maxBlockSize: number;
  /** The controller in charge now. */
  controller: Controller;
  /** The other controller, when one is configured. */
  standby: Controller | null;
  readonly meters = new EngineMeters();
  /** Guard and limiter events; drain with `drainEvents` (src/engine/events.ts) or `drainInto`. */
  readonly events: EventRing;
  readonly limiter: OutputLimiter;
  readonly guard: DivergenceGuard | null;
  private readonly highPass: HighPass;
  private readonly ramp: GainRamp;
  private readonly info = new GuardBlockInfo();
  private mode: EngineMode;
  private userAdapt = true;
  private readonly ctrlOut: Float32Array;
  private readonly prevOut: Float32Array;
  private prevOutN = 0;
  private readonly standbyOut: Float32Array;
  private fadeLeft = 0;
  private fadeTotal = 0;
  private readonly fastCoef: number;
  private readonly slowCoef: number;
  private baselineValid = false;
  private externalBaseline = NaN;
  private outputOn = false;
  private eventsSeen = 0;
  /** Where the output stage's gain of each block goes (a controller that models its own output: src/dsp/plant-tracking.ts). */
  private stageGainOut: Float64Array = new Float64Array(1);
  // queued changes, applied at the next block boundary
  private pendingMode: EngineMode | null = null;
  private pendingStepSize = NaN;
  private pendingLeakage = NaN;
  private pendingCeilingDb = NaN;
  private pendingAdapt = -1;
  private pendingResetWeights = false;
  private pendingSwitchMs = NaN;
  private pendingAcknowledge = false;

  constructor(config: EngineConfig) {
    const { sampleRate, maxBlockSize } = config;
    if (!(sampleRate >= 8000 && sampleRate <= 192000)) throw new RangeError(`sampleRate must be 8000 … 192000 Hz, got ${sampleRate}`);
    if (!Number.isInteger(maxBlockSize) || maxBlockSize < 1 || maxBlockSize > 16384) throw new RangeError(`maxBlockSize must be an integer from 1 to 16384, got ${maxBlockSize}`);
    const lim = config.limiter ?? {};
    const ceilingDbfs = lim.ceilingDbfs ?? config.ceilingDbfs ?? DEFAULT_CEILING_DBFS;
    checkSetting(LIMITER_SETTINGS, 'ceilingDbfs', ceilingDbfs);
    const rampMs = config.rampMs ?? DEFAULT_RAMP_MS;
    checkSetting(OUTPUT_STAGE_SETTINGS, 'rampMs', rampMs);
    const hp = config.highPassHz ?? DEFAULT_HIGHPASS_HZ;
    if (!(hp >= 0 && hp < sampleRate / 4)) throw new RangeError(`highPassHz must be from 0 to ${sampleRate / 4} Hz, got ${hp}`);
    this.sampleRate = sampleRate;
    this.maxBlockSize = maxBlockSize;
    const extras = { feedbackPathModel: config.feedbackPathModel };
    this.controller = createController(config.controller, config.secondaryPathModel, maxBlockSize, sampleRate, extras);
    this.standby = config.standbyController ? createController(config.standbyController, config.secondaryPathModel, maxBlockSize, sampleRate, extras) : null;
    if (this.standby) this.standby.adapt = false;
    const cap = Math.pow(10, ceilingDbfs / 20);
    this.controller.setOutputCap?.(cap);
    this.standby?.setOutputCap?.(cap);
    this.stageGainOut = stageGainOf(this.controller);
    this.limiter = new OutputLimiter({
      sampleRate,
      maxBlockSize,
      ceilingDbfs,
      lookaheadMs: lim.lookaheadMs ?? 0,
      ...(lim.truePeak !== undefined ? { truePeak: lim.truePeak } : {}),
      ...(lim.truePeakFilter !== undefined ? { truePeakFilter: lim.truePeakFilter } : {}),
      ...(lim.attackMs !== undefined ? { attackMs: lim.attackMs } : {}),
      ...(lim.releaseMs !== undefined ? { releaseMs: lim.releaseMs } : {}),
    });
    this.highPass = new HighPass({ sampleRate, cornerHz: hp, dcBlockerHz: config.dcBlockerHz ?? 2 });
    this.ramp = new GainRamp({ sampleRate, fadeInMs: rampMs, fadeOutMs: rampMs });
    this.events = new EventRing(config.eventCapacity ?? 256);
    this.guard = config.guard === false ? null : new DivergenceGuard({ ...(config.guard ?? {}), sampleRate, maxBlockSize }, this.events);
    this.ctrlOut = new Float32Array(maxBlockSize);
    this.prevOut = new Float32Array(maxBlockSize);
    this.standbyOut = new Float32Array(maxBlockSize);
    this.fastCoef = 0.125 * sampleRate;
    this.slowCoef = 1.0 * sampleRate;
    this.info.ref = new Float32Array(0);
    this.mode = config.startMode ?? 'idle';
    if (this.mode === 'control') {
      this.ramp.start();
      this.outputOn = true;
    }
    this.meters.ceiling = Math.pow(10, ceilingDbfs / 20);
  }

  get currentMode(): EngineMode {
    return this.pendingMode ?? this.mode;
  }

  /** Output latency the limiter adds (samples): part of the secondary path. */
  get latencySamples(): number {
    return this.limiter.latencySamples;
  }

  /** Queue a mode change: 'control' fades in, 'idle' fades out, 'muted' fades out and stays silent. */
  setMode(mode: EngineMode): void {
    this.pendingMode = mode;
  }
  setStepSize(mu: number): void {
    if (mu > 0 && Number.isFinite(mu)) this.pendingStepSize = mu;
  }
  setLeakage(gamma: number): void {
    if (gamma >= 0 && Number.isFinite(gamma)) this.pendingLeakage = gamma;
  }
  /** Queue a new ceiling (dBFS, −120 … 0); out-of-range values are ignored (validate at the boundary). */
  setCeilingDbfs(db: number): void {
    if (db <= 0 && db >= -120) this.pendingCeilingDb = db;
  }
  setAdaptation(on: boolean): void {
    this.pendingAdapt = on ? 1 : 0;
  }
  resetWeights(): void {
    this.pendingResetWeights = true;
  }
  /** The user's acknowledgement after a guard action: resume as configured. */
  acknowledge(): void {
    this.pendingAcknowledge = true;
  }
  /**
   * The control-off error power, when the host knows it better than the engine can (the simulator
   * knows it exactly). NaN returns to the engine's own estimate from the last time control was off.
   */
  setBaselineErrorPower(power: number): void {
    this.externalBaseline = power;
  }
  /**
   * Hand control to the standby controller with a raised-cosine crossfade (ms): the outgoing one is
   * frozen and fades out while the incoming one adapts and fades in, so there is no click or burst.
   */
  switchController(crossfadeMs = DEFAULT_CROSSFADE_MS): void {
    if (this.standby && crossfadeMs >= 0 && crossfadeMs <= 10000) this.pendingSwitchMs = crossfadeMs;
  }
  /** True while a crossfade between controllers is under way. */
  get switching(): boolean {
    return this.fadeLeft > 0;
  }

  private applyPending(): void {
    if (this.pendingMode !== null) {
      this.mode = this.pendingMode;
      this.pendingMode = null;
    }
    if (!Number.isNaN(this.pendingSwitchMs) && this.standby) {
      const incoming = this.standby;
      this.standby = this.controller;
      this.standby.adapt = false;
      this.controller = incoming;
      this.stageGainOut = stageGainOf(incoming);
      this.fadeTotal = Math.max(1, Math.round((this.pendingSwitchMs / 1000) * this.sampleRate));
      this.fadeLeft = this.fadeTotal;
      this.pendingSwitchMs = NaN;
    }
    const c = this.controller;
    if (!Number.isNaN(this.pendingStepSize)) {
      c.setStepSize(this.pendingStepSize);
      this.pendingStepSize = NaN;
    }
    if (!Number.isNaN(this.pendingLeakage)) {
      c.setLeakage(this.pendingLeakage);
      this.pendingLeakage = NaN;
    }
    if (!Number.isNaN(this.pendingCeilingDb)) {
      this.limiter.setCeilingDbfs(this.pendingCeilingDb);
      const cap = Math.pow(10, this.pendingCeilingDb / 20);
      this.meters.ceiling = cap;
      this.controller.setOutputCap?.(cap);
      this.standby?.setOutputCap?.(cap);
      this.pendingCeilingDb = NaN;
    }
    if (this.pendingAdapt >= 0) {
      this.userAdapt = this.pendingAdapt === 1;
      this.pendingAdapt = -1;
    }
    if (this.pendingResetWeights) {
      this.controller.reset();
      this.pendingResetWeights = false;
    }
    if (this.pendingAcknowledge) {
      if (this.guard) this.guard.acknowledge();
      this.pendingAcknowledge = false;
    }
  }

  /**
   * End a probe: close the output gate at once, without the stop ramp, so that no tail of the
   * controller's output follows the probe (a probe ends with its own fade-out). The next `process`
   * in 'control' mode fades the controller in from silence.
   */
  endProbe(): void {
    this.ramp.reset();
    this.outputOn = false;
  }

  /**
   * One block: ref and err are the microphone samples of the same instants; out receives the
   * loudspeaker signal for those instants. n ≤ maxBlockSize (larger n is clamped: the host must
   * respect maxBlockSize). Non-finite input samples are replaced by silence in place by the guard.
   */
  process(ref: Float32Array, err: Float32Array, out: Float32Array, n: number): void {
    if (n > this.maxBlockSize) n = this.maxBlockSize;
    if (n <= 0) return;
    this.applyPending();
    const m = this.meters;
    const y = this.ctrlOut;
    const lim = this.limiter;

    // Guard first: it sanitises the inputs and decides what the controller may do this block.
    const guard = this.guard;
    const baseline = !Number.isNaN(this.externalBaseline) ? this.externalBaseline : this.baselineValid ? m.baselineErrPower : NaN;
    if (guard) {
      const info = this.info;
      info.timeS = m.timeS;
      info.n = n;
      info.ref = ref;
      info.err = err;
      info.out = this.prevOut;
      info.outN = this.prevOutN;
      info.weightNormSq = m.weightNormSquared;
      info.baselineErrorPower = this.mode === 'control' ? baseline : NaN;
      info.limiterGainReductionDb = lim.readout.gainReductionDb;
      const action = guard.check(info);
      if (action === ACTION.resetWeights || action === ACTION.mute) this.controller.reset();
    }
    const guardAllowsAdapt = guard ? guard.adaptationAllowed : true;
    const guardAllowsOutput = guard ? guard.outputAllowed : true;
    this.controller.adapt = this.userAdapt && guardAllowsAdapt;

    // Output gate: the ramp fades in when control is on and the guard allows output, out otherwise.
    const wantOn = this.mode === 'control' && guardAllowsOutput;
    if (wantOn !== this.outputOn) {
      if (wantOn) this.ramp.start();
      else this.ramp.stop();
      this.outputOn = wantOn;
    }

    // Input meters.
    let rp = 0, ep = 0, rpk = 0, epk = 0;
    for (let i = 0; i < n; i++) {
      const r = ref[i]!;
      const e = err[i]!;
      rp += r * r;
      ep += e * e;
      const ar = r < 0 ? -r : r;
      const ae = e < 0 ? -e : e;
      if (ar > rpk) rpk = ar;
      if (ae > epk) epk = ae;
    }
    rp /= n;
    ep /= n;

    // Controller: it runs while output is on or still fading out, so fades are smooth.
    const running = this.outputOn || !this.ramp.isSilent;
    if (running) {
      this.controller.process(ref, err, y, n);
    } else {
      for (let i = 0; i < n; i++) y[i] = 0;
    }
    const sb = this.standby;
    if (sb) {
      // the standby runs frozen every block, so its delay lines and tone tracker stay current
      const z = this.standbyOut;
      sb.process(ref, err, z, n);
      if (this.fadeLeft > 0 && running) {
        const total = this.fadeTotal;
        let left = this.fadeLeft;
        for (let i = 0; i < n; i++) {
          // incoming gain rises as a raised cosine from 0 to 1; the outgoing one falls as its complement
          const a = left > 0 ? 0.5 - 0.5 * Math.cos((Math.PI * (total - left)) / total) : 1;
          y[i] = a * y[i]! + (1 - a) * z[i]!;
          if (left > 0) left--;
        }
        this.fadeLeft = left;
      } else {
        this.fadeLeft = 0;
      }
    }
    const prev = this.prevOut;
    for (let i = 0; i < n; i++) prev[i] = y[i]!;
    this.prevOutN = n;

    // Output stage: high-pass (speaker protection), ramp, limiter. Nothing reaches `out` otherwise.
    this.highPass.process(y, y, n);
    this.ramp.process(y, n);
    lim.process(y, out, n);

    let op = 0, opk = 0;
    for (let i = 0; i < n; i++) {
      const v = out[i]!;
      op += v * v;
      const av = v < 0 ? -v : v;
      if (av > opk) opk = av;
    }
    op /= n;

    if (lim.readout.blockNonFiniteCount > 0) {
      const st = this.events.staged;
      st[0] = m.timeS;
      st[1] = 2; // NON_FINITE_SOURCES index of 'out'
      st[2] = lim.readout.blockNonFiniteCount;
      this.events.commit(CAUSE.nonFinite, ACTION.none);
    }

    // Meter update.
    const fastA = Math.exp(-n / this.fastCoef);
    const slowA = Math.exp(-n / this.slowCoef);
    if (m.blocks === 0) {
      m.errPowerFast = ep;
      m.errPowerSlow = ep;
    } else if (ep === ep) {
      m.errPowerFast = fastA * m.errPowerFast + (1 - fastA) * ep;
      m.errPowerSlow = slowA * m.errPowerSlow + (1 - slowA) * ep;
    }
    const gain = this.ramp.gain;
    // controllers that model their own output's way back (src/dsp/plant-tracking.ts) learn what the stage let through
    const gr = lim.readout.gainReductionDb;
    this.stageGainOut[0] = gr > 0 ? gain * Math.pow(10, -gr / 20) : gain;
    if (this.mode !== 'control' && gain === 0) {
      m.baselineErrPower = m.errPowerSlow;
      this.baselineValid = m.baselineErrPower > 0;
    } else if (!Number.isNaN(this.externalBaseline)) {
      m.baselineErrPower = this.externalBaseline;
    }
    const haveBaseline = !Number.isNaN(this.externalBaseline) || this.baselineValid;
    if (haveBaseline && this.mode === 'control') {
      m.attenuationDb = 10 * Math.log10(m.baselineErrPower / m.errPowerFast);
      m.attenuationSlowDb = 10 * Math.log10(m.baselineErrPower / m.errPowerSlow);
    } else {
      m.attenuationDb = NaN;
      m.attenuationSlowDb = NaN;
    }
    m.blocks++;
    m.timeS += n / this.sampleRate;
    m.refPower = rp;
    m.errPower = ep;
    m.outPower = op;
    m.refPeak = rpk;
    m.errPeak = epk;
    m.outPeak = opk;
    if (opk > m.maxOutPeak) m.maxOutPeak = opk;
    const ro = lim.readout;
    m.maxOutTruePeak = ro.maxTruePeak;
    m.rampGain = gain;
    m.gainReductionDb = ro.gainReductionDb;
    m.maxGainReductionDb = ro.maxGainReductionDb;
    m.nonFiniteOut = ro.nonFiniteCount;
    m.weightNormSquared = this.controller.weightNormSquared();
    m.guardState = guard ? (guard.state === 'running' ? 0 : guard.state === 'frozen' ? 1 : 2) : 0;
    const oc = this.controller.outputConstraint;
    m.outputLimited = (oc !== undefined && oc.active === 1) || (guard !== null && guard.outputLimited) ? 1 : 0;
    this.eventsSeen = this.events.pushed;
    m.events = this.eventsSeen;
  }

  /**
   * Play a probe or test signal (identification noise, a sweep, a calibration tone) through the same
   * output stage as the controller: high-pass, ramp and limiter, so the identified path includes them
   * and no probe sample can pass the ceiling. The controller does not run; meters of the output update.
   * `probe` is not modified. No allocation.
   */
  processProbe(probe: Float32Array, out: Float32Array, n: number): void {
    if (n > this.maxBlockSize) n = this.maxBlockSize;
    if (n <= 0) return;
    this.applyPending();
    const y = this.ctrlOut;
    for (let i = 0; i < n; i++) y[i] = probe[i]!;
    if (!this.outputOn && this.mode !== 'muted') {
      this.ramp.start();
      this.outputOn = true;
    }
    this.highPass.process(y, y, n);
    this.ramp.process(y, n);
    this.limiter.process(y, out, n);
    let opk = 0;
    for (let i = 0; i < n; i++) {
      const a = out[i]! < 0 ? -out[i]! : out[i]!;
      if (a > opk) opk = a;
    }
    const m = this.meters;
    m.outPeak = opk;
    if (opk > m.maxOutPeak) m.maxOutPeak = opk;
    m.maxOutTruePeak = this.limiter.readout.maxTruePeak;
    m.gainReductionDb = this.limiter.readout.gainReductionDb;
    m.rampGain = this.ramp.gain;
  }
}
