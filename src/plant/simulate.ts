/**
 * The closed-loop simulator: sources → paths → microphones → engine → loudspeaker → paths, block by
 * block and sample-accurate. The secondary and feedback paths are at least one block long (the
 * scenario validator enforces it), so each block's microphone signals depend only on outputs of
 * earlier blocks and the block loop is exact.
 *
 * One pass computes both runs of the same seed: control off (error = disturbance + sensor noise) and
 * control on. Microphones clip at ±1 (full scale), as a converter would.
 */
import { engineSettings } from '../engine/settings.ts';
import { Engine, DEFAULT_CEILING_DBFS, type EngineConfig, type EngineMode, type LimiterSettings } from '../engine/engine.ts';
import { HighPass } from '../dsp/highpass.ts';
import { OutputLimiter } from '../dsp/limiter.ts';
import { PolynomialNonlinearity } from './nonlinearity.ts';
import { drainEvents, type EngineEvent } from '../engine/events.ts';
import type { ControllerConfig } from '../engine/controller-factory.ts';
import { Random } from '../dsp/random.ts';
import { convergenceMetrics, type ConvergenceResult } from '../analysis/convergence.ts';
import { wienerBound } from '../analysis/wiener.ts';
import { fftConvolve } from '../dsp/fft.ts';
import { amplitudeToDb, powerToDbfs } from '../dsp/units.ts';
import { denseResponse } from './fractional-delay.ts';
import { PathFilter } from './path-filter.ts';
import { isAmplified, OutputLimitMeter } from './output-limit.ts';
import { isStationary, pathResponse, scenarioCeilingDbfs, ScenarioError, type PathSpec, type Scenario } from './scenario.ts';
import { roomPathsToExplicit } from './room-paths.ts';
import { createSource, type SourceGenerator, type WavTable } from './sources.ts';
import { imperfectModel } from './secondary-model.ts';
import { TonalController } from '../dsp/tonal-controller.ts';
import { describeImplementation } from '../engine/implementation.ts';
import type { Controller } from '../dsp/controller.ts';
import { pathResponseAt } from '../dsp/path-response.ts';

export interface SimulateOptions {
  /** Decoded WAV sources (mono, at the scenario's sample rate), keyed by the scenario's `file`. */
  wavs?: WavTable;
  /** A secondary-path model to use instead of the one built from the true path (e.g. a model file). */
  secondaryPathModel?: Float32Array;
  /** A feedback-path model (a model file named by controller.feedbackNeutralisation). */
  feedbackPathModel?: Float32Array;
  /** Keep the four signals (reference, error on, output, error off) for writing. Default false. */
  record?: boolean;
  /**
   * Called after every block with that block's signals (valid only during the call), in the order of
   * `SimulationSignals`: reference, error on, output, error off, reference off. For writing long runs to
   * disk block by block without `record`.
   */
  onBlock?: (signals: readonly [Float32Array, Float32Array, Float32Array, Float32Array, Float32Array], n: number) => void;
  /** Called now and then with the fraction done (0 … 1). */
  onProgress?: (fraction: number) => void;
  /** Seconds of the control-off run used for the Wiener bound (default 30). */
  wienerMaxS?: number;
}

export interface SimulationSignals {
  reference: Float32Array;
  errorOn: Float32Array;
  output: Float32Array;
  errorOff: Float32Array;
  /** The reference microphone with control off (differs from `reference` only with a feedback path). */
  referenceOff: Float32Array;
}

export interface SimulationResult {
  sampleRate: number;
  durationS: number;
  controlStartS: number;
  algorithm: string;
  /** Which code ran the controller (time domain in TypeScript or wasm SIMD, or frequency domain). */
  implementation: string;
  /** Steady-state attenuation at the error mic, dB (null with a note when undefined). */
  attenuationDb: number | null;
  convergenceS: number | null;
  wienerBoundDb: number | null;
  /** False when the scenario is not stationary (drifting tones): the figure is then not a bound. */
  wienerBoundIsBound: boolean;
  peakOutputDbfs: number | null;
  /** What the output cap does to the result (see OutputLimit). */
  outputLimit: OutputLimit;
  /** True when control on is more than 1 dB louder than control off at the error mic, overall or at any reported tone. */
  amplified: boolean;
  /** Real divergence only (error rise, unbounded weights, non-finite values, a howl): being output-limited is not. */
  diverged: boolean;
  divergenceReasons: string[];
  /** AES17 RMS levels of the error mic over the steady-state window, control off and on. */
  errorOffDbfs: number | null;
  errorOnDbfs: number | null;
  clipping: { referenceSamples: number; errorSamples: number };
  /**
   * Per tonal component (each tone, each harmonic of a harmonic series): mean true frequency over the
   * last 25 % of the run and the attenuation found by demodulating the error at the true instantaneous
   * phase over that window, 20·log10(|E_off| / |E_on|).
   */
  tones: ToneResult[];
  /** Tracking error of the narrowband controller (Hz), from its first lock to the end; null otherwise. */
  trackingErrorHz: { rms: number; max: number } | null;
  /** Guard and limiter events, in order. */
  events: EngineEvent[];
  /** Reasons for null figures and other remarks, keyed by field. */
  notes: Record<string, string>;
  /** The model the controller used. */
  secondaryPathModel: Float32Array;
  /** The true secondary path the controller drove (output stage delay and high-pass included). */
  trueSecondaryPath: Float64Array;
  timeline: { timeS: Float64Array; attenuationDb: Float64Array; offDbfs: Float64Array; onDbfs: Float64Array };
  signals?: SimulationSignals;
}

/**
 * The output cap and what it costs. `requiredPeakDbfs` is the peak output of the unconstrained
 * optimum: for FxLMS the output of the Wiener filter (the same solve as the bound) on the control-off
 * reference; for the narrowband controller Σ_k |D_k|/|S(kω)| over the tonal components (the
 * amplitude each needs at the controller output, summed: the peak of their sum at most, exactly it
 * for one tone). null, with a note, where it cannot be computed.
 */
export interface OutputLimit {
  /** The output cap (limiter ceiling), dBFS sample peak. */
  capDbfs: number;
  /** The controller's constraint level, dBFS: the cap minus the margin. */
  constraintDbfs: number;
  /** `controller.outputConstraint` in force. */
  method: string;
  requiredPeakDbfs: number | null;
  /**
   * The required peak exceeds the constraint level; where it is unknown, the constraint or the
   * limiter acted during more than half of the last 25 % of the run.
   */
  limited: boolean;
  /** Fraction of the control-on time (by blocks) in which the output came within 0.1 dB of the cap or the limiter reduced gain by more than 0.1 dB. */
  timeAtCapFraction: number;
  /** Fraction of the control-on time during which the controller's own constraint acted. */
  constraintActiveFraction: number;
  /**
   * When limited: the attenuation to expect within the constraint, −20·log10(1 − A/required) (the
   * constrained optimum for one tone, 20·log10(|D|/(|D| − |S|·A)); calculated), capped by the Wiener
   * bound; null otherwise.
   */
  expectedDb: number | null;
}

/**
 * "output-limited: cancelling this needs about −4 dBFS; the cap is −10 dBFS, so expect about 6 dB",
 * or how much room the cap leaves. Shared by the text summary, the HTML report and the panel.
 */
export function describeOutputLimit(o: OutputLimit): string {
  const db = (v: number): string => `${v < 0 ? '−' : ''}${Math.abs(v).toFixed(1)}`;
  const method = `constraint "${o.method}" at ${db(o.constraintDbfs)} dBFS`;
  const atCap = `; at the cap ${(100 * o.timeAtCapFraction).toFixed(1)} % of the time`;
  if (o.limited) {
    const need = o.requiredPeakDbfs === null ? 'cancelling this needs more output than the cap allows' : `cancelling this needs about ${db(o.requiredPeakDbfs)} dBFS`;
    const expect = o.expectedDb === null ? '' : `, so expect about ${o.expectedDb.toFixed(0)} dB`;
    return `output-limited: ${need}; the cap is ${db(o.capDbfs)} dBFS${expect} (${method}${atCap})`;
  }
  const need = o.requiredPeakDbfs === null ? 'needed output unknown' : `cancelling this needs about ${db(o.requiredPeakDbfs)} dBFS`;
  return `not limited: ${need}; the cap is ${db(o.capDbfs)} dBFS (${method}${atCap})`;
}

export interface ToneResult {
  hz: number;
  harmonic: number;
  source: number;
  attenuationDb: number | null;
}

export const HOP_S = 0.01;

/** I/Q demodulation of the error at a tonal component's true phase, control off and on. */
class ToneMeter {
  offRe = 0; offIm = 0; onRe = 0; onIm = 0; hzSum = 0; count = 0;
  constructor(readonly source: number, readonly harmonic: number) {}
}

function dense(r: { offset: number; taps: Float64Array }): { offset: number; taps: Float64Array } {
  return r.taps.length ? r : { offset: 0, taps: new Float64Array(1) };
}

/**
 * The controller part of a scenario as the engine wants it: the same object minus the simulator-only
 * fields (src/engine/settings.ts). The tone follower's frequency source defaults to the reference
 * mic, or to "fixed" when only `hz` is given.
 */
export function engineControllerConfig(sc: Scenario): ControllerConfig {
  const c = engineSettings(sc.controller) as ControllerConfig;
  if (c.algorithm === 'tonal' && c.frequencySource === undefined) return { ...c, frequencySource: c.hz !== undefined ? 'fixed' : 'reference' };
  return c;
}

/** The true secondary path as a dense impulse response (bulk delay included). */
export function trueSecondaryPath(sc: Scenario): Float64Array {
  const r = pathResponse(sc.paths.secondary, sc.sampleRate);
  return denseResponse(r);
}

/**
 * The closed loop as a streaming object: each `step` advances one block and leaves the block's
 * signals in preallocated arrays. The simulator and the simulated-plant worklet both drive it.
 * `step` allocates nothing.
 */
export class PlantLoop {
  readonly engine: Engine;
  readonly sampleRate: number;
  readonly blockSize: number;
  readonly secondaryPathModel: Float32Array;
  readonly trueSecondaryPath: Float64Array;
  /** Signals of the last block (first n samples valid). */
  readonly ref: Float32Array;
  readonly refNoFeedback: Float32Array;
  readonly errOn: Float32Array;
  readonly errOff: Float32Array;
  readonly out: Float32Array;
  /** Samples simulated so far. */
  time = 0;
  clipRef = 0;
  clipErr = 0;
  nonFiniteErr = 0;
  /** 1 s exponential average of the control-off error power (the guard's baseline). */
  baselinePower = 0;
  // injected faults, by sample time
  private readonly faultAt: number[] = [];
  private readonly faultSpec: NonNullable<Scenario['faults']>;
  private nextFault = 0;
  private dropRefFrom = 0;
  private dropRefUntil = 0;
  private dropErrFrom = 0;
  private dropErrUntil = 0;
  private nanFrom = 0;
  private nanUntil = 0;
  readonly sources: SourceGenerator[];
  private readonly refF: PathFilter;
  private readonly priF: PathFilter;
  private secF: PathFilter;
  private fbF: PathFilter | null;
  /** The true loudspeaker → reference-mic path as the engine drives it (null without paths.feedback). */
  readonly trueFeedbackPath: Float64Array | null;
  /** Feedback-path model handed to the controller for neutralisation (null when not asked for). */
  readonly feedbackPathModel: Float32Array | null;
  /** Every secondary (and feedback) path the run will see, in order: the scenario's, then one per `secondary-path-change`. */
  readonly secondaryPaths: Float64Array[] = [];
  private readonly secAll: PathFilter[] = [];
  private readonly fbAll: (PathFilter | null)[] = [];
  private pathIdx = 0;
  private readonly refNoiseRms: number;
  private readonly errNoiseRms: number;
  private readonly refNoise: Random;
  private readonly errNoise: Random;
  private readonly src: Float64Array;
  private readonly refAc: Float64Array;
  private readonly dAc: Float64Array;
  private readonly loopAc: Float64Array;
  private readonly speaker: PolynomialNonlinearity | null;
  private readonly speakerOut: Float32Array;

  constructor(sc: Scenario, opts: { wavs?: WavTable; secondaryPathModel?: Float32Array; feedbackPathModel?: Float32Array; startMode?: EngineMode; standbyController?: ControllerConfig } = {}) {
    const fs = sc.sampleRate;
    const B = sc.blockSize;
    this.sampleRate = fs;
    this.blockSize = B;
    const wavs = opts.wavs ?? new Map();
    this.sources = sc.sources.map((s, i) => createSource(s, i, fs, sc.seed, wavs, B));
    const refR = dense(pathResponse(sc.paths.reference, fs));
    const priR = dense(pathResponse(sc.paths.primary, fs));
    const secR = dense(pathResponse(sc.paths.secondary, fs));
    const fbR = sc.paths.feedback ? dense(pathResponse(sc.paths.feedback, fs)) : null;
    this.refF = new PathFilter(refR.offset, refR.taps, B);
    this.priF = new PathFilter(priR.offset, priR.taps, B);
    this.secF = new PathFilter(secR.offset, secR.taps, B);
    this.fbF = fbR ? new PathFilter(fbR.offset, fbR.taps, B) : null;
    // What the controller drives is the engine's output stage and then the acoustic path: when the
    // scenario turns on the speaker high-pass, it is part of the true secondary path as an
    // identification would see it, and the model built from the truth includes it.
    const hp = sc.highPassHz ?? 0;
    const limiterSettings = { ...(sc.limiter ?? {}), ceilingDbfs: scenarioCeilingDbfs(sc, DEFAULT_CEILING_DBFS) };
    const asDriven = outputStageDrive(limiterSettings, hp, fs, B);
    this.trueSecondaryPath = asDriven(trueSecondaryPath(sc));
    this.secondaryPathModel = opts.secondaryPathModel ?? imperfectModel(this.trueSecondaryPath, sc.controller);
    // ---- changing plants (issue 14): feedback model, path changes ----
    this.trueFeedbackPath = sc.paths.feedback ? asDriven(denseResponse(pathResponse(sc.paths.feedback, fs))) : null;
    this.feedbackPathModel = feedbackModelFor(sc, opts.feedbackPathModel, () => this.trueFeedbackPath);
    this.secondaryPaths.push(this.trueSecondaryPath);
    this.secAll.push(this.secF);
    this.fbAll.push(this.fbF);
    for (const f of [...(sc.faults ?? [])].sort((a, b) => a.atS - b.atS)) {
      if (f.kind !== 'secondary-path-change') continue;
      const changed = changedPaths(sc, f.path);
      const s2 = dense(pathResponse(changed.secondary, fs));
      this.secAll.push(new PathFilter(s2.offset, s2.taps, B));
      this.secondaryPaths.push(asDriven(denseResponse(pathResponse(changed.secondary, fs))));
      const fb2 = changed.feedback ? dense(pathResponse(changed.feedback, fs)) : null;
      this.fbAll.push(fb2 ? new PathFilter(fb2.offset, fb2.taps, B) : null);
    }
    // ---- end changing plants ----
    try {
      this.engine = new Engine({
        sampleRate: fs,
        maxBlockSize: B,
        controller: engineControllerConfig(sc),
        secondaryPathModel: this.secondaryPathModel,
        ...(this.feedbackPathModel ? { feedbackPathModel: this.feedbackPathModel } : {}),
        limiter: limiterSettings,
        highPassHz: hp,
        dcBlockerHz: 0, // the simulated speaker reproduces every frequency the scenario asks for
        startMode: opts.startMode ?? 'control',
        ...(opts.standbyController ? { standbyController: opts.standbyController } : {}),
        ...(sc.guard === false ? { guard: false as const } : sc.guard ? { guard: sc.guard as EngineConfig['guard'] } : {}),
      });
    } catch (e) {
      if (e instanceof RangeError) throw new ScenarioError([`${e.message.startsWith('controller') ? '' : 'guard/controller: '}${e.message}`]);
      throw e;
    }
    this.faultSpec = [...(sc.faults ?? [])].sort((a, b) => a.atS - b.atS);
    for (const f of this.faultSpec) this.faultAt.push(Math.round(f.atS * fs));
    const sn = sc.sensorNoiseRms;
    this.refNoiseRms = typeof sn === 'number' ? sn : (sn?.reference ?? 0);
    this.errNoiseRms = typeof sn === 'number' ? sn : (sn?.error ?? 0);
    this.refNoise = new Random((sc.seed ^ 0x52454631) >>> 0);
    this.errNoise = new Random((sc.seed ^ 0x45525231) >>> 0);
    this.src = new Float64Array(B);
    this.refAc = new Float64Array(B);
    this.dAc = new Float64Array(B);
    this.loopAc = new Float64Array(B);
    this.ref = new Float32Array(B);
    this.refNoFeedback = new Float32Array(B);
    this.errOn = new Float32Array(B);
    this.errOff = new Float32Array(B);
    this.out = new Float32Array(B);
    this.speaker = sc.loudspeaker && (sc.loudspeaker.a2 || sc.loudspeaker.a3) ? new PolynomialNonlinearity(sc.loudspeaker) : null;
    this.speakerOut = new Float32Array(B);
  }

  /** Faults due in this block take effect at its start (sample-accurate for drop-outs and NaN). */
  private applyFaults(t: number, n: number): void {
    while (this.nextFault < this.faultAt.length && this.faultAt[this.nextFault]! < t + n) {
      const at = this.faultAt[this.nextFault]!;
      const f = this.faultSpec[this.nextFault]!;
      this.nextFault++;
      const c = this.engine.controller as Controller & { stepSize?: number };
      switch (f.kind) {
        case 'model-sign-flip': {
          const flipped = new Float32Array(this.secondaryPathModel.length);
          for (let i = 0; i < flipped.length; i++) flipped[i] = -this.secondaryPathModel[i]!;
          c.setSecondaryPathModel?.(flipped);
          break;
        }
        case 'step-size-scale':
          if (c.stepSize !== undefined) this.engine.setStepSize(c.stepSize * f.factor);
          break;
        case 'nan-error':
          this.nanFrom = at;
          this.nanUntil = at + Math.max(1, Math.round((f.durationS ?? 0) * this.sampleRate));
          break;
        case 'secondary-path-change':
          // the true path changes; the model does not (unless the controller tracks it online)
          this.pathIdx++;
          this.secF = this.secAll[this.pathIdx]!;
          this.fbF = this.fbAll[this.pathIdx]!;
          break;
        case 'mic-dropout':
          if (f.mic === 'reference') {
            this.dropRefFrom = at;
            this.dropRefUntil = at + Math.round(f.durationS * this.sampleRate);
          } else {
            this.dropErrFrom = at;
            this.dropErrUntil = at + Math.round(f.durationS * this.sampleRate);
          }
          break;
      }
    }
  }

  /** Advance n ≤ blockSize samples: sources, paths, microphones (clipped at ±1), engine, loudspeaker. */
  step(n: number): void {
    const t = this.time;
    if (this.faultAt.length) this.applyFaults(t, n);
    const { src, refAc, dAc, loopAc, ref, errOn, errOff, out, refNoFeedback } = this;
    src.fill(0);
    for (let k = 0; k < this.sources.length; k++) this.sources[k]!.addTo(src, n);
    this.refF.push(src, n);
    this.refF.render(t, refAc, n);
    this.priF.push(src, n);
    this.priF.render(t, dAc, n);
    const fbF = this.fbF;
    if (fbF) fbF.render(t, loopAc, n);
    for (let i = 0; i < n; i++) {
      const r0 = refAc[i]! + this.refNoiseRms * this.refNoise.gaussian();
      let r = fbF ? r0 + loopAc[i]! : r0;
      if (r > 1) { r = 1; this.clipRef++; } else if (r < -1) { r = -1; this.clipRef++; }
      ref[i] = r;
      refNoFeedback[i] = r0;
    }
    this.secF.render(t, loopAc, n);
    for (let i = 0; i < n; i++) {
      const d = dAc[i]! + this.errNoiseRms * this.errNoise.gaussian();
      errOff[i] = d > 1 ? 1 : d < -1 ? -1 : d;
      let on = d + loopAc[i]!;
      if (on > 1) { on = 1; this.clipErr++; } else if (on < -1) { on = -1; this.clipErr++; } else if (on !== on) this.nonFiniteErr++;
      errOn[i] = on;
    }
    // The simulator knows the control-off error exactly: its 1 s average is the guard's baseline.
    let p = 0;
    for (let i = 0; i < n; i++) p += errOff[i]! * errOff[i]!;
    p /= n;
    // running mean over the first second (the disturbance may arrive late), then a 1 s exponential average
    const a = Math.min(Math.exp(-n / this.sampleRate), t / (t + n));
    this.baselinePower = a * this.baselinePower + (1 - a) * p;
    this.engine.setBaselineErrorPower(this.baselinePower);
    if (this.dropRefUntil > t) for (let i = 0; i < n; i++) if (t + i >= this.dropRefFrom && t + i < this.dropRefUntil) ref[i] = 0;
    if (this.dropErrUntil > t) for (let i = 0; i < n; i++) if (t + i >= this.dropErrFrom && t + i < this.dropErrUntil) errOn[i] = 0;
    if (this.nanUntil > t) for (let i = 0; i < n; i++) if (t + i >= this.nanFrom && t + i < this.nanUntil) errOn[i] = NaN;
    this.engine.process(ref, errOn, out, n);
    let driven = out;
    if (this.speaker) {
      this.speaker.process(out, this.speakerOut, n);
      driven = this.speakerOut;
    }
    // every path the run will see hears the loudspeaker, so a changed path has its history
    for (let k = 0; k < this.secAll.length; k++) {
      this.secAll[k]!.push(driven, n);
      const fb = this.fbAll[k];
      if (fb) fb.push(driven, n);
    }
    this.time = t + n;
  }
}

/**
 * The paths after a `secondary-path-change`: an explicit new secondary path (feedback unchanged), or in
 * a room scenario the loudspeaker moved (secondary and feedback paths recomputed from the room).
 */
function changedPaths(sc: Scenario, path: Extract<NonNullable<Scenario['faults']>[number], { kind: 'secondary-path-change' }>['path']): { secondary: PathSpec; feedback: PathSpec | undefined } {
  if ('speaker' in path) {
    const room = sc.room!;
    const moved = roomPathsToExplicit({ ...room, room: { ...room.room, speaker: path.speaker } }, sc.sampleRate);
    return { secondary: moved.secondary, feedback: moved.feedback };
  }
  return { secondary: path, feedback: sc.paths.feedback };
}

/**
 * The feedback-path model for `controller.feedbackNeutralisation`: a model file's taps (given by the
 * caller), or with `true` the true path as the engine drives it (as the secondary model is built).
 */
function feedbackModelFor(sc: Scenario, given: Float32Array | undefined, truth: () => Float64Array | null): Float32Array | null {
  const fbn = sc.controller.algorithm === 'tonal' ? undefined : sc.controller.feedbackNeutralisation;
  if (fbn === undefined || fbn === false) return null;
  if (given) return given;
  if (typeof fbn === 'string') throw new ScenarioError([`controller.feedbackNeutralisation: the model file "${fbn}" was not loaded (the command line loads it relative to the scenario)`]);
  const t = truth();
  if (!t) throw new ScenarioError(['controller.feedbackNeutralisation: true needs paths.feedback (the loudspeaker → reference-mic path), got none']);
  return Float32Array.from(t);
}

/** Peak |y| of the Wiener filter's output y = w * x, after its first `skip` samples (start-up). */
export function wienerOutputPeak(x: Float32Array, w: Float64Array, skip: number): number {
  const y = fftConvolve(x, w);
  let peak = 0;
  for (let i = Math.min(skip, x.length); i < x.length; i++) {
    const a = Math.abs(y[i]!);
    if (a > peak) peak = a;
  }
  return peak;
}
/** Full linear convolution of a path with the output stage's short response. */
/**
 * A loudspeaker path as the controller drives it: through the engine's output stage first (speaker
 * high-pass, then the limiter's look-ahead delay and true-peak filter), so it is the path an
 * identification measures and the one the controller's model must hold. Shared by the simulator and replay.
 */
export function outputStageDrive(limiter: LimiterSettings & { ceilingDbfs: number }, highPassHz: number, fs: number, blockSize: number): (path: Float64Array) => Float64Array {
  const stage = new OutputLimiter({ sampleRate: fs, maxBlockSize: blockSize, ...limiter }).responseTaps();
  return (path) => {
    const a = highPassHz > 0 ? withHighPass(path, highPassHz, fs) : path;
    return stage.length > 1 ? convolved(a, stage) : a;
  };
}

function convolved(x: Float64Array, h: Float64Array): Float64Array {
  const out = new Float64Array(x.length + h.length - 1);
  for (let k = 0; k < h.length; k++) {
    const hk = h[k]!;
    if (hk === 0) continue;
    for (let i = 0; i < x.length; i++) out[i + k] += hk * x[i]!;
  }
  return out;
}

/** The true path followed by the engine's speaker high-pass (2nd-order Butterworth, src/dsp/highpass.ts; no DC blocker). */
export function withHighPass(path: Float64Array, cornerHz: number, fs: number): Float64Array {
  const hp = new HighPass({ sampleRate: fs, cornerHz, dcBlockerHz: 0 });
  // the filter's impulse response until its tail holds less than 1e-7 of its energy (at most 2 s)
  const maxLen = Math.round(2 * fs);
  const ir = new Float32Array(maxLen);
  const one = new Float32Array([1]);
  const zero = new Float32Array(1);
  const tmp = new Float32Array(1);
  let total = 0;
  for (let i = 0; i < maxLen; i++) {
    hp.process(i === 0 ? one : zero, tmp, 1);
    ir[i] = tmp[0]!;
    total += tmp[0]! * tmp[0]!;
  }
  let tail = 0;
  let len = maxLen;
  while (len > 1 && tail + ir[len - 1]! ** 2 < 1e-7 * total) tail += ir[--len]! ** 2;
  return fftConvolve(path, ir.subarray(0, len));
}

export function simulate(sc: Scenario, opts: SimulateOptions = {}): SimulationResult {
  const fs = sc.sampleRate;
  const B = sc.blockSize;
  const total = Math.max(1, Math.round(sc.durationS * fs));
  const notes: Record<string, string> = {};
  const controlStartS = sc.controlStartS ?? 0;
  const controlStartSample = Math.round(controlStartS * fs);
  const loop = new PlantLoop(sc, {
    ...(opts.wavs ? { wavs: opts.wavs } : {}),
    ...(opts.secondaryPathModel ? { secondaryPathModel: opts.secondaryPathModel } : {}),
    ...(opts.feedbackPathModel ? { feedbackPathModel: opts.feedbackPathModel } : {}),
    startMode: controlStartSample === 0 ? 'control' : 'idle',
  });
  const engine = loop.engine;
  const trueSec = loop.trueSecondaryPath;
  const model = loop.secondaryPathModel;

  const hop = Math.max(1, Math.round(HOP_S * fs));
  const nh = Math.ceil(total / hop);
  const hopOff = new Float64Array(nh);
  const hopOn = new Float64Array(nh);
  const hopCount = new Float64Array(nh);

  const wienerN = Math.min(total, Math.round((opts.wienerMaxS ?? 30) * fs));
  const wRef = new Float32Array(wienerN);
  const wErr = new Float32Array(wienerN);

  const rec: SimulationSignals | undefined = opts.record
    ? { reference: new Float32Array(total), errorOn: new Float32Array(total), output: new Float32Array(total), errorOff: new Float32Array(total), referenceOff: new Float32Array(total) }
    : undefined;

  let peakOut = 0;
  let lastProgress = -1;
  // time at the cap (limiter reducing gain) and time the controller's constraint acted, control on
  const events: EngineEvent[] = [];
  const { ref, errOn, errOff, out, refNoFeedback } = loop;
  const onBlock = opts.onBlock;
  const blockSignals = [ref, errOn, out, errOff, refNoFeedback] as const;
  // tonal components, demodulated over the last 25 % of the run
  const steadyStart = Math.floor(total * 0.75);
  const limitMeter = new OutputLimitMeter(scenarioCeilingDbfs(sc, DEFAULT_CEILING_DBFS), steadyStart);
  const toneMeters: ToneMeter[] = [];
  loop.sources.forEach((g, si) => {
    g.harmonicAmplitudes?.forEach((a, k) => {
      if (a > 0) toneMeters.push(new ToneMeter(si, k + 1));
    });
  });
  const tonal = engine.controller instanceof TonalController ? engine.controller : null;
  const tracked = tonal && (tonal.frequencySource === 'reference' || tonal.frequencySource === 'error') ? tonal : null;
  const truth = loop.sources.find((g) => g.frequencies);
  let locked = false, trackSq = 0, trackMax = 0, trackN = 0;
  const imc = sc.controller.algorithm === 'imc';
  for (let t = 0; t < total; t += B) {
    const n = Math.min(B, total - t);
    if (t <= controlStartSample && controlStartSample < t + n && controlStartSample > 0) engine.setMode('control');
    loop.step(n);
    if (engine.currentMode === 'control' && t >= controlStartSample) limitMeter.block(engine, out, n, t);
    for (let i = 0; i < n; i++) {
      const ti = t + i;
      const h = (ti / hop) | 0;
      const eo = errOff[i]!, en = errOn[i]!;
      hopOff[h] = hopOff[h]! + eo * eo;
      hopOn[h] = hopOn[h]! + en * en;
      hopCount[h] = hopCount[h]! + 1;
      const a = Math.abs(out[i]!);
      if (a > peakOut) peakOut = a;
      if (ti < wienerN) {
        // IMC's reference is the disturbance regenerated from the error mic: its bound takes d as the reference
        wRef[ti] = imc ? eo : refNoFeedback[i]!;
        wErr[ti] = eo;
      }
      if (rec) {
        rec.reference[ti] = ref[i]!;
        rec.errorOn[ti] = en;
        rec.output[ti] = out[i]!;
        rec.errorOff[ti] = eo;
        rec.referenceOff[ti] = refNoFeedback[i]!;
      }
    }
    if (onBlock) onBlock(blockSignals, n);
    if (t + n > steadyStart) {
      for (const tm of toneMeters) {
        const g = loop.sources[tm.source]!;
        const ph = g.phases!, fr = g.frequencies!;
        for (let i = Math.max(0, steadyStart - t); i < n; i++) {
          const c = Math.cos(tm.harmonic * ph[i]!), sn = Math.sin(tm.harmonic * ph[i]!);
          tm.offRe += errOff[i]! * c; tm.offIm += errOff[i]! * sn;
          tm.onRe += errOn[i]! * c; tm.onIm += errOn[i]! * sn;
          tm.hzSum += tm.harmonic * fr[i]!;
          tm.count++;
        }
      }
    }
    if (tracked && truth) {
      if (!locked && tracked.trackerLocked && tracked.frequencyKnown) locked = true;
      if (locked) {
        const err = tracked.frequencyHz - truth.frequencies![n - 1]!;
        trackSq += err * err;
        trackN++;
        if (Math.abs(err) > trackMax) trackMax = Math.abs(err);
      }
    }
    if (engine.events.size > engine.events.capacity / 2) events.push(...drainEvents(engine.events));
    if (opts.onProgress) {
      const p = Math.floor((100 * (t + n)) / total);
      if (p !== lastProgress) {
        lastProgress = p;
        opts.onProgress((t + n) / total);
      }
    }
  }
  const clipRef = loop.clipRef, clipErr = loop.clipErr, nonFinite = loop.nonFiniteErr;

  const conv: ConvergenceResult = convergenceMetrics({ hop, sampleRate: fs, off: hopOff, on: hopOn, counts: hopCount }, { controlStartS });
  events.push(...drainEvents(engine.events));
  const divergenceReasons: string[] = [];
  // Real divergence only. Output at the cap is the output-limited state, not a fault, unless the user
  // set that detector to mute (to catch a howl that the limiter holds at the cap).
  const faults = events.filter((e) => e.cause === 'error-rise' || e.cause === 'weights-unbounded' || (e.cause === 'output-at-ceiling' && e.action === 'mute') || (e.cause === 'non-finite' && e.values.source !== undefined && e.values.source >= 2));
  if (faults.length) divergenceReasons.push(`the guard acted: ${faults.map((e) => `${e.cause} at ${e.timeS.toFixed(2)} s (${e.action})`).slice(0, 5).join(', ')}${faults.length > 5 ? `, and ${faults.length - 5} more` : ''}`);
  if (conv.diverged) divergenceReasons.push(`error power rose more than 10 dB above control off in a 100 ms window at ${conv.divergedAtS!.toFixed(2)} s`);
  if (nonFinite > 0 || engine.meters.nonFiniteOut > 0) divergenceReasons.push(`non-finite values: ${nonFinite} error samples, ${engine.meters.nonFiniteOut} output samples`);

  let attenuationDb: number | null = conv.attenuationDb;
  if (!Number.isFinite(attenuationDb)) {
    notes.attenuationDb = conv.offPower === 0 ? 'the error signal is silent with control off' : 'the error signal is silent with control on (no sensor noise?)';
    attenuationDb = null;
  }
  const stationary = isStationary(sc);
  let wienerBoundDb: number | null = null;
  let requiredPeak: number | null = null;
  const L = sc.controller.algorithm === 'tonal' ? 0 : sc.controller.taps;
  if (sc.controller.algorithm === 'tonal') {
    notes.wienerBoundDb = 'not computed for the narrowband controller: see the per-tone figures';
  } else if (L > 16384) {
    notes.wienerBoundDb = `not computed for more than 16384 taps (got ${L})`;
  } else {
    const filtered = fftConvolve(wRef, trueSec).subarray(0, wienerN);
    const wb = wienerBound(wErr, filtered, L);
    if (!wb) notes.wienerBoundDb = 'the correlation matrix of the filtered reference is singular, or the run is shorter than 2 × taps';
    else if (!Number.isFinite(wb.attenuationDb)) notes.wienerBoundDb = 'unbounded: the disturbance is perfectly predictable (add sensor noise for a finite bound)';
    else wienerBoundDb = wb.attenuationDb;
    if (!wb) notes.requiredPeakDbfs = 'no Wiener solution (see wienerBoundDb)';
    else requiredPeak = wienerOutputPeak(wRef, wb.weights, Math.max(L, trueSec.length));
  }
  if (L > 16384) notes.requiredPeakDbfs = `not computed for more than 16384 taps (got ${L})`;
  if (wienerBoundDb !== null && attenuationDb !== null && attenuationDb > wienerBoundDb + 1) {
    notes.wienerBoundExceeded =
      'the adaptive controller beat the best fixed filter of the same length: with a tonal reference an LMS filter acts as a ' +
      'time-varying notch narrower than any fixed L-tap filter (a non-Wiener effect; Glover, IEEE TASSP 25(6), 1977, from memory). ' +
      'More taps or less reference noise bring the two together';
  }
  if (!stationary && sc.controller.algorithm !== 'tonal') notes.wienerBound = 'the scenario is not stationary (drifting tone or recorded source): the Wiener figure is the best fixed filter over the run, not a bound on an adaptive one';
  // a secondary path that changes mid-run: the Wiener figure is solved for the first path only
  const plantChanges = (sc.faults ?? []).some((f) => f.kind === 'secondary-path-change');
  if (plantChanges && sc.controller.algorithm !== 'tonal') notes.wienerBound = 'the secondary path changes during the run: the Wiener figure is the best fixed filter for the first path, not a bound on the run';
  if (clipRef || clipErr) notes.clipping = `microphone signals clipped at full scale: ${clipRef} reference and ${clipErr} error samples`;
  let peakOutputDbfs: number | null = amplitudeToDb(peakOut);
  if (!Number.isFinite(peakOutputDbfs)) {
    peakOutputDbfs = null;
    notes.peakOutputDbfs = 'the controller produced no output';
  }
  if (sc.controller.algorithm === 'tonal') {
    // Σ_k |D_k| / |S(kω)|: the amplitude each tonal component needs at the controller output
    let sum = 0;
    const resp = new Float64Array(2);
    for (const tm of toneMeters) {
      if (!tm.count) continue;
      const dAmp = (2 * Math.hypot(tm.offRe, tm.offIm)) / tm.count;
      pathResponseAt(trueSec, (2 * Math.PI * tm.hzSum) / tm.count / fs, resp);
      const sAmp = Math.hypot(resp[0]!, resp[1]!);
      if (sAmp > 0) sum += dAmp / sAmp;
    }
    if (toneMeters.length === 0) notes.requiredPeakDbfs = 'no tonal source in the scenario';
    else if (sum > 0) {
      requiredPeak = sum;
      if (toneMeters.length > 1) notes.requiredPeakDbfs = 'the sum of the amplitudes the tonal components need (their peak is at most this)';
    } else notes.requiredPeakDbfs = 'the tonal components do not reach the error mic';
  }
  const tones: ToneResult[] = toneMeters.map((tm) => {
    const off = Math.hypot(tm.offRe, tm.offIm);
    const on = Math.hypot(tm.onRe, tm.onIm);
    const a = 20 * Math.log10(off / on);
    return { hz: tm.count ? tm.hzSum / tm.count : NaN, harmonic: tm.harmonic, source: tm.source, attenuationDb: Number.isFinite(a) ? a : null };
  });
  if (tonal && tonal.stepSize > tonal.stepSizeLimit) {
    notes.stepSize = `stepSize ${tonal.stepSize} exceeds the delayed-LMS limit ${tonal.stepSizeLimit.toFixed(4)} for a model delay of ${tonal.modelDelay} samples: expect slow ringing or divergence`;
  }
  let trackingErrorHz: { rms: number; max: number } | null = null;
  if (tracked && truth) {
    if (trackN > 0) trackingErrorHz = { rms: Math.sqrt(trackSq / trackN), max: trackMax };
    else notes.trackingErrorHz = 'the tone tracker never locked';
  } else if (tonal) {
    notes.trackingErrorHz = truth ? `no tracking: the frequency source is "${tonal.frequencySource}"` : 'no tonal source in the scenario';
  }
  const outputLimit = limitMeter.summary(sc.controller, requiredPeak, wienerBoundDb, notes);
  const amplified = isAmplified(attenuationDb, tones);
  const lvl = (p: number): number | null => (p > 0 && Number.isFinite(p) ? powerToDbfs(p) : null);
  const toDbfs = (a: Float64Array): Float64Array => a.map((p) => powerToDbfs(p));
  return {
    sampleRate: fs,
    durationS: total / fs,
    controlStartS,
    algorithm: sc.controller.algorithm,
    implementation: describeImplementation(engine.controller),
    attenuationDb,
    convergenceS: conv.convergenceS,
    wienerBoundDb,
    wienerBoundIsBound: stationary && !plantChanges,
    peakOutputDbfs,
    outputLimit,
    amplified,
    diverged: divergenceReasons.length > 0,
    divergenceReasons,
    errorOffDbfs: lvl(conv.offPower),
    errorOnDbfs: lvl(conv.onPower),
    clipping: { referenceSamples: clipRef, errorSamples: clipErr },
    tones,
    trackingErrorHz,
    events,
    notes,
    secondaryPathModel: model,
    trueSecondaryPath: trueSec,
    timeline: { timeS: conv.timeS, attenuationDb: conv.attenuationOverTimeDb, offDbfs: toDbfs(conv.offPowerOverTime), onDbfs: toDbfs(conv.onPowerOverTime) },
    ...(rec ? { signals: rec } : {}),
  };
}
