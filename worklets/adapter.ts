/**
 * Pieces both processors share: display-rate telemetry (meters and events over a SharedArrayBuffer
 * ring or posted messages), input sanitising (a disconnected input or a non-finite sample becomes
 * silence plus an event, never an exception), and audio chunks for the analysis worker.
 *
 * Bundled into each worklet file (each worklet is one self-contained script), so the exports here
 * never reach a worklet bundle. Nothing here allocates after construction, except posting, which
 * structured-clones preallocated payloads at display rate.
 */
import {
  EVENT_RECORD_LENGTH,
  METER_FRAME_LENGTH,
  M,
  TelemetryWriter,
  causeCode,
  actionCode,
  type EventAction,
  type EventCause,
  type TelemetryOptions,
  type AudioChunkMessage,
  type PortLike,
} from '../src/protocol/messages.ts';
import type { Engine } from '../src/engine/engine.ts';

/** Smallest interval between two events of the same cause while the condition persists, s. */
const EVENT_REPEAT_S = 1;
const THROTTLE_SLOTS = 4;

export class Telemetry {
  readonly frame = new Float64Array(METER_FRAME_LENGTH);
  readonly shared: boolean;
  private readonly writer: TelemetryWriter | null;
  private readonly port: PortLike;
  private readonly meterMsg: { type: 'meters'; frame: Float64Array };
  private readonly eventMsg: { type: 'event'; record: Float64Array };
  private readonly record = new Float64Array(EVENT_RECORD_LENGTH);
  private readonly samplesPerFrame: number;
  private readonly lastEventS: Float64Array;
  // accumulators over the current display frame
  private count = 0;
  private refSum = 0;
  private errSum = 0;
  private outSum = 0;
  private errOffSum = 0;
  private refPk = 0;
  private errPk = 0;
  private outPk = 0;
  private monitorPk = 0;
  private gr = 0;
  private stepMax = 0;
  private lastOut = 0;

  constructor(port: PortLike, options: TelemetryOptions, rate: number) {
    this.port = port;
    this.writer = options.sharedBuffer ? new TelemetryWriter(options.sharedBuffer) : null;
    this.shared = this.writer !== null;
    this.meterMsg = { type: 'meters', frame: this.frame };
    this.eventMsg = { type: 'event', record: this.record };
    this.samplesPerFrame = Math.max(1, Math.round(rate / options.displayRateHz));
    this.lastEventS = new Float64Array(64 * THROTTLE_SLOTS).fill(-Infinity);
  }

  /** Add one block's levels (mean squares and peaks over its n samples). */
  addBlock(n: number, refPower: number, errPower: number, outPower: number, refPeak: number, errPeak: number, outPeak: number): void {
    this.count += n;
    this.refSum += refPower * n;
    this.errSum += errPower * n;
    this.outSum += outPower * n;
    if (refPeak > this.refPk) this.refPk = refPeak;
    if (errPeak > this.errPk) this.errPk = errPeak;
    if (outPeak > this.outPk) this.outPk = outPeak;
  }

  /** Simulated plant only: control-off error power and the listening signal's peak for the block. */
  addSimBlock(n: number, errOffPower: number, monitorPeak: number): void {
    this.errOffSum += errOffPower * n;
    if (monitorPeak > this.monitorPk) this.monitorPk = monitorPeak;
  }

  /**
   * The loudspeaker samples of a block, in order: keeps the largest step between consecutive samples
   * over the frame, across block edges (the click meter, `outMaxStep`).
   */
  addOutput(out: Float32Array, n: number): void {
    let prev = this.lastOut;
    let mx = this.stepMax;
    for (let i = 0; i < n; i++) {
      const v = out[i]!;
      const d = v - prev;
      const a = d < 0 ? -d : d;
      if (a > mx) mx = a;
      prev = v;
    }
    this.lastOut = prev;
    this.stepMax = mx;
  }

  addGainReduction(db: number): void {
    if (db > this.gr) this.gr = db;
  }

  /** True when enough audio has passed for a display frame; then fill the rest of `frame` and call publish(). */
  get due(): boolean {
    return this.count >= this.samplesPerFrame;
  }

  /** Copy the engine's meters and the accumulated levels into the frame (other fields: caller). */
  fillFromEngine(engine: Engine): void {
    const f = this.frame;
    const m = engine.meters;
    const c = this.count > 0 ? this.count : 1;
    f[M.timeS] = m.timeS;
    f[M.refPower] = this.refSum / c;
    f[M.errPower] = this.errSum / c;
    f[M.outPower] = this.outSum / c;
    f[M.refPeak] = this.refPk;
    f[M.errPeak] = this.errPk;
    f[M.outPeak] = this.outPk;
    f[M.errPowerFast] = m.errPowerFast;
    f[M.errPowerSlow] = m.errPowerSlow;
    f[M.baselineErrPower] = m.baselineErrPower;
    f[M.attenuationDb] = m.attenuationDb;
    f[M.attenuationSlowDb] = m.attenuationSlowDb;
    f[M.rampGain] = m.rampGain;
    f[M.ceilingDbfs] = engine.limiter.ceilingDbfs;
    f[M.nonFiniteOut] = m.nonFiniteOut;
    f[M.weightNormSquared] = m.weightNormSquared;
    f[M.limiterGainReductionDb] = this.gr;
    f[M.maxTruePeak] = m.maxOutTruePeak;
    f[M.guardState] = m.guardState;
    f[M.outputLimited] = m.outputLimited;
    f[M.errOffPower] = this.errOffSum / c;
    f[M.monitorPeak] = this.monitorPk;
    f[M.adapting] = engine.controller.adapt ? 1 : 0;
    f[M.outMaxStep] = this.stepMax;
    f[M.switching] = engine.switching ? 1 : 0;
    f[M.checkCeilingDbfs] = NaN;
  }

  publish(): void {
    if (this.writer) this.writer.writeMeters(this.frame);
    else this.port.postMessage(this.meterMsg);
    this.count = 0;
    this.refSum = this.errSum = this.outSum = this.errOffSum = 0;
    this.refPk = this.errPk = this.outPk = this.monitorPk = this.gr = this.stepMax = 0;
  }

  /**
   * Send an event. With `throttle`, a cause that fired less than EVENT_REPEAT_S ago is held back
   * (the condition persists; its counters keep counting in the meters).
   */
  event(timeS: number, cause: EventCause, action: EventAction, v0 = NaN, v1 = NaN, v2 = NaN, throttle = true, slot = 0): void {
    const code = causeCode(cause);
    // throttled per cause and slot (e.g. per microphone channel)
    const key = code * THROTTLE_SLOTS + slot;
    if (throttle && timeS - this.lastEventS[key]! < EVENT_REPEAT_S) return;
    this.lastEventS[key] = timeS;
    const r = this.record;
    r[0] = timeS;
    r[1] = code;
    r[2] = actionCode(action);
    r[3] = v0;
    r[4] = v1;
    r[5] = v2;
    r[6] = NaN;
    this.send();
  }

  /** Forward an event record already encoded (the engine's own events), unthrottled. */
  forward(timeS: number, cause: number, action: number, values: Float64Array, offset: number, count: number): void {
    const r = this.record;
    r[0] = timeS;
    r[1] = cause;
    r[2] = action;
    for (let k = 0; k < EVENT_RECORD_LENGTH - 3; k++) r[3 + k] = k < count ? values[offset + k]! : NaN;
    this.send();
  }

  private send(): void {
    if (this.writer) this.writer.writeEvent(this.record);
    else this.port.postMessage(this.eventMsg);
  }
}

/**
 * Copies input channels into preallocated arrays, replacing non-finite samples by 0. A missing
 * input (no channels, or channels of length 0: what a disconnected input looks like, natively and
 * through standardized-audio-context's wrapper) reads as silence.
 */
export class InputConditioner {
  /** Non-finite samples replaced since begin(), per input channel (0, 1), and in total. */
  readonly badLast = new Float64Array(2);
  badTotal = 0;

  /** Copy n samples of channel `ch` of `input` from `offset` to `dest`; returns false when the channel is missing. */
  copy(input: Float32Array[] | undefined, ch: number, offset: number, dest: Float32Array, n: number): boolean {
    const src = input !== undefined && ch < input.length ? input[ch] : undefined;
    if (src === undefined || src.length < offset + n) {
      for (let i = 0; i < n; i++) dest[i] = 0;
      return false;
    }
    let bad = 0;
    for (let i = 0; i < n; i++) {
      const v = src[offset + i]!;
      // v − v is 0 for finite v and NaN for ±Infinity and NaN
      if (v - v === 0) dest[i] = v;
      else {
        dest[i] = 0;
        bad++;
      }
    }
    if (bad > 0) {
      if (ch < 2) this.badLast[ch] = this.badLast[ch]! + bad;
      this.badTotal += bad;
    }
    return true;
  }

  /** Count channels that arrived with data (call once per quantum before copy()). */
  begin(input: Float32Array[] | undefined): number {
    this.badLast[0] = 0;
    this.badLast[1] = 0;
    let c = 0;
    if (input !== undefined) for (let i = 0; i < input.length; i++) if (input[i]!.length > 0) c++;
    return c;
  }
}

/**
 * Collects microphone audio into preallocated chunks and posts each full chunk on the analysis
 * port (a MessagePort the page attached; chunks are dropped while none is attached).
 */
export class ChunkSender {
  private port: PortLike | null = null;
  private readonly size: number;
  private readonly msg: AudioChunkMessage;
  private fill = 0;
  private allOn = true;

  constructor(chunkSamples: number, rate: number, withOff: boolean) {
    this.size = chunkSamples;
    this.msg = {
      type: 'audio-chunk',
      sampleRate: rate,
      err: new Float32Array(chunkSamples),
      errOff: withOff ? new Float32Array(chunkSamples) : null,
      ref: new Float32Array(chunkSamples),
      controlOn: false,
    };
  }

  attach(port: PortLike | null): void {
    if (this.port) this.port.close();
    this.port = port;
  }

  close(): void {
    this.attach(null);
  }

  /** Append n samples; controlOn says whether control was fully on for this block. */
  push(err: Float32Array, errOff: Float32Array | null, ref: Float32Array, n: number, controlOn: boolean): void {
    if (this.size === 0 || this.port === null) return;
    const m = this.msg;
    let i = 0;
    while (i < n) {
      const take = Math.min(n - i, this.size - this.fill);
      for (let k = 0; k < take; k++) {
        m.err[this.fill + k] = err[i + k]!;
        m.ref[this.fill + k] = ref[i + k]!;
        if (m.errOff && errOff) m.errOff[this.fill + k] = errOff[i + k]!;
      }
      if (!controlOn) this.allOn = false;
      this.fill += take;
      i += take;
      if (this.fill === this.size) {
        m.controlOn = this.allOn;
        this.port.postMessage(m);
        this.fill = 0;
        this.allOn = true;
      }
    }
  }
}

/** Mean square and peak of x[0 … n). */
export function levels(x: Float32Array, n: number, out: Float64Array): void {
  let s = 0;
  let pk = 0;
  for (let i = 0; i < n; i++) {
    const v = x[i]!;
    s += v * v;
    const a = v < 0 ? -v : v;
    if (a > pk) pk = a;
  }
  out[0] = n > 0 ? s / n : 0;
  out[1] = pk;
}
