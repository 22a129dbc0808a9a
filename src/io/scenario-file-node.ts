/**
 * Load a scenario file for the CLI: read and parse the JSON, validate it, decode the WAV sources it
 * names (paths relative to the scenario file), read the path model `controller.modelFile` names (unless
 * told to skip it) and hash the file for the reproducibility stamp.
 */
import { createHash } from 'node:crypto';
import { resolve } from 'node:path';
import { parseScenario, type Scenario } from '../plant/scenario.ts';
import { baseDirOf, InputError, readBytes } from './files-node.ts';
import { WavError } from './wav.ts';
import { openWavFile } from './wav-file-node.ts';
import { modelDelayWarning, parsePathModel, PathModelError } from './path-model-file.ts';

/** Largest scenario file read (a 2^20-tap FIR written out is about 25 MB). */
export const MAX_SCENARIO_BYTES = 64 * 1024 * 1024;
/** Largest model file read (a 65536-tap model is about 1.5 MB). */
export const MAX_MODEL_FILE_BYTES = 16 * 1024 * 1024;
/** Most samples a WAV source may hold (it is kept in memory as 32-bit floats: 256 MiB). */
export const MAX_WAV_SOURCE_SAMPLES = 2 ** 26;
import { imperfectModel } from '../plant/secondary-model.ts';

export interface LoadedScenario {
  path: string;
  scenario: Scenario;
  wavs: Map<string, Float32Array>;
  /** SHA-256 of the file's bytes, hex. */
  sha256: string;
  /** The controller's model when `controller.modelFile` names one (imperfections applied on top). */
  secondaryPathModel?: Float32Array;
  /** The feedback-path model a string `controller.feedbackNeutralisation` names. */
  feedbackPathModel?: Float32Array;
  /** With `skipModelFile`: the `controller.modelFile` the file names, left out of `scenario` and not read. */
  skippedModelFile?: string;
  /** Remarks about the inputs that do not stop the run (also printed as notes), keyed by topic. */
  warnings?: { key: string; text: string }[];
}

export interface LoadScenarioOptions {
  /**
   * Parse the scenario without its `controller.modelFile` (a string) and do not read that file: for
   * `ancbench identify`, which is what writes it, so it may not exist yet. Default false.
   */
  skipModelFile?: boolean;
  /** Change the parsed JSON before it is validated (a sweep's settings). */
  edit?: (json: unknown) => unknown;
}

/** The parsed JSON with a string `controller.modelFile` taken out, and that name; anything else unchanged. */
function withoutModelFile(json: unknown): { json: unknown; modelFile?: string } {
  const controller = (json as { controller?: Record<string, unknown> } | null)?.controller;
  if (!controller || typeof controller !== 'object' || typeof controller.modelFile !== 'string') return { json };
  const { modelFile, ...rest } = controller;
  return { json: { ...(json as object), controller: rest }, modelFile };
}

export function loadScenarioFile(path: string, options: LoadScenarioOptions = {}): LoadedScenario {
  const bytes = readBytes(path, 'scenario file', MAX_SCENARIO_BYTES);
  let json: unknown;
  try {
    json = JSON.parse(new TextDecoder().decode(bytes));
  } catch (e) {
    throw new InputError(`scenario file "${path}" is not valid JSON: ${(e as Error).message}`);
  }
  if (options.edit) json = options.edit(json);
  let skippedModelFile: string | undefined;
  if (options.skipModelFile) ({ json, modelFile: skippedModelFile } = withoutModelFile(json));
  const scenario = parseScenario(json);
  const base = baseDirOf(path);
  const wavs = new Map<string, Float32Array>();
  const problems: string[] = [];
  scenario.sources.forEach((s, i) => {
    if (s.kind !== 'wav') return;
    const file = resolve(base, s.file);
    try {
      // Only the channel used is decoded, read piece by piece; its length is capped since it is kept in memory.
      const w = openWavFile(file, `sources[${i}].file`, `sources[${i}].file "${s.file}"`);
      try {
        if (w.sampleRate !== scenario.sampleRate) {
          problems.push(`sources[${i}].file: "${s.file}" has a sample rate of ${w.sampleRate} Hz but the scenario runs at ${scenario.sampleRate} Hz; resample the file or change sampleRate`);
          return;
        }
        const ch = s.channel ?? 0;
        if (ch >= w.channelCount) {
          problems.push(`sources[${i}].channel: "${s.file}" has ${w.channelCount} channel(s), counted from 0; got ${ch}`);
          return;
        }
        const limit = `the ${MAX_WAV_SOURCE_SAMPLES} a source may hold (${(MAX_WAV_SOURCE_SAMPLES / w.sampleRate / 60).toFixed(0)} min at ${w.sampleRate} Hz); cut it, and use "loop" if the run is longer`;
        wavs.set(s.file, w.loadChannel(ch, MAX_WAV_SOURCE_SAMPLES, limit));
      } finally {
        w.close();
      }
    } catch (e) {
      if (e instanceof WavError || e instanceof InputError) problems.push(e.message);
      else throw e;
    }
  });
  let secondaryPathModel: Float32Array | undefined;
  const warnings: { key: string; text: string }[] = [];
  const modelFile = scenario.controller.modelFile;
  if (modelFile) {
    const file = resolve(base, modelFile);
    try {
      const text = new TextDecoder().decode(readBytes(file, 'controller.modelFile', MAX_MODEL_FILE_BYTES));
      const model = parsePathModel(text, { expectedSampleRate: scenario.sampleRate });
      const warning = modelDelayWarning(model, scenario.blockSize, `controller.modelFile "${modelFile}"`);
      if (warning) warnings.push({ key: 'modelDelay', text: warning });
      secondaryPathModel = imperfectModel(model.taps, scenario.controller);
    } catch (e) {
      if (e instanceof PathModelError) problems.push(`controller.modelFile "${modelFile}": ${e.message}`);
      else if (e instanceof InputError) problems.push(e.message);
      else throw e;
    }
  }
  // controller.feedbackNeutralisation may name a feedback-path model file (ancbench identify --feedback-out)
  let feedbackPathModel: Float32Array | undefined;
  const fbn = scenario.controller.algorithm === 'tonal' ? undefined : scenario.controller.feedbackNeutralisation;
  if (typeof fbn === 'string') {
    try {
      const text = new TextDecoder().decode(readBytes(resolve(base, fbn), 'controller.feedbackNeutralisation'));
      feedbackPathModel = Float32Array.from(parsePathModel(text, { expectedSampleRate: scenario.sampleRate }).taps);
    } catch (e) {
      if (e instanceof PathModelError) problems.push(`controller.feedbackNeutralisation "${fbn}": ${e.message}`);
      else if (e instanceof InputError) problems.push(e.message);
      else throw e;
    }
  }
  if (problems.length) throw new InputError(`invalid scenario "${path}":\n  ${problems.join('\n  ')}`);
  const sha256 = createHash('sha256').update(bytes).digest('hex');
  return {
    path,
    scenario,
    wavs,
    sha256,
    ...(secondaryPathModel ? { secondaryPathModel } : {}),
    ...(feedbackPathModel ? { feedbackPathModel } : {}),
    ...(skippedModelFile !== undefined ? { skippedModelFile } : {}),
    ...(warnings.length ? { warnings } : {}),
  };
}
