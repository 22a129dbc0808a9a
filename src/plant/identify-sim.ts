/**
 * Secondary-path identification on a simulated plant, as a user would run it on a real one: the controller is
 * idle, a probe (NLMS noise probe, identify-lms.ts, or exponential sweep, sweep.ts and sweep-deconvolve.ts) is
 * played as the loudspeaker signal through the output ceiling, it reaches the error microphone through the
 * plant's true secondary path (I/O latency included), and the microphone adds the plant's sensor noise (and,
 * if asked, the running noise sources). Because the true path is known here, the estimate's normalised
 * misalignment can be reported beside its delay and measurement SNR.
 *
 * Signal chain per block (n samples, the scenario's block size):
 *
 *   probe → clip at ±ceiling → loudspeaker (optional polynomial nonlinearity) → true secondary path s
 *         → + disturbance and sensor noise (PlantLoop in idle mode, same seeds as the simulator) → clip at ±1 → mic
 *
 * Defaults (ours, stated in the README): probe level −20 dBFS (AES17: RMS for noise; for the sweep the level of
 * a sine, peak 10^(L/20)); model length the scenario's `controller.modelTaps`, else the true path's length up to
 * where all but 10⁻⁶ of its energy has arrived (a speaker high-pass gives it a long, faint tail), rounded up to
 * 32 taps; noise probe white, NLMS step 0.1, duration max(3 s, 60·L/fs) (white-probe NLMS loses
 * about 4.34·μ̃(2 − μ̃)/L dB of misalignment per sample, so 60·L samples reach below −40 dB when noise allows);
 * sweep 20 Hz to 0.49·fs (an estimate band-limited close to Nyquist rings little before its onset, which keeps
 * the onset rule's delay exact; 0.45·fs put it 2 samples early), duration max(2 s, 1.5·L·R/(fs·ln 2)) so that the
 * second harmonic's response, which arrives T·ln 2/R early (Farina, AES preprint 5093, 2000), clears the linear
 * response of L taps.
 *
 * Excited band (where misalignment is computed): noise, [20 Hz, 0.45·fs]; sweep, from the frequency it reaches
 * at twice its fade-in time to the one at its length minus twice its fade-out, so the tapered ends are left out.
 */
import { DEFAULT_CEILING_DBFS } from '../engine/engine.ts';
import { NoiseProbeIdentifier, type ProbeColor } from '../dsp/identify-lms.ts';
import { ExponentialSweep, type SweepOptions } from '../dsp/sweep.ts';
import { bandMisalignmentDb, misalignmentDb, onsetDelaySamples } from '../analysis/path-model.ts';
import { deconvolveSweep } from '../analysis/sweep-deconvolve.ts';
import { PolynomialNonlinearity, type PolynomialNonlinearityOptions } from './nonlinearity.ts';
import { PathFilter } from './path-filter.ts';
import { scenarioCeilingDbfs, type Scenario } from './scenario.ts';
import { PlantLoop } from './simulate.ts';
import type { WavTable } from './sources.ts';

export type IdentifyMethod = 'noise' | 'sweep';

export interface IdentifySimOptions {
  method: IdentifyMethod;
  /** Probe level in dBFS (AES17), −120 … 0 (default −20). */
  levelDbfs?: number;
  /** Probe duration in seconds (default: see the file comment). */
  durationS?: number;
  /** Model length in taps, 1 … 65536 (default: see the file comment). */
  modelTaps?: number;
  /** Noise probe colour (default white). */
  color?: ProbeColor;
  /** NLMS normalised step μ̃ in (0, 2) (default 0.1). */
  stepSize?: number;
  /** Sweep start and end (Hz; default 20 and 0.49·fs). */
  sweepStartHz?: number;
  sweepEndHz?: number;
  /** Highest harmonic order separated by the sweep (0 or 2 … 16; default 3). */
  maxHarmonic?: number;
  /** Keep the scenario's noise sources running during the measurement (default false: a quiet plant). */
  withDisturbance?: boolean;
  /** Loudspeaker nonlinearity y = x + a2·x² + a3·x³ (default none). */
  loudspeaker?: PolynomialNonlinearityOptions;
  /** Decoded WAV sources, needed only with withDisturbance. */
  wavs?: WavTable;
  /** Called now and then with the fraction done (0 … 1). */
  onProgress?: (fraction: number) => void;
}

export interface HarmonicLevel {
  order: number;
  /** Energy of the harmonic's response relative to the linear response (dB). */
  levelDb: number;
}

export interface IdentifySimResult {
  method: IdentifyMethod;
  sampleRate: number;
  /** The estimated FIR, bulk delay included. */
  taps: Float64Array;
  /** Bulk delay of the estimate by the onset rule (first tap within 20 dB of the peak), samples and ms. */
  delaySamples: number;
  delayMs: number;
  /** The same rule on the true path (null for a silent path). */
  trueDelayMs: number | null;
  /** Measurement SNR (dB): noise, modelled vs unexplained mic power over the last quarter; sweep, from the deconvolution tail. */
  snrDb: number | null;
  /** Normalised misalignment over bandHz (dB), and over the whole band in the time domain (null for a silent true path). */
  misalignmentDb: number | null;
  misalignmentTimeDb: number | null;
  bandHz: [number, number];
  probe: { levelDbfs: number; durationS: number; color?: ProbeColor };
  sweep: { startHz: number; endHz: number; durationS: number } | null;
  /** Sweep only: harmonic distortion responses separated from the linear one. */
  harmonics: HarmonicLevel[];
  /** Probe samples clipped by the output ceiling, and microphone samples clipped at full scale. */
  ceilingClippedSamples: number;
  micClippedSamples: number;
  /** The true secondary path (dense, bulk delay included). */
  truePath: Float64Array;
  /**
   * The loudspeaker → reference-mic path, identified in the same run (the probe is heard by both
   * microphones) when the plant has one; null otherwise. For controller.feedbackNeutralisation.
   */
  feedback: FeedbackIdentification | null;
  notes: Record<string, string>;
}

export interface FeedbackIdentification {
  taps: Float64Array;
  delayMs: number | null;
  trueDelayMs: number | null;
  /** Normalised misalignment against the true feedback path over the whole band (dB). */
  misalignmentTimeDb: number | null;
  /** Energy of the feedback path relative to the secondary path (dB): above about −6 dB neutralisation is needed. */
  relativeLevelDb: number | null;
}

/**
 * NLMS on the reference microphone with the loudspeaker drive as the regressor: the same probe that
 * measures the secondary path measures the feedback path (normalised step μ, as the noise probe uses).
 */
class FeedbackNlms {
  readonly w: Float64Array;
  private readonly hist: Float64Array;
  private p = 0;
  private energy = 0;
  constructor(readonly L: number, readonly mu: number) {
    this.w = new Float64Array(L);
    this.hist = new Float64Array(2 * L);
  }
  observe(drive: Float64Array, ref: Float64Array, n: number): void {
    const { w, hist, L, mu } = this;
    for (let i = 0; i < n; i++) {
      this.p = this.p === 0 ? L - 1 : this.p - 1;
      const leaving = hist[this.p]!;
      hist[this.p] = drive[i]!;
      hist[this.p + L] = drive[i]!;
      this.energy += drive[i]! * drive[i]! - leaving * leaving;
      let y = 0;
      for (let k = 0; k < L; k++) y += w[k]! * hist[this.p + k]!;
      const c = (mu * (ref[i]! - y)) / (this.energy + 1e-9);
      for (let k = 0; k < L; k++) w[k] = w[k]! + c * hist[this.p + k]!;
    }
  }
}

function check(ok: boolean, message: string): void {
  if (!ok) throw new RangeError(message);
}

/** The true path as the smallest dense response, and its sparse form for filtering. */
function trimmed(dense: Float64Array): { offset: number; taps: Float64Array } {
  let start = 0;
  while (start < dense.length && dense[start] === 0) start++;
  if (start === dense.length) return { offset: 0, taps: new Float64Array(1) };
  return { offset: start, taps: dense.slice(start) };
}

/** Samples up to where all but `residual` of the response's energy has arrived (at least 1). */
function energyLength(h: Float64Array, residual: number): number {
  let total = 0;
  for (const v of h) total += v * v;
  if (!(total > 0)) return h.length;
  let acc = 0;
  for (let i = 0; i < h.length; i++) {
    acc += h[i]! * h[i]!;
    if (acc >= (1 - residual) * total) return i + 1;
  }
  return h.length;
}

export function identifySimulated(sc: Scenario, options: IdentifySimOptions): IdentifySimResult {
  const fs = sc.sampleRate;
  const B = sc.blockSize;
  const method = options.method;
  check(method === 'noise' || method === 'sweep', `method must be "noise" or "sweep", got ${JSON.stringify(method)}`);
  const levelDbfs = options.levelDbfs ?? -20;
  check(Number.isFinite(levelDbfs) && levelDbfs >= -120 && levelDbfs <= 0, `level must be from −120 to 0 dBFS, got ${levelDbfs}`);
  const notes: Record<string, string> = {};

  // The plant without the loudspeaker: disturbance (or silence) plus sensor noise, seeded as the simulator.
  const quiet: Scenario = options.withDisturbance ? sc : { ...sc, sources: [{ kind: 'noise', color: 'white', rms: 0 }] };
  const plant = new PlantLoop(quiet, { ...(options.wavs ? { wavs: options.wavs } : {}), startMode: 'idle' });
  const truePath = plant.trueSecondaryPath;
  const sparse = trimmed(truePath);
  const secondary = new PathFilter(sparse.offset, sparse.taps, B);

  const defaultTaps = Math.min(65536, Math.ceil(energyLength(truePath, 1e-6) / 32) * 32);
  const L = options.modelTaps ?? sc.controller.modelTaps ?? defaultTaps;
  check(Number.isInteger(L) && L >= 1 && L <= 65536, `model length must be a whole number of taps from 1 to 65536, got ${L}`);
  if (L < truePath.length) {
    notes.modelTaps = `the model has ${L} taps but the true path is ${truePath.length} samples long (bulk delay included): its tail is cut off`;
  }
  const ceiling = Math.pow(10, scenarioCeilingDbfs(sc, DEFAULT_CEILING_DBFS) / 20);
  const speaker = options.loudspeaker ? new PolynomialNonlinearity(options.loudspeaker) : null;

  const drive = new Float64Array(B);
  const acoustic = new Float64Array(B);
  const mic = new Float64Array(B);
  // the feedback path, heard by the reference mic in the same run
  const trueFb = plant.trueFeedbackPath;
  const fbSparse = trueFb ? trimmed(trueFb) : null;
  const fbFilter = fbSparse ? new PathFilter(fbSparse.offset, fbSparse.taps, B) : null;
  const fbL = trueFb ? Math.min(65536, Math.max(L, Math.ceil(energyLength(trueFb, 1e-6) / 32) * 32)) : 0;
  const fbNlms = trueFb ? new FeedbackNlms(fbL, options.stepSize ?? 0.1) : null;
  const refMic = new Float64Array(B);
  let ceilingClipped = 0;
  let micClipped = 0;
  /** One block: the probe in `drive` (n samples) → mic. */
  const step = (n: number): void => {
    for (let i = 0; i < n; i++) {
      const v = drive[i]!;
      if (v > ceiling) { drive[i] = ceiling; ceilingClipped++; } else if (v < -ceiling) { drive[i] = -ceiling; ceilingClipped++; }
    }
    if (speaker) speaker.process(drive, drive, n);
    plant.step(n);
    // The probe is known before the block's microphone samples are needed, so push first and render the same
    // instants (the source-path use of PathFilter): valid for any bulk delay.
    secondary.push(drive, n);
    secondary.render(plant.time - n, acoustic, n);
    const rest = plant.errOff;
    for (let i = 0; i < n; i++) {
      let m = rest[i]! + acoustic[i]!;
      if (m > 1) { m = 1; micClipped++; } else if (m < -1) { m = -1; micClipped++; }
      mic[i] = m;
    }
    if (fbFilter && fbNlms) {
      fbFilter.push(drive, n);
      fbFilter.render(plant.time - n, refMic, n);
      for (let i = 0; i < n; i++) {
        const r = plant.refNoFeedback[i]! + refMic[i]!;
        refMic[i] = r > 1 ? 1 : r < -1 ? -1 : r;
      }
      fbNlms.observe(drive, refMic, n);
    }
  };

  let taps: Float64Array;
  let snrDb: number | null;
  let bandHz: [number, number];
  let durationS: number;
  let sweepInfo: IdentifySimResult['sweep'] = null;
  const harmonics: HarmonicLevel[] = [];
  let lastProgress = -1;
  const progress = (f: number): void => {
    const p = Math.floor(100 * f);
    if (options.onProgress && p !== lastProgress) {
      lastProgress = p;
      options.onProgress(Math.min(1, f));
    }
  };

  if (method === 'noise') {
    const stepSize = options.stepSize ?? 0.1;
    durationS = options.durationS ?? Math.max(3, (60 * L) / fs);
    const color = options.color ?? 'white';
    const id = new NoiseProbeIdentifier({ sampleRate: fs, modelLength: L, maxBlockSize: B, levelDbfs, durationS, color, stepSize, seed: (sc.seed ^ 0x49444e31) >>> 0 });
    while (!id.done) {
      id.nextProbe(drive, B);
      step(B);
      id.observe(mic, B);
      progress(id.progress);
    }
    taps = id.modelTaps();
    snrDb = Number.isFinite(id.snrDb) ? id.snrDb : null;
    bandHz = [20, 0.45 * fs];
    if (bandHz[0] >= bandHz[1]) bandHz = [0, 0.45 * fs];
    if (snrDb === null) notes.snrDb = 'the measurement SNR is undefined (a noiseless, perfectly modelled microphone, or no probe reached it)';
  } else {
    const startHz = options.sweepStartHz ?? 20;
    const endHz = options.sweepEndHz ?? 0.49 * fs;
    const rate = Math.log(endHz / startHz);
    durationS = options.durationS ?? Math.max(2, (1.5 * L * rate) / (fs * Math.LN2));
    const amplitude = Math.pow(10, levelDbfs / 20);
    const sweepOptions: SweepOptions = { sampleRate: fs, startHz, endHz, durationS, amplitude };
    const sweep = new ExponentialSweep(sweepOptions);
    if (amplitude > ceiling) notes.ceiling = `the sweep's peak (${levelDbfs} dBFS) is above the output ceiling (${(20 * Math.log10(ceiling)).toFixed(1)} dBFS): it is clipped, adding distortion`;
    // Record through the system's decay, plus a noise-only stretch for the SNR (deconvolveSweep needs ≥ 64 samples).
    const tail = L + Math.max(256, Math.round(0.25 * fs));
    const total = sweep.lengthSamples + tail;
    const recording = new Float64Array(total);
    for (let t = 0; t < total; t += B) {
      const n = Math.min(B, total - t);
      sweep.process(drive, n);
      step(n);
      recording.set(mic.subarray(0, n), t);
      progress((t + n) / total);
    }
    const maxHarmonic = options.maxHarmonic ?? 3;
    const result = deconvolveSweep(recording, sweepOptions, { irLength: L, maxHarmonic });
    taps = result.linearIr;
    snrDb = result.snrDb;
    if (snrDb !== null && !Number.isFinite(snrDb)) snrDb = null;
    const fadeIn = 0.05 * durationS;
    const fadeOut = 0.01 * durationS;
    bandHz = [sweep.instantaneousFrequencyHz(2 * fadeIn), sweep.instantaneousFrequencyHz(durationS - 2 * fadeOut)];
    let linearEnergy = 0;
    for (const v of taps) linearEnergy += v * v;
    for (const h of result.harmonicIrs) {
      let e = 0;
      for (const v of h.ir) e += v * v;
      harmonics.push({ order: h.order, levelDb: linearEnergy > 0 ? 10 * Math.log10(e / linearEnergy) : -Infinity });
    }
    sweepInfo = { startHz, endHz, durationS };
    const advance2 = Math.floor((durationS * fs * Math.LN2) / rate);
    if (advance2 < L) notes.harmonics = `the 2nd harmonic's response arrives ${advance2} samples early, less than the ${L}-tap model: lengthen the sweep`;
  }

  let delaySamples = 0;
  try {
    delaySamples = onsetDelaySamples(taps);
  } catch {
    notes.delayMs = 'the estimate is all zeros: nothing reached the microphone';
  }
  // A silent true path (gain 0) has no onset and no energy to be misaligned against.
  let trueDelayMs: number | null = null;
  let misalignment: number | null = null;
  let misalignmentTime: number | null = null;
  try {
    trueDelayMs = (1000 * onsetDelaySamples(truePath)) / fs;
    misalignment = bandMisalignmentDb(taps, truePath, fs, bandHz);
    misalignmentTime = misalignmentDb(taps, truePath);
  } catch (e) {
    if (!(e instanceof RangeError)) throw e;
    notes.misalignmentDb = `the true secondary path has no energy in ${bandHz[0].toFixed(0)}–${bandHz[1].toFixed(0)} Hz: nothing to compare with`;
  }
  return {
    method,
    sampleRate: fs,
    taps,
    delaySamples,
    delayMs: (1000 * delaySamples) / fs,
    trueDelayMs,
    snrDb,
    misalignmentDb: misalignment,
    misalignmentTimeDb: misalignmentTime,
    bandHz,
    probe: method === 'noise' ? { levelDbfs, durationS, color: options.color ?? 'white' } : { levelDbfs, durationS },
    sweep: sweepInfo,
    harmonics,
    ceilingClippedSamples: ceilingClipped,
    micClippedSamples: micClipped,
    truePath,
    feedback: trueFb && fbNlms ? feedbackResult(fbNlms.w, trueFb, truePath, fs) : null,
    notes,
  };
}

function feedbackResult(taps: Float64Array, truth: Float64Array, secondary: Float64Array, fs: number): FeedbackIdentification {
  const energy = (h: ArrayLike<number>): number => {
    let e = 0;
    for (let i = 0; i < h.length; i++) e += h[i]! * h[i]!;
    return e;
  };
  let delayMs: number | null = null;
  let trueDelayMs: number | null = null;
  let mis: number | null = null;
  try {
    delayMs = (1000 * onsetDelaySamples(taps)) / fs;
    trueDelayMs = (1000 * onsetDelaySamples(truth)) / fs;
    mis = misalignmentDb(taps, truth);
  } catch (e) {
    if (!(e instanceof RangeError)) throw e;
  }
  const rel = 10 * Math.log10(energy(taps) / energy(secondary));
  return { taps, delayMs, trueDelayMs, misalignmentTimeDb: mis, relativeLevelDb: Number.isFinite(rel) ? rel : null };
}
