/**
 * One table per controller and per output stage: field, unit, range, default, description, and
 * whether it can change while the engine runs. Everything else is derived from these tables:
 *
 *   - the scenario file's zod schema (src/plant/scenario.ts, `schemaFromTable`),
 *   - the worklet message checks (src/protocol/messages.ts, `checkSettings`),
 *   - the engine's own checks (`checkSettings` in the controller factory),
 *   - the panel's controls (ranges, hints, defaults: src/ui/controls.ts),
 *   - the settings table in docs/settings.md (`settingsMarkdown`, kept current by a test).
 *
 * So a setting means the same thing, with the same limits, in a scenario file, on the command line,
 * in the panel and in the engine. The scenario's `controller` object has the engine's controller
 * configuration shape, plus the simulator-only model-imperfection fields (`SIMULATION_ONLY_FIELDS`),
 * which `engineSettings` strips.
 *
 * Plain data and plain functions: no zod here (the live worklet bundle imports this file).
 */
import { rangeMessage } from '../dsp/check.ts';
import { DEFAULT_OUTPUT_CONSTRAINT, DEFAULT_OUTPUT_MARGIN_DB, OUTPUT_CONSTRAINT_METHODS } from '../dsp/output-constraint.ts';

interface SettingBase {
  /** What the setting does, in the words the panel and the docs show. */
  description: string;
  /** Whether a running engine takes a change without a rebuild (its weights kept). */
  live: boolean;
  /** Must be given (no default). */
  required?: boolean;
}

export interface NumberSetting extends SettingBase {
  type: 'number';
  /** Unit as shown to users ('' for dimensionless). */
  unit: string;
  min: number;
  max: number;
  /** The bound itself is excluded (e.g. a step size > 0). */
  minExclusive?: boolean;
  maxExclusive?: boolean;
  integer?: boolean;
  default?: number;
}

export interface EnumSetting extends SettingBase {
  type: 'enum';
  values: readonly string[];
  default?: string;
}

export interface BooleanSetting extends SettingBase {
  type: 'boolean';
  default?: boolean;
}

export interface StringSetting extends SettingBase {
  type: 'string';
  default?: string;
}

/** A nested object whose fields are described by their own table (e.g. `controller.onlineModel`). */
export interface ObjectSetting extends SettingBase {
  type: 'object';
  fields: SettingsTable;
}

/** One of several kinds of value (e.g. `true` or a file name); the first option that fits is taken. */
export interface UnionSetting extends SettingBase {
  type: 'union';
  options: readonly (Omit<BooleanSetting, 'live' | 'description'> | Omit<StringSetting, 'live' | 'description'> | Omit<NumberSetting, 'live' | 'description'>)[];
  default?: boolean | string | number;
}

export type SettingSpec = NumberSetting | EnumSetting | BooleanSetting | StringSetting | ObjectSetting | UnionSetting;
export type SettingsTable = Readonly<Record<string, SettingSpec>>;

type ScalarOf<S> = S extends { type: 'number' } ? number
  : S extends { type: 'enum'; values: readonly (infer V)[] } ? V
  : S extends { type: 'boolean' } ? boolean
  : string;
type ValueOf<S> = S extends { type: 'object'; fields: infer F extends SettingsTable } ? SettingsObject<F>
  : S extends { type: 'union'; options: readonly (infer O)[] } ? ScalarOf<O>
  : ScalarOf<S>;

/** The object a table describes: required fields present, the rest optional. */
export type SettingsObject<T extends SettingsTable> =
  { [K in keyof T as T[K] extends { required: true } ? K : never]: ValueOf<T[K]> } &
  { [K in keyof T as T[K] extends { required: true } ? never : K]?: ValueOf<T[K]> };

// ---------------------------------------------------------------------------------------------
// The tables
// ---------------------------------------------------------------------------------------------

/** Broadband FxLMS / FxNLMS (src/dsp/fxlms.ts and its wasm and frequency-domain twins). */
export const FXLMS_SETTINGS = {
  algorithm: { type: 'enum', values: ['fxlms', 'fxnlms'], required: true, live: false, description: 'FxLMS (raw step size) or FxNLMS (step size normalised by the filtered-reference power)' },
  taps: { type: 'number', unit: 'taps', min: 1, max: 65536, integer: true, required: true, live: false, description: 'control filter length L' },
  stepSize: {
    type: 'number', unit: '', min: 0, max: 1e6, minExclusive: true, required: true, live: true,
    description: 'step size μ; FxNLMS: normalised, stable for 0 < μ < 2 (less with a long secondary-path delay); FxLMS: in 1/(power × taps), keep well below 2/(L·P_f)',
  },
  leakage: { type: 'number', unit: '', min: 0, max: 1e6, default: 0, live: true, description: 'leakage γ: each update scales the weights by 1 − μγ' },
  regularization: { type: 'number', unit: 'FS²', min: 0, max: 1e6, minExclusive: true, default: 1e-6, live: false, description: 'FxNLMS regularisation δ added to ‖f‖²' },
  update: { type: 'enum', values: ['sample', 'block'], default: 'sample', live: false, description: 'weight update every sample or once per block' },
  implementation: { type: 'enum', values: ['auto', 'js', 'wasm', 'fd'], default: 'auto', live: false, description: 'what runs the filter: chosen from the filter lengths and the platform, or forced' },
  fdConstraint: { type: 'enum', values: ['alternating', 'full'], default: 'full', live: false, description: 'gradient constraint of the frequency-domain implementation' },
  outputConstraint: { type: 'enum', values: OUTPUT_CONSTRAINT_METHODS, default: DEFAULT_OUTPUT_CONSTRAINT, live: false, description: 'how the controller keeps its output within the cap: rescale the weights (Qiu & Hansen 2001), penalise output power (effort weighting), or leave it to the limiter' },
  outputMarginDb: { type: 'number', unit: 'dB', min: 0, max: 20, default: DEFAULT_OUTPUT_MARGIN_DB, live: false, description: 'the constraint level sits this far below the output cap' },
  // ---- changing plants (issue 14): src/dsp/plant-tracking.ts ----
  onlineModel: {
    type: 'object', live: false,
    description: 'keep the secondary-path model current while control runs: a faint white-noise probe is added to the output and an NLMS model of the path is adapted on the error mic (Eriksson & Allie, JASA 85(2), 1989); the controller takes the model over every 50 ms',
    fields: {
      method: { type: 'enum', values: ['auxiliary-noise'], required: true, live: false, description: 'how the path is tracked: an auxiliary white-noise probe' },
      noiseDbfs: { type: 'number', unit: 'dBFS', min: -120, max: -6, default: -30, live: false, description: 'probe RMS level (AES17); with variablePower the highest level the probe may take' },
      stepSize: { type: 'number', unit: '', min: 0, max: 1, minExclusive: true, default: 0.01, live: false, description: 'NLMS step size of the online model (normalised by the probe power)' },
      taps: { type: 'number', unit: 'taps', min: 1, max: 16384, integer: true, live: false, description: 'online model length (default: the length of the identified model)' },
      variablePower: { type: 'boolean', default: true, live: false, description: 'probe level follows the residual error (10 dB below it, never above noiseDbfs), so it costs little attenuation once converged' },
    },
  },
  feedbackNeutralisation: {
    type: 'union', options: [{ type: 'boolean' }, { type: 'string' }], default: false, live: false,
    description: 'subtract a model of the loudspeaker → reference-mic path from the reference before the controller uses it (Kuo & Morgan, Active Noise Control Systems, 1996): true takes the model identified with the secondary path; a string names a path-model file',
  },
} as const satisfies SettingsTable;

/**
 * One-microphone broadband control (internal model control): the reference is regenerated from the
 * error mic as x̂ = e − ŝ*y and fed to FxNLMS (src/dsp/plant-tracking.ts). Same fields as FxLMS.
 */
export const IMC_SETTINGS = {
  ...FXLMS_SETTINGS,
  algorithm: { type: 'enum', values: ['imc'], required: true, live: false, description: 'internal model control: FxNLMS on the reference regenerated from the error mic, x̂ = e − ŝ*y' },
} as const satisfies SettingsTable;

/** The tone follower: narrowband FxLMS at a tracked fundamental and its harmonics (src/dsp/tonal-controller.ts). */
export const TONAL_SETTINGS = {
  algorithm: { type: 'enum', values: ['tonal'], required: true, live: false, description: 'the tone follower' },
  harmonics: { type: 'number', unit: '', min: 1, max: 8, integer: true, required: true, live: true, description: 'harmonics controlled: f₀, 2f₀, … H·f₀' },
  stepSize: {
    type: 'number', unit: '', min: 0, max: 2, minExclusive: true, maxExclusive: true, required: true, live: true,
    description: 'step size μ normalised per harmonic; the error at each harmonic decays with a time constant of about 2/μ samples',
  },
  frequencySource: { type: 'enum', values: ['reference', 'error', 'fixed', 'external'], live: true, description: 'where the fundamental comes from: tracked on the reference or error mic, fixed, or set from outside; default "reference", or "fixed" when only hz is given' },
  hz: { type: 'number', unit: 'Hz', min: 1, max: 96000, live: true, description: 'fundamental for "fixed" (required there) or the first value for "external"' },
  minHz: { type: 'number', unit: 'Hz', min: 1, max: 96000, default: 20, live: false, description: 'lowest fundamental the follower searches' },
  maxHz: { type: 'number', unit: 'Hz', min: 1, max: 96000, live: false, description: 'highest fundamental the follower searches (default min(2000 Hz, fs/4))' },
  harmonicsCheck: { type: 'boolean', default: false, live: false, description: 'look for a fundamental below the strongest line' },
  leakage: { type: 'number', unit: '', min: 0, max: 1e6, default: 0, live: true, description: 'leakage γ: each update scales the weights by 1 − μγ' },
  regularization: { type: 'number', unit: 'model gain²', min: 0, max: 1e6, live: false, description: 'regularisation δ of the per-harmonic normalisation (default 1e-3·Σŝ²)' },
  outputConstraint: { type: 'enum', values: OUTPUT_CONSTRAINT_METHODS, default: DEFAULT_OUTPUT_CONSTRAINT, live: false, description: 'how the controller keeps its output within the cap: share the allowed output between harmonics where it buys most attenuation and rescale, penalise output power (effort weighting), or leave it to the limiter' },
  outputMarginDb: { type: 'number', unit: 'dB', min: 0, max: 20, default: DEFAULT_OUTPUT_MARGIN_DB, live: false, description: 'the constraint level sits this far below the output cap' },
} as const satisfies SettingsTable;

/**
 * Simulator-only fields of a scenario's controller: imperfections of the secondary-path model the
 * simulator hands the controller. The engine never sees them.
 */
export const SIMULATION_ONLY_FIELDS = {
  modelTaps: { type: 'number', unit: 'taps', min: 1, max: 1 << 20, integer: true, live: false, description: 'truncate the model to this many taps' },
  modelPhaseErrorDeg: { type: 'number', unit: '°', min: -180, max: 180, default: 0, live: false, description: 'rotate the model’s phase at every frequency (Hilbert transform)' },
  modelGainErrorDb: { type: 'number', unit: 'dB', min: -60, max: 60, default: 0, live: false, description: 'scale the model' },
  modelFile: { type: 'string', live: false, description: 'a secondary-path model file (ancbench-path-model) instead of the true path, relative to the scenario' },
} as const satisfies SettingsTable;

/** The output stage: limiter and its ceiling (src/dsp/limiter.ts), as the scenario's `limiter` object holds it. */
export const LIMITER_SETTINGS = {
  ceilingDbfs: { type: 'number', unit: 'dBFS', min: -120, max: 0, default: -6, live: true, description: 'output cap: no output sample exceeds it' },
  lookaheadMs: { type: 'number', unit: 'ms', min: 0, max: 50, default: 0, live: false, description: 'limiter look-ahead (part of the secondary path)' },
  truePeak: { type: 'boolean', live: false, description: 'limit the 4×-oversampled true peak (ITU-R BS.1770-4 Annex 2) with a look-ahead detector (≥ 18 samples of latency); false alone asks for the zero-latency sample-peak mode' },
  truePeakFilter: { type: 'boolean', live: false, description: 'the short filter after the limiter that bounds the 4× true peak (one sample of delay, within +0.41 dB of the cap); on unless truePeak is given' },
  attackMs: { type: 'number', unit: 'ms', min: 0, max: 100, live: false, description: 'limiter attack' },
  releaseMs: { type: 'number', unit: 'ms', min: 1, max: 5000, live: false, description: 'limiter release' },
} as const satisfies SettingsTable;

/** The rest of the output stage (top-level scenario fields and engine settings). */
export const OUTPUT_STAGE_SETTINGS = {
  highPassHz: { type: 'number', unit: 'Hz', min: 0, max: 1000, default: 20, live: false, description: 'high-pass corner protecting small loudspeakers (0 = off)' },
  rampMs: { type: 'number', unit: 'ms', min: 0, max: 5000, default: 50, live: false, description: 'fade-in and fade-out time of starts and stops' },
} as const satisfies SettingsTable;

/** The table that governs a controller configuration, by its `algorithm`. */
export function controllerTable(algorithm: unknown): SettingsTable | null {
  if (algorithm === 'fxlms' || algorithm === 'fxnlms') return FXLMS_SETTINGS;
  if (algorithm === 'tonal') return TONAL_SETTINGS;
  if (algorithm === 'imc') return IMC_SETTINGS;
  return null;
}

/** Every algorithm a controller configuration may name. */
export const ALGORITHMS = ['fxlms', 'fxnlms', 'tonal', 'imc'] as const;

// ---------------------------------------------------------------------------------------------
// Derived checks (no zod: this runs in the worklet)
// ---------------------------------------------------------------------------------------------

/** The allowed values of a setting, as messages state them ("from 0 to 2 (exclusive)", "one of …"). */
export function describeRange(spec: SettingSpec): string {
  switch (spec.type) {
    case 'number': {
      const lo = spec.minExclusive ? `> ${spec.min}` : `≥ ${spec.min}`;
      const hi = spec.maxExclusive ? `< ${spec.max}` : `≤ ${spec.max}`;
      return `${spec.integer ? 'an integer' : 'a number'} ${lo} and ${hi}${spec.unit && spec.unit !== '' ? ` (${spec.unit})` : ''}`;
    }
    case 'enum':
      return `one of ${spec.values.map((v) => `"${v}"`).join(', ')}`;
    case 'boolean':
      return 'true or false';
    case 'string':
      return 'a non-empty string';
    case 'object':
      return `an object with ${Object.entries(spec.fields).map(([k, f]) => `${k}${f.required ? '' : '?'}`).join(', ')}`;
    case 'union':
      return spec.options.map((o) => describeRange(o as SettingSpec)).join(' or ');
  }
}

/** Whether a value fits a setting. */
export function fitsSetting(spec: SettingSpec, v: unknown): boolean {
  switch (spec.type) {
    case 'number':
      return (
        typeof v === 'number' && Number.isFinite(v) &&
        (spec.minExclusive ? v > spec.min : v >= spec.min) &&
        (spec.maxExclusive ? v < spec.max : v <= spec.max) &&
        (!spec.integer || Number.isInteger(v))
      );
    case 'enum':
      return typeof v === 'string' && spec.values.includes(v);
    case 'boolean':
      return typeof v === 'boolean';
    case 'string':
      return typeof v === 'string' && v.length > 0;
    case 'object':
      return settingsProblems(spec.fields, v).length === 0;
    case 'union':
      return spec.options.some((o) => fitsSetting(o as SettingSpec, v));
  }
}

/**
 * Check an object against a table: unknown fields, missing required fields and values out of range,
 * one message per problem in the project's format (field, allowed range, value received).
 */
export function settingsProblems(table: SettingsTable, value: unknown, prefix = ''): string[] {
  if (typeof value !== 'object' || value === null || Array.isArray(value)) return [rangeMessage(prefix.replace(/\.$/, '') || 'settings', 'an object', value)];
  const o = value as Record<string, unknown>;
  const problems: string[] = [];
  for (const [field, spec] of Object.entries(table)) {
    const v = o[field];
    if (v === undefined) {
      if (spec.required) problems.push(`${prefix}${field}: required (${describeRange(spec)})`);
      continue;
    }
    if (spec.type === 'object') problems.push(...settingsProblems(spec.fields, v, `${prefix}${field}.`));
    else if (!fitsSetting(spec, v)) problems.push(rangeMessage(`${prefix}${field}`, describeRange(spec), v));
  }
  const unknown = Object.keys(o).filter((k) => !(k in table) && o[k] !== undefined);
  if (unknown.length) problems.push(`${prefix ? prefix.slice(0, -1) : '(top level)'}: unknown field(s) ${unknown.map((k) => `"${k}"`).join(', ')}`);
  return problems;
}

/** One setting's value, or a RangeError in the common format (field, allowed range, value). */
export function checkSetting<T>(table: SettingsTable, field: string, value: T, prefix = ''): T {
  const spec = table[field];
  if (spec && !fitsSetting(spec, value)) throw new RangeError(rangeMessage(`${prefix}${field}`, describeRange(spec), value));
  return value;
}

/** Throw a RangeError naming every problem of a controller configuration (the engine's and the worklet's check). */
export function checkControllerSettings(value: unknown, prefix = 'controller.'): void {
  if (typeof value !== 'object' || value === null || Array.isArray(value)) throw new RangeError(rangeMessage(prefix.slice(0, -1), 'an object of controller settings', value));
  const algorithm = typeof value === 'object' && value !== null ? (value as { algorithm?: unknown }).algorithm : undefined;
  const table = controllerTable(algorithm);
  if (!table) throw new RangeError(rangeMessage(`${prefix}algorithm`, `one of ${ALGORITHMS.map((a) => `"${a}"`).join(', ')}`, algorithm));
  const problems = settingsProblems(table, value, prefix);
  if (problems.length) throw new RangeError(problems.join('; '));
}

/**
 * The engine's controller configuration from a scenario's controller object: the same shape minus
 * the simulator-only fields. Generic over the tables, so a new setting needs no mapping code.
 */
export function engineSettings<T extends { algorithm: string }>(controller: T): Omit<T, keyof typeof SIMULATION_ONLY_FIELDS> {
  const out: Record<string, unknown> = {};
  for (const [k, v] of Object.entries(controller)) if (!(k in SIMULATION_ONLY_FIELDS) && v !== undefined) out[k] = v;
  return out as Omit<T, keyof typeof SIMULATION_ONLY_FIELDS>;
}

/** A setting's default, or undefined where it has none (or depends on other settings). */
export function settingDefault(table: SettingsTable, field: string): number | string | boolean | undefined {
  const spec = table[field];
  return spec && spec.type !== 'object' ? spec.default : undefined;
}

// ---------------------------------------------------------------------------------------------
// Docs
// ---------------------------------------------------------------------------------------------

function mdRange(spec: SettingSpec): string {
  if (spec.type === 'number') {
    const lo = `${spec.min}${spec.minExclusive ? ' (excl.)' : ''}`;
    const hi = `${spec.max}${spec.maxExclusive ? ' (excl.)' : ''}`;
    return `${spec.integer ? 'integer ' : ''}${lo} … ${hi}`;
  }
  return describeRange(spec);
}

/** One table as Markdown: field, unit, range, default, live, description. */
export function tableMarkdown(table: SettingsTable, prefix = ''): string {
  const rows = ['| field | unit | range | default | live | description |', '| --- | --- | --- | --- | --- | --- |'];
  const add = (t: SettingsTable, pre: string): void => {
    for (const [field, spec] of Object.entries(t)) {
      const unit = spec.type === 'number' ? spec.unit || '—' : '—';
      const def = spec.required ? 'required' : spec.type === 'object' || spec.default === undefined ? '—' : JSON.stringify(spec.default);
      const range = spec.type === 'object' ? 'object (fields below)' : mdRange(spec);
      rows.push(`| \`${pre}${field}\` | ${unit} | ${range} | ${def} | ${spec.live ? 'yes' : 'no'} | ${spec.description} |`);
      if (spec.type === 'object') add(spec.fields, `${pre}${field}.`);
    }
  };
  add(table, prefix);
  return rows.join('\n');
}

/** docs/settings.md as generated from the tables (test/engine/settings.test.ts keeps the file current). */
export function settingsMarkdown(): string {
  return [
    '# Settings',
    '',
    'Generated from `src/engine/settings.ts` (run `npx tsx scripts/write-settings-doc.ts` after changing a table; a test fails while this file is out of date).',
    'The same tables check scenario files, worklet messages, the engine and the panel, so each setting has the same range everywhere.',
    '"live" means a running engine takes a change at the next block without a rebuild.',
    '',
    '## Broadband controller (`controller.algorithm` "fxlms" or "fxnlms")',
    '',
    tableMarkdown(FXLMS_SETTINGS, 'controller.'),
    '',
    '## Tone follower (`controller.algorithm` "tonal")',
    '',
    tableMarkdown(TONAL_SETTINGS, 'controller.'),
    '',
    '## One-microphone broadband control (`controller.algorithm` "imc")',
    '',
    'The same fields as the broadband controller; `algorithm` is "imc".',
    '',
    '## Simulator-only model imperfections (scenario `controller`, any algorithm)',
    '',
    tableMarkdown(SIMULATION_ONLY_FIELDS, 'controller.'),
    '',
    '## Limiter (scenario `limiter`; `outputCeilingDbfs` is a shorthand for `limiter.ceilingDbfs`)',
    '',
    tableMarkdown(LIMITER_SETTINGS, 'limiter.'),
    '',
    '## Rest of the output stage',
    '',
    tableMarkdown(OUTPUT_STAGE_SETTINGS),
    '',
  ].join('\n');
}
