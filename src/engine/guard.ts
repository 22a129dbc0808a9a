/**
 * Divergence guard: per-block checks of the signals and weights of a running controller, each with
 * a configured action, and a resume policy. No allocation and no exceptions in `check`.
 *
 * Detectors (times are sample-exact inside a block except where marked "per block"):
 * - non-finite: NaN/±Infinity in ref or err (input action; the samples are replaced by 0 in place
 *   when `sanitizeInputs`, so the controller never sees them), in the controller output `out` or in
 *   the weight norm² (output action).
 * - weights-unbounded (per block): ‖w‖² > maxNormSq, or (when growthFactor > 0) ‖w‖ more than
 *   growthFactor times its value one growth window earlier (that value taken as at least
 *   √growthFloorNormSq, so weights converging from 0 do not count).
 * - error-rise: mean-square error over consecutive sub-windows of windowMs above
 *   baseline·10^(riseDb/10) for holdMs (the baseline, the control-off error power, comes from the
 *   engine; NaN or ≤ 0 disables the check for that block).
 * - output-at-ceiling (per block): limiter gain reduction above gainReductionDb for holdMs. By
 *   default this is the "output-limited" state (action 'none', read `outputLimited`), not a fault:
 *   the controller's own output constraint (src/dsp/output-constraint.ts) brings the output back
 *   under the cap, and freezing adaptation here would keep the weights that drive the output into
 *   the limiter, a lock-up the freeze itself sustains. Real divergence is caught by the error-rise,
 *   weights and non-finite detectors; a user may still set this detector to mute, to catch a howl
 *   that the limiter holds at the cap.
 * - input-clipping: |x| ≥ level for `consecutive` samples in a row (ref or err).
 * - dead-microphone: the same value (digital silence included) for holdMs (ref or err).
 * - limiter-engaged (per block, information only): gain reduction first above its threshold.
 * Worst-case detection delay after a symptom starts: error-rise holdMs + windowMs (defaults
 * 60 + 20 = 80 ms), output-at-ceiling holdMs + one block, dead-microphone holdMs, clipping
 * `consecutive` samples, non-finite at once: all within 100 ms with the defaults at any block size
 * up to 20 ms.
 *
 * Latching: a detector reports once, then stays quiet until its symptom has been absent for
 * windowMs (limiter-engaged: rearmMs), so a lasting fault gives one event, not one per block.
 *
 * State: running → frozen (freeze-adaptation, reset-weights) → muted (mute); a stronger action
 * escalates, a weaker one never de-escalates. Resume: `acknowledge()` by the user at any time, or
 * (mode 'auto') automatically once no symptom has been seen for holdOffMs, at most maxAutoResumes
 * times before the user must acknowledge.
 */
import { ACTION, CAUSE, EVENT_ACTIONS, type ActionCode, type EventAction, type EventRing } from './events.ts';

export type GuardState = 'running' | 'frozen' | 'muted';

interface DetectorBase {
  /** Default true. */
  enabled?: boolean;
}

export interface GuardConfig {
  /** Sample rate in Hz, 8000 … 384000. */
  sampleRate: number;
  /** Largest block, 1 … 65536 samples. */
  maxBlockSize: number;
  /** Sub-window for the error-power average and the re-arm time, ms, 5 … 100. Default 20. */
  windowMs?: number;
  /** Replace non-finite ref/err samples by 0 in place. Default true. */
  sanitizeInputs?: boolean;
  nonFinite?: DetectorBase & {
    /** Action for NaN/±Infinity in ref or err. Default 'freeze-adaptation'. */
    inputAction?: EventAction;
    /** Action for NaN/±Infinity in the controller output or the weights. Default 'reset-weights'. */
    outputAction?: EventAction;
  };
  weights?: DetectorBase & {
    /** Default 'reset-weights'. */
    action?: EventAction;
    /** Largest allowed ‖w‖², > 0. Default 1e4 (a control filter gain near 40 dB: no sane ANC setting). */
    maxNormSq?: number;
    /** Growth of ‖w‖ over growthWindowMs that counts as unbounded, 0 = off or > 1. Default 0. */
    growthFactor?: number;
    /** Growth window, ms, 50 … 60000. Default 500. */
    growthWindowMs?: number;
    /**
     * Growth is measured from at least this ‖w‖² (weights starting from 0 grow by any factor), > 0;
     * set it near the expected converged ‖w‖². Default 1 (a filter of unity norm).
     */
    growthFloorNormSq?: number;
  };
  errorRise?: DetectorBase & {
    /** Default 'mute'. */
    action?: EventAction;
    /** Rise above the control-off baseline, dB, 0.5 … 60. Default 6. */
    riseDb?: number;
    /** How long the rise must last, ms, windowMs … 60000. Default 60. */
    holdMs?: number;
  };
  outputAtCeiling?: DetectorBase & {
    /** Default 'none' (the output-limited state, recorded only; see the module comment). */
    action?: EventAction;
    /**
     * Limiter gain reduction threshold, dB, 0.1 … 60. Default 1: a howl settles where the limiter's
     * gain reduction brings the loop gain back to one, often only 1.5–3 dB.
     */
    gainReductionDb?: number;
    /** How long it must last, ms, 1 … 60000. Default 60. */
    holdMs?: number;
  };
  inputClipping?: DetectorBase & {
    /** Default 'freeze-adaptation'. */
    action?: EventAction;
    /** |x| at or above this counts as clipped, 0.5 … 1. Default 0.999. */
    level?: number;
    /** Clipped samples in a row, 1 … 1000. Default 3. */
    consecutive?: number;
  };
  deadMicrophone?: DetectorBase & {
    /** Default 'freeze-adaptation'. */
    action?: EventAction;
    /** How long a constant value must last, ms, 1 … 60000. Default 60. */
    holdMs?: number;
  };
  limiterEngaged?: DetectorBase & {
    /** Gain reduction threshold, dB, 0.01 … 60. Default 0.5. */
    gainReductionDb?: number;
    /** Quiet time before it can report again, ms, 0 … 60000. Default 1000. */
    rearmMs?: number;
  };
  resume?: {
    /** 'auto' (after the hold-off) or 'user' (only `acknowledge()`). Default 'auto'. */
    mode?: 'auto' | 'user';
    /** Symptom-free time before an automatic resume, ms, 0 … 600000. Default 2000. */
    holdOffMs?: number;
    /** Automatic resumes allowed before the user must acknowledge, 0 … 1000. Default 3. */
    maxAutoResumes?: number;
  };
}

/** What the engine fills in before each `check` (preallocate one and reuse it). */
export class GuardBlockInfo {
  /** Time of the first sample of the block, s. */
  timeS = 0;
  /** Samples in ref and err. */
  n = 0;
  ref: Float32Array = new Float32Array(0);
  err: Float32Array = new Float32Array(0);
  /** Controller output (before the limiter); `outN` samples are checked (0 = skip). */
  out: Float32Array = new Float32Array(0);
  outN = 0;
  /** ‖w‖² of the control filter. */
  weightNormSq = 0;
  /** Control-off error power (mean square); NaN or ≤ 0 = unknown. */
  baselineErrorPower = NaN;
  /** Current limiter gain reduction, dB (≥ 0). */
  limiterGainReductionDb = 0;
}

// Detector slots for latching.
const D_NF_REF = 0;
const D_NF_ERR = 1;
const D_NF_OUT = 2;
const D_NF_W = 3;
const D_WEIGHTS = 4;
const D_ERR_RISE = 5;
const D_CEILING = 6;
const D_CLIP_REF = 7;
const D_CLIP_ERR = 8;
const D_DEAD_REF = 9;
const D_DEAD_ERR = 10;
const D_LIMITER = 11;
const DETECTORS = 12;

const STATE_RUNNING = 0;
const STATE_FROZEN = 1;
const STATE_MUTED = 2;
const STATE_NAMES: readonly GuardState[] = ['running', 'frozen', 'muted'];

function fail(field: string, range: string, value: unknown): never {
  throw new RangeError(`${field} must be ${range}, got ${String(value)}`);
}

function num(field: string, value: unknown, fallback: number | undefined, lo: number, hi: number, unit = ''): number {
  const v = value === undefined ? fallback : value;
  if (typeof v !== 'number' || !(v >= lo && v <= hi)) fail(field, `a number from ${lo} to ${hi}${unit}`, v);
  return v;
}

function int(field: string, value: unknown, fallback: number | undefined, lo: number, hi: number): number {
  const v = value === undefined ? fallback : value;
  if (typeof v !== 'number' || !Number.isInteger(v) || v < lo || v > hi) fail(field, `an integer from ${lo} to ${hi}`, v);
  return v;
}

function bool(field: string, value: unknown, fallback: boolean): boolean {
  const v = value === undefined ? fallback : value;
  if (typeof v !== 'boolean') fail(field, 'true or false', v);
  return v;
}

function action(field: string, value: unknown, fallback: EventAction): ActionCode {
  const v = value === undefined ? fallback : value;
  const code = EVENT_ACTIONS.indexOf(v as EventAction);
  if (code < 0) fail(field, `one of ${EVENT_ACTIONS.join(', ')}`, v);
  return code as ActionCode;
}

function section<T extends object>(field: string, value: T | undefined): Partial<T> {
  if (value === undefined) return {};
  if (typeof value !== 'object' || value === null) fail(field, 'an object', value);
  return value;
}

export class DivergenceGuard {
  readonly sampleRate: number;
  readonly maxBlockSize: number;
  private readonly events: EventRing;
  private readonly windowSamples: number;
  private readonly sanitize: boolean;

  private readonly nfOn: boolean;
  private readonly nfInputAction: ActionCode;
  private readonly nfOutputAction: ActionCode;
  private readonly wOn: boolean;
  private readonly wAction: ActionCode;
  private readonly wMaxNormSq: number;
  private readonly wGrowthFactorSq: number;
  private readonly wGrowthFloor: number;
  private readonly wHistory: Float64Array;
  private readonly wSnapshotS: number;
  private readonly erOn: boolean;
  private readonly erAction: ActionCode;
  private readonly erRiseDb: number;
  private readonly erFactor: number;
  private readonly erHoldWindows: number;
  private readonly ceOn: boolean;
  private readonly ceAction: ActionCode;
  private readonly ceThresholdDb: number;
  private readonly ceHoldSamples: number;
  private readonly clOn: boolean;
  private readonly clAction: ActionCode;
  private readonly clLevel: number;
  private readonly clConsecutive: number;
  private readonly dmOn: boolean;
  private readonly dmAction: ActionCode;
  private readonly dmHoldSamples: number;
  private readonly leOn: boolean;
  private readonly leThresholdDb: number;
  private readonly leRearmS: number;
  private readonly autoResume: boolean;
  private readonly holdOffS: number;
  private readonly maxAutoResumes: number;

  // Running state.
  private stateCode = STATE_RUNNING;
  private changed = false;
  private stoppedAtS = 0;
  private lastSymptomS = -Infinity;
  private autoResumes = 0;
  private lastTimeS = 0;
  private readonly latched = new Uint8Array(DETECTORS);
  private readonly ev = new Float64Array(5).fill(NaN);
  private readonly lastActiveS = new Float64Array(DETECTORS);
  // Per-channel sample counters: [ref, err].
  private readonly clipRun = new Float64Array(2);
  private readonly constRun = new Float64Array(2);
  private readonly lastValue = new Float64Array(2);
  private errSum = 0;
  private errCount = 0;
  private errAboveWindows = 0;
  private lastRiseDb = NaN;
  private ceilingRun = 0;
  private wHead = 0;
  private wCount = 0;
  private wNextSnapshotS = 0;

  constructor(config: GuardConfig, events: EventRing) {
    if (typeof config !== 'object' || config === null) throw new TypeError('DivergenceGuard config must be an object');
    if (events === null || typeof events !== 'object' || typeof events.push !== 'function') {
      throw new TypeError('DivergenceGuard needs an EventRing to write its events to');
    }
    this.events = events;
    const fs = num('sampleRate', config.sampleRate, undefined, 8000, 384000, ' Hz');
    this.sampleRate = fs;
    this.maxBlockSize = int('maxBlockSize', config.maxBlockSize, undefined, 1, 65536);
    const windowMs = num('windowMs', config.windowMs, 20, 5, 100, ' ms');
    this.windowSamples = Math.max(1, Math.round((windowMs * fs) / 1000));
    this.sanitize = bool('sanitizeInputs', config.sanitizeInputs, true);

    const nf = section('nonFinite', config.nonFinite);
    this.nfOn = bool('nonFinite.enabled', nf.enabled, true);
    this.nfInputAction = action('nonFinite.inputAction', nf.inputAction, 'freeze-adaptation');
    this.nfOutputAction = action('nonFinite.outputAction', nf.outputAction, 'reset-weights');

    const w = section('weights', config.weights);
    this.wOn = bool('weights.enabled', w.enabled, true);
    this.wAction = action('weights.action', w.action, 'reset-weights');
    this.wMaxNormSq = num('weights.maxNormSq', w.maxNormSq, 1e4, Number.MIN_VALUE, Infinity);
    const growth = num('weights.growthFactor', w.growthFactor, 0, 0, 1e6);
    if (growth !== 0 && !(growth > 1)) fail('weights.growthFactor', '0 (off) or a number above 1 (up to 1e6)', growth);
    this.wGrowthFactorSq = growth * growth;
    const growthWindowMs = num('weights.growthWindowMs', w.growthWindowMs, 500, 50, 60000, ' ms');
    this.wGrowthFloor = num('weights.growthFloorNormSq', w.growthFloorNormSq, 1, Number.MIN_VALUE, Infinity);
    // ‖w‖² snapshots every windowMs over the growth window (+1 so the oldest is a full window back).
    const snapshots = growth > 0 ? Math.ceil(growthWindowMs / windowMs) + 1 : 1;
    this.wHistory = new Float64Array(snapshots);
    this.wSnapshotS = windowMs / 1000;

    const er = section('errorRise', config.errorRise);
    this.erOn = bool('errorRise.enabled', er.enabled, true);
    this.erAction = action('errorRise.action', er.action, 'mute');
    this.erRiseDb = num('errorRise.riseDb', er.riseDb, 6, 0.5, 60, ' dB');
    this.erFactor = Math.pow(10, this.erRiseDb / 10);
    const erHoldMs = num('errorRise.holdMs', er.holdMs, 60, windowMs, 60000, ' ms');
    this.erHoldWindows = Math.max(1, Math.ceil(erHoldMs / windowMs - 1e-9));

    const ce = section('outputAtCeiling', config.outputAtCeiling);
    this.ceOn = bool('outputAtCeiling.enabled', ce.enabled, true);
    this.ceAction = action('outputAtCeiling.action', ce.action, 'none');
    this.ceThresholdDb = num('outputAtCeiling.gainReductionDb', ce.gainReductionDb, 1, 0.1, 60, ' dB');
    this.ceHoldSamples = Math.round((num('outputAtCeiling.holdMs', ce.holdMs, 60, 1, 60000, ' ms') * fs) / 1000);

    const cl = section('inputClipping', config.inputClipping);
    this.clOn = bool('inputClipping.enabled', cl.enabled, true);
    this.clAction = action('inputClipping.action', cl.action, 'freeze-adaptation');
    this.clLevel = num('inputClipping.level', cl.level, 0.999, 0.5, 1);
    this.clConsecutive = int('inputClipping.consecutive', cl.consecutive, 3, 1, 1000);

    const dm = section('deadMicrophone', config.deadMicrophone);
    this.dmOn = bool('deadMicrophone.enabled', dm.enabled, true);
    this.dmAction = action('deadMicrophone.action', dm.action, 'freeze-adaptation');
    this.dmHoldSamples = Math.max(2, Math.round((num('deadMicrophone.holdMs', dm.holdMs, 60, 1, 60000, ' ms') * fs) / 1000));

    const le = section('limiterEngaged', config.limiterEngaged);
    this.leOn = bool('limiterEngaged.enabled', le.enabled, true);
    this.leThresholdDb = num('limiterEngaged.gainReductionDb', le.gainReductionDb, 0.5, 0.01, 60, ' dB');
    this.leRearmS = num('limiterEngaged.rearmMs', le.rearmMs, 1000, 0, 60000, ' ms') / 1000;

    const rs = section('resume', config.resume);
    const mode = rs.mode ?? 'auto';
    if (mode !== 'auto' && mode !== 'user') fail('resume.mode', "'auto' or 'user'", mode);
    this.autoResume = mode === 'auto';
    this.holdOffS = num('resume.holdOffMs', rs.holdOffMs, 2000, 0, 600000, ' ms') / 1000;
    this.maxAutoResumes = int('resume.maxAutoResumes', rs.maxAutoResumes, 3, 0, 1000);
    this.reset();
  }

  /** Back to running with every counter cleared (events already pushed stay in the ring). */
  reset(): void {
    this.stateCode = STATE_RUNNING;
    this.changed = false;
    this.stoppedAtS = 0;
    this.lastSymptomS = -Infinity;
    this.autoResumes = 0;
    this.lastTimeS = 0;
    this.latched.fill(0);
    this.lastActiveS.fill(-Infinity);
    this.clipRun.fill(0);
    this.constRun.fill(0);
    this.lastValue.fill(NaN);
    this.errSum = 0;
    this.errCount = 0;
    this.errAboveWindows = 0;
    this.lastRiseDb = NaN;
    this.ceilingRun = 0;
    this.wHead = 0;
    this.wCount = 0;
    this.wNextSnapshotS = -Infinity;
  }

  /** 'running', 'frozen' (adaptation stopped) or 'muted' (output faded to silence, adaptation stopped). */
  get state(): GuardState {
    return STATE_NAMES[this.stateCode]!;
  }

  /** The controller may adapt (state running). */
  get adaptationAllowed(): boolean {
    return this.stateCode === STATE_RUNNING;
  }

  /** The output may sound (state not muted). */
  get outputAllowed(): boolean {
    return this.stateCode !== STATE_MUTED;
  }

  /**
   * Output-limited: the limiter's gain reduction has stayed above the output-at-ceiling threshold for
   * its hold time (up to the last `check`). Information, not a fault, unless that detector's action
   * says otherwise.
   */
  get outputLimited(): boolean {
    return this.ceOn && this.ceilingRun >= this.ceHoldSamples;
  }

  /** The state changed during the last `check` or `acknowledge` call. */
  get stateChanged(): boolean {
    return this.changed;
  }

  /** Automatic resumes since construction, reset() or the last acknowledge(). */
  get autoResumeCount(): number {
    return this.autoResumes;
  }

  /**
   * The user resumes control: state → running, latches cleared (a fault still present reports
   * again), automatic-resume budget restored. Pushes a `resume` event when the state changes.
   */
  acknowledge(): void {
    this.changed = false;
    this.latched.fill(0);
    this.autoResumes = 0;
    this.lastSymptomS = -Infinity;
    // symptoms are measured afresh after an acknowledgement: a persisting fault must build up its
    // hold time again before it fires, instead of firing on the next block with the old count
    this.clipRun.fill(0);
    this.constRun.fill(0);
    this.errSum = 0;
    this.errCount = 0;
    this.errAboveWindows = 0;
    this.ceilingRun = 0;
    if (this.stateCode !== STATE_RUNNING) this.resume(1);
  }

  /** Back to running at `lastTimeS` (no double arguments, see `detect`). */
  private resume(byUser: number): void {
    const st = this.events.staged;
    st[0] = this.lastTimeS;
    st[1] = byUser;
    st[2] = (this.lastTimeS - this.stoppedAtS) * 1000;
    this.events.commit(CAUSE.resume, ACTION.none);
    this.stateCode = STATE_RUNNING;
    this.changed = true;
  }

  /**
   * Check one block; returns the strongest action detected in it (ACTION code; `reset-weights`
   * means: clear the weights now). Reads `state`, `adaptationAllowed`, `outputAllowed` afterwards.
   */
  check(info: GuardBlockInfo): ActionCode {
    this.changed = false;
    const fs = this.sampleRate;
    const t0 = info.timeS;
    let n = info.n;
    if (n > info.ref.length) n = info.ref.length;
    if (n > info.err.length) n = info.err.length;
    if (!(n > 0)) n = 0;
    const tEnd = t0 + n / fs;
    this.lastTimeS = tEnd;
    let strongest: ActionCode = ACTION.none;
    const ev = this.ev; // event time and values for `detect`: [atS, v0, v1, v2, v3]; unset slots stay NaN

    // Inputs: non-finite, clipping, dead microphone, per channel.
    for (let ch = 0; ch < 2; ch++) {
      const x = ch === 0 ? info.ref : info.err;
      let nonFinite = 0;
      let firstBad = -1;
      let clipRun = this.clipRun[ch]!;
      let constRun = this.constRun[ch]!;
      let last = this.lastValue[ch]!;
      let clipActive = false;
      let clipAt = -1;
      let clipRunAt = 0;
      let deadAt = -1;
      const level = this.clLevel;
      const k = this.clConsecutive;
      const deadHold = this.dmHoldSamples;
      for (let i = 0; i < n; i++) {
        let v = x[i]!;
        if (!(v - v === 0)) {
          nonFinite++;
          if (firstBad < 0) firstBad = i;
          if (this.sanitize) x[i] = 0;
          v = 0;
        }
        const a = v < 0 ? -v : v;
        if (a >= level) {
          clipRun++;
          if (clipRun >= k) {
            clipActive = true;
            if (clipAt < 0) {
              clipAt = i;
              clipRunAt = clipRun;
            }
          }
        } else {
          clipRun = 0;
        }
        if (v === last) {
          constRun++;
          if (constRun >= deadHold && deadAt < 0) deadAt = i;
        } else {
          constRun = 1;
          last = v;
        }
      }
      this.clipRun[ch] = clipRun;
      this.constRun[ch] = constRun;
      this.lastValue[ch] = last;
      if (this.nfOn && nonFinite > 0) {
        ev[0] = t0 + firstBad / fs;
        ev[1] = ch;
        ev[2] = nonFinite;
        strongest = this.detect(ch === 0 ? D_NF_REF : D_NF_ERR, CAUSE.nonFinite, this.nfInputAction, strongest);
      }
      if (this.clOn && clipActive) {
        ev[0] = t0 + clipAt / fs;
        ev[1] = ch;
        ev[2] = clipRunAt;
        ev[3] = level;
        strongest = this.detect(ch === 0 ? D_CLIP_REF : D_CLIP_ERR, CAUSE.inputClipping, this.clAction, strongest);
      }
      if (this.dmOn && deadAt >= 0) {
        ev[0] = t0 + deadAt / fs;
        ev[1] = ch;
        ev[2] = last;
        ev[3] = (constRun / fs) * 1000;
        strongest = this.detect(ch === 0 ? D_DEAD_REF : D_DEAD_ERR, CAUSE.deadMicrophone, this.dmAction, strongest);
      }
    }

    // Controller output: non-finite.
    if (this.nfOn) {
      const out = info.out;
      let m = info.outN < out.length ? info.outN : out.length;
      if (!(m > 0)) m = 0;
      let bad = 0;
      for (let i = 0; i < m; i++) {
        const v = out[i]!;
        if (!(v - v === 0)) bad++;
      }
      if (bad > 0) {
        ev[0] = t0;
        ev[1] = 2;
        ev[2] = bad;
        strongest = this.detect(D_NF_OUT, CAUSE.nonFinite, this.nfOutputAction, strongest);
      }
    }

    // Weights.
    const wsq = info.weightNormSq;
    if (!(wsq - wsq === 0)) {
      if (this.nfOn) {
        ev[0] = t0;
        ev[1] = 3;
        ev[2] = 1;
        strongest = this.detect(D_NF_W, CAUSE.nonFinite, this.nfOutputAction, strongest);
      }
    } else if (this.wOn) {
      let growth = NaN;
      let unbounded = wsq > this.wMaxNormSq;
      if (this.wGrowthFactorSq > 0) {
        const hist = this.wHistory;
        const len = hist.length;
        if (t0 >= this.wNextSnapshotS) {
          const slot = (this.wHead + this.wCount) % len;
          hist[slot] = wsq;
          if (this.wCount < len) this.wCount++;
          else this.wHead = (this.wHead + 1) % len;
          this.wNextSnapshotS = t0 + this.wSnapshotS;
        }
        if (this.wCount === len) {
          const old = hist[this.wHead]!;
          // Growth is measured from at least the floor, so weights re-converging from 0 after a
          // reset do not count as unbounded.
          const from = old > this.wGrowthFloor ? old : this.wGrowthFloor;
          if (from > 0) {
            growth = Math.sqrt(wsq / from);
            if (wsq > this.wGrowthFactorSq * from) unbounded = true;
          }
        }
      }
      if (unbounded) {
        ev[0] = t0;
        ev[1] = wsq;
        ev[2] = this.wMaxNormSq;
        ev[3] = growth;
        strongest = this.detect(D_WEIGHTS, CAUSE.weightsUnbounded, this.wAction, strongest);
      }
    }

    // Error power over sub-windows against the control-off baseline.
    if (this.erOn) {
      const err = info.err;
      const base = info.baselineErrorPower;
      const baseOk = base > 0 && base - base === 0;
      const win = this.windowSamples;
      let sum = this.errSum;
      let cnt = this.errCount;
      for (let i = 0; i < n; i++) {
        const e = err[i]!;
        if (e - e === 0) sum += e * e;
        cnt++;
        if (cnt === win) {
          const p = sum / win;
          if (baseOk && p > base * this.erFactor) {
            this.errAboveWindows++;
            this.lastRiseDb = 10 * Math.log10(p / base);
            if (this.errAboveWindows >= this.erHoldWindows) {
              const heldMs = ((this.errAboveWindows * win) / fs) * 1000;
              ev[0] = t0 + i / fs;
              ev[1] = this.lastRiseDb;
              ev[2] = this.erRiseDb;
              ev[3] = heldMs;
              ev[4] = base;
              strongest = this.detect(D_ERR_RISE, CAUSE.errorRise, this.erAction, strongest);
            }
          } else {
            this.errAboveWindows = 0;
          }
          sum = 0;
          cnt = 0;
        }
      }
      this.errSum = sum;
      this.errCount = cnt;
    }

    // Limiter gain reduction (per block).
    const gr = info.limiterGainReductionDb;
    if (this.ceOn) {
      if (gr > this.ceThresholdDb) {
        this.ceilingRun += n;
        if (this.ceilingRun >= this.ceHoldSamples) {
          ev[0] = tEnd;
          ev[1] = gr;
          ev[2] = this.ceThresholdDb;
          ev[3] = (this.ceilingRun / fs) * 1000;
          strongest = this.detect(D_CEILING, CAUSE.outputAtCeiling, this.ceAction, strongest);
        }
      } else {
        this.ceilingRun = 0;
      }
    }
    if (this.leOn && gr > this.leThresholdDb) {
      ev[0] = t0;
      ev[1] = gr;
      ev[2] = this.leThresholdDb;
      strongest = this.detect(D_LIMITER, CAUSE.limiterEngaged, ACTION.none, strongest);
    }

    // Re-arm detectors whose symptom has been absent long enough.
    const windowS = this.windowSamples / fs;
    for (let d = 0; d < DETECTORS; d++) {
      if (this.latched[d] === 1 && tEnd - this.lastActiveS[d]! >= (d === D_LIMITER ? this.leRearmS : windowS)) this.latched[d] = 0;
    }

    // Automatic resume.
    if (
      this.stateCode !== STATE_RUNNING &&
      this.autoResume &&
      this.autoResumes < this.maxAutoResumes &&
      tEnd - this.lastSymptomS >= this.holdOffS
    ) {
      this.autoResumes++;
      this.resume(0);
    }
    return strongest;
  }

  /**
   * One detector found its symptom in this block: report it once (the event's time and values are
   * in `ev`: [atS, v0, v1, v2, v3], reset to NaN here), apply its action, return the strongest
   * action so far. Only small-integer arguments: a call the JIT does not inline then boxes nothing.
   */
  private detect(d: number, cause: number, act: ActionCode, strongest: ActionCode): ActionCode {
    const tEnd = this.lastTimeS;
    this.lastActiveS[d] = tEnd;
    if (act !== ACTION.none) this.lastSymptomS = tEnd;
    const ev = this.ev;
    if (this.latched[d] === 1) {
      ev.fill(NaN);
      return strongest;
    }
    this.latched[d] = 1;
    const st = this.events.staged;
    for (let k = 0; k < 5; k++) st[k] = ev[k]!;
    this.events.commit(cause, act);
    const atS = ev[0]!;
    ev.fill(NaN);
    if (act !== ACTION.none) {
      const target = act === ACTION.mute ? STATE_MUTED : STATE_FROZEN;
      if (target > this.stateCode) {
        if (this.stateCode === STATE_RUNNING) this.stoppedAtS = atS;
        this.stateCode = target;
        this.changed = true;
      }
    }
    return act > strongest ? act : strongest;
  }
}
