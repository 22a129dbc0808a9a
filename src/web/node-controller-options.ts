/**
 * Options of the embeddable controller node (`createControllerNode`), checked with the same settings
 * tables as scenario files (src/engine/settings.ts): the controller object is a scenario's
 * `controller` without the simulator-only fields, the limiter object takes the live output cap, and
 * the node's own options have a table of their own here. README's "Use it in your own page" shows
 * `nodeOptionsMarkdown()` (a test keeps it current).
 */
import {
  FXLMS_SETTINGS,
  LIMITER_SETTINGS,
  OUTPUT_STAGE_SETTINGS,
  TONAL_SETTINGS,
  checkControllerSettings,
  settingsProblems,
  tableMarkdown,
  type SettingsObject,
  type SettingsTable,
} from '../engine/settings.ts';
import type { ControllerConfig } from '../engine/controller-factory.ts';
import type { InputLayout } from '../protocol/messages.ts';

/** The node's own options (the controller and the limiter have their tables in src/engine/settings.ts). */
export const NODE_SETTINGS = {
  inputLayout: {
    type: 'enum', values: ['ref-err', 'err-only'], default: 'ref-err', live: false,
    description: 'the input carries two channels (0 = reference mic, 1 = error mic), or the error mic alone on channel 0 (the error signal is then the reference too)',
  },
  rampMs: OUTPUT_STAGE_SETTINGS.rampMs,
  maxQuantum: { type: 'number', unit: 'samples', min: 1, max: 16384, integer: true, default: 128, live: false, description: 'largest render quantum the engine is built for (longer quanta are split)' },
  displayRateHz: { type: 'number', unit: 'Hz', min: 5, max: 120, default: 30, live: false, description: 'meter frames per second delivered to `meters` listeners' },
  workletUrl: { type: 'string', live: false, description: 'address of `ancbench-live-processor.js` (default: the file beside the package\'s `web/index.js`)' },
} as const satisfies SettingsTable;

/** The part of the limiter table the live node takes (the cap; the rest of the limiter keeps its defaults). */
export const NODE_LIMITER_SETTINGS = { ceilingDbfs: LIMITER_SETTINGS.ceilingDbfs } as const satisfies SettingsTable;

/** A controller in the tables' vocabulary (docs/settings.md): what a scenario's `controller` holds, minus the simulator-only fields. */
export type ControllerSettings = SettingsObject<typeof FXLMS_SETTINGS> | SettingsObject<typeof TONAL_SETTINGS>;

/**
 * The engine's configuration from checked settings: the tone follower's frequency source defaults to
 * the reference mic, or to "fixed" when only `hz` is given (as for scenarios, src/plant/simulate.ts).
 */
export function engineController(settings: ControllerSettings): ControllerConfig {
  const c = settings as ControllerConfig;
  if (c.algorithm === 'tonal' && c.frequencySource === undefined) return { ...c, frequencySource: c.hz !== undefined ? 'fixed' : 'reference' };
  return c;
}

/** What `createControllerNode` takes. */
export interface ControllerNodeOptions {
  /** A controller configuration in the scenario vocabulary (docs/settings.md), e.g. `{ algorithm: 'fxnlms', taps: 64, stepSize: 0.05 }`. */
  controller: ControllerSettings;
  /**
   * Secondary-path model ŝ: FIR taps at the context's rate, bulk delay included. Without one the node
   * passes nothing to the output until `loadModel()` or `identify()` gave it one.
   */
  secondaryPathModel?: ArrayLike<number>;
  limiter?: { ceilingDbfs?: number };
  inputLayout?: InputLayout;
  rampMs?: number;
  maxQuantum?: number;
  displayRateHz?: number;
  workletUrl?: string | URL;
}

/** Options after the checks, with the defaults written out. */
export interface CheckedNodeOptions {
  controller: ControllerConfig;
  secondaryPathModel: Float32Array | null;
  ceilingDbfs: number;
  inputLayout: InputLayout;
  rampMs: number;
  maxQuantum: number;
  displayRateHz: number;
  workletUrl: string | null;
}

/** Options refused: `problems` holds one line per bad field (field, allowed values, value received). */
export class ControllerNodeOptionsError extends RangeError {
  readonly problems: readonly string[];
  constructor(problems: string[]) {
    super(`createControllerNode: ${problems.length === 1 ? 'an option is' : `${problems.length} options are`} refused:\n  ${problems.join('\n  ')}`);
    this.name = 'ControllerNodeOptionsError';
    this.problems = problems;
  }
}

/** Check a model's taps: a non-empty list of finite numbers (at most 2^20). Returns a problem or the taps. */
export function modelTaps(field: string, taps: unknown): Float32Array | string {
  const a = taps as ArrayLike<unknown> | null;
  if (a === null || typeof a !== 'object' || typeof a.length !== 'number' || a.length < 1 || a.length > 1 << 20) {
    return `${field}: must be a list of 1 … ${1 << 20} FIR taps (numbers), got ${a === null || typeof a !== 'object' ? String(a) : `length ${String(a.length)}`}`;
  }
  const out = new Float32Array(a.length);
  for (let i = 0; i < a.length; i++) {
    const v = a[i];
    if (typeof v !== 'number' || !Number.isFinite(v)) return `${field}[${i}]: must be a finite number, got ${String(v)}`;
    out[i] = v;
  }
  return out;
}

function def<T>(v: T | undefined, d: T): T {
  return v === undefined ? d : v;
}

/** Check every option; throws one ControllerNodeOptionsError listing each bad field. */
export function checkNodeOptions(options: unknown): CheckedNodeOptions {
  if (typeof options !== 'object' || options === null || Array.isArray(options)) {
    throw new ControllerNodeOptionsError([`options: must be an object such as { controller: { algorithm: 'fxnlms', taps: 64, stepSize: 0.05 } }, got ${String(options)}`]);
  }
  const { controller, secondaryPathModel, limiter, ...rest } = options as Record<string, unknown>;
  const problems: string[] = [];
  if (controller === undefined) problems.push(`controller: required (an object with algorithm "fxlms", "fxnlms" or "tonal" and its settings, see docs/settings.md)`);
  else {
    try {
      checkControllerSettings(controller, 'controller.');
    } catch (e) {
      problems.push(...(e as Error).message.split('; '));
    }
  }
  let model: Float32Array | null = null;
  if (secondaryPathModel !== undefined) {
    const m = modelTaps('secondaryPathModel', secondaryPathModel);
    if (typeof m === 'string') problems.push(m);
    else model = m;
  }
  if (limiter !== undefined) problems.push(...settingsProblems(NODE_LIMITER_SETTINGS, limiter, 'limiter.'));
  const node = { ...rest, ...(rest.workletUrl instanceof URL ? { workletUrl: rest.workletUrl.href } : {}) };
  problems.push(...settingsProblems(NODE_SETTINGS, node));
  if (problems.length) throw new ControllerNodeOptionsError(problems);
  const n = node as Partial<Record<keyof typeof NODE_SETTINGS, unknown>>;
  return {
    controller: engineController(controller as ControllerSettings),
    secondaryPathModel: model,
    ceilingDbfs: def((limiter as { ceilingDbfs?: number } | undefined)?.ceilingDbfs, LIMITER_SETTINGS.ceilingDbfs.default),
    inputLayout: def(n.inputLayout as InputLayout | undefined, NODE_SETTINGS.inputLayout.default),
    rampMs: def(n.rampMs as number | undefined, NODE_SETTINGS.rampMs.default),
    maxQuantum: def(n.maxQuantum as number | undefined, NODE_SETTINGS.maxQuantum.default),
    displayRateHz: def(n.displayRateHz as number | undefined, NODE_SETTINGS.displayRateHz.default),
    workletUrl: (n.workletUrl as string | undefined) ?? null,
  };
}

/** The options tables as Markdown (README's "Use it in your own page"). */
export function nodeOptionsMarkdown(): string {
  return [
    '**Node options**',
    '',
    tableMarkdown({ ...NODE_SETTINGS, ...Object.fromEntries(Object.entries(NODE_LIMITER_SETTINGS).map(([k, v]) => [`limiter.${k}`, v])) }),
    '',
    '**`controller`, broadband (`algorithm` "fxlms" or "fxnlms")**',
    '',
    tableMarkdown(FXLMS_SETTINGS, 'controller.'),
    '',
    '**`controller`, tone follower (`algorithm` "tonal")**',
    '',
    tableMarkdown(TONAL_SETTINGS, 'controller.'),
  ].join('\n');
}
