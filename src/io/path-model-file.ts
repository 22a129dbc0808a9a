/**
 * The secondary-path model file: a small JSON format of ancbench's own, validated with zod.
 *
 * ```json
 * {
 *   "format": "ancbench-path-model",      // fixed marker
 *   "version": 1,                          // this program reads version 1
 *   "sampleRate": 48000,                   // Hz, the rate the taps were measured at
 *   "taps": [0, 0, 0.012, -0.31, ...],     // FIR from output to error microphone, 1 to 65536 finite numbers
 *   "delayMs": 2.104,                      // bulk delay by the onset rule (first tap within 20 dB of the peak)
 *   "method": "noise",                     // "noise" (NLMS with a probe), "sweep", "simulated" or "imported"
 *   "createdAt": "2024-05-01T12:00:00.000Z",
 *   "quality": { "snrDb": 31.2, "misalignmentDb": -24.5, "bandHz": [60, 2000] },
 *   "probe": { "levelDbfs": -20, "durationS": 5, "color": "white" },   // optional, how it was measured
 *   "resampledFromHz": 44100,              // optional, present only if the taps were resampled
 *   "notes": "free text"                   // optional
 * }
 * ```
 * `quality.snrDb` is the measurement SNR (null when unknown); `misalignmentDb` and `bandHz` are optional
 * (misalignment is known only in simulation, against the true path). Unknown fields are refused, so a misspelt
 * field is caught rather than ignored. Reading and writing files is the CLI's business: this module works on
 * strings and values only.
 */
import { z } from 'zod';
import { onsetDelaySamples, resampleImpulseResponse } from '../analysis/path-model.ts';
import { show } from '../plant/scenario.ts';

export const PATH_MODEL_FORMAT = 'ancbench-path-model';
export const PATH_MODEL_VERSION = 1;
export const PATH_MODEL_METHODS = ['noise', 'sweep', 'simulated', 'imported'] as const;
export type PathModelMethod = (typeof PATH_MODEL_METHODS)[number];

/** Largest |tap| accepted in a model file. */
export const MAX_TAP = 1000;

const finite = (what: string) =>
  z.number({ error: `must be ${what}` }).refine(Number.isFinite, `must be ${what} (finite)`);
const ranged = (min: number, max: number, unit: string) =>
  z
    .number({ error: `must be a number of ${unit} from ${min} to ${max}` })
    .min(min, `must be from ${min} to ${max} ${unit}`)
    .max(max, `must be from ${min} to ${max} ${unit}`);

const pathModelSchema = z.strictObject({
  format: z.literal(PATH_MODEL_FORMAT, { error: `must be "${PATH_MODEL_FORMAT}"` }),
  version: z.literal(PATH_MODEL_VERSION, { error: `must be ${PATH_MODEL_VERSION} (the version this program reads)` }),
  sampleRate: ranged(1000, 768000, 'Hz'),
  taps: z
    .array(finite('a finite number').refine((v) => Math.abs(v) <= MAX_TAP, `must be from −${MAX_TAP} to ${MAX_TAP} (a path gain beyond 60 dB is no loudspeaker path)`), { error: 'must be an array of numbers (the FIR taps)' })
    .min(1, 'must hold at least one tap')
    .max(65536, 'must hold at most 65536 taps'),
  delayMs: ranged(0, 10000, 'ms'),
  method: z.enum(PATH_MODEL_METHODS, { error: `must be one of ${PATH_MODEL_METHODS.map((m) => `"${m}"`).join(', ')}` }),
  createdAt: z
    .string({ error: 'must be an ISO 8601 date and time, e.g. "2024-05-01T12:00:00Z"' })
    .refine(
      (s) => /^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}/.test(s) && !Number.isNaN(Date.parse(s)),
      'must be an ISO 8601 date and time, e.g. "2024-05-01T12:00:00Z"',
    ),
  quality: z.strictObject(
    {
      snrDb: z.union([finite('a number of dB or null'), z.null()], { error: 'must be a number of dB or null' }),
      misalignmentDb: finite('a number of dB').optional(),
      bandHz: z
        .tuple([ranged(0, 384000, 'Hz'), ranged(0, 384000, 'Hz')], { error: 'must be [lowHz, highHz]' })
        .refine(([lo, hi]) => lo < hi, 'must be [lowHz, highHz] with low < high')
        .optional(),
    },
    { error: 'must be an object { snrDb, misalignmentDb?, bandHz? }' },
  ),
  probe: z
    .strictObject(
      {
        levelDbfs: ranged(-120, 0, 'dBFS'),
        durationS: ranged(0, 3600, 's'),
        color: z.enum(['white', 'pink'], { error: 'must be "white" or "pink"' }).optional(),
      },
      { error: 'must be an object { levelDbfs, durationS, color? }' },
    )
    .optional(),
  resampledFromHz: ranged(1000, 768000, 'Hz').optional(),
  notes: z.string({ error: 'must be text' }).max(10000, 'must be at most 10000 characters').optional(),
});

export type PathModel = z.infer<typeof pathModelSchema>;

/** A model file that failed validation: one line per problem, each naming the field. */
export class PathModelError extends Error {
  constructor(readonly problems: string[]) {
    super(`invalid path model:\n  ${problems.join('\n  ')}`);
    this.name = 'PathModelError';
  }
}

function fieldName(path: readonly PropertyKey[]): string {
  let name = '';
  for (const key of path) name += typeof key === 'number' ? `[${key}]` : `${name ? '.' : ''}${String(key)}`;
  return name || '(whole file)';
}

/** A value for a message, bounded in length and depth (a deeply nested value must not overflow the stack). */
function describeValue(value: unknown): string {
  return show(value);
}

export interface ParsePathModelOptions {
  /** The sample rate the model will be used at, in Hz. A model of another rate is refused (unless `resample`). */
  expectedSampleRate?: number;
  /** Resample a model of another rate to `expectedSampleRate` instead of refusing it (default false). */
  resample?: boolean;
}

/**
 * Validate a model file (JSON text or an already-parsed value). Throws PathModelError naming every bad field.
 * With `expectedSampleRate`, a model measured at another rate is refused with a message saying both rates,
 * or, with `resample: true`, resampled (see resamplePathModel: the result says so in `resampledFromHz`).
 */
export function parsePathModel(input: unknown, options: ParsePathModelOptions = {}): PathModel {
  let value = input;
  if (typeof input === 'string') {
    try {
      value = JSON.parse(input);
    } catch (e) {
      throw new PathModelError([`(whole file): not valid JSON: ${(e as Error).message}`]);
    }
  }
  // Say plainly when the file is not a path model at all, or is from a newer version, before listing details.
  if (typeof value === 'object' && value !== null && !Array.isArray(value)) {
    const v = value as Record<string, unknown>;
    if (v.format !== PATH_MODEL_FORMAT) {
      throw new PathModelError([`format: must be "${PATH_MODEL_FORMAT}" (this is not a path-model file), got ${describeValue(v.format)}`]);
    }
    if (typeof v.version === 'number' && v.version > PATH_MODEL_VERSION) {
      throw new PathModelError([
        `version: this file is version ${v.version}, written by a newer ancbench; this program reads version ${PATH_MODEL_VERSION}`,
      ]);
    }
  }
  const result = pathModelSchema.safeParse(value, { reportInput: true });
  if (!result.success) {
    throw new PathModelError(
      result.error.issues.map((issue) => {
        const where = fieldName(issue.path);
        if (issue.code === 'unrecognized_keys') return `${where}: unknown field(s) ${issue.keys.map((k) => `"${k}"`).join(', ')}`;
        const got = 'input' in issue ? `, got ${describeValue(issue.input)}` : '';
        return `${where}: ${issue.message}${got}`;
      }),
    );
  }
  const model = result.data;
  const expected = options.expectedSampleRate;
  if (expected !== undefined && model.sampleRate !== expected) {
    if (options.resample) return resamplePathModel(model, expected);
    throw new PathModelError([
      `sampleRate: the model was measured at ${model.sampleRate} Hz but is to be used at ${expected} Hz; ` +
        `measure the path again at ${expected} Hz, or resample the model (resample option)`,
    ]);
  }
  return model;
}

/** JSON text of a model: two-space indentation, taps eight to a line; numbers written so they read back exactly. */
export function serializePathModel(model: PathModel): string {
  const checked = parsePathModel(model);
  const marker = '"__TAPS__"';
  const text = JSON.stringify({ ...checked, taps: '__TAPS__' }, null, 2);
  const lines: string[] = [];
  for (let i = 0; i < checked.taps.length; i += 8) lines.push(`    ${checked.taps.slice(i, i + 8).map(String).join(', ')}`);
  return `${text.replace(marker, `[\n${lines.join(',\n')}\n  ]`)}\n`;
}

export interface CreatePathModelOptions {
  taps: ArrayLike<number>;
  sampleRate: number;
  method: PathModelMethod;
  quality: PathModel['quality'];
  probe?: PathModel['probe'];
  notes?: string;
  /** Defaults to now. */
  createdAt?: Date;
}

/** Build a validated model, computing `delayMs` from the taps by the onset rule. */
export function createPathModel(options: CreatePathModelOptions): PathModel {
  const taps = Array.from(options.taps);
  let delayMs = 0;
  try {
    delayMs = (1000 * onsetDelaySamples(taps)) / options.sampleRate;
  } catch {
    delayMs = 0; // no taps or all zero: the schema below reports what is wrong
  }
  const draft: Record<string, unknown> = {
    format: PATH_MODEL_FORMAT,
    version: PATH_MODEL_VERSION,
    sampleRate: options.sampleRate,
    taps,
    delayMs,
    method: options.method,
    createdAt: (options.createdAt ?? new Date()).toISOString(),
    quality: options.quality,
  };
  if (options.probe !== undefined) draft.probe = options.probe;
  if (options.notes !== undefined) draft.notes = options.notes;
  return parsePathModel(draft);
}

/**
 * The model at another sample rate, by band-limited interpolation (resampleImpulseResponse). The result records
 * the original rate in `resampledFromHz` (kept from the first resampling if resampled twice) and says so in `notes`.
 */
export function resamplePathModel(model: PathModel, toHz: number): PathModel {
  if (!Number.isFinite(toHz) || toHz < 1000 || toHz > 768000) {
    throw new PathModelError([`sampleRate: the target rate must be from 1000 to 768000 Hz, got ${toHz}`]);
  }
  if (toHz === model.sampleRate) return model;
  const taps = Array.from(resampleImpulseResponse(model.taps, model.sampleRate, toHz));
  const from = model.resampledFromHz ?? model.sampleRate;
  const note = `resampled from ${model.sampleRate} Hz to ${toHz} Hz`;
  let delayMs = model.delayMs;
  try {
    delayMs = (1000 * onsetDelaySamples(taps)) / toHz;
  } catch {
    // an all-zero model has no onset: keep the stated delay
  }
  return parsePathModel({
    ...model,
    sampleRate: toHz,
    taps,
    delayMs,
    resampledFromHz: from,
    notes: model.notes ? `${model.notes}; ${note}` : note,
  });
}

/**
 * A warning when a model's stated `delayMs` disagrees with its taps' onset (first tap within 20 dB of the
 * peak) by more than `toleranceSamples` (one block), naming both; null when they agree or the taps are all
 * zero (then the warning says so instead).
 */
export function modelDelayWarning(model: Pick<PathModel, 'taps' | 'delayMs' | 'sampleRate'>, toleranceSamples: number, what = 'the model'): string | null {
  let onset: number;
  try {
    onset = onsetDelaySamples(model.taps);
  } catch {
    return `${what} has all taps zero: it describes no path, so control cannot work with it`;
  }
  const onsetMs = (1000 * onset) / model.sampleRate;
  const statedSamples = (model.delayMs / 1000) * model.sampleRate;
  if (Math.abs(statedSamples - onset) <= toleranceSamples) return null;
  return `${what} states a delay of ${model.delayMs.toFixed(2)} ms but its taps start at ${onsetMs.toFixed(2)} ms (first tap within 20 dB of the peak), ` +
    `${Math.abs(statedSamples - onset).toFixed(0)} samples apart, more than one block (${toleranceSamples} samples): the figures that use the delay (causality) may be wrong`;
}
