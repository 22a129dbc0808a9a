/**
 * The scenario file: everything the simulator needs to close the acoustic loop, validated with zod.
 * Field names are part of the file format users keep: add fields freely, rename none.
 *
 * Units: `amplitude` linear peak, `gain` linear, `bandHz` [low, high] in Hz, delays in ms (fractional
 * delays allowed), `rms` linear RMS, levels in dBFS (RMS per AES17, peaks as sample peaks).
 */
import { z } from 'zod';
import { buildPathResponse, DEFAULT_HALF_WIDTH, type SparseResponse } from './fractional-delay.ts';
import { roomPathsSchema, roomPathsToExplicit } from './room-paths.ts';
import {
  ALGORITHMS, FXLMS_SETTINGS, IMC_SETTINGS, LIMITER_SETTINGS, SIMULATION_ONLY_FIELDS, TONAL_SETTINGS,
  describeRange, fitsSetting, type SettingSpec, type SettingsObject, type SettingsTable, type UnionSetting,
} from '../engine/settings.ts';
import { EVENT_ACTIONS } from '../engine/events.ts';
import { fieldPath, showValue } from '../dsp/check.ts';

export const SCENARIO_SCHEMA_VERSION = 1;

const num = (min: number, max: number, what = 'number') =>
  z.number({ error: `must be a ${what} from ${min} to ${max}` }).min(min, `must be from ${min} to ${max}`).max(max, `must be from ${min} to ${max}`);
const int = (min: number, max: number) =>
  z.number({ error: `must be an integer from ${min} to ${max}` }).int(`must be an integer from ${min} to ${max}`).min(min, `must be an integer from ${min} to ${max}`).max(max, `must be an integer from ${min} to ${max}`);

const toneSource = z.strictObject({
  kind: z.literal('tone'),
  hz: num(1, 96000, 'frequency in Hz'),
  amplitude: num(0, 1e3),
  driftHzPerS: num(-1000, 1000, 'drift in Hz/s').optional(),
  phaseDeg: num(-360, 360, 'phase in degrees').optional(),
  /** Frequency jumps (phase-continuous): at `atS` seconds the tone moves to `hz` (drift continues from there). */
  steps: z.array(z.strictObject({ atS: num(0, 86400, 'time in seconds'), hz: num(1, 96000, 'frequency in Hz') }), { error: 'must be an array of {atS, hz}' }).max(1000).optional(),
});
const harmonicsSource = z.strictObject({
  kind: z.literal('harmonics'),
  fundamentalHz: num(1, 96000, 'frequency in Hz'),
  amplitudes: z.array(num(0, 1e3), { error: 'must be an array of linear peak amplitudes' }).min(1, 'needs at least one amplitude').max(64, 'at most 64 harmonics'),
  driftHzPerS: num(-1000, 1000, 'drift in Hz/s').optional(),
});
const noiseSource = z.strictObject({
  kind: z.literal('noise'),
  color: z.enum(['white', 'pink', 'brown'], { error: 'must be "white", "pink" or "brown"' }),
  rms: num(0, 1e3),
  bandHz: z.tuple([num(0, 96000), num(0, 96000)], { error: 'must be [lowHz, highHz]' }).optional(),
});
const wavSource = z.strictObject({
  kind: z.literal('wav'),
  file: z.string({ error: 'must be a path (relative to the scenario file)' }).min(1, 'must not be empty'),
  gain: num(0, 1e3).optional(),
  channel: int(0, 255).optional(),
  loop: z.boolean({ error: 'must be true or false' }).optional(),
});

export const sourceSchema = z.discriminatedUnion('kind', [toneSource, harmonicsSource, noiseSource, wavSource], {
  error: (iss) => (iss.code === 'invalid_union' ? 'kind must be one of "tone", "harmonics", "noise", "wav"' : undefined),
});

/** Largest |gain| and |FIR tap| of a path (linear): 60 dB, beyond any acoustic path. */
export const MAX_PATH_GAIN = 1000;

export const pathSchema = z.strictObject({
  delayMs: num(0, 10000, 'delay in ms (≥ 0)'),
  gain: num(-MAX_PATH_GAIN, MAX_PATH_GAIN, 'linear gain').optional(),
  fir: z.array(num(-MAX_PATH_GAIN, MAX_PATH_GAIN, 'FIR tap'), { error: 'must be an array of FIR taps' }).min(1, 'needs at least one tap').max(1 << 20).optional(),
});

const boolean = () => z.boolean({ error: 'must be true or false' });
const guardAction = z.enum(EVENT_ACTIONS, { error: `must be one of ${EVENT_ACTIONS.map((a) => `"${a}"`).join(', ')}` });
const positiveFinite = () => z.number({ error: 'must be a number > 0' }).positive('must be > 0').refine(Number.isFinite, 'must be finite');

/**
 * The divergence guard's settings (src/engine/guard.ts, GuardConfig), with the same ranges; unknown keys are
 * refused at every level, like the rest of the scenario.
 */
export const guardSchema = z.strictObject({
  windowMs: num(5, 100, 'time in ms').optional(),
  sanitizeInputs: boolean().optional(),
  nonFinite: z.strictObject({ enabled: boolean().optional(), inputAction: guardAction.optional(), outputAction: guardAction.optional() }).optional(),
  weights: z.strictObject({
    enabled: boolean().optional(),
    action: guardAction.optional(),
    maxNormSq: positiveFinite().optional(),
    growthFactor: num(0, 1e6).refine((g) => g === 0 || g > 1, 'must be 0 (off) or above 1').optional(),
    growthWindowMs: num(50, 60000, 'time in ms').optional(),
    growthFloorNormSq: positiveFinite().optional(),
  }).optional(),
  errorRise: z.strictObject({ enabled: boolean().optional(), action: guardAction.optional(), riseDb: num(0.5, 60, 'level in dB').optional(), holdMs: num(5, 60000, 'time in ms').optional() }).optional(),
  outputAtCeiling: z.strictObject({ enabled: boolean().optional(), action: guardAction.optional(), gainReductionDb: num(0.1, 60, 'level in dB').optional(), holdMs: num(1, 60000, 'time in ms').optional() }).optional(),
  inputClipping: z.strictObject({ enabled: boolean().optional(), action: guardAction.optional(), level: num(0.5, 1).optional(), consecutive: int(1, 1000).optional() }).optional(),
  deadMicrophone: z.strictObject({ enabled: boolean().optional(), action: guardAction.optional(), holdMs: num(1, 60000, 'time in ms').optional() }).optional(),
  limiterEngaged: z.strictObject({ enabled: boolean().optional(), gainReductionDb: num(0.01, 60, 'level in dB').optional(), rearmMs: num(0, 60000, 'time in ms').optional() }).optional(),
  resume: z.strictObject({
    mode: z.enum(['auto', 'user'], { error: 'must be "auto" or "user"' }).optional(),
    holdOffMs: num(0, 600000, 'time in ms').optional(),
    maxAutoResumes: int(0, 1000).optional(),
  }).optional(),
}, { error: 'must be false (no guard) or an object of guard settings' });
/** In a room scenario, a `secondary-path-change` may move the loudspeaker instead (secondary and feedback paths recomputed). */
const roomPositionChange = z.strictObject({
  speaker: z.tuple([num(0, 1000, 'position in m'), num(0, 1000, 'position in m'), num(0, 1000, 'position in m')], { error: 'must be a position [x, y, z] in metres' }),
});

const explicitPaths = z.strictObject({
  reference: pathSchema,
  primary: pathSchema,
  secondary: pathSchema,
  feedback: pathSchema.optional(),
});

const sensorNoise = z.union([
  num(0, 10),
  z.strictObject({ reference: num(0, 10), error: num(0, 10) }),
], { error: 'must be a number (RMS for both mics) or {reference, error}' });

/**
 * A zod object schema derived from a settings table (src/engine/settings.ts): the same ranges,
 * defaults and messages as the engine's and the worklet's checks. Strict: unknown keys are refused.
 */
export function schemaFromTable(table: SettingsTable): z.ZodObject {
  const shape: Record<string, z.ZodType> = {};
  for (const [field, spec] of Object.entries(table)) {
    const t = schemaFromSpec(spec);
    shape[field] = spec.required ? t : t.optional();
  }
  return z.strictObject(shape);
}

/** One setting's zod schema (nested tables and unions included), with the table's range message. */
function schemaFromSpec(spec: SettingSpec | UnionSetting['options'][number]): z.ZodType {
  const allowed = `must be ${describeRange(spec as SettingSpec)}`;
  switch (spec.type) {
    case 'number':
      return z.number({ error: allowed }).refine((v) => fitsSetting(spec as SettingSpec, v), allowed);
    case 'enum':
      return spec.values.length === 1 ? z.literal(spec.values[0]!, { error: allowed }) : z.enum(spec.values as [string, ...string[]], { error: allowed });
    case 'boolean':
      return z.boolean({ error: allowed });
    case 'string':
      return z.string({ error: allowed }).min(1, allowed);
    case 'object':
      return schemaFromTable(spec.fields);
    case 'union':
      return z.union(spec.options.map((o) => schemaFromSpec(o)) as unknown as [z.ZodType, z.ZodType], { error: allowed });
  }
}

/** The scenario's controller object: a settings table plus the simulator-only model-imperfection fields. */
const controllerBranch = (table: SettingsTable) => schemaFromTable({ ...table, ...SIMULATION_ONLY_FIELDS });

/**
 * Broadband FxLMS / FxNLMS, and the narrowband tone follower (its `stepSize` is normalised per
 * harmonic by the power of its filtered synthesized reference: μ_k = stepSize / (δ + |Ŝ(kω₀)|²), so the
 * error at each harmonic decays with a time constant of about 2/stepSize samples whatever the path
 * gain; see src/dsp/tonal-controller.ts). Fields, ranges and defaults: src/engine/settings.ts.
 */
export const controllerSchema = z.discriminatedUnion('algorithm', [controllerBranch(FXLMS_SETTINGS), controllerBranch(TONAL_SETTINGS), controllerBranch(IMC_SETTINGS)], {
  error: (iss) => (iss.code === 'invalid_union' ? `algorithm must be one of ${ALGORITHMS.map((a) => `"${a}"`).join(', ')}` : undefined),
});

/** A scenario's controller object, typed from the tables. */
export type ControllerSpec =
  | SettingsObject<typeof FXLMS_SETTINGS & typeof SIMULATION_ONLY_FIELDS>
  | SettingsObject<typeof TONAL_SETTINGS & typeof SIMULATION_ONLY_FIELDS>
  | SettingsObject<typeof IMC_SETTINGS & typeof SIMULATION_ONLY_FIELDS>;

export const scenarioSchema = z.strictObject({
  schemaVersion: z.literal(SCENARIO_SCHEMA_VERSION, { error: `must be ${SCENARIO_SCHEMA_VERSION} (this version of ancbench reads scenario schema ${SCENARIO_SCHEMA_VERSION})` }),
  name: z.string().optional(),
  description: z.string().optional(),
  sampleRate: int(8000, 192000),
  blockSize: int(32, 4096).refine((b) => (b & (b - 1)) === 0, 'must be a power of two from 32 to 4096'),
  durationS: num(0.01, 86400, 'duration in seconds'),
  seed: int(0, 0xffffffff),
  sources: z.array(sourceSchema, { error: 'must be an array of sources' }).min(1, 'needs at least one source'),
  paths: explicitPaths,
  /** Memoryless loudspeaker nonlinearity y = x + a2·x² + a3·x³ applied to the controller output. */
  loudspeaker: z.strictObject({ a2: num(-10, 10).optional(), a3: num(-10, 10).optional() }).optional(),
  sensorNoiseRms: sensorNoise.optional(),
  controller: controllerSchema,
  outputCeilingDbfs: num(-120, 0, 'level in dBFS (≤ 0)').optional(),
  limiter: schemaFromTable(LIMITER_SETTINGS).optional(),
  highPassHz: num(0, 1000, 'frequency in Hz (0 = off)').optional(),
  guard: z.union([z.literal(false), guardSchema], { error: 'must be false (no guard) or an object of guard settings' }).optional(),
  controlStartS: num(0, 86400).optional(),
  /** Faults injected during the run, to exercise the guard (see README). */
  faults: z.array(z.discriminatedUnion('kind', [
    z.strictObject({ kind: z.literal('model-sign-flip'), atS: num(0, 86400, 'time in seconds') }),
    z.strictObject({ kind: z.literal('step-size-scale'), atS: num(0, 86400, 'time in seconds'), factor: num(1e-6, 1e6) }),
    z.strictObject({ kind: z.literal('nan-error'), atS: num(0, 86400, 'time in seconds'), durationS: num(0, 86400, 'duration in seconds').optional() }),
    z.strictObject({ kind: z.literal('mic-dropout'), atS: num(0, 86400, 'time in seconds'), durationS: num(0, 86400, 'duration in seconds'), mic: z.enum(['reference', 'error']) }),
    // the true secondary path changes (a moved loudspeaker, a lid, a hand); the model does not, unless controller.onlineModel runs
    z.strictObject({ kind: z.literal('secondary-path-change'), atS: num(0, 86400, 'time in seconds'), path: z.union([pathSchema, roomPositionChange], { error: 'must be a path {delayMs, gain?, fir?} or, in a room scenario, {speaker: [x, y, z]}' }) }),
  ], { error: (iss) => (iss.code === 'invalid_union' ? 'kind must be one of "model-sign-flip", "step-size-scale", "nan-error", "mic-dropout", "secondary-path-change"' : undefined) }), { error: 'must be an array of faults' }).max(1000).optional(),
});

/** A validated scenario; room paths are already turned into explicit paths. */
/** The same file with `paths: {room: {...}, ioLatencyMs}`: an image-source room instead of explicit paths. */
export const roomScenarioSchema = scenarioSchema.extend({ paths: roomPathsSchema });

/** A validated scenario; room paths are already turned into explicit paths. */
export type Scenario = Omit<z.infer<typeof scenarioSchema>, 'controller' | 'limiter'> & {
  controller: ControllerSpec;
  limiter?: SettingsObject<typeof LIMITER_SETTINGS>;
  room?: z.infer<typeof roomPathsSchema>;
};
export type SourceSpec = z.infer<typeof sourceSchema>;
export type PathSpec = z.infer<typeof pathSchema>;

/** A scenario that failed validation: one line per problem, each naming the field path. */
export class ScenarioError extends Error {
  constructor(readonly problems: string[]) {
    super(`invalid scenario:\n  ${problems.join('\n  ')}`);
    this.name = 'ScenarioError';
  }
}


type Issue = z.core.$ZodIssue;

/**
 * A union's failure as the problems of the branch the value was meant for: the one whose problems all lie
 * inside the value (e.g. `guard` given as an object reports its bad fields, not "must be false or an
 * object"); the union's own message when no branch or several qualify.
 */
function unionBranch(iss: Issue): Issue[] {
  if (iss.code !== 'invalid_union' || !('errors' in iss) || !iss.errors?.length) return [iss];
  const inside = iss.errors.filter((branch) => branch.length > 0 && branch.every((b) => b.path.length > 0));
  if (inside.length !== 1) return [iss];
  return inside[0]!.map((b) => ({ ...b, path: [...iss.path, ...b.path] }) as Issue).flatMap(unionBranch);
}

/**
 * Validate a parsed JSON value as a scenario. Throws ScenarioError naming every bad field.
 * Cross-field rules (frequencies below Nyquist, secondary and feedback delays of at least one
 * block) are checked here too, since nothing may run on an invalid file.
 */
export function parseScenario(value: unknown): Scenario {
  const paths = (value as { paths?: unknown } | null)?.paths;
  const isRoom = typeof paths === 'object' && paths !== null && 'room' in paths;
  const r = (isRoom ? roomScenarioSchema : scenarioSchema).safeParse(value, { reportInput: true });
  if (!r.success) {
    const problems = r.error.issues.flatMap(unionBranch).map((iss) => {
      const where = fieldPath(iss.path, '(top level)');
      if (iss.code === 'unrecognized_keys') return `${where}: unknown field(s) ${iss.keys.map((k) => `"${k}"`).join(', ')}`;
      const got = 'input' in iss && !/\bgot\b/.test(iss.message) ? `, got ${showValue(iss.input)}` : '';
      return `${where}: ${iss.message}${got}`;
    });
    throw new ScenarioError(problems);
  }
  const data = r.data;
  let s: Scenario;
  if ('room' in data.paths) {
    // image-source room: compute the four paths now, so everything downstream sees explicit paths
    const room = data.paths;
    try {
      s = { ...data, paths: roomPathsToExplicit(room, data.sampleRate), room } as unknown as Scenario;
    } catch (e) {
      throw new ScenarioError([`paths.room: ${(e as Error).message}`]);
    }
  } else {
    s = data as unknown as Scenario;
  }
  const problems: string[] = [];
  const nyq = s.sampleRate / 2;
  s.sources.forEach((src, i) => {
    if (src.kind === 'tone') {
      if (src.hz >= nyq) problems.push(`sources[${i}].hz: must be below the Nyquist frequency ${nyq} Hz, got ${src.hz}`);
      src.steps?.forEach((st, j) => {
        if (st.hz >= nyq) problems.push(`sources[${i}].steps[${j}].hz: must be below the Nyquist frequency ${nyq} Hz, got ${st.hz}`);
        if (j > 0 && st.atS <= src.steps![j - 1]!.atS) problems.push(`sources[${i}].steps[${j}].atS: steps must be in increasing time order, got ${st.atS} after ${src.steps![j - 1]!.atS}`);
      });
      const end = src.hz + (src.driftHzPerS ?? 0) * s.durationS;
      if (end <= 0 || end >= nyq) problems.push(`sources[${i}].driftHzPerS: the tone would reach ${end.toFixed(1)} Hz by the end of the run, outside (0, ${nyq}) Hz`);
    }
    if (src.kind === 'harmonics') {
      const top = src.fundamentalHz * src.amplitudes.length;
      if (top >= nyq) problems.push(`sources[${i}].amplitudes: harmonic ${src.amplitudes.length} at ${top} Hz is above the Nyquist frequency ${nyq} Hz`);
      const end = src.fundamentalHz + (src.driftHzPerS ?? 0) * s.durationS;
      if (end <= 0 || end * src.amplitudes.length >= nyq) problems.push(`sources[${i}].driftHzPerS: the fundamental would reach ${end.toFixed(1)} Hz by the end of the run, taking a harmonic outside (0, ${nyq}) Hz`);
    }
    if (src.kind === 'noise' && src.bandHz) {
      const [lo, hi] = src.bandHz;
      if (!(lo < hi)) problems.push(`sources[${i}].bandHz: low edge must be below high edge, got [${lo}, ${hi}]`);
      if (hi > nyq) problems.push(`sources[${i}].bandHz: high edge must be at most the Nyquist frequency ${nyq} Hz, got ${hi}`);
    }
  });
  for (const key of ['secondary', 'feedback'] as const) {
    const p = s.paths[key];
    if (!p) continue;
    const r = pathResponse(p, s.sampleRate);
    if (r.taps.length > 0 && r.offset < s.blockSize) {
      const fractional = !isIntegerDelay(p.delayMs, s.sampleRate);
      const field = s.room ? `paths.ioLatencyMs (the room's ${key} path)` : `paths.${key}.delayMs`;
      problems.push(
        `${field}: the path's first sample arrives after ${r.offset} samples (${((r.offset / s.sampleRate) * 1000).toFixed(3)} ms), ` +
          `but the block loop needs at least one block, ${s.blockSize} samples (${((s.blockSize / s.sampleRate) * 1000).toFixed(3)} ms at ${s.sampleRate} Hz)` +
          `${fractional ? `; a fractional delay also spreads ${DEFAULT_HALF_WIDTH - 1} samples early` : ''}; got ${s.room ? `ioLatencyMs ${s.room.ioLatencyMs}` : p.delayMs} ms. ` +
          `This path includes the audio I/O latency, which is never shorter than one block`,
      );
    }
  }
  problems.push(...pathChangeProblems(s));
  if (s.controller.algorithm === 'tonal') {
    const c = s.controller;
    if (c.frequencySource === 'fixed' && c.hz === undefined) problems.push('controller.hz: required when frequencySource is "fixed"');
    if (c.hz !== undefined && c.hz >= nyq) problems.push(`controller.hz: must be below the Nyquist frequency ${nyq} Hz, got ${c.hz}`);
    if (c.maxHz !== undefined && c.maxHz > s.sampleRate / 4) problems.push(`controller.maxHz: must be at most sampleRate/4 = ${s.sampleRate / 4} Hz, got ${c.maxHz}`);
    if (c.minHz !== undefined && c.maxHz !== undefined && !(c.maxHz >= 1.25 * c.minHz)) problems.push(`controller.maxHz: must be at least 1.25 × minHz = ${1.25 * c.minHz} Hz, got ${c.maxHz}`);
  }
  if (s.limiter?.ceilingDbfs !== undefined && s.outputCeilingDbfs !== undefined && s.limiter.ceilingDbfs !== s.outputCeilingDbfs) {
    problems.push(`limiter.ceilingDbfs: ${s.limiter.ceilingDbfs} differs from outputCeilingDbfs ${s.outputCeilingDbfs}; give one of them`);
  }
  if (s.guard) {
    const windowMs = s.guard.windowMs ?? 20;
    const hold = s.guard.errorRise?.holdMs;
    if (hold !== undefined && hold < windowMs) problems.push(`guard.errorRise.holdMs: must be at least guard.windowMs (${windowMs} ms), got ${hold}`);
  }
  if (s.controlStartS !== undefined && s.controlStartS >= s.durationS) {
    problems.push(`controlStartS: must be before the end of the run (${s.durationS} s), got ${s.controlStartS}`);
  }
  if (problems.length) throw new ScenarioError(problems);
  return s;
}

/** A `secondary-path-change` fault's new path must reach the loop no sooner than one block, and a moved loudspeaker needs a room. */
function pathChangeProblems(s: Scenario): string[] {
  const problems: string[] = [];
  (s.faults ?? []).forEach((f, i) => {
    if (f.kind !== 'secondary-path-change') return;
    if ('speaker' in f.path) {
      if (!s.room) problems.push(`faults[${i}].path.speaker: a moved loudspeaker needs room paths (paths.room); give {delayMs, gain?, fir?} for explicit paths`);
      return;
    }
    const r = pathResponse(f.path, s.sampleRate);
    if (r.taps.length > 0 && r.offset < s.blockSize) problems.push(`faults[${i}].path.delayMs: the new path's first sample arrives after ${r.offset} samples, but the block loop needs at least one block, ${s.blockSize} samples; got ${f.path.delayMs} ms`);
  });
  return problems;
}

export function isIntegerDelay(delayMs: number, sampleRate: number): boolean {
  const d = (delayMs / 1000) * sampleRate;
  return Math.abs(d - Math.round(d)) < 1e-9;
}

/** A path's sparse impulse response at the scenario's sample rate: gain × (fir delayed by delayMs). */
export function pathResponse(p: PathSpec, sampleRate: number): SparseResponse {
  return buildPathResponse({ delaySamples: (p.delayMs / 1000) * sampleRate, gain: p.gain ?? 1, ...(p.fir ? { fir: p.fir } : {}) });
}

/** The output ceiling a scenario sets (limiter.ceilingDbfs or its shorthand outputCeilingDbfs), dBFS. */
export function scenarioCeilingDbfs(s: Scenario, fallback: number): number {
  return s.limiter?.ceilingDbfs ?? s.outputCeilingDbfs ?? fallback;
}

/**
 * Whether the scenario's noise is stationary: no drifting or stepping tone, no recorded source. Only
 * then is the Wiener figure a bound on an adaptive controller (else it is the best fixed filter over
 * the run).
 */
export function isStationary(sc: Scenario): boolean {
  return sc.sources.every((s) => !('driftHzPerS' in s && s.driftHzPerS) && !(s.kind === 'tone' && s.steps?.length) && s.kind !== 'wav');
}
