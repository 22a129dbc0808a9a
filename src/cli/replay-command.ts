/**
 * `ancbench replay <recording.zip|dir>` and `ancbench replay --ref FILE --err FILE --model model.json
 * --controller controller.json`: run the engine on recorded control-off signals with other settings
 * (src/plant/replay.ts) and print the same summary as `simulate`.
 */
import { readAll } from '../analysis/welch.ts';
import { createHash } from 'node:crypto';
import { readdirSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { InputError, readBytes, readJson, writeOutputs } from '../io/files-node.ts';
import { encodeWavFloat32 } from '../io/wav.ts';
import { parsePathModel, PathModelError, createPathModel, type PathModel } from '../io/path-model-file.ts';
import {
  BUNDLE_PARTS, BundleError, bundleFiles, controlOffSignals, parseRecordingBundle, unzipBundle, STATE_CODE,
  RECORDING_FORMAT, RECORDING_VERSION, type RecordingBundle, type RecordingManifest,
} from '../io/recording-bundle.ts';
import { REPORT_FILE, simulationReportFiles, simulationReportHtml } from '../io/report-html-node.ts';
import { DEFAULT_CEILING_DBFS } from '../engine/engine.ts';
import { outputStageSchema, parseReplaySettings, replay, ReplayError, settingsIssues, type ReplayInput, type ReplaySettings } from '../plant/replay.ts';
import { controllerSchema } from '../plant/scenario.ts';
import type { SimulationResult } from '../plant/simulate.ts';
import { attenuationCsv, readableSummary, summarize, type SimulateSummary } from './simulate-command.ts';
import { numberFlag, parseCommandArgs, safeJson, stamp, toolVersion, UsageError } from './common.ts';
import { pick, WavCache } from './analyze-command.ts';
import { progressBar } from './progress.ts';

export const REPLAY_USAGE = `usage: ancbench replay <recording.zip|recording-folder> [options]
       ancbench replay --ref FILE --err FILE --model model.json --controller controller.json [options]

Runs the engine on recorded control-off signals (the reference x and the error d) with the error the
controller would have met synthesised as e = d + s*y, s the model (or --true-path), y the engine's
output after the output stage, and prints the same summary as simulate. A recording bundle brings its
own settings, model and control-off stretch; the flags below override them.

Assumptions: no acoustic feedback from the loudspeaker into the reference; the recorded control-off
noise is the noise the controller would have met; the loop is linear. The model is the path from the
output stage to the error mic (as ancbench identify measures it); the controller's copy gets the
output stage's high-pass and limiter look-ahead added, as in the simulator.

  --ref FILE            reference microphone, control off (WAV)
  --err FILE            error microphone, control off, recorded together with --ref (WAV)
  --ref-channel N       channel of --ref (default 0 for a mono file)
  --err-channel N       channel of --err (default 0 for a mono file)
  --model FILE          secondary-path model (ancbench-path-model JSON); resampled if its rate differs
  --controller FILE     a scenario "controller" object (JSON); model-imperfection fields apply to the
                        controller's copy of the model
  --output-stage FILE   {limiter, outputCeilingDbfs, highPassHz, rampMs} as in a scenario (JSON);
                        without it: a recording's settings, else no high-pass and a -6 dBFS ceiling
  --true-path FILE      another model file that synthesises the error (model mismatch)
  --block-size N        block size (power of two, 32 … 4096; default the recording's, else 128)
  --json                print one JSON object on stdout instead of the readable summary
  --out DIR             also write DIR/summary.json, attenuation.csv, signals.wav (float32; 0 reference,
                        1 error with control on, 2 controller output, 3 error with control off,
                        4 reference) and DIR/report.html
  --bundle DIR          also write a recording bundle folder: the input with control off, then the
                        replay with control on (open it in the panel, sweep it, replay it)
  -h, --help            this text`;

function parseArgsOrThrow(argv: string[]) {
  return parseCommandArgs(argv, {
    ref: { type: 'string' },
    err: { type: 'string' },
    'ref-channel': { type: 'string' },
    'err-channel': { type: 'string' },
    model: { type: 'string' },
    controller: { type: 'string' },
    'output-stage': { type: 'string' },
    'true-path': { type: 'string' },
    'block-size': { type: 'string' },
    json: { type: 'boolean' },
    out: { type: 'string' },
    bundle: { type: 'string' },
  } as const, REPLAY_USAGE, true);
}

/** Read a recording bundle from a .zip or a folder; every part checked before anything is used. */
export function loadBundle(path: string): { bundle: RecordingBundle; sha256: string } {
  let files: Map<string, Uint8Array>;
  const hash = createHash('sha256');
  let isDir = false;
  try {
    isDir = statSync(path).isDirectory();
  } catch {
    isDir = false; // readBytes below says what is wrong
  }
  try {
    if (isDir) {
      files = new Map();
      const present = new Set(readdirSync(path));
      for (const p of BUNDLE_PARTS) {
        if (!present.has(p)) continue;
        const b = readBytes(join(path, p), `recording bundle part ${p}`);
        files.set(p, b);
        hash.update(b);
      }
    } else {
      const zip = readBytes(path, 'recording bundle');
      hash.update(zip);
      files = unzipBundle(zip);
    }
    return { bundle: parseRecordingBundle(files), sha256: hash.digest('hex') };
  } catch (e) {
    if (e instanceof BundleError) throw new InputError(`recording bundle "${path}": ${e.message}`);
    throw e;
  }
}

export function loadModelFile(path: string, flag: string, sampleRate: number): PathModel {
  try {
    return parsePathModel(new TextDecoder().decode(readBytes(path, `${flag} file`)), { expectedSampleRate: sampleRate, resample: true });
  } catch (e) {
    if (e instanceof PathModelError) throw new InputError(`${flag} "${path}": ${e.problems.join('; ')}`);
    throw e;
  }
}

/** A JSON settings file checked against a schema derived from the settings tables. */
function settingsFile(path: string, flag: string, check: (v: unknown) => string[]): unknown {
  const v = readJson(path, `${flag} file`);
  const problems = check(v);
  if (problems.length) throw new InputError(`${flag} "${path}": ${problems.join('; ')}`);
  return v;
}

/** Everything a replay needs, loaded and checked, plus what the summary says about where it came from. */
export interface ReplaySource {
  input: ReplayInput;
  label: string;
  name: string | null;
  sha256: string;
  /** The recording bundle, when the input was one. */
  bundle: RecordingBundle | null;
  inputs: Record<string, unknown>;
}

export interface ReplaySourceArgs {
  recording?: string | undefined;
  ref?: string | undefined;
  err?: string | undefined;
  refChannel?: string | undefined;
  errChannel?: string | undefined;
  model?: string | undefined;
  controller?: string | undefined;
  outputStage?: string | undefined;
  truePath?: string | undefined;
  blockSize?: string | undefined;
}

/** Load the inputs of a replay from the command line's flags (used by replay and by sweep's workers). */
export function loadReplaySource(a: ReplaySourceArgs): ReplaySource {
  const blockSize = numberFlag('block-size', a.blockSize, 32, 4096, true);
  if (blockSize !== undefined && (blockSize & (blockSize - 1)) !== 0) throw new UsageError(`--block-size must be a power of two from 32 to 4096, got "${a.blockSize}"`);
  const hash = createHash('sha256');
  let bundle: RecordingBundle | null = null;
  let reference: Float32Array, disturbance: Float32Array, sampleRate: number;
  let settings: Partial<ReplaySettings> = {};
  let model: PathModel | null = null;
  const inputs: Record<string, unknown> = {};
  if (a.recording) {
    if (a.ref || a.err || a.refChannel !== undefined || a.errChannel !== undefined) throw new UsageError('give a recording bundle or --ref/--err, not both');
    const loaded = loadBundle(a.recording);
    bundle = loaded.bundle;
    hash.update(loaded.sha256);
    const off = controlOffSignals(bundle);
    reference = off.reference;
    disturbance = off.error;
    sampleRate = bundle.manifest.sampleRate;
    settings = bundle.manifest.settings;
    model = bundle.model;
    Object.assign(inputs, { recording: a.recording, controlOffRangeS: off.range });
  } else {
    if (!a.ref || !a.err || !a.model || !a.controller) {
      const missing = ([['--ref', a.ref], ['--err', a.err], ['--model', a.model], ['--controller', a.controller]] as const).filter(([, v]) => !v).map(([f]) => f);
      throw new UsageError(`replay needs a recording bundle, or ${missing.join(', ')}\n\n${REPLAY_USAGE}`);
    }
    const cache = new WavCache();
    const ref = pick(cache, 'ref', a.ref, a.refChannel);
    const err = pick(cache, 'err', a.err, a.errChannel);
    if (a.ref === a.err && ref.channel === err.channel) throw new UsageError(`--ref and --err name the same channel (${ref.channel}) of "${a.ref}": give the error microphone's channel with --err-channel`);
    if (ref.wav.sampleRate !== err.wav.sampleRate) throw new InputError(`--ref "${a.ref}" is at ${ref.wav.sampleRate} Hz and --err "${a.err}" at ${err.wav.sampleRate} Hz; resample them to one rate first`);
    if (ref.samples.length !== err.samples.length) throw new InputError(`--ref holds ${ref.samples.length} samples and --err ${err.samples.length}: they must be recorded together (same length)`);
    // replay runs on whole signals (the control-off stretch); the files are read once, then closed
    reference = Float32Array.from(readAll(ref.samples));
    disturbance = Float32Array.from(readAll(err.samples));
    sampleRate = ref.wav.sampleRate;
    cache.close();
    hash.update(new Uint8Array(reference.buffer, reference.byteOffset, reference.byteLength));
    hash.update(new Uint8Array(disturbance.buffer, disturbance.byteOffset, disturbance.byteLength));
    Object.assign(inputs, { reference: { file: a.ref, channel: ref.channel }, errorOff: { file: a.err, channel: err.channel } });
  }
  if (a.model) {
    model = loadModelFile(a.model, '--model', sampleRate);
    inputs.model = a.model;
  }
  hash.update(safeJson(model!.taps, 0));
  if (a.controller) {
    settings = { ...settings, controller: settingsFile(a.controller, '--controller', (v) => settingsIssues(controllerSchema, v, 'controller')) as ReplaySettings['controller'] };
    inputs.controller = a.controller;
  }
  if (a.outputStage) {
    const { controller } = settings;
    settings = { ...(settingsFile(a.outputStage, '--output-stage', (v) => settingsIssues(outputStageSchema, v)) as object), ...(controller ? { controller } : {}) };
    inputs.outputStage = a.outputStage;
  }
  let checked: ReplaySettings;
  try {
    checked = parseReplaySettings(settings);
  } catch (e) {
    if (e instanceof ReplayError) throw new InputError(`replay settings: ${e.message}`);
    throw e;
  }
  hash.update(safeJson(checked, 0));
  let truePath: number[] | undefined;
  if (a.truePath) {
    truePath = loadModelFile(a.truePath, '--true-path', sampleRate).taps;
    hash.update(safeJson(truePath, 0));
    inputs.truePath = a.truePath;
  }
  const input: ReplayInput = {
    sampleRate,
    blockSize: blockSize ?? bundle?.manifest.blockSize ?? 128,
    reference,
    disturbance,
    model: model!.taps,
    ...(truePath ? { truePath } : {}),
    settings: checked,
  };
  return { input, label: a.recording ?? `${a.err}`, name: bundle?.manifest.name ?? null, sha256: hash.digest('hex'), bundle, inputs };
}

/** Run a loaded replay, turning a refused input into an InputError. */
export function runReplay(src: ReplaySource, opts: Parameters<typeof replay>[1] = {}): SimulationResult {
  try {
    return replay(src.input, opts);
  } catch (e) {
    if (e instanceof ReplayError) throw new InputError(`cannot replay: ${e.message}`);
    if (e instanceof RangeError) throw new InputError(`replay settings: ${e.message}`);
    throw e;
  }
}

export interface ReplaySummary extends SimulateSummary {
  inputs: Record<string, unknown>;
}

export function replaySummary(src: ReplaySource, r: SimulationResult): ReplaySummary {
  const s = src.input.settings;
  const ceiling = s.limiter?.ceilingDbfs ?? s.outputCeilingDbfs ?? DEFAULT_CEILING_DBFS;
  const base = summarize(src.label, r, stamp('replay', 0, src.sha256), src.name ?? undefined, ceiling);
  return { ...base, notes: { ...base.notes, stamp: 'replay has no random seed (seed 0); scenarioSha256 is the SHA-256 of the inputs, model and settings' }, inputs: src.inputs };
}

/** The bundle of a replay: the input with control off, then the replay with control on. */
export function replayBundleFiles(src: ReplaySource, r: SimulationResult, summary: ReplaySummary, model: PathModel): Map<string, Uint8Array> {
  const sig = r.signals!;
  const n = sig.reference.length;
  const cat = (a: Float32Array, b: Float32Array): Float32Array => {
    const o = new Float32Array(a.length + b.length);
    o.set(a);
    o.set(b, a.length);
    return o;
  };
  const state = new Float32Array(2 * n);
  state.fill(STATE_CODE.on, n);
  const fs = r.sampleRate;
  const manifest: RecordingManifest = {
    format: RECORDING_FORMAT,
    version: RECORDING_VERSION,
    name: `replay of ${src.label}`.slice(0, 200),
    source: 'replay',
    sampleRate: fs,
    blockSize: src.input.blockSize,
    channels: ['reference', 'error', 'output', 'state'],
    devices: {},
    startedAt: new Date().toISOString(),
    settings: src.input.settings,
    ranges: { controlOff: [[0, n / fs]], controlOn: [[n / fs, (2 * n) / fs]] },
    tool: { name: 'ancbench', version: toolVersion() },
  };
  return bundleFiles({
    manifest,
    signals: { reference: cat(sig.referenceOff, sig.reference), error: cat(sig.errorOff, sig.errorOn), output: cat(new Float32Array(n), sig.output), state },
    model,
    events: r.events.map((e) => ({ ...e, timeS: e.timeS + n / fs })),
    reportHtml: simulationReportHtml(summary, r, { trueSecondaryPath: r.trueSecondaryPath }),
  });
}

export async function replayCommand(argv: string[]): Promise<number> {
  const { values, positionals } = parseArgsOrThrow(argv);
  if (values.help) {
    process.stdout.write(REPLAY_USAGE + '\n');
    return 0;
  }
  if (positionals.length > 1) throw new UsageError(`replay takes at most one recording bundle, got ${positionals.length}\n\n${REPLAY_USAGE}`);
  const src = loadReplaySource({
    recording: positionals[0],
    ref: values.ref, err: values.err, refChannel: values['ref-channel'], errChannel: values['err-channel'],
    model: values.model, controller: values.controller, outputStage: values['output-stage'], truePath: values['true-path'], blockSize: values['block-size'],
  });
  const bar = progressBar('replaying');
  let r: SimulationResult;
  try {
    r = runReplay(src, { record: Boolean(values.out || values.bundle), onProgress: (f) => bar.update(f) });
  } finally {
    bar.stop();
  }
  const summary = replaySummary(src, r);
  if (values.out) {
    const sig = r.signals!;
    writeOutputs(values.out, [
      { name: 'summary.json', data: safeJson(summary) + '\n' },
      { name: 'attenuation.csv', data: attenuationCsv(r) },
      { name: 'signals.wav', data: encodeWavFloat32([sig.reference, sig.errorOn, sig.output, sig.errorOff, sig.referenceOff], r.sampleRate) },
      ...simulationReportFiles(summary, r, { trueSecondaryPath: r.trueSecondaryPath }),
    ]);
  }
  if (values.bundle) {
    const model = src.bundle?.model ?? createPathModel({ taps: src.input.model, sampleRate: r.sampleRate, method: 'imported', quality: { snrDb: null }, notes: `from ${values.model}` });
    const files = replayBundleFiles(src, r, summary, model);
    writeOutputs(values.bundle, [...files].map(([name, data]) => ({ name, data })));
  }
  if (values.json) process.stdout.write(safeJson(summary, 0) + '\n');
  else {
    process.stdout.write(readableSummary(summary).replace(/^scenario {6}/, 'recording     ') + '\n');
    if (values.out) process.stdout.write(`wrote         ${values.out}/summary.json, attenuation.csv, signals.wav, ${REPORT_FILE}\n`);
    if (values.bundle) process.stdout.write(`wrote         ${values.bundle}/${BUNDLE_PARTS.join(', ')}\n`);
  }
  return 0;
}
