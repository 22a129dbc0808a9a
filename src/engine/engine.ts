import type { Controller } from '../dsp/controller.ts';
import { createController, type ControllerConfig } from './controller-factory.ts';

/**
 * The real-time pipeline for one reference and one error microphone:
 *
 *   guard → controller → output stage (ramp, ceiling) → meters
 *
 * Contract (DESIGN.md): the constructor allocates everything for the largest block; `process`
 * handles one block with no allocation, no closures, no exceptions and no logging. Parameter and
 * mode changes are queued and applied at the next block boundary; starts and stops are ramped.
 */
export type EngineMode = 'idle' | 'control' | 'muted';

export interface EngineConfig {
  /** Sample rate in Hz (8000 … 192000). */
  sampleRate: number;
  /** Largest block `process` will be given (1 … 16384 samples). */
  maxBlockSize: number;
  controller: ControllerConfig;
  /** Secondary-path model ŝ (taps at the engine's sample rate, bulk delay included). */
  secondaryPathModel: Float32Array;
  /** Hard output ceiling in dBFS (sample peak), ≤ 0. Default −6 dBFS. */
  ceilingDbfs?: number;
  /** Fade-in / fade-out time in ms for starts and stops (0 … 5000). Default 50 ms. */
  rampMs?: number;
  /** Mode at construction. Default 'idle'. */
  startMode?: EngineMode;
  /**
   * A second controller to switch to at runtime (for example the narrowband one beside a broadband
   * FxLMS). It runs frozen while on standby so its delay lines (and tone tracker) stay current.
   */
  standbyController?: ControllerConfig;
}

/** Default crossfade between controllers, ms. */
export const DEFAULT_CROSSFADE_MS = 200;

export const DEFAULT_CEILING_DBFS = -6;
export const DEFAULT_RAMP_MS = 50;

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
  /** Output samples clamped by the ceiling (cumulative). */
  ceilingHits = 0;
  /** Non-finite output samples replaced by silence (cumulative). */
  nonFiniteOut = 0;
  /** ‖w‖² of the control filter after the last block. */
  weightNormSquared = 0;
}

export class Engine {
  readonly sampleRate: number;
  readonly maxBlockSize: number;
  /** The controller in charge now. */
  controller: Controller;
  /** The other controller, when one is configured. */
  standby: Controller | null;
  readonly meters = new EngineMeters();
  private mode: EngineMode;
  private ceiling: number;
  private rampStep: number;
  private rampGain = 0;
  private rampTarget = 0;
  private readonly ctrlOut: Float32Array;
  private readonly standbyOut: Float32Array;
  private fadeLeft = 0;
  private fadeTotal = 0;
  private pendingSwitchMs = NaN;
  private readonly fastCoef: number;
  private readonly slowCoef: number;
  private baselineValid = false;
  // queued changes, applied at the next block boundary
  private pendingMode: EngineMode | null = null;
  private pendingStepSize = NaN;
  private pendingLeakage = NaN;
  private pendingCeiling = NaN;
  private pendingAdapt = -1;
  private pendingResetWeights = false;

  constructor(config: EngineConfig) {
    const { sampleRate, maxBlockSize } = config;
    if (!(sampleRate >= 8000 && sampleRate <= 192000)) throw new RangeError(`sampleRate must be 8000 … 192000 Hz, got ${sampleRate}`);
    if (!Number.isInteger(maxBlockSize) || maxBlockSize < 1 || maxBlockSize > 16384) throw new RangeError(`maxBlockSize must be an integer from 1 to 16384, got ${maxBlockSize}`);
    const ceilingDbfs = config.ceilingDbfs ?? DEFAULT_CEILING_DBFS;
    if (!(ceilingDbfs <= 0 && ceilingDbfs >= -120)) throw new RangeError(`ceilingDbfs must be from −120 to 0 dBFS, got ${ceilingDbfs}`);
    const rampMs = config.rampMs ?? DEFAULT_RAMP_MS;
    if (!(rampMs >= 0 && rampMs <= 5000)) throw new RangeError(`rampMs must be from 0 to 5000 ms, got ${rampMs}`);
    this.sampleRate = sampleRate;
    this.maxBlockSize = maxBlockSize;
    this.controller = createController(config.controller, config.secondaryPathModel, maxBlockSize, sampleRate);
    this.standby = config.standbyController ? createController(config.standbyController, config.secondaryPathModel, maxBlockSize, sampleRate) : null;
    if (this.standby) this.standby.adapt = false;
    this.ceiling = Math.pow(10, ceilingDbfs / 20);
    this.rampStep = rampMs > 0 ? 1 / ((rampMs / 1000) * sampleRate) : 1;
    this.ctrlOut = new Float32Array(maxBlockSize);
    this.standbyOut = new Float32Array(maxBlockSize);
    this.fastCoef = 0.125 * sampleRate;
    this.slowCoef = 1.0 * sampleRate;
    this.mode = config.startMode ?? 'idle';
    if (this.mode === 'control') {
      this.rampTarget = 1;
    }
  }

  get currentMode(): EngineMode {
    return this.pendingMode ?? this.mode;
  }

  get ceilingLinear(): number {
    return this.ceiling;
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
  setCeilingDbfs(db: number): void {
    if (db <= 0 && db >= -120) this.pendingCeiling = Math.pow(10, db / 20);
  }
  setAdaptation(on: boolean): void {
    this.pendingAdapt = on ? 1 : 0;
  }
  resetWeights(): void {
    this.pendingResetWeights = true;
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
      const m = this.pendingMode;
      this.pendingMode = null;
      if (m !== this.mode) {
        this.mode = m;
        this.rampTarget = m === 'control' ? 1 : 0;
      }
    }
    if (!Number.isNaN(this.pendingSwitchMs) && this.standby) {
      const incoming = this.standby;
      const adapt = this.controller.adapt;
      this.standby = this.controller;
      this.standby.adapt = false;
      this.controller = incoming;
      this.controller.adapt = adapt;
      this.fadeTotal = Math.max(1, Math.round((this.pendingSwitchMs / 1000) * this.sampleRate));
      this.fadeLeft = this.fadeTotal;
      this.pendingSwitchMs = NaN;
    }
    const c = this.controller;
    if (!Number.isNaN(this.pendingStepSize)) {
      if (c.setStepSize) c.setStepSize(this.pendingStepSize);
      this.pendingStepSize = NaN;
    }
    if (!Number.isNaN(this.pendingLeakage)) {
      if (c.setLeakage) c.setLeakage(this.pendingLeakage);
      this.pendingLeakage = NaN;
    }
    if (!Number.isNaN(this.pendingCeiling)) {
      this.ceiling = this.pendingCeiling;
      this.pendingCeiling = NaN;
    }
    if (this.pendingAdapt >= 0) {
      this.controller.adapt = this.pendingAdapt === 1;
      this.pendingAdapt = -1;
    }
    if (this.pendingResetWeights) {
      this.controller.reset();
      this.pendingResetWeights = false;
    }
  }

  /**
   * One block: ref and err are the microphone samples of the same instants; out receives the
   * loudspeaker signal for those instants. n ≤ maxBlockSize (larger n is processed in pieces of
   * maxBlockSize would need extra state, so it is clamped: the host must respect maxBlockSize).
   */
  process(ref: Float32Array, err: Float32Array, out: Float32Array, n: number): void {
    if (n > this.maxBlockSize) n = this.maxBlockSize;
    this.applyPending();
    const m = this.meters;
    const y = this.ctrlOut;

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

    // Controller: it runs while control is on or still fading out, so the fade is smooth.
    const running = this.mode === 'control' || this.rampGain > 0;
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

    // Output stage: ramp, then a hard ceiling no sample can pass; non-finite → silence.
    const ceil = this.ceiling;
    let g = this.rampGain;
    const target = this.rampTarget;
    const step = this.rampStep;
    let op = 0, opk = 0, hits = 0, bad = 0;
    for (let i = 0; i < n; i++) {
      if (g < target) {
        g += step;
        if (g > target) g = target;
      } else if (g > target) {
        g -= step;
        if (g < target) g = target;
      }
      let v = y[i]! * g;
      if (!(v === v) || v === Infinity || v === -Infinity) {
        v = 0;
        bad++;
      } else if (v > ceil) {
        v = ceil;
        hits++;
      } else if (v < -ceil) {
        v = -ceil;
        hits++;
      }
      out[i] = v;
      op += v * v;
      const av = v < 0 ? -v : v;
      if (av > opk) opk = av;
    }
    this.rampGain = g;
    op /= n;

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
    if (this.mode !== 'control' && g === 0) {
      m.baselineErrPower = m.errPowerSlow;
      this.baselineValid = m.baselineErrPower > 0;
    }
    if (this.baselineValid && this.mode === 'control') {
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
    m.rampGain = g;
    m.ceilingHits += hits;
    m.nonFiniteOut += bad;
    m.weightNormSquared = this.controller.weightNormSquared();
  }
}
