/**
 * The closed-loop simulator: sources → paths → microphones → engine → loudspeaker → paths, block by
 * block and sample-accurate. The secondary and feedback paths are at least one block long (the
 * scenario validator enforces it), so each block's microphone signals depend only on outputs of
 * earlier blocks and the block loop is exact.
 *
 * One pass computes both runs of the same seed: control off (error = disturbance + sensor noise) and
 * control on. Microphones clip at ±1 (full scale), as a converter would.
 */
import { Engine, DEFAULT_CEILING_DBFS } from '../engine/engine.ts';
import type { ControllerConfig } from '../engine/controller-factory.ts';
import { Random } from '../dsp/random.ts';
import { convergenceMetrics, type ConvergenceResult } from '../analysis/convergence.ts';
import { wienerBound } from '../analysis/wiener.ts';
import { fftConvolve } from '../analysis/fft.ts';
import { amplitudeToDb, powerToDbfs } from '../dsp/units.ts';
import { denseResponse } from './fractional-delay.ts';
import { PathFilter } from './path-filter.ts';
import { pathResponse, type Scenario } from './scenario.ts';
import { createSource, type WavTable } from './sources.ts';
import { imperfectModel } from './secondary-model.ts';

export interface SimulateOptions {
  /** Decoded WAV sources (mono, at the scenario's sample rate), keyed by the scenario's `file`. */
  wavs?: WavTable;
  /** A secondary-path model to use instead of the one built from the true path (e.g. a model file). */
  secondaryPathModel?: Float32Array;
  /** Keep the four signals (reference, error on, output, error off) for writing. Default false. */
  record?: boolean;
  /** Called now and then with the fraction done (0 … 1). */
  onProgress?: (fraction: number) => void;
  /** Seconds of the control-off run used for the Wiener bound (default 30). */
  wienerMaxS?: number;
}

export interface SimulationSignals {
  reference: Float32Array;
  errorOn: Float32Array;
  output: Float32Array;
  errorOff: Float32Array;
}

export interface SimulationResult {
  sampleRate: number;
  durationS: number;
  controlStartS: number;
  algorithm: string;
  /** Steady-state attenuation at the error mic, dB (null with a note when undefined). */
  attenuationDb: number | null;
  convergenceS: number | null;
  wienerBoundDb: number | null;
  /** False when the scenario is not stationary (drifting tones): the figure is then not a bound. */
  wienerBoundIsBound: boolean;
  peakOutputDbfs: number | null;
  diverged: boolean;
  divergenceReasons: string[];
  /** AES17 RMS levels of the error mic over the steady-state window, control off and on. */
  errorOffDbfs: number | null;
  errorOnDbfs: number | null;
  clipping: { referenceSamples: number; errorSamples: number };
  /** Reasons for null figures and other remarks, keyed by field. */
  notes: Record<string, string>;
  /** The model the controller used. */
  secondaryPathModel: Float32Array;
  timeline: { timeS: Float64Array; attenuationDb: Float64Array; offDbfs: Float64Array; onDbfs: Float64Array };
  signals?: SimulationSignals;
}

export const HOP_S = 0.01;

function dense(r: { offset: number; taps: Float64Array }): { offset: number; taps: Float64Array } {
  return r.taps.length ? r : { offset: 0, taps: new Float64Array(1) };
}

/** The controller part of a scenario as the engine wants it. */
export function engineControllerConfig(sc: Scenario): ControllerConfig {
  const c = sc.controller;
  return {
    algorithm: c.algorithm,
    taps: c.taps,
    stepSize: c.stepSize,
    ...(c.leakage !== undefined ? { leakage: c.leakage } : {}),
    ...(c.regularization !== undefined ? { regularization: c.regularization } : {}),
    ...(c.update !== undefined ? { update: c.update } : {}),
  };
}

/** The true secondary path as a dense impulse response (bulk delay included). */
export function trueSecondaryPath(sc: Scenario): Float64Array {
  const r = pathResponse(sc.paths.secondary, sc.sampleRate);
  return denseResponse(r);
}

export function simulate(sc: Scenario, opts: SimulateOptions = {}): SimulationResult {
  const fs = sc.sampleRate;
  const B = sc.blockSize;
  const total = Math.max(1, Math.round(sc.durationS * fs));
  const wavs = opts.wavs ?? new Map();
  const sources = sc.sources.map((s, i) => createSource(s, i, fs, sc.seed, wavs));
  const notes: Record<string, string> = {};

  const refR = dense(pathResponse(sc.paths.reference, fs));
  const priR = dense(pathResponse(sc.paths.primary, fs));
  const secR = dense(pathResponse(sc.paths.secondary, fs));
  const fbR = sc.paths.feedback ? dense(pathResponse(sc.paths.feedback, fs)) : null;
  const refF = new PathFilter(refR.offset, refR.taps, B);
  const priF = new PathFilter(priR.offset, priR.taps, B);
  const secF = new PathFilter(secR.offset, secR.taps, B);
  const fbF = fbR ? new PathFilter(fbR.offset, fbR.taps, B) : null;

  const trueSec = trueSecondaryPath(sc);
  const model = opts.secondaryPathModel ?? imperfectModel(trueSec, sc.controller);
  const controlStartS = sc.controlStartS ?? 0;
  const controlStartSample = Math.round(controlStartS * fs);
  const engine = new Engine({
    sampleRate: fs,
    maxBlockSize: B,
    controller: engineControllerConfig(sc),
    secondaryPathModel: model,
    ceilingDbfs: sc.outputCeilingDbfs ?? DEFAULT_CEILING_DBFS,
    startMode: controlStartSample === 0 ? 'control' : 'idle',
  });

  const sn = sc.sensorNoiseRms;
  const refNoiseRms = typeof sn === 'number' ? sn : (sn?.reference ?? 0);
  const errNoiseRms = typeof sn === 'number' ? sn : (sn?.error ?? 0);
  const refNoise = new Random((sc.seed ^ 0x52454631) >>> 0);
  const errNoise = new Random((sc.seed ^ 0x45525231) >>> 0);

  const src = new Float64Array(B);
  const refAc = new Float64Array(B);
  const dAc = new Float64Array(B);
  const loopAc = new Float64Array(B);
  const ref = new Float32Array(B);
  const errOn = new Float32Array(B);
  const errOff = new Float32Array(B);
  const out = new Float32Array(B);

  const hop = Math.max(1, Math.round(HOP_S * fs));
  const nh = Math.ceil(total / hop);
  const hopOff = new Float64Array(nh);
  const hopOn = new Float64Array(nh);
  const hopCount = new Float64Array(nh);

  const wienerN = Math.min(total, Math.round((opts.wienerMaxS ?? 30) * fs));
  const wRef = new Float32Array(wienerN);
  const wErr = new Float32Array(wienerN);

  const rec: SimulationSignals | undefined = opts.record
    ? { reference: new Float32Array(total), errorOn: new Float32Array(total), output: new Float32Array(total), errorOff: new Float32Array(total) }
    : undefined;

  let clipRef = 0, clipErr = 0, nonFinite = 0, peakOut = 0;
  let lastProgress = -1;
  for (let t = 0; t < total; t += B) {
    const n = Math.min(B, total - t);
    if (t <= controlStartSample && controlStartSample < t + n && controlStartSample > 0) engine.setMode('control');
    src.fill(0);
    for (const s of sources) s.addTo(src, n);
    refF.push(src, n);
    refF.render(t, refAc, n);
    priF.push(src, n);
    priF.render(t, dAc, n);
    if (fbF) fbF.render(t, loopAc, n);
    for (let i = 0; i < n; i++) {
      const r0 = refAc[i]! + refNoiseRms * refNoise.gaussian();
      let r = fbF ? r0 + loopAc[i]! : r0;
      if (r > 1) { r = 1; clipRef++; } else if (r < -1) { r = -1; clipRef++; }
      ref[i] = r;
      if (t + i < wienerN) wRef[t + i] = r0;
    }
    secF.render(t, loopAc, n);
    for (let i = 0; i < n; i++) {
      const d = dAc[i]! + errNoiseRms * errNoise.gaussian();
      const off = d > 1 ? 1 : d < -1 ? -1 : d;
      let on = d + loopAc[i]!;
      if (on > 1) { on = 1; clipErr++; } else if (on < -1) { on = -1; clipErr++; } else if (on !== on) nonFinite++;
      errOff[i] = off;
      errOn[i] = on;
      if (t + i < wienerN) wErr[t + i] = off;
    }
    engine.process(ref, errOn, out, n);
    secF.push(out, n);
    if (fbF) fbF.push(out, n);
    for (let i = 0; i < n; i++) {
      const ti = t + i;
      const h = (ti / hop) | 0;
      const eo = errOff[i]!, en = errOn[i]!;
      hopOff[h] = hopOff[h]! + eo * eo;
      hopOn[h] = hopOn[h]! + en * en;
      hopCount[h] = hopCount[h]! + 1;
      const a = Math.abs(out[i]!);
      if (a > peakOut) peakOut = a;
      if (rec) {
        rec.reference[ti] = ref[i]!;
        rec.errorOn[ti] = en;
        rec.output[ti] = out[i]!;
        rec.errorOff[ti] = eo;
      }
    }
    if (opts.onProgress) {
      const p = Math.floor((100 * (t + n)) / total);
      if (p !== lastProgress) {
        lastProgress = p;
        opts.onProgress((t + n) / total);
      }
    }
  }

  const conv: ConvergenceResult = convergenceMetrics({ hop, sampleRate: fs, off: hopOff, on: hopOn, counts: hopCount }, { controlStartS });
  const divergenceReasons: string[] = [];
  if (conv.diverged) divergenceReasons.push(`error power rose more than 10 dB above control off in a 100 ms window at ${conv.divergedAtS!.toFixed(2)} s`);
  if (nonFinite > 0 || engine.meters.nonFiniteOut > 0) divergenceReasons.push(`non-finite values: ${nonFinite} error samples, ${engine.meters.nonFiniteOut} output samples`);

  let attenuationDb: number | null = conv.attenuationDb;
  if (!Number.isFinite(attenuationDb)) {
    notes.attenuationDb = conv.offPower === 0 ? 'the error signal is silent with control off' : 'the error signal is silent with control on (no sensor noise?)';
    attenuationDb = null;
  }
  const stationary = sc.sources.every((s) => !(('driftHzPerS' in s) && s.driftHzPerS)) && sc.sources.every((s) => s.kind !== 'wav');
  let wienerBoundDb: number | null = null;
  const L = sc.controller.taps;
  if (L > 16384) {
    notes.wienerBoundDb = `not computed for more than 16384 taps (got ${L})`;
  } else {
    const filtered = fftConvolve(wRef, trueSec).subarray(0, wienerN);
    const wb = wienerBound(wErr, filtered, L);
    if (!wb) notes.wienerBoundDb = 'the correlation matrix of the filtered reference is singular, or the run is shorter than 2 × taps';
    else if (!Number.isFinite(wb.attenuationDb)) notes.wienerBoundDb = 'unbounded: the disturbance is perfectly predictable (add sensor noise for a finite bound)';
    else wienerBoundDb = wb.attenuationDb;
  }
  if (!stationary) notes.wienerBound = 'the scenario is not stationary (drifting tone or recorded source): the Wiener figure is the best fixed filter over the run, not a bound on an adaptive one';
  if (clipRef || clipErr) notes.clipping = `microphone signals clipped at full scale: ${clipRef} reference and ${clipErr} error samples`;
  let peakOutputDbfs: number | null = amplitudeToDb(peakOut);
  if (!Number.isFinite(peakOutputDbfs)) {
    peakOutputDbfs = null;
    notes.peakOutputDbfs = 'the controller produced no output';
  }
  const lvl = (p: number): number | null => (p > 0 && Number.isFinite(p) ? powerToDbfs(p) : null);
  const toDbfs = (a: Float64Array): Float64Array => a.map((p) => powerToDbfs(p));
  return {
    sampleRate: fs,
    durationS: total / fs,
    controlStartS,
    algorithm: sc.controller.algorithm,
    attenuationDb,
    convergenceS: conv.convergenceS,
    wienerBoundDb,
    wienerBoundIsBound: stationary,
    peakOutputDbfs,
    diverged: divergenceReasons.length > 0,
    divergenceReasons,
    errorOffDbfs: lvl(conv.offPower),
    errorOnDbfs: lvl(conv.onPower),
    clipping: { referenceSamples: clipRef, errorSamples: clipErr },
    notes,
    secondaryPathModel: model,
    timeline: { timeS: conv.timeS, attenuationDb: conv.attenuationOverTimeDb, offDbfs: toDbfs(conv.offPowerOverTime), onDbfs: toDbfs(conv.onPowerOverTime) },
    ...(rec ? { signals: rec } : {}),
  };
}
