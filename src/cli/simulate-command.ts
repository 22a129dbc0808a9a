/**
 * `ancbench simulate <scenario.json> [--out DIR] [--json]`: run the closed loop on a scenario with
 * control off and on, and report attenuation, convergence, the Wiener bound, peak output, divergence.
 */
import { loadScenarioFile } from '../io/scenario-file-node.ts';
import { InputError, OutputFolder } from '../io/files-node.ts';
import { MAX_WAV_DATA_BYTES, openWavFile, WavFileWriter } from '../io/wav-file-node.ts';
import { describeOutputLimit, simulate, type OutputLimit, type SimulationResult } from '../plant/simulate.ts';
import { REPORT_FILE, simulationReportHtml } from '../io/report-html-node.ts';
import { scenarioCeilingDbfs } from '../plant/scenario.ts';
import { DEFAULT_CEILING_DBFS } from '../engine/engine.ts';
import type { EngineEvent } from '../engine/events.ts';
import { describeEventValues } from '../engine/events.ts';
import { fmtDb, fmtNum, outFlag, safeJson, stamp, UsageError, type Stamp, parseCommandArgs } from './common.ts';
import { progressBar } from './progress.ts';

export const SIMULATE_USAGE = `usage: ancbench simulate <scenario.json> [--out DIR] [--json]

Runs the scenario's closed loop twice with the same seed (control off, control on) and reports:
steady-state attenuation at the error mic (last 25 % of the run), convergence time, the Wiener
bound for a filter of the same length, peak output level, and whether the controller diverged.

  --out DIR   also write DIR/summary.json, DIR/attenuation.csv, DIR/signals.wav
              (float32; channels 0 reference, 1 error with control on, 2 controller
              output, 3 error with control off, 4 reference with control off) and
              DIR/report.html (self-contained). Signals are written to disk block by
              block, so memory does not grow with the duration; a run longer than
              the 4 GiB a WAV file holds (about 74 min at 48 kHz) is refused
              before it starts. Nothing is left in DIR if the run fails.
  --json      print one JSON object on stdout instead of the readable summary
  -h, --help  this text`;

export interface SimulateSummary {
  scenario: string;
  name: string | null;
  algorithm: string;
  implementation: string;
  sampleRate: number;
  durationS: number;
  attenuationDb: number | null;
  convergenceS: number | null;
  wienerBoundDb: number | null;
  wienerBoundIsBound: boolean;
  peakOutputDbfs: number | null;
  outputCeilingDbfs: number;
  outputLimit: OutputLimit;
  amplified: boolean;
  diverged: boolean;
  divergenceReasons: string[];
  errorOffDbfs: number | null;
  errorOnDbfs: number | null;
  clipping: { referenceSamples: number; errorSamples: number };
  tones: { hz: number; harmonic: number; source: number; attenuationDb: number | null }[];
  trackingErrorHz: { rms: number; max: number } | null;
  events: EngineEvent[];
  notes: Record<string, string>;
  stamp: Stamp;
}

export function summarize(path: string, r: SimulationResult, st: Stamp, name: string | undefined, ceilingDbfs: number): SimulateSummary {
  return {
    scenario: path,
    name: name ?? null,
    algorithm: r.algorithm,
    implementation: r.implementation,
    sampleRate: r.sampleRate,
    durationS: r.durationS,
    attenuationDb: r.attenuationDb,
    convergenceS: r.convergenceS,
    wienerBoundDb: r.wienerBoundDb,
    wienerBoundIsBound: r.wienerBoundIsBound,
    peakOutputDbfs: r.peakOutputDbfs,
    outputCeilingDbfs: ceilingDbfs,
    outputLimit: r.outputLimit,
    amplified: r.amplified,
    diverged: r.diverged,
    divergenceReasons: r.divergenceReasons,
    errorOffDbfs: r.errorOffDbfs,
    errorOnDbfs: r.errorOnDbfs,
    clipping: r.clipping,
    tones: r.tones,
    trackingErrorHz: r.trackingErrorHz,
    events: r.events,
    notes: r.convergenceS === null ? { ...r.notes, convergenceS: 'the trailing 100 ms attenuation never settled within 3 dB of its steady-state value' } : r.notes,
    stamp: st,
  };
}

export function attenuationCsv(r: SimulationResult): string {
  const rows = ['time_s,error_off_dbfs,error_on_dbfs,attenuation_db'];
  const t = r.timeline;
  const f = (v: number): string => (Number.isFinite(v) ? v.toFixed(3) : '');
  for (let i = 0; i < t.timeS.length; i++) rows.push(`${t.timeS[i]!.toFixed(3)},${f(t.offDbfs[i]!)},${f(t.onDbfs[i]!)},${f(t.attenuationDb[i]!)}`);
  return rows.join('\n') + '\n';
}

export function readableSummary(s: SimulateSummary): string {
  const lines = [
    `scenario      ${s.scenario}${s.name ? `  (${s.name})` : ''}`,
    `controller    ${s.algorithm}, ${s.sampleRate} Hz, ${s.durationS.toFixed(2)} s${s.implementation !== s.algorithm ? `; ${s.implementation}` : ''}`,
    `attenuation   ${fmtDb(s.attenuationDb)}  (error mic, last 25 % of the run, unweighted)`,
    `error level   ${s.errorOffDbfs === null ? 'n/a' : fmtNum(s.errorOffDbfs)} dBFS off → ${s.errorOnDbfs === null ? 'n/a' : fmtNum(s.errorOnDbfs)} dBFS on`,
    `convergence   ${s.convergenceS === null ? 'not reached' : `${s.convergenceS.toFixed(2)} s`}`,
    `Wiener bound  ${fmtDb(s.wienerBoundDb)}${s.wienerBoundDb === null ? (s.algorithm === 'tonal' ? '  (narrowband controller: see the per-tone figures)' : '') : s.wienerBoundIsBound ? '' : '  (not a bound: the noise or the plant changes during the run)'}`,
    `peak output   ${s.peakOutputDbfs === null ? 'n/a' : `${fmtNum(s.peakOutputDbfs)} dBFS`}  (ceiling ${fmtNum(s.outputCeilingDbfs, Number.isInteger(s.outputCeilingDbfs) ? 0 : 2)} dBFS)`,
    `output limit  ${describeOutputLimit(s.outputLimit)}`,
    ...(s.amplified ? ['amplified     YES: control on is more than 1 dB louder than control off (overall or at a tone)'] : []),
    `diverged      ${s.diverged ? `YES: ${s.divergenceReasons.join('; ')}` : 'no'}`,
  ];
  for (const t of s.tones) lines.push(`tone          ${t.hz.toFixed(1)} Hz (source ${t.source}, harmonic ${t.harmonic}): ${fmtDb(t.attenuationDb)}`);
  const shown = s.events.filter((e) => e.cause !== 'limiter-engaged');
  for (const e of shown.slice(0, 8)) lines.push(`event         ${e.timeS.toFixed(3)} s  ${e.cause} → ${e.action}  ${describeEventValues(e)}`);
  if (shown.length > 8) lines.push(`event         … ${shown.length - 8} more in summary.json`);
  if (s.trackingErrorHz) lines.push(`tracking      RMS ${s.trackingErrorHz.rms.toFixed(2)} Hz, max ${s.trackingErrorHz.max.toFixed(2)} Hz (from first lock)`);
  for (const [k, v] of Object.entries(s.notes)) lines.push(`note          ${k}: ${v}`);
  return lines.join('\n');
}

export async function simulateCommand(argv: string[]): Promise<number> {
  const { values, positionals } = parseArgsOrThrow(argv);
  if (values.help) {
    process.stdout.write(SIMULATE_USAGE + '\n');
    return 0;
  }
  if (positionals.length !== 1) throw new UsageError(`simulate takes exactly one scenario file, got ${positionals.length}\n\n${SIMULATE_USAGE}`);
  const path = positionals[0]!;
  const outDir = outFlag('out', values.out);
  const loaded = loadScenarioFile(path);
  const sc = loaded.scenario;
  const frames = Math.max(1, Math.round(sc.durationS * sc.sampleRate));
  if (outDir !== undefined && WavFileWriter.bytesFor(frames, SIGNAL_CHANNELS) - WavFileWriter.headerBytesFor(SIGNAL_CHANNELS) > MAX_WAV_DATA_BYTES) {
    const gib = (WavFileWriter.bytesFor(frames, SIGNAL_CHANNELS) / 2 ** 30).toFixed(1);
    throw new InputError(`scenario "${path}": with --out, signals.wav would hold ${gib} GiB (${SIGNAL_CHANNELS} channels of ${sc.durationS} s at ${sc.sampleRate} Hz), more than the 4 GiB a WAV file can hold; shorten durationS or run without --out`);
  }
  // The output folder is prepared before the run, so that an unwritable place is said at once.
  const out = outDir !== undefined ? OutputFolder.prepare(outDir, ['summary.json', 'attenuation.csv', 'signals.wav', REPORT_FILE]) : null;
  try {
    const writer = out ? new WavFileWriter(out.pathOf('signals.wav'), SIGNAL_CHANNELS, sc.sampleRate) : null;
    const bar = progressBar('simulating');
    let r: SimulationResult;
    try {
      r = simulate(sc, {
        wavs: loaded.wavs,
        onProgress: (f) => bar.update(f),
        ...(writer ? { onBlock: (sig, n) => writer.write(sig, n) } : {}),
        ...(loaded.secondaryPathModel ? { secondaryPathModel: loaded.secondaryPathModel } : {}),
        ...(loaded.feedbackPathModel ? { feedbackPathModel: loaded.feedbackPathModel } : {}),
      });
      writer?.close();
    } catch (e) {
      writer?.discard();
      throw e;
    } finally {
      bar.stop();
    }
    const summary = summarize(path, r, stamp('simulate', sc.seed, loaded.sha256), sc.name, scenarioCeilingDbfs(sc, DEFAULT_CEILING_DBFS));
    for (const w of loaded.warnings ?? []) {
      summary.notes[w.key] = w.text;
      process.stderr.write(`ancbench simulate: warning: ${w.text}\n`);
    }
    if (out) {
      out.write('summary.json', safeJson(summary) + '\n');
      out.write('attenuation.csv', attenuationCsv(r));
      // The report's analysis reads the signals back from the written file, piece by piece.
      const wav = openWavFile(out.pathOf('signals.wav'), 'signals.wav');
      try {
        const signals = { reference: wav.channelSource(4), errorOff: wav.channelSource(3), errorOn: wav.channelSource(1) };
        out.write(REPORT_FILE, simulationReportHtml(summary, r, { trueSecondaryPath: r.trueSecondaryPath, signals }));
      } finally {
        wav.close();
      }
      out.commit();
    }
    printSimulation(values, summary, outDir);
  } finally {
    out?.abort();
  }
  return 0;
}

/** Channels of signals.wav: reference, error on, controller output, error off, reference off. */
const SIGNAL_CHANNELS = 5;

function printSimulation(values: { json?: boolean | undefined }, summary: SimulateSummary, outDir: string | undefined): void {
  if (values.json) process.stdout.write(safeJson(summary, 0) + '\n');
  else {
    process.stdout.write(readableSummary(summary) + '\n');
    if (outDir !== undefined) process.stdout.write(`wrote         ${outDir}/summary.json, attenuation.csv, signals.wav, ${REPORT_FILE}\n`);
  }
}

function parseArgsOrThrow(argv: string[]) {
  return parseCommandArgs(argv, { out: { type: 'string' }, json: { type: 'boolean' } } as const, SIMULATE_USAGE, true);
}
