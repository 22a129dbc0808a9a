/**
 * One run of a sweep: a scenario simulated, or a recording replayed, with a grid point's settings. The
 * same function runs in the worker threads (sweep-worker.ts) and in-process, so a run's figures do not
 * depend on where it ran.
 */
import { loadScenarioFile } from '../io/scenario-file-node.ts';
import { simulate } from '../plant/simulate.ts';
import { scenarioCeilingDbfs } from '../plant/scenario.ts';
import { DEFAULT_CEILING_DBFS } from '../engine/engine.ts';
import { parseReplaySettings, ReplayError } from '../plant/replay.ts';
import { applySettings, type GridValue } from '../plant/settings-grid.ts';
import { InputError } from '../io/files-node.ts';
import { summarize, type SimulateSummary } from './simulate-command.ts';
import { stamp } from './common.ts';
import { loadReplaySource, replaySummary, runReplay, type ReplaySource } from './replay-command.ts';

export interface SweepSource {
  kind: 'scenario' | 'recording';
  path: string;
}

export interface SweepRunResult {
  index: number;
  settings: Record<string, GridValue>;
  summary: SimulateSummary;
  /** Attenuation over time (trailing 100 ms window), for the best run's curve. */
  timeline: { timeS: number[]; attenuationDb: number[] };
}

let cached: { path: string; src: ReplaySource } | null = null;

/** The recording's inputs, loaded once per thread. */
function recording(path: string): ReplaySource {
  if (cached?.path !== path) cached = { path, src: loadReplaySource({ recording: path }) };
  return cached.src;
}

export function sweepRun(source: SweepSource, index: number, settings: Record<string, GridValue>): SweepRunResult {
  let summary: SimulateSummary;
  let timeline: { timeS: Float64Array; attenuationDb: Float64Array };
  if (source.kind === 'scenario') {
    const loaded = loadScenarioFile(source.path, { edit: (json) => applySettings(json, settings) });
    const sc = loaded.scenario;
    const r = simulate(sc, { wavs: loaded.wavs, ...(loaded.secondaryPathModel ? { secondaryPathModel: loaded.secondaryPathModel } : {}) });
    summary = summarize(source.path, r, stamp('sweep', sc.seed, loaded.sha256), sc.name, scenarioCeilingDbfs(sc, DEFAULT_CEILING_DBFS));
    timeline = r.timeline;
  } else {
    const base = recording(source.path);
    let edited;
    try {
      edited = parseReplaySettings(applySettings(base.input.settings, settings));
    } catch (e) {
      if (e instanceof ReplayError) throw new InputError(`settings ${JSON.stringify(settings)}: ${e.message}`);
      throw e;
    }
    const src: ReplaySource = { ...base, input: { ...base.input, settings: edited } };
    const r = runReplay(src);
    summary = replaySummary(src, r);
    timeline = r.timeline;
  }
  return { index, settings, summary, timeline: { timeS: Array.from(timeline.timeS), attenuationDb: Array.from(timeline.attenuationDb) } };
}
