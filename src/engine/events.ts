/**
 * Events: one shape everywhere, `{ timeS, cause, values, action }`.
 *
 * On the audio thread events live in an `EventRing` (fixed capacity, numeric codes, a Float64Array
 * of values, no allocation on `staged` + `commit`; when full the oldest entry is overwritten and counted as
 * dropped). Off the audio thread they are decoded into plain objects: either `drainEvents(ring)`
 * directly (simulator, CLI) or, across threads, `ring.drainInto(batch)` on the audio thread (no
 * allocation; a batch is plain typed arrays, so it can be posted) and `decodeEventBatch(batch)`
 * on the receiving side.
 */

/**
 * Causes, with the values each event carries (in this order; NaN = not available).
 * - `non-finite`: NaN/±Infinity seen. values: source (NON_FINITE_SOURCES index: 0 ref, 1 err,
 *   2 out = controller output, 3 weights), count (samples in the block; 1 for weights).
 * - `weights-unbounded`: control-filter weight norm too large or growing without bound.
 *   values: weightNormSq, maxNormSq, growth (‖w‖ now / ‖w‖ one growth window earlier, NaN when off).
 * - `error-rise`: error power above the control-off baseline for the hold time.
 *   values: riseDb (last window vs baseline), thresholdDb, heldMs, baselinePower (mean square).
 * - `output-at-ceiling`: limiter gain reduction above a threshold for the hold time.
 *   values: gainReductionDb, thresholdDb, heldMs.
 * - `input-clipping`: |x| ≥ level for k consecutive samples. values: channel (0 ref, 1 err), runLength, level.
 * - `dead-microphone`: digital silence or a constant value for the hold time.
 *   values: channel (0 ref, 1 err), value (the constant), heldMs.
 * - `limiter-engaged`: limiter gain reduction first exceeds a small threshold (information only).
 *   values: gainReductionDb, thresholdDb.
 * - `latency-jump`: the measured audio I/O latency changed (emitted by the engine). values: previousMs, currentMs.
 * - `model-mismatch`: the secondary-path model no longer fits the plant (emitted by the engine or
 *   identification). values: misfitDb (model error power relative to the plant response, dB).
 * - `resume`: control resumed after a guard action. values: byUser (1 = acknowledge(), 0 = automatic
 *   after the hold-off), heldMs (time spent frozen or muted).
 */
export const EVENT_CAUSES = [
  'non-finite',
  'weights-unbounded',
  'error-rise',
  'output-at-ceiling',
  'input-clipping',
  'dead-microphone',
  'limiter-engaged',
  'latency-jump',
  'model-mismatch',
  'resume',
] as const;
export type EventCause = (typeof EVENT_CAUSES)[number];

/**
 * Actions, ordered by strength (a larger code includes the effect of the smaller ones):
 * `none` (record only), `freeze-adaptation` (stop updating the weights, keep the output),
 * `reset-weights` (clear the weights, then stay frozen), `mute` (fade the output to silence and freeze).
 */
export const EVENT_ACTIONS = ['none', 'freeze-adaptation', 'reset-weights', 'mute'] as const;
export type EventAction = (typeof EVENT_ACTIONS)[number];

/** Numeric cause codes for the real-time path (index into EVENT_CAUSES). */
export const CAUSE = {
  nonFinite: 0,
  weightsUnbounded: 1,
  errorRise: 2,
  outputAtCeiling: 3,
  inputClipping: 4,
  deadMicrophone: 5,
  limiterEngaged: 6,
  latencyJump: 7,
  modelMismatch: 8,
  resume: 9,
} as const;

/** Numeric action codes (index into EVENT_ACTIONS; larger = stronger). */
export const ACTION = { none: 0, freezeAdaptation: 1, resetWeights: 2, mute: 3 } as const;
export type ActionCode = (typeof ACTION)[keyof typeof ACTION];

/** Sources of the `non-finite` cause (its `source` value indexes this list). */
export const NON_FINITE_SOURCES = ['ref', 'err', 'out', 'weights'] as const;

/** Values carried per entry in the ring. */
export const VALUES_PER_EVENT = 4;

/** Names of the values of each cause, in slot order. */
export const EVENT_VALUE_NAMES: { readonly [C in EventCause]: readonly string[] } = {
  'non-finite': ['source', 'count'],
  'weights-unbounded': ['weightNormSq', 'maxNormSq', 'growth'],
  'error-rise': ['riseDb', 'thresholdDb', 'heldMs', 'baselinePower'],
  'output-at-ceiling': ['gainReductionDb', 'thresholdDb', 'heldMs'],
  'input-clipping': ['channel', 'runLength', 'level'],
  'dead-microphone': ['channel', 'value', 'heldMs'],
  'limiter-engaged': ['gainReductionDb', 'thresholdDb'],
  'latency-jump': ['previousMs', 'currentMs'],
  'model-mismatch': ['misfitDb'],
  resume: ['byUser', 'heldMs'],
};

/** One decoded event. */
export interface EngineEvent {
  /** Time of the detection in seconds of processed audio. */
  timeS: number;
  cause: EventCause;
  values: Record<string, number>;
  action: EventAction;
}

/** Events copied out of a ring: plain typed arrays, safe to post between threads. */
export interface EventBatch {
  /** Entries filled (oldest first). */
  count: number;
  /** Entries the ring had to overwrite since the previous drain. */
  dropped: number;
  readonly timeS: Float64Array;
  readonly cause: Uint8Array;
  readonly action: Uint8Array;
  /** VALUES_PER_EVENT values per entry. */
  readonly values: Float64Array;
}

/** A batch able to hold `capacity` events (allocates; do it once). */
export function createEventBatch(capacity: number): EventBatch {
  checkCapacity(capacity);
  return {
    count: 0,
    dropped: 0,
    timeS: new Float64Array(capacity),
    cause: new Uint8Array(capacity),
    action: new Uint8Array(capacity),
    values: new Float64Array(capacity * VALUES_PER_EVENT),
  };
}

function checkCapacity(capacity: number): void {
  if (typeof capacity !== 'number' || !Number.isInteger(capacity) || capacity < 1 || capacity > 65536) {
    throw new RangeError(`capacity must be an integer from 1 to 65536 events, got ${String(capacity)}`);
  }
}

export class EventRing {
  readonly capacity: number;
  private readonly timeS: Float64Array;
  private readonly cause: Uint8Array;
  private readonly action: Uint8Array;
  private readonly values: Float64Array;
  private head = 0; // oldest entry
  private count = 0;
  private droppedSinceDrain = 0;
  private pushedTotal = 0;

  constructor(capacity: number) {
    checkCapacity(capacity);
    this.capacity = capacity;
    this.timeS = new Float64Array(capacity);
    this.cause = new Uint8Array(capacity);
    this.action = new Uint8Array(capacity);
    this.values = new Float64Array(capacity * VALUES_PER_EVENT);
    this.staged.fill(NaN);
  }

  /** Entries waiting to be drained. */
  get size(): number {
    return this.count;
  }

  /** Entries overwritten (lost) since the last drain. */
  get dropped(): number {
    return this.droppedSinceDrain;
  }

  /** Entries pushed since construction or `clear()`. */
  get pushed(): number {
    return this.pushedTotal;
  }

  /** Forget every entry and counter. */
  clear(): void {
    this.head = 0;
    this.count = 0;
    this.droppedSinceDrain = 0;
    this.pushedTotal = 0;
  }

  /**
   * Staging area for `commit`: [timeS, v0, v1, v2, v3]. The real-time path writes here and commits,
   * so no double is ever passed as an argument (V8 boxes doubles passed to a call it does not inline).
   */
  readonly staged = new Float64Array(1 + VALUES_PER_EVENT);

  /**
   * Record an event (convenience form; may box its number arguments if the JIT does not inline it:
   * per-block code should use `staged` + `commit`). Unused value slots are NaN.
   */
  push(timeS: number, cause: number, action: number, v0 = NaN, v1 = NaN, v2 = NaN, v3 = NaN): void {
    const st = this.staged;
    st[0] = timeS;
    st[1] = v0;
    st[2] = v1;
    st[3] = v2;
    st[4] = v3;
    this.commit(cause, action);
  }

  /**
   * Record the event held in `staged` (no allocation, never throws), then reset `staged` to NaN.
   * `cause` is a CAUSE code, `action` an ACTION code. When full, the oldest entry is overwritten
   * and counted in `dropped`.
   */
  commit(cause: number, action: number): void {
    let slot: number;
    if (this.count < this.capacity) {
      slot = this.head + this.count;
      if (slot >= this.capacity) slot -= this.capacity;
      this.count++;
    } else {
      slot = this.head;
      this.head = this.head + 1 === this.capacity ? 0 : this.head + 1;
      this.droppedSinceDrain++;
    }
    const st = this.staged;
    this.timeS[slot] = st[0]!;
    this.cause[slot] = cause;
    this.action[slot] = action;
    const v = slot * VALUES_PER_EVENT;
    for (let k = 0; k < VALUES_PER_EVENT; k++) this.values[v + k] = st[1 + k]!;
    st.fill(NaN);
    this.pushedTotal++;
  }

  /**
   * Move the oldest entries (as many as `batch` holds) into `batch`, oldest first; the rest stay
   * queued. Sets batch.count and batch.dropped (and zeroes the ring's dropped counter). No allocation.
   */
  drainInto(batch: EventBatch): number {
    const room = batch.timeS.length;
    const n = this.count < room ? this.count : room;
    for (let i = 0; i < n; i++) {
      let slot = this.head + i;
      if (slot >= this.capacity) slot -= this.capacity;
      batch.timeS[i] = this.timeS[slot]!;
      batch.cause[i] = this.cause[slot]!;
      batch.action[i] = this.action[slot]!;
      for (let k = 0; k < VALUES_PER_EVENT; k++) {
        batch.values[i * VALUES_PER_EVENT + k] = this.values[slot * VALUES_PER_EVENT + k]!;
      }
    }
    this.head = (this.head + n) % this.capacity;
    this.count -= n;
    batch.count = n;
    batch.dropped = this.droppedSinceDrain;
    this.droppedSinceDrain = 0;
    return n;
  }
}

/** Decode a batch into plain event objects (allocates: call it off the audio thread). */
export function decodeEventBatch(batch: EventBatch): EngineEvent[] {
  const out: EngineEvent[] = [];
  for (let i = 0; i < batch.count; i++) {
    const cause = EVENT_CAUSES[batch.cause[i]!];
    const action = EVENT_ACTIONS[batch.action[i]!];
    if (cause === undefined) throw new RangeError(`event ${i}: cause code must be 0 … ${EVENT_CAUSES.length - 1}, got ${batch.cause[i]}`);
    if (action === undefined) throw new RangeError(`event ${i}: action code must be 0 … ${EVENT_ACTIONS.length - 1}, got ${batch.action[i]}`);
    const names = EVENT_VALUE_NAMES[cause];
    const values: Record<string, number> = {};
    for (let k = 0; k < names.length; k++) values[names[k]!] = batch.values[i * VALUES_PER_EVENT + k]!;
    out.push({ timeS: batch.timeS[i]!, cause, values, action });
  }
  return out;
}

/** Drain every queued entry of `ring` and decode it (allocates; simulator, CLI, tests). */
export function drainEvents(ring: EventRing): EngineEvent[] {
  const batch = createEventBatch(Math.max(1, ring.size));
  ring.drainInto(batch);
  return decodeEventBatch(batch);
}

/**
 * An event's values in words for a readable summary: `name=value` pairs, numbers to four significant
 * digits, and the non-finite detector's source code named ('ref', 'err', 'out', 'weights').
 */
export function describeEventValues(e: EngineEvent): string {
  return Object.entries(e.values)
    .map(([k, v]) => {
      if (e.cause === 'non-finite' && k === 'source' && Number.isInteger(v)) return `source=${NON_FINITE_SOURCES[v] ?? v}`;
      return `${k}=${Number.isFinite(v) ? +v.toPrecision(4) : v}`;
    })
    .join(' ');
}
