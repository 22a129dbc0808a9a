/**
 * A sweep's grid: dotted paths into a scenario (or a recording's settings) mapped to lists of values,
 *
 *   { "controller.stepSize": [0.002, 0.01, 0.05], "controller.taps": [128, 256, 512] }
 *
 * and its full product (the last path varies fastest). Every combination is checked by the same schema
 * as the file it edits (the scenario schema, or the recording settings' schema, both derived from the
 * settings tables in src/engine/settings.ts) before anything runs: an unknown path, a value of the wrong
 * type, a value the schema refuses, an empty list or a product over MAX_SWEEP_RUNS is an error naming
 * the path and the value.
 *
 * Ranking: runs that controlled (not diverged, attenuation > 0 dB) first, by attenuation, then runs that
 * amplified or gave no figure, then diverged runs; ties keep grid order.
 */

/** The largest product a sweep runs (documented in the README). */
export const MAX_SWEEP_RUNS = 1000;

export type GridValue = number | string | boolean;
export interface Grid {
  paths: string[];
  values: GridValue[][];
}

export class GridError extends Error {
  constructor(readonly problems: string[]) {
    super(problems.length === 1 ? problems[0]! : `${problems.length} problems:\n  ${problems.join('\n  ')}`);
    this.name = 'GridError';
  }
}

const PATH = /^[A-Za-z][A-Za-z0-9]*(\.[A-Za-z][A-Za-z0-9]*)*$/;

/** Check the grid's own shape (not yet its values against the schema). */
export function parseGridShape(value: unknown): Grid {
  if (typeof value !== 'object' || value === null || Array.isArray(value)) throw new GridError(['the grid must be a JSON object mapping dotted setting paths to lists of values, e.g. {"controller.stepSize": [0.01, 0.05]}']);
  const entries = Object.entries(value as Record<string, unknown>);
  if (!entries.length) throw new GridError(['the grid names no setting: give at least one "path": [values]']);
  const problems: string[] = [];
  for (const [path, list] of entries) {
    if (!PATH.test(path)) problems.push(`"${path}": not a dotted setting path (e.g. "controller.stepSize")`);
    if (!Array.isArray(list)) problems.push(`"${path}": must be a list of values, got ${JSON.stringify(list)}`);
    else if (list.length === 0) problems.push(`"${path}": the list of values is empty`);
    else list.forEach((v, i) => {
      if (!['number', 'string', 'boolean'].includes(typeof v)) problems.push(`"${path}"[${i}]: must be a number, text or true/false, got ${JSON.stringify(v)}`);
    });
  }
  if (problems.length) throw new GridError(problems);
  const grid = { paths: entries.map(([p]) => p), values: entries.map(([, l]) => l as GridValue[]) };
  const runs = gridSize(grid);
  if (runs > MAX_SWEEP_RUNS) throw new GridError([`the grid makes ${runs} runs (${grid.values.map((l) => l.length).join(' × ')}), more than the limit of ${MAX_SWEEP_RUNS}`]);
  return grid;
}

export function gridSize(g: Grid): number {
  return g.values.reduce((n, l) => n * l.length, 1);
}

/** Combination i of the product, as path → value (the last path varies fastest). */
export function combination(g: Grid, i: number): Record<string, GridValue> {
  const out: Record<string, GridValue> = {};
  for (let k = g.paths.length - 1; k >= 0; k--) {
    const l = g.values[k]!;
    out[g.paths[k]!] = l[i % l.length]!;
    i = Math.floor(i / l.length);
  }
  return Object.fromEntries(g.paths.map((p) => [p, out[p]!]));
}

/** A deep copy of `base` with each dotted path set (intermediate objects created where absent). */
export function applySettings<T>(base: T, settings: Record<string, GridValue>): T {
  const copy = structuredClone(base) as Record<string, unknown>;
  for (const [path, v] of Object.entries(settings)) {
    const keys = path.split('.');
    let o = copy;
    for (const k of keys.slice(0, -1)) {
      const next = o[k];
      if (next === undefined) o[k] = {};
      else if (typeof next !== 'object' || next === null || Array.isArray(next)) throw new GridError([`"${path}": "${k}" is not an object of settings in this file`]);
      o = o[k] as Record<string, unknown>;
    }
    o[keys[keys.length - 1]!] = v;
  }
  return copy as T;
}

/**
 * Check every combination with `check` (problems as "field: message" lines from the file's schema).
 * `base` must itself pass `check`: each value is first tried alone on it (so a problem names its path
 * and value), then every combination (cross-field rules).
 */
export function checkGrid(g: Grid, base: unknown, check: (edited: unknown) => string[]): void {
  const problems: string[] = [];
  // each value alone on the base file: names unknown paths and refused values precisely
  g.paths.forEach((path, k) => {
    g.values[k]!.forEach((v, i) => {
      let found: string[];
      try {
        found = check(applySettings(base, { [path]: v }));
      } catch (e) {
        if (e instanceof GridError) found = e.problems;
        else throw e;
      }
      if (found.length) problems.push(`"${path}"[${i}] = ${JSON.stringify(v)}: ${found.map((p) => (/unknown field/.test(p) ? `unknown setting (${p})` : p)).join('; ')}`);
    });
  });
  if (problems.length) throw new GridError(problems.slice(0, 20));
  // then every combination (cross-field rules)
  const n = gridSize(g);
  for (let i = 0; i < n && problems.length < 20; i++) {
    const c = combination(g, i);
    const found = check(applySettings(base, c));
    if (found.length) problems.push(`run ${i + 1} ${JSON.stringify(c)}: ${found.join('; ')}`);
  }
  if (problems.length) throw new GridError(problems);
}

export interface RankedFigures {
  attenuationDb: number | null;
  diverged: boolean;
}

/** 0 controlled, 1 amplified or no figure, 2 diverged. */
export function rankClass(r: RankedFigures): number {
  if (r.diverged) return 2;
  return r.attenuationDb !== null && r.attenuationDb > 0 ? 0 : 1;
}

/** Indices of the runs, best first (stable: ties keep grid order). */
export function rankRuns(runs: readonly RankedFigures[]): number[] {
  return runs.map((_, i) => i).sort((a, b) => {
    const ra = runs[a]!, rb = runs[b]!;
    const ca = rankClass(ra), cb = rankClass(rb);
    if (ca !== cb) return ca - cb;
    const xa = ra.attenuationDb ?? -Infinity, xb = rb.attenuationDb ?? -Infinity;
    if (xa !== xb) return xb - xa;
    return a - b;
  });
}
