/**
 * The four acoustic paths of a scenario generated from a shoebox room, so users can try microphone and
 * loudspeaker placements instead of typing delays:
 *
 *   reference  noise source → reference microphone
 *   primary    noise source → error microphone
 *   secondary  loudspeaker  → error microphone, plus the audio I/O latency
 *   feedback   loudspeaker  → reference microphone, plus the audio I/O latency
 *
 * Each is an image-source response (Allen & Berkley, JASA 65(4), 1979) with fractional delays by windowed
 * sinc (Peterson, JASA 80(5), 1986), computed by room.ts. The I/O latency (converters, buffering: the time
 * from the controller writing a sample to the loudspeaker moving, plus the microphone's way back in) sits
 * on the two paths that start at the controller's output, as it does in the explicit form of `paths`.
 *
 * Scale (ours): room.ts gives pressure per unit source strength, 1/(4π·d) for the direct sound. Here that is
 * multiplied by 4π·(1 m), so the direct sound at d metres has amplitude 1/d (d in metres): a source's `rms`
 * or `amplitude` in the scenario is its level at 1 m, and a full-scale loudspeaker drive gives full scale at
 * 1 m. Paths are then comparable with the explicit form, where gain 1 means "as loud as at the source".
 *
 * File format (the `paths` field of a scenario, as an alternative to explicit paths):
 *
 * ```json
 * "paths": {
 *   "room": {
 *     "dimensionsM": [6, 4, 3],            // [x, y, z] in metres
 *     "absorption": 0.3,                   // energy absorption α in (0, 1]: one value, or six [x0, x1, y0, y1, z0, z1]
 *     "source": [0.5, 2, 1.2],             // positions in metres, strictly inside the room
 *     "referenceMic": [1.0, 2, 1.2],
 *     "errorMic": [5.0, 2, 1.2],
 *     "speaker": [4.2, 2.4, 1.2],
 *     "speedOfSound": 343,                 // optional, m/s
 *     "maxOrder": 10,                      // optional, highest reflection order kept
 *     "highPassHz": 40,                    // optional, 2nd-order high-pass applied to every response
 *     "maxTimeS": 0.3                      // optional, response length in seconds (default: Sabine T60, capped)
 *   },
 *   "ioLatencyMs": 6                       // audio I/O latency in ms, added to the secondary and feedback paths
 * }
 * ```
 */
import { z } from 'zod';
import { buildPathResponse, type SparseResponse } from './fractional-delay.ts';
import { defaultRoomTimeS, eyringT60, roomImpulseResponse, sabineT60, type Vec3 } from './room.ts';

/** Smallest distance allowed between a source or loudspeaker and a microphone (m). */
export const MIN_DISTANCE_M = 0.01;
/** Longest response generated (s): the cost of the plant grows with path length. */
export const MAX_ROOM_TIME_S = 10;

const num = (min: number, max: number, unit: string) =>
  z
    .number({ error: `must be a number of ${unit} from ${min} to ${max}` })
    .min(min, `must be from ${min} to ${max} ${unit}`)
    .max(max, `must be from ${min} to ${max} ${unit}`);
const positive = (max: number, unit: string) =>
  z
    .number({ error: `must be a number of ${unit} > 0 and at most ${max}` })
    .positive(`must be > 0 and at most ${max} ${unit}`)
    .max(max, `must be > 0 and at most ${max} ${unit}`);
const absorption = () =>
  z
    .number({ error: 'must be an absorption coefficient in (0, 1]' })
    .positive('must be an absorption coefficient in (0, 1]')
    .max(1, 'must be an absorption coefficient in (0, 1]');
const position = () =>
  z.tuple([num(0, 1000, 'm'), num(0, 1000, 'm'), num(0, 1000, 'm')], { error: 'must be a position [x, y, z] in metres' });

const POSITIONS = ['source', 'referenceMic', 'errorMic', 'speaker'] as const;
/** Pairs whose distance the paths divide by. */
const PAIRS = [
  ['source', 'referenceMic'],
  ['source', 'errorMic'],
  ['speaker', 'errorMic'],
  ['speaker', 'referenceMic'],
] as const;

export const roomSpecSchema = z
  .strictObject({
    dimensionsM: z.tuple([positive(1000, 'm'), positive(1000, 'm'), positive(1000, 'm')], {
      error: 'must be the room size [x, y, z] in metres',
    }),
    absorption: z.union([absorption(), z.tuple([absorption(), absorption(), absorption(), absorption(), absorption(), absorption()])], {
      error: 'must be one absorption coefficient in (0, 1] or six [x0, x1, y0, y1, z0, z1]',
    }),
    source: position(),
    referenceMic: position(),
    errorMic: position(),
    speaker: position(),
    speedOfSound: num(100, 2000, 'm/s').optional(),
    maxOrder: z.number({ error: 'must be a whole number from 0 to 1000' }).int('must be a whole number from 0 to 1000').min(0, 'must be a whole number from 0 to 1000').max(1000, 'must be a whole number from 0 to 1000').optional(),
    highPassHz: positive(96000, 'Hz').optional(),
    maxTimeS: positive(MAX_ROOM_TIME_S, 's').optional(),
  })
  .superRefine((room, ctx) => {
    const axes = ['x', 'y', 'z'];
    for (const key of POSITIONS) {
      const p = room[key];
      for (let i = 0; i < 3; i++) {
        const limit = room.dimensionsM[i]!;
        if (!(p[i]! > 0 && p[i]! < limit)) {
          ctx.addIssue({ code: 'custom', path: [key, i], message: `${axes[i]} must lie strictly inside the room, in (0, ${limit}) m, got ${p[i]}` });
        }
      }
    }
    for (const [a, b] of PAIRS) {
      const d = distance(room[a], room[b]);
      if (d < MIN_DISTANCE_M) {
        ctx.addIssue({ code: 'custom', path: [b], message: `must be at least ${MIN_DISTANCE_M} m from ${a}, got ${d.toFixed(4)} m` });
      }
    }
  });

/** `paths: { room, ioLatencyMs }` in a scenario: the room form of the paths (the alternative to explicit paths). */
export const roomPathsSchema = z.strictObject({
  room: roomSpecSchema,
  ioLatencyMs: num(0, 10000, 'ms'),
});

export type RoomSpec = z.infer<typeof roomSpecSchema>;
export type RoomPathsSpec = z.infer<typeof roomPathsSchema>;

export type RoomPathName = 'reference' | 'primary' | 'secondary' | 'feedback';

export interface RoomPathResponses {
  /** Sparse responses at the sample rate asked for, scaled as the file comment says. */
  reference: SparseResponse;
  primary: SparseResponse;
  secondary: SparseResponse;
  feedback: SparseResponse;
  /** Straight-line distance of each path (m). */
  distancesM: Record<RoomPathName, number>;
  /** Arrival of each path's direct sound (ms): distance / c, plus ioLatencyMs on secondary and feedback. */
  directDelayMs: Record<RoomPathName, number>;
  /** Acoustic delay from the reference to the error microphone, primary − reference direct delay (ms). */
  referenceToErrorMs: number;
  /** Reverberation times of the room (s). */
  sabineT60S: number;
  eyringT60S: number;
  /** Length of the room responses (s) before the I/O latency is added. */
  responseS: number;
}

/** One path in the explicit form of the scenario file: pure delay (ms, whole samples here), gain, FIR. */
export interface ExplicitRoomPath {
  delayMs: number;
  gain: number;
  fir: number[];
}

export type ExplicitRoomPaths = Record<RoomPathName, ExplicitRoomPath>;

function distance(a: Vec3, b: Vec3): number {
  return Math.hypot(a[0] - b[0], a[1] - b[1], a[2] - b[2]);
}

/** Leading and trailing zeros removed; an all-zero response keeps one zero tap at offset 0. */
function sparse(dense: Float64Array): SparseResponse {
  let start = 0;
  while (start < dense.length && dense[start] === 0) start++;
  if (start === dense.length) return { offset: 0, taps: new Float64Array(1) };
  let end = dense.length;
  while (dense[end - 1] === 0) end--;
  return { offset: start, taps: dense.slice(start, end) };
}

/**
 * The reference, primary, secondary and feedback responses of a room at `sampleRate` Hz. The spec is
 * validated first (so direct callers get the same messages as the scenario file); a RangeError names the
 * first bad field.
 */
export function roomPathResponses(spec: RoomPathsSpec, sampleRate: number): RoomPathResponses {
  if (!Number.isFinite(sampleRate) || sampleRate <= 0) throw new RangeError(`sampleRate must be a finite number of Hz > 0, got ${sampleRate}`);
  const checked = roomPathsSchema.safeParse(spec);
  if (!checked.success) {
    const issue = checked.error.issues[0]!;
    throw new RangeError(`room paths: ${issue.path.map(String).join('.') || '(top level)'}: ${issue.message}`);
  }
  const { room, ioLatencyMs } = checked.data;
  const c = room.speedOfSound ?? 343;
  if (room.highPassHz !== undefined && room.highPassHz >= sampleRate / 2) {
    throw new RangeError(`room.highPassHz must be below half the sample rate (${sampleRate / 2} Hz), got ${room.highPassHz}`);
  }
  const geometry = { dimensionsM: room.dimensionsM, absorption: room.absorption };
  const sabine = sabineT60(geometry, c);
  const eyring = eyringT60(geometry, c);
  // The default length is room.ts's (Sabine T60, capped by the image count), but never more than
  // MAX_ROOM_TIME_S, and always long enough to hold every direct sound.
  const longest = Math.max(...PAIRS.map(([a, b]) => distance(room[a], room[b]))) / c;
  const responseS = room.maxTimeS ?? Math.min(MAX_ROOM_TIME_S, Math.max(defaultRoomTimeS(geometry, c), 2 * longest + 0.01));
  const scale = 4 * Math.PI; // × 1 m: direct sound at d metres reads 1/d
  const latencySamples = (ioLatencyMs / 1000) * sampleRate;

  const response = (from: Vec3, to: Vec3, withLatency: boolean): SparseResponse => {
    const ir = roomImpulseResponse({
      dimensionsM: room.dimensionsM,
      absorption: room.absorption,
      source: from,
      receiver: to,
      sampleRate,
      speedOfSound: c,
      maxTimeS: responseS,
      ...(room.maxOrder !== undefined ? { maxOrder: room.maxOrder } : {}),
      ...(room.highPassHz !== undefined ? { highPassHz: room.highPassHz } : {}),
    });
    for (let i = 0; i < ir.length; i++) ir[i] = ir[i]! * scale;
    const s = sparse(ir);
    if (!withLatency || latencySamples === 0) return s;
    // The latency is a (possibly fractional) delay in front of the acoustic response.
    const delayed = buildPathResponse({ delaySamples: latencySamples, gain: 1, fir: s.taps });
    return { offset: s.offset + delayed.offset, taps: delayed.taps };
  };

  const distancesM: Record<RoomPathName, number> = {
    reference: distance(room.source, room.referenceMic),
    primary: distance(room.source, room.errorMic),
    secondary: distance(room.speaker, room.errorMic),
    feedback: distance(room.speaker, room.referenceMic),
  };
  const ms = (d: number) => (1000 * d) / c;
  return {
    reference: response(room.source, room.referenceMic, false),
    primary: response(room.source, room.errorMic, false),
    secondary: response(room.speaker, room.errorMic, true),
    feedback: response(room.speaker, room.referenceMic, true),
    distancesM,
    directDelayMs: {
      reference: ms(distancesM.reference),
      primary: ms(distancesM.primary),
      secondary: ms(distancesM.secondary) + ioLatencyMs,
      feedback: ms(distancesM.feedback) + ioLatencyMs,
    },
    referenceToErrorMs: ms(distancesM.primary) - ms(distancesM.reference),
    sabineT60S: sabine,
    eyringT60S: eyring,
    responseS,
  };
}

/**
 * The same paths in the explicit form of the scenario file ({delayMs, gain, fir} each, delays in whole
 * samples), so a scenario with `paths.room` can be turned into one with explicit paths and run by the
 * unchanged simulator.
 */
export function roomPathsToExplicit(spec: RoomPathsSpec, sampleRate: number): ExplicitRoomPaths {
  const r = roomPathResponses(spec, sampleRate);
  const explicit = (s: SparseResponse): ExplicitRoomPath => ({ delayMs: (1000 * s.offset) / sampleRate, gain: 1, fir: Array.from(s.taps) });
  return {
    reference: explicit(r.reference),
    primary: explicit(r.primary),
    secondary: explicit(r.secondary),
    feedback: explicit(r.feedback),
  };
}
