/**
 * `ancbench sweep <scenario.json|recording> --grid grid.json [--workers N] [--json] [--out DIR]`: run
 * every combination of a grid of settings (src/plant/settings-grid.ts) on a pool of worker threads and
 * rank the runs, best first.
 */
import { availableParallelism } from 'node:os';
import { statSync } from 'node:fs';
import { readJson, writeOutputs, InputError } from '../io/files-node.ts';
import { readReportAssets, REPORT_FILE } from '../io/report-html-node.ts';
import { escapeHtml, renderReportHtml, REPORT_COLORS, type ReportSection } from '../io/report-html.ts';
import { parseScenario, ScenarioError } from '../plant/scenario.ts';
import { parseReplaySettings, ReplayError } from '../plant/replay.ts';
import { checkGrid, combination, GridError, gridSize, MAX_SWEEP_RUNS, parseGridShape, rankClass, rankRuns, type Grid, type GridValue } from '../plant/settings-grid.ts';
import { loadScenarioFile } from '../io/scenario-file-node.ts';
import { numberFlag, parseCommandArgs, safeJson, toolVersion, UsageError } from './common.ts';
import { progressBar } from './progress.ts';
import { loadReplaySource } from './replay-command.ts';
import { runPool } from './sweep-pool.ts';
import type { SweepRunResult, SweepSource } from './sweep-run.ts';
import type { SimulateSummary } from './simulate-command.ts';

export const SWEEP_USAGE = `usage: ancbench sweep <scenario.json|recording.zip|recording-folder> --grid grid.json
                      [--workers N] [--json] [--out DIR]

Runs every combination of the grid's settings: a scenario is simulated (control off vs on), a
recording bundle is replayed (as ancbench replay). Runs go to a pool of worker threads; the table
is ranked best first (highest attenuation), with runs that amplified or gave no figure after them
and diverged runs last.

grid.json maps dotted setting paths, in the scenario's vocabulary, to lists of values:
  {"controller.stepSize": [0.002, 0.01, 0.05], "controller.taps": [128, 256, 512]}
Every combination is checked against the scenario schema (or a recording's settings) before any
run; at most ${MAX_SWEEP_RUNS} runs.

  --grid FILE   the grid (JSON)
  --workers N   worker threads (default: the number of cores, ${availableParallelism()} here)
  --json        print a JSON array, best first: {rank, settings, attenuationDb, convergenceS,
                peakOutputDbfs, diverged, ...the rest of simulate's summary}
  --out DIR     also write DIR/sweep.csv, DIR/sweep.json and DIR/report.html (ranked table, heat
                map for a two-setting grid, the best run's attenuation over time)
  -h, --help    this text`;

export interface SweepEntry extends SimulateSummary {
  rank: number;
  settings: Record<string, GridValue>;
}

function parseArgsOrThrow(argv: string[]) {
  return parseCommandArgs(argv, {
    grid: { type: 'string' },
    workers: { type: 'string' },
    json: { type: 'boolean' },
    out: { type: 'string' },
  } as const, SWEEP_USAGE, true);
}

function isRecording(path: string): boolean {
  if (path.toLowerCase().endsWith('.zip')) return true;
  try {
    return statSync(path).isDirectory();
  } catch {
    return false;
  }
}

/** The base file and the check its schema makes, for the grid to be validated against. */
function baseAndCheck(source: SweepSource): { base: unknown; check: (v: unknown) => string[] } {
  if (source.kind === 'scenario') {
    loadScenarioFile(source.path); // the file itself must be valid (and its WAVs and model readable)
    return {
      base: readJson(source.path, 'scenario file'),
      check: (v) => {
        try {
          parseScenario(v);
          return [];
        } catch (e) {
          if (e instanceof ScenarioError) return e.problems;
          throw e;
        }
      },
    };
  }
  const src = loadReplaySource({ recording: source.path });
  return {
    base: src.input.settings,
    check: (v) => {
      try {
        parseReplaySettings(v);
        return [];
      } catch (e) {
        if (e instanceof ReplayError) return e.problems;
        throw e;
      }
    },
  };
}

/** Load and check a grid file against the source: every problem before any run. */
export function loadGrid(gridPath: string, source: SweepSource): Grid {
  const { base, check } = baseAndCheck(source);
  try {
    const grid = parseGridShape(readJson(gridPath, '--grid file'));
    checkGrid(grid, base, check);
    return grid;
  } catch (e) {
    if (e instanceof GridError) throw new InputError(`--grid "${gridPath}": ${e.message}`);
    throw e;
  }
}

export function rankedEntries(results: SweepRunResult[]): SweepEntry[] {
  const order = rankRuns(results.map((r) => r.summary));
  return order.map((i, k) => ({ rank: k + 1, settings: results[i]!.settings, ...results[i]!.summary }));
}

const num = (v: number | null, d: number): string => (v === null || !Number.isFinite(v) ? '' : v.toFixed(d));

export function sweepCsv(grid: Grid, entries: SweepEntry[]): string {
  const rows = [['rank', ...grid.paths, 'attenuation_db', 'convergence_s', 'peak_output_dbfs', 'diverged', 'error_off_dbfs', 'error_on_dbfs'].join(',')];
  const cell = (v: GridValue): string => (typeof v === 'string' && /[",\n]/.test(v) ? `"${v.replace(/"/g, '""')}"` : String(v));
  for (const e of entries) {
    rows.push([e.rank, ...grid.paths.map((p) => cell(e.settings[p]!)), num(e.attenuationDb, 2), num(e.convergenceS, 3), num(e.peakOutputDbfs, 2), e.diverged, num(e.errorOffDbfs, 2), num(e.errorOnDbfs, 2)].join(','));
  }
  return rows.join('\n') + '\n';
}

/** Cell colour on the project's own scale: sand (0 dB) to teal (best); amplified and diverged runs in amber. */
function heatColour(att: number | null, diverged: boolean, best: number): string {
  if (diverged || att === null || att <= 0) return REPORT_COLORS.off;
  const t = best > 0 ? Math.min(1, att / best) : 0;
  const lerp = (a: number, b: number): number => Math.round(a + (b - a) * t);
  // #f3ead8 → #0f766e
  return `rgb(${lerp(0xf3, 0x0f)}, ${lerp(0xea, 0x76)}, ${lerp(0xd8, 0x6e)})`;
}

function heatMap(grid: Grid, entries: SweepEntry[]): string {
  const [rowPath, colPath] = grid.paths as [string, string];
  const byKey = new Map(entries.map((e) => [`${JSON.stringify(e.settings[rowPath])}|${JSON.stringify(e.settings[colPath])}`, e]));
  const best = Math.max(0, ...entries.map((e) => (e.diverged ? 0 : e.attenuationDb ?? 0)));
  const head = `<tr><th>${escapeHtml(rowPath)} \\ ${escapeHtml(colPath)}</th>${grid.values[1]!.map((v) => `<th>${escapeHtml(String(v))}</th>`).join('')}</tr>`;
  const rows = grid.values[0]!.map((rv) => {
    const cells = grid.values[1]!.map((cv) => {
      const e = byKey.get(`${JSON.stringify(rv)}|${JSON.stringify(cv)}`)!;
      const bg = heatColour(e.attenuationDb, e.diverged, best);
      const dark = !e.diverged && e.attenuationDb !== null && e.attenuationDb > 0.5 * best;
      const text = e.diverged ? 'diverged' : e.attenuationDb === null ? 'n/a' : `${e.attenuationDb.toFixed(1)} dB`;
      return `<td style="background:${bg};color:${dark || bg === REPORT_COLORS.off ? '#fff' : '#1f2937'};text-align:center;padding:6px 10px">${text}</td>`;
    });
    return `<tr><th>${escapeHtml(String(rv))}</th>${cells.join('')}</tr>`;
  });
  return `<table class="heat" style="border-collapse:collapse;margin:8px 0">${head}${rows.join('')}</table>`;
}

function rankedTable(grid: Grid, entries: SweepEntry[]): string {
  const head = `<tr><th>rank</th>${grid.paths.map((p) => `<th>${escapeHtml(p)}</th>`).join('')}<th>attenuation</th><th>convergence</th><th>peak output</th><th>verdict</th></tr>`;
  const rows = entries.map((e) => {
    const verdict = e.diverged ? 'diverged' : rankClass(e) === 1 ? 'amplified or no figure' : 'controlled';
    return `<tr><td>${e.rank}</td>${grid.paths.map((p) => `<td>${escapeHtml(String(e.settings[p]))}</td>`).join('')}<td>${e.attenuationDb === null ? 'n/a' : `${e.attenuationDb.toFixed(2)} dB`}</td><td>${e.convergenceS === null ? 'not reached' : `${e.convergenceS.toFixed(2)} s`}</td><td>${e.peakOutputDbfs === null ? 'n/a' : `${e.peakOutputDbfs.toFixed(1)} dBFS`}</td><td>${verdict}</td></tr>`;
  });
  return `<table class="ranked">${head}${rows.join('')}</table>`;
}

export function sweepReportHtml(source: SweepSource, grid: Grid, entries: SweepEntry[], best: SweepRunResult, workers: number): string {
  const b = entries[0]!;
  const sections: ReportSection[] = [
    {
      title: 'Sweep',
      table: {
        rows: [
          [source.kind === 'scenario' ? 'scenario (simulated)' : 'recording (replayed)', source.path],
          ['runs', `${entries.length} (${grid.values.map((l) => l.length).join(' × ')}), ${workers} worker thread${workers > 1 ? 's' : ''}`],
          ['best settings', Object.entries(b.settings).map(([k, v]) => `${k} = ${v}`).join(', ')],
          ['best attenuation', b.attenuationDb === null ? 'n/a' : `${b.attenuationDb.toFixed(2)} dB (error mic, last 25 % of the run)`],
          ['ranking', 'highest attenuation first; runs that amplified or gave no figure next; diverged runs last'],
        ],
      },
    },
  ];
  if (grid.paths.length === 2) sections.push({ title: 'Attenuation over the grid', paragraphs: ['Steady-state attenuation of each run; amber cells amplified, gave no figure or diverged.'], html: heatMap(grid, entries) });
  sections.push({ title: 'Runs, best first', html: rankedTable(grid, entries) });
  sections.push({
    title: 'Best run over time',
    plots: [{
      title: 'Attenuation of the best run (trailing 100 ms window)',
      xLabel: 'time (s)',
      yLabel: 'attenuation (dB)',
      xScale: 'linear',
      x: best.timeline.timeS,
      series: [{ label: 'attenuation', values: best.timeline.attenuationDb.map((v) => (v === null ? NaN : v)), color: REPORT_COLORS.on }],
    }],
  });
  return renderReportHtml({ title: 'ancbench sweep', subtitle: `${entries.length} runs of ${source.path}`, sections, footer: `ancbench ${toolVersion()} sweep` }, readReportAssets());
}

function readableSweep(grid: Grid, entries: SweepEntry[]): string {
  const lines = [`rank  ${grid.paths.map((p) => p.padEnd(Math.max(10, p.length))).join('  ')}  attenuation  convergence  peak out   verdict`];
  for (const e of entries.slice(0, 20)) {
    const verdict = e.diverged ? 'DIVERGED' : rankClass(e) === 1 ? 'amplified/no figure' : 'ok';
    lines.push(`${String(e.rank).padStart(4)}  ${grid.paths.map((p) => String(e.settings[p]).padEnd(Math.max(10, p.length))).join('  ')}  ${(e.attenuationDb === null ? 'n/a' : `${e.attenuationDb.toFixed(1)} dB`).padStart(11)}  ${(e.convergenceS === null ? '—' : `${e.convergenceS.toFixed(2)} s`).padStart(11)}  ${(e.peakOutputDbfs === null ? 'n/a' : `${e.peakOutputDbfs.toFixed(1)} dBFS`).padStart(9)}  ${verdict}`);
  }
  if (entries.length > 20) lines.push(`… ${entries.length - 20} more (--json or --out for all)`);
  return lines.join('\n');
}

export async function sweepCommand(argv: string[]): Promise<number> {
  const { values, positionals } = parseArgsOrThrow(argv);
  if (values.help) {
    process.stdout.write(SWEEP_USAGE + '\n');
    return 0;
  }
  if (positionals.length !== 1) throw new UsageError(`sweep takes exactly one scenario file or recording, got ${positionals.length}\n\n${SWEEP_USAGE}`);
  if (!values.grid) throw new UsageError(`sweep needs --grid grid.json\n\n${SWEEP_USAGE}`);
  const workers = numberFlag('workers', values.workers, 1, 256, true) ?? availableParallelism();
  const path = positionals[0]!;
  const source: SweepSource = { kind: isRecording(path) ? 'recording' : 'scenario', path };
  const grid = loadGrid(values.grid, source);
  const n = gridSize(grid);
  const jobs = Array.from({ length: n }, (_, i) => ({ index: i, settings: combination(grid, i) }));
  const bar = progressBar(`sweeping ${n} runs`);
  let results: SweepRunResult[];
  try {
    results = await runPool(source, jobs, workers, (done) => bar.update(done / n));
  } finally {
    bar.stop();
  }
  const entries = rankedEntries(results);
  const best = results[rankRuns(results.map((x) => x.summary))[0]!]!;
  if (values.out) {
    writeOutputs(values.out, [
      { name: 'sweep.csv', data: sweepCsv(grid, entries) },
      { name: 'sweep.json', data: safeJson(entries) + '\n' },
      { name: REPORT_FILE, data: sweepReportHtml(source, grid, entries, best, Math.min(workers, n)) },
    ]);
  }
  if (values.json) process.stdout.write(safeJson(entries, 0) + '\n');
  else {
    process.stdout.write(readableSweep(grid, entries) + '\n');
    if (values.out) process.stdout.write(`wrote         ${values.out}/sweep.csv, sweep.json, ${REPORT_FILE}\n`);
  }
  return 0;
}
