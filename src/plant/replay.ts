/**
 * Replay ("what if"): run the engine on a recorded control-off reference x and error d, with the
 * error the controller would have met synthesised as
 *
 *   e = d + s * y
 *
 * where y is the engine's output (after the output stage) and s a path from the output to the error
 * microphone (the model, or another "true" path to study model mismatch). Assumptions, stated in the
 * README: no acoustic feedback from the loudspeaker into the reference; the recorded control-off noise
 * is the noise the controller would have met; the loop is linear (no loudspeaker distortion).
 *
 * The loop mirrors `PlantLoop.step` (src/plant/simulate.ts): the path's contribution to a block is
 * rendered from earlier outputs first (s starts at least one block late), the error clips at ±1 as a
 * converter would, the guard's baseline is the 1 s average of the control-off error, and the metrics are
 * the simulator's, so a replay of a simulated run's control-off signals through its true path gives the
 * simulation's figures.
 *
 * Settings use the scenario's vocabulary: `controller` is a scenario controller object (its simulator-only
 * model-imperfection fields apply to the controller's copy of the model), `limiter`, `highPassHz` and
 * `rampMs` come from the output-stage tables (src/engine/settings.ts). As in a scenario file, an absent
 * `highPassHz` means no high-pass.
 */
import { isAmplified, OutputLimitMeter } from './output-limit.ts';
import { z } from 'zod';
import { OUTPUT_STAGE_SETTINGS, LIMITER_SETTINGS, type SettingsObject } from '../engine/settings.ts';
import { Engine, DEFAULT_CEILING_DBFS, type EngineConfig } from '../engine/engine.ts';
import { drainEvents, type EngineEvent } from '../engine/events.ts';
import { convergenceMetrics } from '../analysis/convergence.ts';
import { wienerBound } from '../analysis/wiener.ts';
import { fftConvolve } from '../dsp/fft.ts';
import { amplitudeToDb, powerToDbfs } from '../dsp/units.ts';
import { describeImplementation } from '../engine/implementation.ts';
import { controllerSchema, schemaFromTable, type ControllerSpec } from './scenario.ts';
import { PathFilter } from './path-filter.ts';
import { imperfectModel } from './secondary-model.ts';
import { engineControllerConfig, outputStageDrive, wienerOutputPeak, HOP_S, type SimulationResult, type SimulationSignals } from './simulate.ts';

/** Controller and output-stage settings in the scenario's vocabulary. */
export interface ReplaySettings {
  controller: ControllerSpec;
  limiter?: SettingsObject<typeof LIMITER_SETTINGS>;
  /** Shorthand for limiter.ceilingDbfs, as in a scenario. */
  outputCeilingDbfs?: number;
  highPassHz?: number;
  rampMs?: number;
}

/**
 * The output stage alone (an `--output-stage` file): `limiter` from the limiter table, `highPassHz` and
 * `rampMs` from the output-stage table, and the scenario's shorthand `outputCeilingDbfs`.
 */
export const outputStageSchema = schemaFromTable({ ...OUTPUT_STAGE_SETTINGS, outputCeilingDbfs: LIMITER_SETTINGS.ceilingDbfs })
  .extend({ limiter: schemaFromTable(LIMITER_SETTINGS).optional() });

/** Controller and output stage together (what a recording's manifest and a replay sweep hold). */
export const replaySettingsSchema = outputStageSchema.extend({ controller: controllerSchema });

/** One line per problem, each naming the field path, the allowed values and what was found. */
export function settingsIssues(schema: z.ZodType, value: unknown, prefix = ''): string[] {
  const r = schema.safeParse(value, { reportInput: true });
  if (r.success) return [];
  return r.error.issues.map((iss) => {
    let where = prefix;
    for (const p of iss.path) where += typeof p === 'number' ? `[${p}]` : `${where ? '.' : ''}${String(p)}`;
    where ||= '(top level)';
    if (iss.code === 'unrecognized_keys') return `${where}: unknown field(s) ${iss.keys.map((k) => `"${k}"`).join(', ')}`;
    const input = 'input' in iss ? iss.input : undefined;
    const got = /\bgot\b/.test(iss.message) ? '' : `, got ${input === undefined ? 'nothing' : JSON.stringify(input)}`;
    return `${where}: ${iss.message}${got}`;
  });
}

export class ReplayError extends Error {
  constructor(readonly problems: string[]) {
    super(problems.join('; '));
    this.name = 'ReplayError';
  }
}

/** Validate settings (throws ReplayError naming every bad field). */
export function parseReplaySettings(value: unknown): ReplaySettings {
  const problems = settingsIssues(replaySettingsSchema, value);
  const v = value as ReplaySettings;
  if (!problems.length && v.limiter?.ceilingDbfs !== undefined && v.outputCeilingDbfs !== undefined && v.limiter.ceilingDbfs !== v.outputCeilingDbfs) {
    problems.push(`limiter.ceilingDbfs: ${v.limiter.ceilingDbfs} differs from outputCeilingDbfs ${v.outputCeilingDbfs}; give one of them`);
  }
  if (!problems.length && v.controller.modelFile !== undefined) problems.push('controller.modelFile: replay takes the model from the recording or --model, not from the controller settings');
  if (problems.length) throw new ReplayError(problems);
  return v;
}

export interface ReplayInput {
  sampleRate: number;
  blockSize: number;
  /** Reference microphone, control off. */
  reference: Float32Array;
  /** Error microphone, control off (the disturbance d), same length as the reference. */
  disturbance: Float32Array;
  /** The secondary-path model: output → error microphone, dense, bulk delay included. */
  model: ArrayLike<number>;
  /** The path that synthesises the error (default: the model). */
  truePath?: ArrayLike<number>;
  settings: ReplaySettings;
  /** Divergence-guard settings as in a scenario's `guard` (default: the engine's). */
  guard?: EngineConfig['guard'];
}

export interface ReplayOptions {
  record?: boolean;
  onProgress?: (fraction: number) => void;
  /** Seconds used for the Wiener figure (default 30). */
  wienerMaxS?: number;
}

/** Share of a path's energy that arrives sooner than `samples`. */
function earlyEnergyShare(path: ArrayLike<number>, samples: number): number {
  let early = 0, total = 0;
  for (let i = 0; i < path.length; i++) {
    const p = path[i]! * path[i]!;
    total += p;
    if (i < samples) early += p;
  }
  return total > 0 ? early / total : 0;
}

/** Largest share of a path's energy that may arrive within the first block (dropped, with a note). */
export const MAX_EARLY_ENERGY = 0.01;

/**
 * Run the replay. The path that closes the loop must start at least one block late (as the audio I/O
 * latency makes it in a live run): taps earlier than that (an identified model's noise floor) are
 * left out and reported in `notes`, and more than 1 % of the path's energy there is refused.
 */
export function replay(input: ReplayInput, opts: ReplayOptions = {}): SimulationResult {
  const { sampleRate: fs, blockSize: B, reference: x, disturbance: dist, settings } = input;
  if (x.length !== dist.length) throw new ReplayError([`the reference has ${x.length} samples and the error ${dist.length}: they must be recorded together`]);
  const total = x.length;
  if (total < B) throw new ReplayError([`the recordings hold ${total} samples, less than one block (${B})`]);
  const notes: Record<string, string> = {};
  const truth = Float64Array.from(input.truePath ?? input.model);
  const which = input.truePath ? 'the true path' : 'the model';
  const early = earlyEnergyShare(truth, B);
  if (early > MAX_EARLY_ENERGY) {
    throw new ReplayError([
      `${which} holds ${(100 * early).toFixed(1)} % of its energy in its first ${B} samples (one block), but the block loop needs the path to start at least one block late; replay with a smaller block size`,
    ]);
  }
  if (early > 0) notes.truePath = `the first ${B} taps of ${which} (one block, ${(100 * early).toPrecision(2)} % of its energy) arrive sooner than the block loop can render and were left out`;
  const plant = new PathFilter(B, truth.length > B ? truth.subarray(B) : new Float64Array(1), B);

  const hp = settings.highPassHz ?? 0;
  const limiterSettings = { ...(settings.limiter ?? {}), ceilingDbfs: settings.limiter?.ceilingDbfs ?? settings.outputCeilingDbfs ?? DEFAULT_CEILING_DBFS };
  // As in the simulator: the controller drives the output stage and then the path, so its model of the
  // path includes the high-pass and the limiter's response: look-ahead delay and true-peak filter
  // (built from the model, imperfections applied).
  const drive = outputStageDrive(limiterSettings, hp, fs, B);
  const withStage = drive(Float64Array.from(input.model));
  const model = imperfectModel(withStage, settings.controller);
  const truthDriven = input.truePath ? drive(truth) : withStage;
  const controller = engineControllerConfig({ controller: settings.controller } as Parameters<typeof engineControllerConfig>[0]);
  const engine = new Engine({
    sampleRate: fs,
    maxBlockSize: B,
    controller,
    secondaryPathModel: model,
    limiter: limiterSettings,
    highPassHz: hp,
    dcBlockerHz: 0,
    ...(settings.rampMs !== undefined ? { rampMs: settings.rampMs } : {}),
    startMode: 'control',
    ...(input.guard !== undefined ? { guard: input.guard } : {}),
  });

  const hop = Math.max(1, Math.round(HOP_S * fs));
  const nh = Math.ceil(total / hop);
  const hopOff = new Float64Array(nh), hopOn = new Float64Array(nh), hopCount = new Float64Array(nh);
  const rec: SimulationSignals | undefined = opts.record
    ? { reference: x, errorOn: new Float32Array(total), output: new Float32Array(total), errorOff: dist, referenceOff: x }
    : undefined;
  const ref = new Float32Array(B), errOn = new Float32Array(B), out = new Float32Array(B), loopAc = new Float64Array(B);
  const events: EngineEvent[] = [];
  let peakOut = 0, clipErr = 0, nonFinite = 0, baseline = 0, lastProgress = -1;
  const limitMeter = new OutputLimitMeter(limiterSettings.ceilingDbfs, Math.floor(total * 0.75));
  for (let t = 0; t < total; t += B) {
    const n = Math.min(B, total - t);
    plant.render(t, loopAc, n);
    let p = 0;
    for (let i = 0; i < n; i++) {
      ref[i] = x[t + i]!;
      const d = dist[t + i]!;
      p += d * d;
      let on = d + loopAc[i]!;
      if (on > 1) { on = 1; clipErr++; } else if (on < -1) { on = -1; clipErr++; } else if (on !== on) nonFinite++;
      errOn[i] = on;
    }
    const a = Math.min(Math.exp(-n / fs), t / (t + n));
    baseline = a * baseline + (1 - a) * (p / n);
    engine.setBaselineErrorPower(baseline);
    engine.process(ref, errOn, out, n);
    if (engine.currentMode === 'control') limitMeter.block(engine, out, n, t);
    plant.push(out, n);
    for (let i = 0; i < n; i++) {
      const h = ((t + i) / hop) | 0;
      const eo = dist[t + i]!, en = errOn[i]!;
      hopOff[h] = hopOff[h]! + eo * eo;
      hopOn[h] = hopOn[h]! + en * en;
      hopCount[h] = hopCount[h]! + 1;
      const m = Math.abs(out[i]!);
      if (m > peakOut) peakOut = m;
    }
    if (rec) {
      rec.errorOn.set(errOn.subarray(0, n), t);
      rec.output.set(out.subarray(0, n), t);
    }
    if (engine.events.size > engine.events.capacity / 2) events.push(...drainEvents(engine.events));
    if (opts.onProgress) {
      const pc = Math.floor((100 * (t + n)) / total);
      if (pc !== lastProgress) {
        lastProgress = pc;
        opts.onProgress((t + n) / total);
      }
    }
  }
  events.push(...drainEvents(engine.events));
  const conv = convergenceMetrics({ hop, sampleRate: fs, off: hopOff, on: hopOn, counts: hopCount });
  const reasons: string[] = [];
  const acted = events.filter((e) => e.cause === 'error-rise' || e.cause === 'weights-unbounded' || e.cause === 'output-at-ceiling' || (e.cause === 'non-finite' && e.values.source !== undefined && e.values.source >= 2));
  if (acted.length) reasons.push(`the guard acted: ${acted.slice(0, 5).map((e) => `${e.cause} at ${e.timeS.toFixed(2)} s (${e.action})`).join(', ')}${acted.length > 5 ? `, and ${acted.length - 5} more` : ''}`);
  if (conv.diverged) reasons.push(`error power rose more than 10 dB above control off in a 100 ms window at ${conv.divergedAtS!.toFixed(2)} s`);
  if (nonFinite > 0 || engine.meters.nonFiniteOut > 0) reasons.push(`non-finite values: ${nonFinite} error samples, ${engine.meters.nonFiniteOut} output samples`);

  let attenuationDb: number | null = conv.attenuationDb;
  if (!Number.isFinite(attenuationDb)) {
    notes.attenuationDb = conv.offPower === 0 ? 'the recorded error is silent' : 'the synthesised error is silent with control on';
    attenuationDb = null;
  }
  let wienerBoundDb: number | null = null;
  let requiredPeak: number | null = null;
  const c = settings.controller;
  if (c.algorithm === 'tonal') notes.wienerBoundDb = 'not computed for the narrowband controller';
  else if (c.taps > 16384) notes.wienerBoundDb = `not computed for more than 16384 taps (got ${c.taps})`;
  else {
    const wn = Math.min(total, Math.round((opts.wienerMaxS ?? 30) * fs));
    const wb = wienerBound(dist.subarray(0, wn), fftConvolve(x.subarray(0, wn), truthDriven).subarray(0, wn), c.taps);
    if (!wb) notes.wienerBoundDb = 'the correlation matrix of the filtered reference is singular, or the recording is shorter than 2 × taps';
    else if (!Number.isFinite(wb.attenuationDb)) notes.wienerBoundDb = 'unbounded: the recorded error is perfectly predictable from the reference';
    else wienerBoundDb = wb.attenuationDb;
    if (wb) requiredPeak = wienerOutputPeak(x.subarray(0, wn), wb.weights, Math.max(c.taps, truthDriven.length));
    else notes.requiredPeakDbfs = 'no Wiener solution (see wienerBoundDb)';
  }
  if (c.algorithm === 'tonal') notes.requiredPeakDbfs = 'not computed for the narrowband controller on a recording';
  notes.wienerBound = 'recorded noise: the Wiener figure is the best fixed filter over the recording, not a bound on an adaptive one';
  if (clipErr) notes.clipping = `the synthesised error clipped at full scale in ${clipErr} samples`;
  let peakOutputDbfs: number | null = amplitudeToDb(peakOut);
  if (!Number.isFinite(peakOutputDbfs)) {
    peakOutputDbfs = null;
    notes.peakOutputDbfs = 'the controller produced no output';
  }
  const lvl = (pw: number): number | null => (pw > 0 && Number.isFinite(pw) ? powerToDbfs(pw) : null);
  const toDbfs = (arr: Float64Array): Float64Array => arr.map((pw) => powerToDbfs(pw));
  return {
    sampleRate: fs,
    durationS: total / fs,
    controlStartS: 0,
    algorithm: c.algorithm,
    implementation: describeImplementation(engine.controller),
    attenuationDb,
    convergenceS: conv.convergenceS,
    wienerBoundDb,
    wienerBoundIsBound: false,
    peakOutputDbfs,
    diverged: reasons.length > 0,
    divergenceReasons: reasons,
    errorOffDbfs: lvl(conv.offPower),
    errorOnDbfs: lvl(conv.onPower),
    clipping: { referenceSamples: 0, errorSamples: clipErr },
    tones: [],
    outputLimit: limitMeter.summary(c, requiredPeak, wienerBoundDb, notes),
    amplified: isAmplified(attenuationDb, []),
    trackingErrorHz: null,
    events,
    notes,
    secondaryPathModel: model,
    trueSecondaryPath: truthDriven,
    timeline: { timeS: conv.timeS, attenuationDb: conv.attenuationOverTimeDb, offDbfs: toDbfs(conv.offPowerOverTime), onDbfs: toDbfs(conv.onPowerOverTime) },
    ...(rec ? { signals: rec } : {}),
  };
}
