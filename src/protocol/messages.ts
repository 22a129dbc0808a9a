/**
 * Messages between the page and the audio worklets, and the telemetry layout both sides share.
 *
 * Every message is a plain object with a `type` field, so it survives structured cloning and can be
 * checked at the boundary (`parseControlMessage`). The same module is bundled into the worklets and
 * into the page: it may use nothing of the DOM (the worklet scope has no DOM).
 *
 * Telemetry (meters and events) travels at display rate, about 30 frames per second, by one of two
 * transports with the same numeric records:
 *  - shared: a SharedArrayBuffer ring (`TelemetryWriter` in the worklet, `TelemetryReader` on the
 *    page) when the page is cross-origin isolated; nothing is posted;
 *  - posted: `{ type: 'meters', frame }` and `{ type: 'event', record }` messages on the node's port,
 *    each a preallocated object reused for every post (structured cloning copies it).
 */
import { checkControllerSettings } from '../engine/settings.ts';
import type { ControllerConfig } from '../engine/controller-factory.ts';
import type { EngineMode } from '../engine/engine.ts';
import type { TestSignalSettings } from '../engine/level-cap-check.ts';
import { parseRecordMessage, type RecordChunkMessage, type RecordControlMessage } from './record-ring.ts';
import {
  EVENT_ACTIONS,
  EVENT_CAUSES as ENGINE_EVENT_CAUSES,
  EVENT_VALUE_NAMES,
  VALUES_PER_EVENT,
  type EngineEvent,
  type EventAction as EngineEventAction,
  type EventCause as EngineEventCause,
} from '../engine/events.ts';

// ---------------------------------------------------------------------------------------------
// Meter frame: one Float64Array per display frame; index names below. Powers are mean squares
// (full scale = 1) averaged over every block since the previous frame, peaks the largest |x| over
// the same blocks, so no block goes unmeasured.
// ---------------------------------------------------------------------------------------------

export const METER_FIELDS = [
  /** Audio time of the frame's last sample, s. */
  'timeS',
  'refPower',
  'errPower',
  'outPower',
  'refPeak',
  'errPeak',
  'outPeak',
  /** Engine's exponentially averaged error power, ~125 ms and ~1 s, and the held control-off level. */
  'errPowerFast',
  'errPowerSlow',
  'baselineErrPower',
  /** Attenuation now (fast) and averaged (slow) in dB; NaN while control is off. */
  'attenuationDb',
  'attenuationSlowDb',
  /** Start/stop ramp gain, 0 … 1. */
  'rampGain',
  /** Output cap in dBFS (sample peak). */
  'ceilingDbfs',
  /** Non-finite output samples silenced (cumulative). */
  'nonFiniteOut',
  'weightNormSquared',
  /** Largest limiter gain reduction over the frame, dB ≥ 0. */
  'limiterGainReductionDb',
  /** Largest 4×-oversampled true peak of the output so far (ITU-R BS.1770-4 Annex 2), linear. */
  'maxTruePeak',
  /** Guard state: 0 running, 1 adaptation frozen, 2 muted. */
  'guardState',
  /** 1 while the output is limited (the controller's output constraint acts, or the limiter holds the cap): not a fault. */
  'outputLimited',
  /** Control-off error power over the frame (simulated plant only; NaN live). */
  'errOffPower',
  /** Peak of what was played to the loudspeaker for listening (simulated plant only; NaN live). */
  'monitorPeak',
  /** MODE_CODES index of the engine's mode (identify while a probe plays). */
  'mode',
  /** 1 while the control filter adapts, 0 frozen. */
  'adapting',
  /** Tone follower: tracked fundamental in Hz, lock (1/0) and harmonics controlled; NaN when no tone follower runs. */
  'toneHz',
  'toneLocked',
  'toneHarmonics',
  /** Input channels received in the last render quantum (0: input disconnected). */
  'inputChannels',
  /** Samples in the last render quantum. */
  'quantum',
  /** Identification probe progress 0 … 1 (NaN when none plays). */
  'probeProgress',
  /** Input samples replaced by silence because they were not finite (cumulative). */
  'nonFiniteIn',
  /**
   * Largest |out[i] − out[i−1]| between consecutive output samples over the frame (block edges
   * included): a click or a step in the loudspeaker signal shows here as a jump far above the
   * signal's own slope (for a sine of peak A at f, A·2π·f/fs).
   */
  'outMaxStep',
  /** 1 while the engine crossfades from one controller to the other. */
  'switching',
  /** Level-cap check: output ceiling it enforces, dBFS (NaN when no check runs). */
  'checkCeilingDbfs',
] as const;

/** Tone follower, per harmonic k = 1 … MAX_PANEL_HARMONICS, after the fields above (NaN when absent). */
export const MAX_PANEL_HARMONICS = 8;
export const HARMONIC_FIELDS = [
  /** k·f₀, Hz. */
  'Hz',
  /** Peak amplitude of the disturbance at the error mic (before control) and of the residual (after). */
  'Before',
  'After',
  /** Anti-noise phase at the error mic relative to the disturbance, degrees (±180 = anti-phase). */
  'PhaseDeg',
  /** 20·log10(before / after), dB. */
  'AttDb',
] as const;

export type MeterField = (typeof METER_FIELDS)[number];
export const METER_FRAME_LENGTH = METER_FIELDS.length + MAX_PANEL_HARMONICS * HARMONIC_FIELDS.length;
/** Index of each field in a meter frame. */
export const M = Object.fromEntries(METER_FIELDS.map((k, i) => [k, i])) as { readonly [K in MeterField]: number };

/** Index of harmonic k's field j (j indexes HARMONIC_FIELDS). */
export function harmonicIndex(k: number, j: number): number {
  return METER_FIELDS.length + (k - 1) * HARMONIC_FIELDS.length + j;
}

/** Modes the panel shows: the engine's, and what the live processor plays instead of control. */
export const MODE_CODES = ['idle', 'control', 'muted', 'identify', 'tone', 'level-check'] as const;
export type PanelMode = (typeof MODE_CODES)[number];

/** Read a meter frame into a plain object (allocates: for tests and logs, not for the display loop). */
export function meterFrameToObject(frame: ArrayLike<number>): Record<string, number> {
  const o: Record<string, number> = {};
  for (let i = 0; i < METER_FIELDS.length; i++) o[METER_FIELDS[i]!] = frame[i]!;
  for (let k = 1; k <= MAX_PANEL_HARMONICS; k++) {
    for (let j = 0; j < HARMONIC_FIELDS.length; j++) o[`h${k}${HARMONIC_FIELDS[j]}`] = frame[harmonicIndex(k, j)]!;
  }
  return o;
}

// ---------------------------------------------------------------------------------------------
// Events: the engine's shape (events.ts: time, cause, values, action) and its documented causes and
// actions, plus a few causes only the hosts can see (appended after the engine's, codes stable).
// The worklet sends them as numeric records [timeS, cause code, action code, v0 … v3].
// ---------------------------------------------------------------------------------------------

/** Causes seen by the worklet adapters and the page, not by the engine. */
export const HOST_EVENT_CAUSES = {
  /** The processor's input has no channels (disconnected) or came back. values: channels. */
  'input-missing': ['channels'],
  'input-restored': ['channels'],
  /** The microphone delivered fewer channels than the layout needs. values: expected, received. */
  'channel-count': ['expected', 'received'],
  /** The media devices changed (plugged, unplugged, default moved). */
  'device-change': [],
  /** Output underruns (overload) reported by the browser. values: events (new), durationMs (total). */
  underrun: ['events', 'durationMs'],
  /** The identification probe finished. values: samples recorded, peakDbfs of the probe. */
  'probe-done': ['samples', 'peakDbfs'],
  /** The engine handed control to its standby controller. values: crossfadeMs, toTonal (1 tone follower, 0 broadband). */
  'controller-switch': ['crossfadeMs', 'toTonal'],
  /** A calibration tone started (or stopped: dbfs = measured output level). values: hz, dbfs. */
  'calibration-tone': ['hz', 'dbfs'],
  /** A level-cap check ended. values: passed (1/0), maxSamplePeakDbfs, ceilingDbfs. */
  'level-check': ['passed', 'maxSamplePeakDbfs', 'ceilingDbfs'],

} as const satisfies Record<string, readonly string[]>;

export type EventCause = EngineEventCause | keyof typeof HOST_EVENT_CAUSES;
export type EventAction = EngineEventAction;
export const EVENT_CAUSE_CODES: readonly EventCause[] = [...ENGINE_EVENT_CAUSES, ...(Object.keys(HOST_EVENT_CAUSES) as (keyof typeof HOST_EVENT_CAUSES)[])];
export { EVENT_ACTIONS };

/** Names of each cause's values, in slot order. */
export function eventValueNames(cause: EventCause): readonly string[] {
  return cause in HOST_EVENT_CAUSES ? HOST_EVENT_CAUSES[cause as keyof typeof HOST_EVENT_CAUSES] : EVENT_VALUE_NAMES[cause as EngineEventCause];
}

export const EVENT_RECORD_LENGTH = 3 + VALUES_PER_EVENT;

export type PanelEvent = Omit<EngineEvent, 'cause'> & { cause: EventCause };

export function causeCode(cause: EventCause): number {
  return EVENT_CAUSE_CODES.indexOf(cause);
}
export function actionCode(action: EventAction): number {
  return EVENT_ACTIONS.indexOf(action);
}

/** Numeric record → event (an unknown code reads as 'model-mismatch'/'none' rather than throwing). */
export function decodeEvent(record: ArrayLike<number>): PanelEvent {
  const cause = EVENT_CAUSE_CODES[record[1]!] ?? 'model-mismatch';
  const action = EVENT_ACTIONS[record[2]!] ?? 'none';
  const names = eventValueNames(cause);
  const values: Record<string, number> = {};
  for (let i = 0; i < names.length && i < VALUES_PER_EVENT; i++) values[names[i]!] = record[3 + i]!;
  return { timeS: record[0]!, cause, action, values };
}

export function encodeEvent(e: PanelEvent, out: Float64Array = new Float64Array(EVENT_RECORD_LENGTH)): Float64Array {
  out[0] = e.timeS;
  out[1] = causeCode(e.cause);
  out[2] = actionCode(e.action);
  const names = eventValueNames(e.cause);
  for (let i = 0; i < VALUES_PER_EVENT; i++) out[3 + i] = i < names.length ? (e.values[names[i]!] ?? NaN) : NaN;
  return out;
}

// ---------------------------------------------------------------------------------------------
// Shared telemetry ring. Layout of the SharedArrayBuffer (little-endian host order):
//   bytes 0 … 15   Int32 header: [0] meter frames written, [1] events written, [2] layout version,
//                  [3] meter frame length (a reader checks it against its own)
//   then           Float64 meter slots: METER_SLOTS × METER_FRAME_LENGTH
//   then           Float64 event slots: EVENT_SLOTS × EVENT_RECORD_LENGTH
// One writer (the audio thread), one reader (the page). The writer fills slot (count mod SLOTS) and
// then publishes count + 1 with Atomics.store; the reader copies frames between its last count and
// the published one and drops any it may have lost to wrap-around (it re-reads the count after
// copying). 64 slots at 30 frames/s is two seconds of slack for a busy page.
// ---------------------------------------------------------------------------------------------

export const TELEMETRY_LAYOUT_VERSION = 1;
export const METER_SLOTS = 64;
export const EVENT_SLOTS = 64;
const HEADER_INTS = 4;
const HEADER_BYTES = HEADER_INTS * 4;

export function telemetryByteLength(): number {
  return HEADER_BYTES + 8 * (METER_SLOTS * METER_FRAME_LENGTH + EVENT_SLOTS * EVENT_RECORD_LENGTH);
}

function views(buffer: SharedArrayBuffer): { header: Int32Array; meters: Float64Array; events: Float64Array } {
  if (buffer.byteLength < telemetryByteLength()) {
    throw new RangeError(`telemetry buffer must hold at least ${telemetryByteLength()} bytes, got ${buffer.byteLength}`);
  }
  return {
    header: new Int32Array(buffer, 0, HEADER_INTS),
    meters: new Float64Array(buffer, HEADER_BYTES, METER_SLOTS * METER_FRAME_LENGTH),
    events: new Float64Array(buffer, HEADER_BYTES + 8 * METER_SLOTS * METER_FRAME_LENGTH, EVENT_SLOTS * EVENT_RECORD_LENGTH),
  };
}

export function createTelemetryBuffer(): SharedArrayBuffer {
  const sab = new SharedArrayBuffer(telemetryByteLength());
  const h = new Int32Array(sab, 0, HEADER_INTS);
  h[2] = TELEMETRY_LAYOUT_VERSION;
  h[3] = METER_FRAME_LENGTH;
  return sab;
}

/** Audio-thread side of the ring: no allocation after construction. */
export class TelemetryWriter {
  private readonly header: Int32Array;
  private readonly meters: Float64Array;
  private readonly events: Float64Array;
  private meterCount = 0;
  private eventCount = 0;

  constructor(buffer: SharedArrayBuffer) {
    const v = views(buffer);
    if (v.header[2] !== TELEMETRY_LAYOUT_VERSION || v.header[3] !== METER_FRAME_LENGTH) {
      throw new RangeError(`telemetry buffer layout ${v.header[2]}/${v.header[3]} does not match ${TELEMETRY_LAYOUT_VERSION}/${METER_FRAME_LENGTH}`);
    }
    this.header = v.header;
    this.meters = v.meters;
    this.events = v.events;
    this.meterCount = Atomics.load(this.header, 0);
    this.eventCount = Atomics.load(this.header, 1);
  }

  writeMeters(frame: Float64Array): void {
    const base = (this.meterCount % METER_SLOTS) * METER_FRAME_LENGTH;
    for (let i = 0; i < METER_FRAME_LENGTH; i++) this.meters[base + i] = frame[i]!;
    this.meterCount = (this.meterCount + 1) | 0;
    Atomics.store(this.header, 0, this.meterCount);
  }

  writeEvent(record: Float64Array): void {
    const base = (this.eventCount % EVENT_SLOTS) * EVENT_RECORD_LENGTH;
    for (let i = 0; i < EVENT_RECORD_LENGTH; i++) this.events[base + i] = record[i]!;
    this.eventCount = (this.eventCount + 1) | 0;
    Atomics.store(this.header, 1, this.eventCount);
  }
}

/** Page side of the ring. `poll` hands each new frame/record to the callbacks in order. */
export class TelemetryReader {
  private readonly header: Int32Array;
  private readonly meters: Float64Array;
  private readonly events: Float64Array;
  private meterRead: number;
  private eventRead: number;
  private readonly frame = new Float64Array(METER_FRAME_LENGTH);
  private readonly record = new Float64Array(EVENT_RECORD_LENGTH);
  /** Frames and records skipped because the reader fell more than a ring behind. */
  lostFrames = 0;
  lostEvents = 0;

  constructor(buffer: SharedArrayBuffer) {
    const v = views(buffer);
    this.header = v.header;
    this.meters = v.meters;
    this.events = v.events;
    this.meterRead = Atomics.load(this.header, 0);
    this.eventRead = Atomics.load(this.header, 1);
  }

  /** Returns the number of meter frames delivered. The arrays passed to the callbacks are reused. */
  poll(onFrame: (frame: Float64Array) => void, onEvent: (record: Float64Array) => void): number {
    let delivered = 0;
    const written = Atomics.load(this.header, 0);
    let from = this.meterRead;
    // leave one slot of margin: the writer may be filling slot `written` right now
    if (written - from > METER_SLOTS - 1) {
      this.lostFrames += written - (METER_SLOTS - 1) - from;
      from = written - (METER_SLOTS - 1);
    }
    for (let c = from; c < written; c++) {
      const base = (((c % METER_SLOTS) + METER_SLOTS) % METER_SLOTS) * METER_FRAME_LENGTH;
      for (let i = 0; i < METER_FRAME_LENGTH; i++) this.frame[i] = this.meters[base + i]!;
      // if the writer lapped this slot while we copied, the frame may be torn: drop it
      if (Atomics.load(this.header, 0) - c > METER_SLOTS - 1) {
        this.lostFrames++;
        continue;
      }
      onFrame(this.frame);
      delivered++;
    }
    this.meterRead = written;

    const ew = Atomics.load(this.header, 1);
    let ef = this.eventRead;
    if (ew - ef > EVENT_SLOTS - 1) {
      this.lostEvents += ew - (EVENT_SLOTS - 1) - ef;
      ef = ew - (EVENT_SLOTS - 1);
    }
    for (let c = ef; c < ew; c++) {
      const base = (((c % EVENT_SLOTS) + EVENT_SLOTS) % EVENT_SLOTS) * EVENT_RECORD_LENGTH;
      for (let i = 0; i < EVENT_RECORD_LENGTH; i++) this.record[i] = this.events[base + i]!;
      if (Atomics.load(this.header, 1) - c > EVENT_SLOTS - 1) {
        this.lostEvents++;
        continue;
      }
      onEvent(this.record);
    }
    this.eventRead = ew;
    return delivered;
  }
}

// ---------------------------------------------------------------------------------------------
// Processor options (constructor arguments, validated in the worklet) and control messages.
// ---------------------------------------------------------------------------------------------

/** What the worklet adapters need of a MessagePort (the worklet scope's and the page's both fit). */
export interface PortLike {
  postMessage(message: unknown, transfer?: ArrayBuffer[]): void;
  close(): void;
}

/**
 * AudioParams of the live processor (k-rate: read once per render quantum). A change of value is
 * applied like the matching message (set-step-size, set-leakage, set-ceiling), so automation ramps
 * reach the engine smoothly; a parameter that never changes from its initial value leaves the
 * controller's own setting alone (the panel sets these by message and never touches the params).
 */
export const LIVE_PARAMETERS = [
  { name: 'stepSize', defaultValue: 0.01, minValue: 0, maxValue: 1e6, automationRate: 'k-rate' },
  { name: 'leakage', defaultValue: 0, minValue: 0, maxValue: 1e6, automationRate: 'k-rate' },
  { name: 'ceilingDbfs', defaultValue: -6, minValue: -120, maxValue: 0, automationRate: 'k-rate' },
] as const;
export type LiveParameterName = (typeof LIVE_PARAMETERS)[number]['name'];

/** How the live processor's input channels map to microphones. */
export type InputLayout = 'ref-err' | 'err-only';

export interface TelemetryOptions {
  /** Present when the page is cross-origin isolated: the worklet writes meters and events here. */
  sharedBuffer?: SharedArrayBuffer;
  /** Meter frames per second (5 … 120). */
  displayRateHz: number;
  /** Samples per audio chunk sent to the analysis worker (256 … 65536; 0 = no chunks). */
  chunkSamples: number;
}

export interface LiveProcessorOptions {
  controller: ControllerConfig;
  /**
   * A second controller (built on the same model) kept on standby for `switch-controller`: the
   * engine crossfades to it without a restart (Engine.switchController).
   */
  standbyController?: ControllerConfig;
  secondaryPathModel: Float32Array;
  ceilingDbfs: number;
  rampMs?: number;
  startMode?: EngineMode;
  inputLayout: InputLayout;
  /** Largest render quantum expected (the engine is built for it; bigger quanta are split). */
  maxQuantum: number;
  telemetry: TelemetryOptions;
}

export interface SimProcessorOptions {
  /** A scenario validated by parseScenario on the page, with sampleRate and blockSize set for this context. */
  scenario: unknown;
  /** Gain from the simulated error mic to the loudspeaker, dB (−60 … 0). */
  monitorGainDb: number;
  /** Peak cap of the listening signal, dBFS (−60 … 0). */
  monitorCeilingDbfs: number;
  startMode?: EngineMode;
  /** A standby controller for `switch-controller`, built on the scenario's model. */
  standbyController?: ControllerConfig;
  telemetry: TelemetryOptions;
}

/** The identification probe: an exponential sweep (Farina 2000) at a safe level, then silence for the tail. */
export interface ProbeSpec {
  startHz: number;
  endHz: number;
  durationS: number;
  /** Peak amplitude relative to full scale, (0, 0.5]. */
  amplitude: number;
  /** Recording kept after the sweep ends, s (0.05 … 2). */
  tailS: number;
}

/** Calibration tones: level range (dBFS, AES17), frequency range (Hz, up to 0.45·fs), longest tone (s). */
export const TONE_DBFS_RANGE: readonly [number, number] = [-80, -6];
export const TONE_MIN_HZ = 20;
export const TONE_MAX_S = 120;
/** Longest microphone recording for a calibration, s. */
export const RECORD_MAX_S = 10;
/** Controller crossfade limits, ms (Engine.switchController takes 0 … 10000). */
export const CROSSFADE_RANGE_MS: readonly [number, number] = [0, 10000];

/** One output-calibration reading (src/engine/calibration.ts OutputCalibrationPoint). */
export interface CalibrationReading {
  hz: number;
  dbfs: number;
  measuredDbSpl: number;
}

/** A microphone calibration (src/engine/calibration.ts MicCalibration). */
export interface MicCalibrationData {
  hz: number;
  sensitivityDbSpl: number;
  validFromHz: number;
  validToHz: number;
}

/**
 * A live level-cap check (src/engine/level-cap-check.ts): the user's dBFS cap, and optionally an
 * output calibration with a peak SPL cap (the stricter cap applies) and an error-mic calibration.
 * The signal settings are checked by the check itself (its messages name each field).
 */
export interface LevelCheckRequest {
  ceilingDbfs: number;
  outputCalibration?: CalibrationReading[];
  peakCeilingDbSpl?: number;
  micCalibration?: MicCalibrationData;
  /** The test signal: the check's own settings (ranges checked by the check, its messages name each field). */
  signal: TestSignalSettings;
}

/** What the live processor itself saw of the samples it handed to the audio output during a check. */
export interface HandedToOutput {
  samples: number;
  /** The ceiling the check enforced, dBFS. */
  ceilingDbfs: number;
  maxSamplePeakDbfs: number;
  samplesOverCeiling: number;
  nonFinite: number;
}

export type ControlMessage =
  | { type: 'set-mode'; mode: EngineMode }
  | { type: 'set-step-size'; value: number }
  | { type: 'set-leakage'; value: number }
  | { type: 'set-ceiling'; dbfs: number }
  | { type: 'set-adaptation'; on: boolean }
  | { type: 'reset-weights' }
  | { type: 'configure'; controller: ControllerConfig; secondaryPathModel: Float32Array; startMode?: EngineMode; standbyController?: ControllerConfig }
  | { type: 'switch-controller'; crossfadeMs: number }
  | { type: 'calibration-tone'; hz: number; dbfs: number }
  | { type: 'stop-tone' }
  | { type: 'record'; seconds: number }
  | { type: 'level-check'; request: LevelCheckRequest }
  | { type: 'cancel-level-check' }
  | { type: 'identify'; probe: ProbeSpec }
  | { type: 'cancel-identify' }
  | { type: 'set-monitor'; gainDb: number; source: 'on' | 'off' }
  | { type: 'set-harmonics'; harmonics: number }
  | { type: 'set-frequency-source'; source: 'reference' | 'error' | 'fixed'; hz?: number }
  | { type: 'acknowledge' }
  | { type: 'request-weights' }
  | { type: 'attach-analysis'; port: unknown }
  | RecordControlMessage
  | { type: 'shutdown' };

/**
 * `implementation` on 'ready', 'configured' and 'switched': what runs the controller now in charge
 * (for 'switched', the incoming one), as describeImplementation (src/engine/implementation.ts) words
 * it, e.g. "time domain (wasm SIMD, sample update)" or "tonal".
 */
export type WorkletMessage =
  | { type: 'ready'; sampleRate: number; telemetry: 'shared' | 'posted'; maxBlockSize: number; modelTaps: number; implementation: string }
  | { type: 'meters'; frame: Float64Array }
  | { type: 'event'; record: Float64Array }
  | { type: 'identify-recording'; err: Float32Array; ref: Float32Array; probe: ProbeSpec; sampleRate: number }
  | { type: 'weights'; weights: Float32Array }
  | { type: 'model'; taps: Float32Array; truePath: Float32Array | null; sampleRate: number; source: 'scenario' | 'identified' }
  | { type: 'configured'; modelTaps: number; implementation: string }
  | { type: 'error'; message: string }
  | { type: 'switched'; toTonal: boolean; crossfadeMs: number; implementation: string }
  | { type: 'tone-started'; hz: number; dbfs: number }
  /** measuredDbfs: AES17 RMS level of the samples handed to the output over the tone's steady part. */
  | { type: 'tone-stopped'; hz: number; dbfs: number; measuredDbfs: number; samples: number }
  | { type: 'recording'; err: Float32Array; ref: Float32Array; sampleRate: number }
  /** result: a LevelCapResult (src/engine/level-cap-check.ts), typed by the page. */
  | { type: 'level-check-result'; result: unknown; output: HandedToOutput }
  | RecordChunkMessage
  | { type: 'record-stopped'; frames: number; dropped: number }
  | { type: 'stopped' };

/** A chunk of microphone audio for the analysis worker (sent on a dedicated port, never to comlink). */
export interface AudioChunkMessage {
  type: 'audio-chunk';
  sampleRate: number;
  /** Error mic with control as it is (on or off, see controlOn). */
  err: Float32Array;
  /** Simulated control-off error mic (simulated plant only), else null. */
  errOff: Float32Array | null;
  /** Reference mic. */
  ref: Float32Array;
  /** True when every block of the chunk ran with control on and the ramp fully open. */
  controlOn: boolean;
}

const MODES: readonly EngineMode[] = ['idle', 'control', 'muted'];

function num(m: Record<string, unknown>, field: string, lo: number, hi: number, prefix = ''): number {
  const v = m[field];
  if (typeof v !== 'number' || !(v >= lo && v <= hi)) throw new RangeError(`${prefix}${field} must be a number from ${lo} to ${hi}, got ${String(v)}`);
  return v;
}

export function checkProbe(p: unknown, sampleRate: number): ProbeSpec {
  if (typeof p !== 'object' || p === null) throw new RangeError(`probe must be an object, got ${String(p)}`);
  const o = p as Record<string, unknown>;
  const startHz = num(o, 'startHz', 1, sampleRate / 2, 'probe.');
  const endHz = num(o, 'endHz', 1, sampleRate / 2, 'probe.');
  if (!(endHz > startHz)) throw new RangeError(`probe.endHz must be above probe.startHz (${startHz} Hz), got ${endHz}`);
  return {
    startHz,
    endHz,
    durationS: num(o, 'durationS', 0.05, 30, 'probe.'),
    amplitude: num(o, 'amplitude', 1e-6, 0.5, 'probe.'),
    tailS: num(o, 'tailS', 0.05, 2, 'probe.'),
  };
}

/** Validate a message arriving at a worklet. Throws RangeError naming the field. */
export function parseControlMessage(data: unknown, sampleRate: number): ControlMessage {
  if (typeof data !== 'object' || data === null || typeof (data as { type?: unknown }).type !== 'string') {
    throw new RangeError(`message must be an object with a string "type", got ${String(data)}`);
  }
  const m = data as Record<string, unknown>;
  switch (m.type) {
    case 'set-mode':
      if (!MODES.includes(m.mode as EngineMode)) throw new RangeError(`mode must be one of ${MODES.join(', ')}, got ${String(m.mode)}`);
      return { type: 'set-mode', mode: m.mode as EngineMode };
    case 'set-step-size':
      return { type: 'set-step-size', value: num(m, 'value', 1e-12, 1e6) };
    case 'set-leakage':
      return { type: 'set-leakage', value: num(m, 'value', 0, 1e6) };
    case 'set-ceiling':
      return { type: 'set-ceiling', dbfs: num(m, 'dbfs', -120, 0) };
    case 'set-adaptation':
      if (typeof m.on !== 'boolean') throw new RangeError(`on must be true or false, got ${String(m.on)}`);
      return { type: 'set-adaptation', on: m.on };
    case 'reset-weights':
    case 'cancel-identify':
    case 'stop-tone':
    case 'cancel-level-check':
    case 'request-weights':
    case 'acknowledge':
    case 'shutdown':
      return { type: m.type };
    case 'set-harmonics': {
      const h = num(m, 'harmonics', 1, MAX_PANEL_HARMONICS);
      if (!Number.isInteger(h)) throw new RangeError(`harmonics must be a whole number from 1 to ${MAX_PANEL_HARMONICS}, got ${h}`);
      return { type: 'set-harmonics', harmonics: h };
    }
    case 'set-frequency-source': {
      if (m.source !== 'reference' && m.source !== 'error' && m.source !== 'fixed') {
        throw new RangeError(`source must be "reference", "error" or "fixed", got ${String(m.source)}`);
      }
      if (m.source === 'fixed') return { type: 'set-frequency-source', source: 'fixed', hz: num(m, 'hz', 1, sampleRate / 4) };
      return { type: 'set-frequency-source', source: m.source };
    }
    case 'configure': {
      if (!(m.secondaryPathModel instanceof Float32Array) || m.secondaryPathModel.length < 1) {
        throw new RangeError('secondaryPathModel must be a non-empty Float32Array');
      }
      checkControllerSettings(m.controller, 'controller.');
      const startMode = m.startMode === undefined ? undefined : (m.startMode as EngineMode);
      if (startMode !== undefined && !MODES.includes(startMode)) throw new RangeError(`startMode must be one of ${MODES.join(', ')}, got ${String(startMode)}`);
      const sb = m.standbyController;
      if (sb !== undefined) checkControllerSettings(sb, 'standbyController.');
      return {
        type: 'configure',
        controller: m.controller as ControllerConfig,
        secondaryPathModel: m.secondaryPathModel,
        ...(startMode ? { startMode } : {}),
        ...(sb ? { standbyController: sb as ControllerConfig } : {}),
      };
    }
    case 'switch-controller':
      return { type: 'switch-controller', crossfadeMs: num(m, 'crossfadeMs', CROSSFADE_RANGE_MS[0], CROSSFADE_RANGE_MS[1]) };
    case 'calibration-tone':
      return {
        type: 'calibration-tone',
        hz: num(m, 'hz', TONE_MIN_HZ, 0.45 * sampleRate),
        dbfs: num(m, 'dbfs', TONE_DBFS_RANGE[0], TONE_DBFS_RANGE[1]),
      };
    case 'record':
      return { type: 'record', seconds: num(m, 'seconds', 0.1, RECORD_MAX_S) };
    case 'level-check':
      return { type: 'level-check', request: checkLevelRequest(m.request) };
    case 'identify':
      return { type: 'identify', probe: checkProbe(m.probe, sampleRate) };
    case 'set-monitor':
      if (m.source !== 'on' && m.source !== 'off') throw new RangeError(`source must be "on" or "off", got ${String(m.source)}`);
      return { type: 'set-monitor', gainDb: num(m, 'gainDb', -60, 0), source: m.source };
    case 'attach-analysis':
      if (typeof m.port !== 'object' || m.port === null) throw new RangeError('port must be a MessagePort');
      return { type: 'attach-analysis', port: m.port };
    case 'record-start':
    case 'record-stop':
    case 'record-chunk-return':
      return parseRecordMessage(m);
    default:
      throw new RangeError(`unknown message type "${String(m.type)}"`);
  }
}

/** Shallow check of a level-check request (ranges of the signal settings: the check's own messages). */
export function checkLevelRequest(r: unknown): LevelCheckRequest {
  if (typeof r !== 'object' || r === null) throw new RangeError(`request must be an object, got ${String(r)}`);
  const o = r as Record<string, unknown>;
  const ceilingDbfs = num(o, 'ceilingDbfs', -120, 0, 'request.');
  if (typeof o.signal !== 'object' || o.signal === null) throw new RangeError(`request.signal must be an object, got ${String(o.signal)}`);
  const cal = o.outputCalibration;
  if (cal !== undefined && !Array.isArray(cal)) throw new RangeError(`request.outputCalibration must be a list of readings {hz, dbfs, measuredDbSpl}, got ${String(cal)}`);
  if ((cal === undefined) !== (o.peakCeilingDbSpl === undefined)) {
    throw new RangeError('request.outputCalibration and request.peakCeilingDbSpl go together: give both or neither');
  }
  const peak = o.peakCeilingDbSpl === undefined ? undefined : num(o, 'peakCeilingDbSpl', -50, 200, 'request.');
  const mic = o.micCalibration;
  if (mic !== undefined && (typeof mic !== 'object' || mic === null)) throw new RangeError(`request.micCalibration must be an object, got ${String(mic)}`);
  if (mic) {
    const mo = mic as Record<string, unknown>;
    num(mo, 'hz', 1e-6, 1e6, 'request.micCalibration.');
    num(mo, 'sensitivityDbSpl', -100, 300, 'request.micCalibration.');
    num(mo, 'validFromHz', 1e-6, 1e6, 'request.micCalibration.');
    num(mo, 'validToHz', 1e-6, 1e6, 'request.micCalibration.');
  }
  return {
    ceilingDbfs,
    signal: o.signal as LevelCheckRequest['signal'],
    ...(cal ? { outputCalibration: cal as CalibrationReading[], peakCeilingDbSpl: peak! } : {}),
    ...(mic ? { micCalibration: mic as MicCalibrationData } : {}),
  };
}

export function checkTelemetryOptions(t: unknown): TelemetryOptions {
  if (typeof t !== 'object' || t === null) throw new RangeError(`telemetry must be an object, got ${String(t)}`);
  const o = t as Record<string, unknown>;
  const sharedBuffer = o.sharedBuffer;
  if (sharedBuffer !== undefined && !(typeof SharedArrayBuffer !== 'undefined' && sharedBuffer instanceof SharedArrayBuffer)) {
    throw new RangeError('telemetry.sharedBuffer must be a SharedArrayBuffer when given');
  }
  const displayRateHz = num(o, 'displayRateHz', 5, 120, 'telemetry.');
  const chunkSamples = o.chunkSamples === 0 ? 0 : num(o, 'chunkSamples', 256, 65536, 'telemetry.');
  return { displayRateHz, chunkSamples, ...(sharedBuffer ? { sharedBuffer } : {}) };
}
