/**
 * `ancbench analyze --ref ref.wav --err err.wav [--control-on err-on.wav] [--model model.json] [--json] [--out DIR]`:
 * from recordings, how much could a feedforward controller remove (coherence bound), can it act in time
 * (causality against the model's delay), and how much did it remove (band attenuation with control on).
 */
import { analyzeRecordings, MIN_ANALYSIS_SAMPLES, type RecordingAnalysis } from '../analysis/recording-analysis.ts';
import type { BandFraction } from '../analysis/bands.ts';
import type { FrequencyWeighting } from '../analysis/weighting.ts';
import { InputError, OutputFolder, readBytes } from '../io/files-node.ts';
import { modelDelayWarning, parsePathModel, PathModelError, type PathModel } from '../io/path-model-file.ts';
import { analysisReportHtml, REPORT_FILE } from '../io/report-html-node.ts';
import { openWavFile, type WavFile } from '../io/wav-file-node.ts';
import type { SampleSource } from '../analysis/welch.ts';
import { fmtNum, safeJson, toolVersion, UsageError, numberFlag, outFlag, parseCommandArgs } from './common.ts';
import { progressBar } from './progress.ts';

/** Largest model file read (a 65536-tap model is about 1.5 MB of JSON). */
const MAX_MODEL_BYTES = 16 * 1024 * 1024;

/** Samples: a model's stated delay may differ from its taps' onset by this much before a warning (one 128-sample block). */
const MODEL_DELAY_TOLERANCE = 128;

export const ANALYZE_USAGE = `usage: ancbench analyze --ref ref.wav --err err.wav [--control-on err-on.wav] [--model model.json]
                        [--json] [--out DIR] [--ref-channel N] [--err-channel N] [--control-on-channel N]

Analyses recordings of the reference and error microphones made together with control off (and
optionally the error microphone with control on): one-third-octave band levels and attenuation,
the coherence bound (the most any feedforward controller can remove), and whether broadband noise
can be cancelled in time (reference → error delay by GCC-PHAT against the model's bulk delay).

WAV files: 8/16/24/32-bit integer PCM or 32/64-bit float (plain RIFF, WAVE_FORMAT_EXTENSIBLE too),
1000 to 768000 Hz (the same for every file), up to 4 GiB each. Files are read piece by piece, so
memory does not grow with their length; the delay is estimated from the middle 2^20 samples.
A multichannel file needs its channel flag, counted from 0; the simulator's signals.wav holds
reference 0, error with control on 1, controller output 2, error with control off 3,
reference with control off 4 (use it as --ref when the scenario has a feedback path).

  --ref FILE               reference microphone, control off
  --err FILE               error microphone, control off, recorded together with --ref
  --control-on FILE        error microphone with control on (optional)
  --model FILE             secondary-path model (JSON, from ancbench identify); a model of another
                           sample rate is resampled, and the output says so
  --ref-channel N          channel of --ref (default 0 for a mono file)
  --err-channel N          channel of --err (default 0 for a mono file)
  --control-on-channel N   channel of --control-on (default 0 for a mono file)
  --weighting W            A, C or Z (none; the default): weighting of levels and of the overall bound
  --bands B                third (one-third octave, the default) or octave
  --from S                 compare control off and on from S seconds on (e.g. after convergence;
                           default 0); the coherence and delay always use the whole recordings
  --json                   print one JSON object on stdout instead of the readable summary
  --out DIR                also write DIR/analysis.json, DIR/bands.csv and DIR/report.html
  -h, --help               this text

Example with the simulator's output:
  ancbench analyze --ref out/signals.wav --ref-channel 0 --err out/signals.wav --err-channel 3 \\
                   --control-on out/signals.wav --control-on-channel 1`;

/** The simulator's signals.wav layout, named in messages about multichannel files. */
const SIMULATOR_LAYOUT = 'the simulator\'s signals.wav holds reference 0, error with control on 1, controller output 2, error with control off 3, reference with control off 4';

export interface AnalyzeInputs {
  reference: { file: string; channel: number };
  errorOff: { file: string; channel: number };
  errorOn: { file: string; channel: number } | null;
  model: string | null;
}

export interface AnalyzeSummary {
  inputs: AnalyzeInputs;
  sampleRate: number;
  durationS: number;
  weighting: FrequencyWeighting;
  /** Off and on levels compare the recordings from this time on (s). */
  comparisonFromS: number;
  bandFraction: 'one-third-octave' | 'octave';
  /** Overall coherence bound (dB) over bandRangeHz. */
  coherenceBoundDb: number;
  bandRangeHz: [number, number];
  causality: RecordingAnalysis['causality'];
  overall: RecordingAnalysis['overall'];
  bands: RecordingAnalysis['bands'];
  model: { delayMs: number; taps: number; sampleRate: number; method: string; resampledFromHz: number | null } | null;
  resolution: RecordingAnalysis['resolution'];
  notes: Record<string, string>;
  tool: { name: 'ancbench'; version: string; command: 'analyze' };
}

function parseArgsOrThrow(argv: string[]) {
  return parseCommandArgs(argv, {
    ref: { type: 'string' },
    err: { type: 'string' },
    'control-on': { type: 'string' },
    model: { type: 'string' },
    json: { type: 'boolean' },
    out: { type: 'string' },
    'ref-channel': { type: 'string' },
    'err-channel': { type: 'string' },
    'control-on-channel': { type: 'string' },
    weighting: { type: 'string' },
    bands: { type: 'string' },
    from: { type: 'string' },
  } as const, ANALYZE_USAGE, false);
}

/** Opens each file once, however many roles it plays; files are read on demand and closed by `close()`. */
export class WavCache {
  private readonly files = new Map<string, WavFile>();
  get(path: string, flag: string): WavFile {
    let w = this.files.get(path);
    if (!w) {
      w = openWavFile(path, `--${flag} file`);
      this.files.set(path, w);
    }
    return w;
  }
  close(): void {
    for (const w of this.files.values()) w.close();
    this.files.clear();
  }
}

/** One channel of a file, by the rule: the flag's channel, or 0 for a mono file; a multichannel file needs the flag. */
export function pick(cache: WavCache, flag: string, file: string, channelText: string | undefined): { wav: WavFile; channel: number; samples: SampleSource } {
  const wav = cache.get(file, flag);
  const count = wav.channelCount;
  let channel: number;
  if (channelText === undefined) {
    if (count > 1) {
      throw new UsageError(`--${flag} "${file}" has ${count} channels: choose one with --${flag}-channel N (counted from 0)${count === 4 || count === 5 ? `; ${SIMULATOR_LAYOUT}` : ''}`);
    }
    channel = 0;
  } else {
    channel = numberFlag(`${flag}-channel`, channelText, 0, 255, true)!;
    if (channel >= count) {
      throw new UsageError(`--${flag}-channel must be from 0 to ${count - 1} ("${file}" has ${count} channel${count > 1 ? 's' : ''}, counted from 0), got ${channel}`);
    }
  }
  return { wav, channel, samples: wav.channelSource(channel) };
}

function loadModel(path: string, sampleRate: number): { model: PathModel; note: string | null; warning: string | null } {
  const text = new TextDecoder().decode(readBytes(path, '--model file', MAX_MODEL_BYTES));
  try {
    const model = parsePathModel(text, { expectedSampleRate: sampleRate, resample: true });
    const note = model.resampledFromHz !== undefined && model.sampleRate === sampleRate && model.resampledFromHz !== sampleRate
      ? `the model was measured at ${model.resampledFromHz} Hz and resampled to the recordings' ${sampleRate} Hz`
      : null;
    if (model.taps.every((t) => t === 0)) throw new InputError(`--model "${path}": all taps are zero: the model describes no path`);
    const warning = modelDelayWarning(model, MODEL_DELAY_TOLERANCE, `--model "${path}"`);
    if (warning) process.stderr.write(`ancbench analyze: warning: ${warning}\n`);
    return { model, note, warning };
  } catch (e) {
    if (e instanceof PathModelError) throw new InputError(`--model "${path}": ${e.message}`);
    throw e;
  }
}

export async function analyzeCommand(argv: string[]): Promise<number> {
  const { values } = parseArgsOrThrow(argv);
  if (values.help) {
    process.stdout.write(ANALYZE_USAGE + '\n');
    return 0;
  }
  if (!values.ref || !values.err) {
    const missing = [values.ref ? null : '--ref', values.err ? null : '--err'].filter(Boolean).join(' and ');
    throw new UsageError(`analyze needs ${missing}\n\n${ANALYZE_USAGE}`);
  }
  const weighting = (values.weighting ?? 'Z').toUpperCase();
  if (weighting !== 'A' && weighting !== 'C' && weighting !== 'Z') throw new UsageError(`--weighting must be A, C or Z, got "${values.weighting}"`);
  const bandsFlag = values.bands ?? 'third';
  if (bandsFlag !== 'third' && bandsFlag !== 'octave') throw new UsageError(`--bands must be "third" or "octave", got "${bandsFlag}"`);
  const fraction: BandFraction = bandsFlag === 'octave' ? 1 : 3;
  const fromS = numberFlag('from', values.from, 0, 86400);
  if (values['control-on-channel'] !== undefined && !values['control-on']) throw new UsageError('--control-on-channel needs --control-on');
  const outDir = outFlag('out', values.out);
  // Checked before the work: an unwritable place is said now, not after the analysis.
  const out = outDir !== undefined ? OutputFolder.prepare(outDir, ['analysis.json', 'bands.csv', REPORT_FILE]) : null;
  const cache = new WavCache();
  try {
    return analyzeWith(values, cache, out, fromS, weighting, fraction);
  } finally {
    cache.close();
    out?.abort();
  }
}

type AnalyzeValues = ReturnType<typeof parseArgsOrThrow>['values'];

function analyzeWith(values: AnalyzeValues, cache: WavCache, out: OutputFolder | null, fromS: number | undefined, weighting: 'A' | 'C' | 'Z', fraction: BandFraction): number {
  if (!values.ref || !values.err) throw new UsageError('analyze needs --ref and --err');
  const ref = pick(cache, 'ref', values.ref, values['ref-channel']);
  const err = pick(cache, 'err', values.err, values['err-channel']);
  const on = values['control-on'] ? pick(cache, 'control-on', values['control-on'], values['control-on-channel']) : null;
  if (values.ref === values.err && ref.channel === err.channel) {
    throw new UsageError(`--ref and --err name the same channel (${ref.channel}) of "${values.ref}": give the error microphone's channel with --err-channel`);
  }
  if (on && values['control-on'] === values.err && on.channel === err.channel) {
    throw new UsageError(`--err and --control-on name the same channel (${err.channel}) of "${values.err}": control off and on must be different recordings`);
  }
  const rates = [['--ref', values.ref, ref.wav.sampleRate], ['--err', values.err, err.wav.sampleRate], ...(on ? [['--control-on', values['control-on']!, on.wav.sampleRate]] : [])] as [string, string, number][];
  if (new Set(rates.map((r) => r[2])).size > 1) {
    throw new InputError(`the recordings have different sample rates (${rates.map(([f, p, r]) => `${f} "${p}" ${r} Hz`).join(', ')}); resample them to one rate first`);
  }
  const fs = ref.wav.sampleRate;
  for (const [flag, file, x] of [['--ref', values.ref, ref], ['--err', values.err, err], ...(on ? [['--control-on', values['control-on']!, on]] : [])] as [string, string, typeof ref][]) {
    if (x.samples.length < MIN_ANALYSIS_SAMPLES) {
      throw new InputError(`${flag} "${file}" holds ${x.samples.length} sample${x.samples.length === 1 ? '' : 's'} per channel (${(x.samples.length / fs).toFixed(3)} s); analyze needs at least ${MIN_ANALYSIS_SAMPLES}`);
    }
  }
  if (fromS !== undefined) {
    const shortest = Math.min(err.samples.length, on ? on.samples.length : Infinity);
    if (shortest - Math.round(fromS * fs) < MIN_ANALYSIS_SAMPLES) {
      throw new UsageError(`--from ${fromS} s leaves less than ${MIN_ANALYSIS_SAMPLES} samples of the error recording${on ? 's' : ''} (${(shortest / fs).toFixed(2)} s long)`);
    }
  }
  const notes: Record<string, string> = {};
  let model: PathModel | null = null;
  if (values.model) {
    const loaded = loadModel(values.model, fs);
    model = loaded.model;
    if (loaded.note) notes.model = loaded.note;
    if (loaded.warning) notes.modelDelay = loaded.warning;
  }

  let analysis: RecordingAnalysis;
  // Reads are counted to drive the progress bar: the analysis reads the recordings about six times over.
  const total = 6 * (ref.samples.length + err.samples.length + (on ? on.samples.length : 0));
  const bar = progressBar('analysing');
  let done = 0;
  const counted = (src: SampleSource): SampleSource => ({
    length: src.length,
    read(start, buf) {
      src.read(start, buf);
      done += buf.length;
      bar.update(Math.min(0.99, done / total));
    },
  });
  try {
    analysis = analyzeRecordings(
      { sampleRate: fs, reference: counted(ref.samples), errorOff: counted(err.samples), errorOn: on ? counted(on.samples) : undefined, model: model ? { taps: model.taps, delayMs: model.delayMs } : undefined },
      { weighting, fraction, ...(fromS !== undefined ? { comparisonStartS: fromS } : {}) },
    );
  } catch (e) {
    // Recordings the analysis cannot use (too short, no band below fs/2): an input problem, said plainly.
    if (e instanceof RangeError) throw new InputError(`cannot analyse these recordings: ${e.message}`);
    throw e;
  } finally {
    bar.stop();
  }
  const inputs: AnalyzeInputs = {
    reference: { file: values.ref, channel: ref.channel },
    errorOff: { file: values.err, channel: err.channel },
    errorOn: on ? { file: values['control-on']!, channel: on.channel } : null,
    model: values.model ?? null,
  };
  const summary: AnalyzeSummary = {
    inputs,
    sampleRate: fs,
    durationS: analysis.durationS,
    weighting: analysis.weighting,
    comparisonFromS: fromS ?? 0,
    bandFraction: fraction === 1 ? 'octave' : 'one-third-octave',
    coherenceBoundDb: analysis.coherenceBoundDb,
    bandRangeHz: analysis.bandRangeHz,
    causality: analysis.causality,
    overall: analysis.overall,
    bands: analysis.bands,
    model: model
      ? { delayMs: model.delayMs, taps: model.taps.length, sampleRate: model.sampleRate, method: model.method, resampledFromHz: model.resampledFromHz ?? null }
      : null,
    resolution: analysis.resolution,
    notes: { ...notes, ...analysis.notes },
    tool: { name: 'ancbench', version: toolVersion(), command: 'analyze' },
  };
  if (out) {
    const channelOf = (x: { file: string; channel: number }) => `${x.file}, channel ${x.channel}`;
    const html = analysisReportHtml(analysis, {
      inputs: [
        ['reference (control off)', channelOf(inputs.reference)],
        ['error (control off)', channelOf(inputs.errorOff)],
        ...(inputs.errorOn ? ([['error (control on)', channelOf(inputs.errorOn)]] as [string, string][]) : []),
        ...(inputs.model ? ([['model', `${inputs.model} (${model!.taps.length} taps, bulk delay ${model!.delayMs.toFixed(2)} ms)`]] as [string, string][]) : []),
      ],
      footer: `ancbench ${summary.tool.version} analyze`,
    });
    out.write('analysis.json', safeJson(summary) + '\n');
    out.write('bands.csv', bandsCsv(analysis));
    out.write(REPORT_FILE, html);
    out.commit();
  }
  if (values.json) process.stdout.write(safeJson(summary, 0) + '\n');
  else {
    process.stdout.write(readableAnalysis(summary) + '\n');
    if (values.out) process.stdout.write(`wrote         ${values.out}/analysis.json, bands.csv, ${REPORT_FILE}\n`);
  }
  return 0;
}

/** The bands as CSV: levels in dBFS (empty for silence), attenuation and bound in dB. */
export function bandsCsv(a: RecordingAnalysis): string {
  const f = (v: number | undefined): string => (v !== undefined && Number.isFinite(v) ? v.toFixed(2) : '');
  const rows = ['nominal_hz,center_hz,low_hz,high_hz,off_dbfs,on_dbfs,attenuation_db,bound_db'];
  for (const b of a.bands) rows.push(`${b.nominalHz},${b.centerHz.toFixed(3)},${b.lowHz.toFixed(3)},${b.highHz.toFixed(3)},${f(b.offDb)},${f(b.onDb)},${f(b.attenuationDb)},${f(b.boundDb)}`);
  return rows.join('\n') + '\n';
}

const cell = (v: number | undefined, width: number): string => (v !== undefined && Number.isFinite(v) ? fmtNum(v, 1) : '—').padStart(width);
const ms = (v: number): string => `${fmtNum(v, 2)} ms`;

export function readableAnalysis(s: AnalyzeSummary): string {
  const c = s.causality;
  const where = (x: { file: string; channel: number }) => `${x.file} [${x.channel}]`;
  const weighting = s.weighting === 'Z' ? 'unweighted' : `${s.weighting}-weighted`;
  const lines = [
    `reference     ${where(s.inputs.reference)}`,
    `error off     ${where(s.inputs.errorOff)}`,
    ...(s.inputs.errorOn ? [`error on      ${where(s.inputs.errorOn)}`] : []),
    `recordings    ${s.sampleRate} Hz, ${s.durationS.toFixed(2)} s`,
    `delay         reference → error ${c.primaryDelayMs === null ? 'not found' : ms(c.primaryDelayMs)} (GCC-PHAT, control off)`,
    `model         ${s.model ? `bulk delay ${ms(s.model.delayMs)}, ${s.model.taps} taps (${s.inputs.model})` : 'none (give --model for the causality check)'}`,
    `causality     ${c.verdict}${c.marginMs === null ? '' : ` (margin ${ms(c.marginMs)})`}: ${c.sentence}`,
    `coherence     bound ${Number.isFinite(s.coherenceBoundDb) ? `${fmtNum(s.coherenceBoundDb, 1)} dB` : 'n/a'} over ${s.bandRangeHz[0].toFixed(0)}–${s.bandRangeHz[1].toFixed(0)} Hz (${weighting})`,
    `level         ${cell(s.overall.offDb, 0).trim()} dBFS off${s.overall.onDb !== undefined ? ` → ${cell(s.overall.onDb, 0).trim()} dBFS on: ${cell(s.overall.attenuationDb, 0).trim()} dB attenuation` : ''} (${weighting})`,
    '',
    `${s.bandFraction === 'octave' ? 'octave' : '1/3 octave'}    off dBFS${s.inputs.errorOn ? '   on dBFS  atten dB' : ''}  bound dB`,
  ];
  for (const b of s.bands) {
    const label = b.nominalHz >= 1000 ? `${+(b.nominalHz / 1000).toPrecision(3)} kHz` : `${b.nominalHz} Hz`;
    lines.push(`  ${label.padEnd(10)} ${cell(b.offDb, 9)}${s.inputs.errorOn ? `${cell(b.onDb, 10)}${cell(b.attenuationDb, 10)}` : ''}${cell(b.boundDb, 10)}`);
  }
  const notes = Object.entries(s.notes);
  if (notes.length) lines.push('');
  for (const [k, v] of notes) lines.push(`note          ${k}: ${v}`);
  return lines.join('\n');
}
