/**
 * `ancbench identify <scenario.json> [--method noise|sweep] [--out model.json] [--json]`: measure the secondary
 * path of the scenario's simulated plant as one would on a real one (controller idle, probe through the output
 * ceiling, sensor noise at the microphone), print the quality of the estimate and optionally save it as a
 * path-model file that `controller.modelFile` can name.
 */
import { basename } from 'node:path';
import { SingleOutputFile } from '../io/files-node.ts';
import { createPathModel, serializePathModel } from '../io/path-model-file.ts';
import { loadScenarioFile } from '../io/scenario-file-node.ts';
import { identifySimulated, type IdentifySimResult } from '../plant/identify-sim.ts';
import { fmtDb, fmtNum, outFlag, safeJson, stamp, UsageError, type Stamp, numberFlag, parseCommandArgs } from './common.ts';
import { progressBar } from './progress.ts';

export const IDENTIFY_USAGE = `usage: ancbench identify <scenario.json> [--method noise|sweep] [--out model.json] [--json]

Identifies the secondary path (loudspeaker drive → error microphone, I/O latency included) of the
scenario's simulated plant: the controller is idle, the probe is played through the output ceiling,
the microphone adds the scenario's sensor noise. Prints the bulk delay, the measurement SNR and,
since the true path is known here, the normalised misalignment over the excited band.

  --method M          noise (NLMS with a noise probe, the default) or sweep (exponential sine sweep)
  --out FILE          save the estimate as a path-model file (JSON, format "ancbench-path-model" v1)
  --json              print one JSON object on stdout instead of the readable summary
  --level DBFS        probe level, AES17 dBFS (noise: RMS; sweep: as a sine), −120 to 0 (default −20)
  --duration S        probe duration in seconds (default: noise max(3, 60·taps/fs), sweep long
                      enough for the 2nd harmonic to clear the model)
  --taps N            model length (default: controller.modelTaps, else the true path's length
                      to within 10⁻⁶ of its energy, rounded up to 32)
  --color C           noise probe colour: white (default) or pink
  --step-size MU      NLMS normalised step size in (0, 2) (default 0.1)
  --with-disturbance  keep the scenario's noise sources running while measuring
  --feedback-out FILE save the loudspeaker → reference-mic path (measured in the same run when
                      the plant has one) as a path-model file for controller.feedbackNeutralisation
  -h, --help          this text`;

/** The printed result: the identification's figures (without the taps), plus where they came from. */
export type IdentifySummary = Omit<IdentifySimResult, 'taps' | 'truePath' | 'delaySamples' | 'ceilingClippedSamples' | 'micClippedSamples' | 'feedback'> & {
  /** The feedback path measured in the same run (taps left out), or null. */
  feedback: Omit<NonNullable<IdentifySimResult['feedback']>, 'taps'> & { modelTaps: number } | null;
  scenario: string;
  name: string | null;
  modelTaps: number;
  withDisturbance: boolean;
  clipping: { ceilingSamples: number; micSamples: number };
  /** The model file written, if any. */
  model: string | null;
  stamp: Stamp;
};

function parseArgsOrThrow(argv: string[]) {
  return parseCommandArgs(argv, {
    method: { type: 'string' },
    out: { type: 'string' },
    json: { type: 'boolean' },
    level: { type: 'string' },
    duration: { type: 'string' },
    taps: { type: 'string' },
    color: { type: 'string' },
    'step-size': { type: 'string' },
    'with-disturbance': { type: 'boolean' },
    'feedback-out': { type: 'string' },
  } as const, IDENTIFY_USAGE, true);
}


export async function identifyCommand(argv: string[]): Promise<number> {
  const { values, positionals } = parseArgsOrThrow(argv);
  if (values.help) {
    process.stdout.write(IDENTIFY_USAGE + '\n');
    return 0;
  }
  if (positionals.length !== 1) throw new UsageError(`identify takes exactly one scenario file, got ${positionals.length}\n\n${IDENTIFY_USAGE}`);
  const method = values.method ?? 'noise';
  if (method !== 'noise' && method !== 'sweep') throw new UsageError(`--method must be "noise" or "sweep", got "${method}"`);
  const color = values.color ?? 'white';
  if (color !== 'white' && color !== 'pink') throw new UsageError(`--color must be "white" or "pink", got "${color}"`);
  if (values.color !== undefined && method === 'sweep') throw new UsageError('--color applies to the noise probe only, not to --method sweep');
  if (values['step-size'] !== undefined && method === 'sweep') throw new UsageError('--step-size applies to the noise probe only, not to --method sweep');
  const levelDbfs = numberFlag('level', values.level, -120, 0);
  const durationS = numberFlag('duration', values.duration, 0.01, 3600);
  const taps = numberFlag('taps', values.taps, 1, 65536, true);
  const stepSize = numberFlag('step-size', values['step-size'], 1e-6, 1.999);
  const out = outFlag('out', values.out);

  const path = positionals[0]!;
  const withDisturbance = Boolean(values['with-disturbance']);
  // controller.modelFile is not read: identify is what writes it, so it may not exist yet.
  const loaded = loadScenarioFile(path, { skipModelFile: true });
  const sc = loaded.scenario;
  // Checked before the measurement: an unwritable place is said now, not after the run.
  const target = out !== undefined ? SingleOutputFile.prepare(out) : null;
  try {
    return identifyWith(values, path, loaded, sc, method, color, withDisturbance, target, { levelDbfs, durationS, taps, stepSize });
  } finally {
    target?.abort();
  }
}

type IdentifyValues = ReturnType<typeof parseArgsOrThrow>['values'];

function identifyWith(
  values: IdentifyValues,
  path: string,
  loaded: ReturnType<typeof loadScenarioFile>,
  sc: ReturnType<typeof loadScenarioFile>['scenario'],
  method: 'noise' | 'sweep',
  color: 'white' | 'pink',
  withDisturbance: boolean,
  target: SingleOutputFile | null,
  flags: { levelDbfs: number | undefined; durationS: number | undefined; taps: number | undefined; stepSize: number | undefined },
): number {
  const { levelDbfs, durationS, taps, stepSize } = flags;
  const out = values.out;
  const bar = progressBar(`identifying (${method})`);
  let r: IdentifySimResult;
  try {
    r = identifySimulated(sc, {
      method,
      withDisturbance,
      wavs: loaded.wavs,
      ...(levelDbfs !== undefined ? { levelDbfs } : {}),
      ...(durationS !== undefined ? { durationS } : {}),
      ...(taps !== undefined ? { modelTaps: taps } : {}),
      ...(method === 'noise' ? { color } : {}),
      ...(stepSize !== undefined ? { stepSize } : {}),
      ...(sc.loudspeaker ? { loudspeaker: sc.loudspeaker } : {}),
      onProgress: (f) => bar.update(f),
    });
  } catch (e) {
    // Probe settings the flags passed but the probe refuses (e.g. a sweep too short for its band).
    if (e instanceof RangeError) throw new UsageError(e.message);
    throw e;
  } finally {
    bar.stop();
  }
  const notes: Record<string, string> = { ...r.notes };
  if (loaded.skippedModelFile) notes.modelFile = `controller.modelFile "${loaded.skippedModelFile}" was not read: identify measures the true path`;
  if (r.ceilingClippedSamples > 0) notes.ceiling = `${r.ceilingClippedSamples} probe samples were clipped by the output ceiling: lower --level`;
  if (r.micClippedSamples > 0) notes.micClipping = `${r.micClippedSamples} microphone samples clipped at full scale: lower --level`;
  const { taps: _taps, truePath: _truth, delaySamples: _d, ceilingClippedSamples, micClippedSamples, feedback, ...figures } = r;
  const fbOut = values['feedback-out'];
  if (fbOut !== undefined && !feedback) throw new UsageError('--feedback-out: the scenario has no paths.feedback (no loudspeaker → reference-mic path to measure)');
  if (feedback && feedback.relativeLevelDb !== null && feedback.relativeLevelDb > -6) {
    notes.feedback = `the loudspeaker reaches the reference mic ${feedback.relativeLevelDb.toFixed(1)} dB relative to the error mic: set controller.feedbackNeutralisation`;
  }
  const summary: IdentifySummary = {
    scenario: path,
    name: sc.name ?? null,
    ...figures,
    feedback: feedback ? (({ taps: t, ...f }) => ({ ...f, modelTaps: t.length }))(feedback) : null,
    modelTaps: r.taps.length,
    withDisturbance,
    clipping: { ceilingSamples: ceilingClippedSamples, micSamples: micClippedSamples },
    model: out ?? null,
    notes,
    stamp: stamp('identify', sc.seed, loaded.sha256),
  };
  if (out !== undefined) {
    const model = createPathModel({
      taps: r.taps,
      sampleRate: r.sampleRate,
      method: r.method,
      quality: { snrDb: r.snrDb, ...(r.misalignmentDb !== null ? { misalignmentDb: r.misalignmentDb } : {}), bandHz: r.bandHz },
      probe: r.method === 'noise' ? { levelDbfs: r.probe.levelDbfs, durationS: r.probe.durationS, color: r.probe.color ?? 'white' } : { levelDbfs: r.probe.levelDbfs, durationS: r.probe.durationS },
      notes: `identified by ancbench ${summary.stamp.version} on the simulated plant of "${basename(path)}"${withDisturbance ? ' with its noise sources running' : ''}`,
    });
    target!.commit(serializePathModel(model));
  }
  if (fbOut !== undefined && feedback) {
    const fbModel = createPathModel({
      taps: feedback.taps,
      sampleRate: r.sampleRate,
      method: r.method,
      quality: { snrDb: null, ...(feedback.misalignmentTimeDb !== null ? { misalignmentDb: feedback.misalignmentTimeDb } : {}), bandHz: [0, r.sampleRate / 2] },
      probe: r.method === 'noise' ? { levelDbfs: r.probe.levelDbfs, durationS: r.probe.durationS, color: r.probe.color ?? 'white' } : { levelDbfs: r.probe.levelDbfs, durationS: r.probe.durationS },
      notes: `loudspeaker → reference-mic path identified by ancbench ${summary.stamp.version} on the simulated plant of "${basename(path)}" (NLMS on the probe)`,
    });
    SingleOutputFile.prepare(fbOut).commit(serializePathModel(fbModel));
  }
  if (values.json) process.stdout.write(safeJson(summary, 0) + '\n');
  else process.stdout.write(readableIdentify(summary) + '\n');
  return 0;
}

const ORDINAL: Record<number, string> = { 2: '2nd', 3: '3rd' };

export function readableIdentify(s: IdentifySummary): string {
  const probe =
    s.method === 'noise'
      ? `noise probe (${s.probe.color}, ${fmtNum(s.probe.levelDbfs, Number.isInteger(s.probe.levelDbfs) ? 0 : 1)} dBFS RMS, ${s.probe.durationS.toFixed(2)} s), NLMS`
      : `exponential sweep (${s.sweep!.startHz.toFixed(0)}–${s.sweep!.endHz.toFixed(0)} Hz, ${fmtNum(s.probe.levelDbfs, Number.isInteger(s.probe.levelDbfs) ? 0 : 1)} dBFS, ${s.probe.durationS.toFixed(2)} s)`;
  const lines = [
    `scenario      ${s.scenario}${s.name ? `  (${s.name})` : ''}`,
    `method        ${probe}, ${s.modelTaps} taps at ${s.sampleRate} Hz${s.withDisturbance ? ', noise sources running' : ''}`,
    `bulk delay    ${fmtNum(s.delayMs, 2)} ms  (true path ${s.trueDelayMs === null ? 'silent' : `${fmtNum(s.trueDelayMs, 2)} ms`}; first tap within 20 dB of the peak)`,
    `SNR           ${fmtDb(s.snrDb)}  (measurement)`,
    `misalignment  ${fmtDb(s.misalignmentDb)} over ${s.bandHz[0].toFixed(0)}–${s.bandHz[1].toFixed(0)} Hz  (${fmtDb(s.misalignmentTimeDb)} over the whole band)`,
  ];
  if (s.feedback) {
    const f = s.feedback;
    lines.push(`feedback path ${f.modelTaps} taps, delay ${f.delayMs === null ? '—' : `${f.delayMs.toFixed(2)} ms`}, ${fmtDb(f.relativeLevelDb)} relative to the secondary path, misalignment ${fmtDb(f.misalignmentTimeDb)}  (loudspeaker → reference mic, same probe)`);
  }
  if (s.harmonics.length) {
    lines.push(`harmonics     ${s.harmonics.map((h) => `${ORDINAL[h.order] ?? `${h.order}th`} ${fmtDb(h.levelDb)}`).join(', ')}  (energy relative to the linear response)`);
  }
  for (const [k, v] of Object.entries(s.notes)) lines.push(`note          ${k}: ${v}`);
  if (s.model) lines.push(`wrote         ${s.model}`);
  return lines.join('\n');
}
