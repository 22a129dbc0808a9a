/**
 * Level-cap check: ramp a test signal from a safe level towards and beyond the output cap through the
 * engine's own output stage, measure every output sample, and say whether the cap held.
 *
 * What is driven: a real `Engine` built with the output-stage settings under test (limiter, ceiling,
 * high-pass, DC blocker, start ramp, guard), whose controller is replaced by a test-signal source
 * (`engine.controller` is a public field; the source implements the `Controller` interface and
 * ignores adaptation). So the test signal takes exactly the path a control signal takes:
 *
 *   test signal → high-pass → start ramp → limiter (look-ahead, true peak, hard ceiling) → out
 *
 * and the guard watches it as it watches a controller: its events (limiter engaged, output at the
 * ceiling, non-finite output) are the ones a live session would log. Two departures, both stated in
 * the result's notes: the guard's dead-microphone detector is off (the reference input is silent by
 * design during a check), and a detector set to mute (a user may set output-at-ceiling → mute, as
 * for a howling loop) freezes adaptation instead: a mute would fade the test signal out at the
 * first sign of the cap and leave the rest of the ramp untested. Its events then carry the action
 * freeze-adaptation, and `mutesObserved` counts them.
 *
 * Test signal (levels are AES17 dBFS, a full-scale sine = 0 dBFS): one segment per kind, each a
 * linear-in-dB ramp from `startDbfs` to `ceiling + overDb` over `rampS`, a hold at the top for
 * `holdS`, then `gapS` of silence (the limiter releases):
 *  - tone: a sine at `toneHz`, peak = level;
 *  - noise: white Gaussian noise of AES17 level = level (RMS = 10^(level/20)/√2, peaks ≈ 10 dB higher);
 *  - adversarial: 50 ms sub-patterns in turn at peak = level: a Nyquist square wave with a phase flip
 *    every 6 samples (the sign pattern of the BS.1770-4 interpolator's phase: its 4×-oversampled
 *    peak reads +6.1 dB over the sample peak, the largest any ±1 sequence can give; calculated from
 *    the ITU-R BS.1770-4 Annex 2 coefficients as 20·log10 of the largest sum of |coefficients| over the
 *    four phases, see test/engine/level-cap-check.test.ts), a square wave
 *    at fs/4 (+3.1 dB), steps of ±level, a burst of the Nyquist pattern after 40 ms of silence, and
 *    random ±level binary noise; once, at the start of the hold, NaN, +∞, −∞, ±10⁴·level and a
 *    denormal (1e−40).
 * The start level is the smaller of `startDbfs` and ceiling − overDb, so the ramp always begins
 * well below the cap.
 *
 * Measured on every output sample: sample peak, 4× true peak (an independent TruePeakMeter on the
 * output, ITU-R BS.1770-4 Annex 2), samples above the ceiling, non-finite samples; per hop of about
 * 10 ms: test-signal peak, output sample and true peak, the limiter's largest gain reduction, and the
 * error-mic peak when the host gives error-mic samples (live sessions).
 *
 * Verdict: passed ⇔ every output sample finite and none above the ceiling, and in the modes that
 * bound the true peak (the default true-peak filter, the look-ahead true-peak detector) the true
 * peak at most TRUE_PEAK_TOLERANCE_DB above it; with a microphone calibration and an SPL ceiling,
 * also the error mic's peak SPL at most the SPL ceiling. In the sample-peak modes a pass holds the
 * sample peak only, and `capVerdict` says so ("sample peak held; true peak not limited: X dBTP").
 *
 * Ceiling: the dBFS ceiling, or, with an output calibration and a peak SPL ceiling, the stricter of
 * the two (src/engine/calibration.ts: the highest sensitivity measured across the calibrated
 * frequencies sets the dBFS equivalent; SPL ceilings are peak-based).
 *
 * `LevelCapCheck` is the streaming form: a host (the simulator here, the AudioWorklet live) calls
 * `process(out, n, errorMic?)` block by block; it allocates nothing per block. `runLevelCapCheck`
 * runs it to the end in one call.
 */
import type { Controller } from '../dsp/controller.ts';
import { Random } from '../dsp/random.ts';
import { TruePeakMeter } from '../dsp/true-peak.ts';
import { Engine, DEFAULT_CEILING_DBFS, DEFAULT_RAMP_MS, type EngineConfig, type LimiterSettings } from './engine.ts';
import { drainEvents, type EngineEvent } from './events.ts';
import { ceilingDbfsForPeakSpl, SINE_CREST_DB, type MicCalibration, type OutputCalibration, type SplCeiling } from './calibration.ts';

/**
 * How the output stage limits: 'true-peak-filter' (the default: sample-peak limiter, then the true-peak
 * filter, one sample of delay), 'true-peak' (look-ahead true-peak detector), or sample peaks only
 * ('zero-latency', 'look-ahead': asked for with `limiter.truePeak: false`).
 */
export type LimiterMode = 'zero-latency' | 'look-ahead' | 'true-peak' | 'true-peak-filter';

/** The mode bounds the 4× true peak (the check then holds it to TRUE_PEAK_TOLERANCE_DB above the ceiling). */
export function limitsTruePeak(mode: LimiterMode): boolean {
  return mode === 'true-peak' || mode === 'true-peak-filter';
}

/**
 * The one-line verdict every host prints. What a pass means depends on the mode: in the true-peak
 * modes, no output sample above the cap and the 4× true peak within the tolerance; in the
 * sample-peak modes only the former, so the verdict says so and gives the true peak it did not limit.
 */
export function capVerdict(passed: boolean, mode: LimiterMode, truePeakDbtp: number, reasons: readonly string[]): string {
  if (!passed) return `FAILED: ${reasons.join('; ')}`;
  if (limitsTruePeak(mode)) return `PASSED: the cap held (sample peak, and 4x true peak within +${TRUE_PEAK_TOLERANCE_DB} dB)`;
  return `sample peak held; true peak not limited: ${Number.isFinite(truePeakDbtp) ? truePeakDbtp.toFixed(2) : 'n/a'} dBTP`;
}
export type TestSignalKind = 'tone' | 'noise' | 'adversarial';

/** In true-peak mode the output's 4×-oversampled peak may exceed the ceiling by at most this, dB (issue 5). */
export const TRUE_PEAK_TOLERANCE_DB = 0.5;
export const DEFAULT_START_DBFS = -40;
export const DEFAULT_OVER_DB = 12;
export const DEFAULT_RAMP_S = 2;
export const DEFAULT_HOLD_S = 0.5;
export const DEFAULT_GAP_S = 0.25;
export const DEFAULT_TONE_HZ = 1000;
/** History resolution, s (coarser when a block is longer). */
export const HISTORY_HOP_S = 0.01;
/** Length of one adversarial sub-pattern, s. */
export const ADVERSARIAL_PATTERN_S = 0.05;

/**
 * ±1 sign pattern, oldest first, that drives phase 1 of the BS.1770-4 interpolator to the sum of its
 * |coefficients| (2.0228, +6.12 dB): a Nyquist square wave whose phase flips every 6 samples.
 */
export const NYQUIST_FLIP_PATTERN: readonly number[] = [-1, 1, -1, 1, -1, 1, 1, -1, 1, -1, 1, -1];
const QUARTER_SQUARE = [1, 1, -1, -1];
/** Special values written once at the start of the adversarial hold (huge values are ×level). */
const SPECIAL_VALUES = [NaN, Infinity, -Infinity, 1e4, -1e4, 1e-40];

export interface TestSignalSettings {
  /** Level the ramp starts from, dBFS, −120 … 0. Default −40 (capped at ceiling − overDb). */
  startDbfs?: number;
  /** How far above the ceiling the ramp goes, dB, 0 … 40. Default 12. */
  overDb?: number;
  /** Ramp duration per kind, s, 0.05 … 600. Default 2. */
  rampS?: number;
  /** Hold at the top level per kind, s, 0 … 600. Default 0.5. */
  holdS?: number;
  /** Silence after each kind, s, 0 … 10 (at least the limiter's latency + 50 ms at the end). Default 0.25. */
  gapS?: number;
  /** Tone frequency, Hz, (0, fs/2). Default: with an output calibration, its most sensitive frequency; else 1 kHz. */
  toneHz?: number;
  /** Kinds, in order. Default ['tone', 'noise', 'adversarial']. */
  kinds?: TestSignalKind[];
  /** Seed of the noise. Default 1. */
  seed?: number;
}

export interface LevelCapCheckConfig {
  /** Sample rate in Hz (the engine's range, 8000 … 192000). */
  sampleRate: number;
  /** Largest block `process` will be given (the engine's maxBlockSize). */
  blockSize: number;
  /** Shorthand for limiter.ceilingDbfs. Default: the engine's (−6 dBFS). */
  ceilingDbfs?: number;
  limiter?: LimiterSettings;
  /** Output high-pass corner and DC blocker, Hz (engine defaults 20 and 2 when absent). */
  highPassHz?: number;
  dcBlockerHz?: number;
  /** Start-ramp time, ms (engine default 50). */
  rampMs?: number;
  /** Guard settings as the engine takes them, or false. Default: the engine's defaults. */
  guard?: EngineConfig['guard'];
  /** Output calibration and a peak SPL ceiling at the listening position (both or neither). */
  outputCalibration?: OutputCalibration;
  peakCeilingDbSpl?: number;
  /** Error-microphone calibration: its peak SPL is then reported (and checked against the SPL ceiling). */
  micCalibration?: MicCalibration;
  signal?: TestSignalSettings;
}

export interface EffectiveCeiling {
  /** The ceiling the output stage enforces, dBFS (sample peak). */
  ceilingDbfs: number;
  /** Which rule set it. */
  limitedBy: 'dbfs' | 'spl';
  /** The dBFS setting. */
  dbfsCeiling: number;
  /** The SPL rule's result, when a calibration and an SPL ceiling are given. */
  spl: (SplCeiling & { peakCeilingDbSpl: number }) | null;
}

/**
 * The stricter of a dBFS ceiling and a peak SPL ceiling through an output calibration: the SPL
 * ceiling's dBFS equivalent uses the highest peak sensitivity measured (ceilingDbfsForPeakSpl).
 */
export function effectiveCeiling(dbfsCeiling: number, calibration?: OutputCalibration, peakCeilingDbSpl?: number): EffectiveCeiling {
  if ((calibration === undefined) !== (peakCeilingDbSpl === undefined)) {
    throw new RangeError(
      `outputCalibration and peakCeilingDbSpl go together: got ${calibration ? 'a calibration' : 'no calibration'} and ${peakCeilingDbSpl === undefined ? 'no SPL ceiling' : `an SPL ceiling of ${peakCeilingDbSpl} dB`}`,
    );
  }
  if (!calibration || peakCeilingDbSpl === undefined) return { ceilingDbfs: dbfsCeiling, limitedBy: 'dbfs', dbfsCeiling, spl: null };
  const s = ceilingDbfsForPeakSpl(calibration, peakCeilingDbSpl);
  const splFirst = s.ceilingDbfs < dbfsCeiling;
  return { ceilingDbfs: splFirst ? s.ceilingDbfs : dbfsCeiling, limitedBy: splFirst ? 'spl' : 'dbfs', dbfsCeiling, spl: { ...s, peakCeilingDbSpl } };
}

/**
 * The check's configuration for a scenario: the output stage exactly as the simulator's PlantLoop
 * builds it (limiter settings, ceiling or its shorthand, highPassHz or 0, no DC blocker, the guard).
 */
/** The parts of a scenario (src/plant/scenario.ts) the check reads: the engine layer does not import the schema. */
export interface OutputStageOfScenario {
  sampleRate: number;
  blockSize: number;
  limiter?: LimiterSettings | undefined;
  outputCeilingDbfs?: number | undefined;
  highPassHz?: number | undefined;
  guard?: false | Record<string, unknown> | undefined;
}

export function levelCapConfigFromScenario(sc: OutputStageOfScenario, extra: Pick<LevelCapCheckConfig, 'signal' | 'outputCalibration' | 'peakCeilingDbSpl' | 'micCalibration'> = {}): LevelCapCheckConfig {
  return {
    sampleRate: sc.sampleRate,
    blockSize: sc.blockSize,
    limiter: { ...(sc.limiter ?? {}), ceilingDbfs: sc.limiter?.ceilingDbfs ?? sc.outputCeilingDbfs ?? DEFAULT_CEILING_DBFS },
    highPassHz: sc.highPassHz ?? 0,
    dcBlockerHz: 0,
    ...(sc.guard === false ? { guard: false as const } : sc.guard ? { guard: sc.guard as EngineConfig['guard'] } : {}),
    ...extra,
  };
}

/** Time line of the check, one entry per hop (NaN where nothing is defined, e.g. silence). */
export interface LevelCapHistory {
  /** End of the hop, s (of check time, output side). */
  timeS: Float64Array;
  /** Nominal level of the test signal at the end of the hop, dBFS (NaN in the gaps). */
  levelDbfs: Float64Array;
  /** Largest |test signal| in the hop (before the output stage; non-finite samples not counted), dBFS. */
  inputPeakDbfs: Float64Array;
  /** Largest |output sample| in the hop, dBFS. */
  samplePeakDbfs: Float64Array;
  /** Largest 4×-oversampled |output| in the hop, dBTP. */
  truePeakDbtp: Float64Array;
  /** Largest limiter gain reduction in the blocks of the hop, dB. */
  gainReductionDb: Float64Array;
  /** Largest |error-mic sample| in the hop, dBFS (NaN without error-mic input). */
  errorMicPeakDbfs: Float64Array;
}

export interface LevelCapResult {
  /** The ceiling enforced, dBFS (the stricter rule when an SPL ceiling is given). */
  ceilingDbfs: number;
  ceiling: EffectiveCeiling;
  limiterMode: LimiterMode;
  /** Delay the output stage adds, samples (look-ahead, plus one for the true-peak filter). */
  latencySamples: number;
  maxSamplePeakDbfs: number;
  maxTruePeakDbtp: number;
  /** The limiter's own reading of the output's true peak (it meters every mode), for comparison. */
  limiterTruePeakDbtp: number;
  maxGainReductionDb: number;
  /** Largest |test signal| sample fed in (finite ones), dBFS. */
  maxInputPeakDbfs: number;
  /** Output samples above the ceiling (must be 0). */
  samplesOverCeiling: number;
  /** Output samples that were NaN or ±∞ (must be 0). */
  nonFiniteOutputSamples: number;
  /** Non-finite test-signal samples the limiter silenced. */
  nonFiniteInputSamples: number;
  /** In true-peak mode, the tolerance applied to the true peak; null in the other modes (reported only). */
  truePeakToleranceDb: number | null;
  /** With a calibration: the highest peak SPL the largest output sample can give across the calibrated frequencies. */
  maxPeakDbSplBound: number | null;
  errorMic: { maxSamplePeakDbfs: number; maxPeakDbSpl: number | null; withinSplCeiling: boolean | null } | null;
  passed: boolean;
  /** Why it failed (empty when passed). */
  reasons: string[];
  /** True when the whole plan ran (false after abort()). */
  completed: boolean;
  sampleRate: number;
  blockSize: number;
  durationS: number;
  startDbfs: number;
  topDbfs: number;
  toneHz: number;
  segments: { kind: TestSignalKind | 'gap'; startS: number; endS: number }[];
  /** Events whose detector is set to mute, logged with freeze-adaptation during the check. */
  mutesObserved: number;
  events: EngineEvent[];
  /** Events the engine's ring overwrote before they were read. */
  eventsDropped: number;
  history: LevelCapHistory;
  notes: string[];
}

function check(field: string, v: unknown, lo: number, hi: number, unit: string, openLo = false, openHi = false): number {
  if (typeof v !== 'number' || !(openLo ? v > lo : v >= lo) || !(openHi ? v < hi : v <= hi)) {
    throw new RangeError(`${field} must be a number in ${openLo ? '(' : '['}${lo}, ${hi}${openHi ? ')' : ']'}${unit}, got ${String(v)}`);
  }
  return v;
}

const KIND_CODE: Record<TestSignalKind, number> = { tone: 1, noise: 2, adversarial: 3 };
const GAP = 0;

/**
 * The test signal, posing as a controller so the engine's output stage carries it. Reset does
 * nothing (the guard's reset-weights must not restart the plan); adaptation is ignored.
 */
class TestSignalSource implements Controller {
  readonly kind = 'level-cap-test';
  adapt = true;
  /** Next plan sample to write. */
  pos = 0;
  /** Samples of the plan; after it, silence. */
  readonly total: number;
  /** Nominal level of the last sample written, dBFS (−Infinity in gaps). */
  levelDbfs = -Infinity;
  /** Largest finite |sample| since the host last cleared it. */
  hopPeak = 0;
  maxPeak = 0;
  /** When set, writes silence from now on. */
  silenced = false;
  private seg = 0;
  private phase = 0;
  private readonly phaseStep: number;
  private readonly rng: Random;
  private readonly patternLen: number;
  /** One block of Gaussian noise, drawn per block (see Random.fillGaussianN). */
  private readonly noise: Float64Array;

  constructor(
    readonly segKind: Uint8Array,
    readonly segStart: Float64Array,
    readonly segRampEnd: Float64Array,
    readonly startDb: number,
    readonly topDb: number,
    toneHz: number,
    sampleRate: number,
    seed: number,
    maxBlockSize: number,
  ) {
    this.total = segStart[segStart.length - 1]!;
    this.noise = new Float64Array(maxBlockSize);
    this.phaseStep = (2 * Math.PI * toneHz) / sampleRate;
    this.rng = new Random(seed);
    this.patternLen = Math.max(12, Math.round(ADVERSARIAL_PATTERN_S * sampleRate));
  }

  reset(): void {
    // deliberately empty: see the class comment
  }

  weightNormSquared(): number {
    return 0;
  }

  /** A test signal has no step size or leakage: these do nothing. */
  setStepSize(): void {}
  setLeakage(): void {}

  copyWeights(): number {
    return 0;
  }

  process(_ref: Float32Array, _err: Float32Array, out: Float32Array, n: number): void {
    const kinds = this.segKind;
    const last = kinds.length - 1;
    let peak = this.hopPeak;
    const noise = this.noise;
    if (n > noise.length) n = noise.length;
    this.rng.fillGaussianN(noise, n);
    for (let i = 0; i < n; i++) {
      const p = this.pos++;
      let s = this.seg;
      while (s < last && p >= this.segStart[s + 1]!) s++;
      this.seg = s;
      const kind = kinds[s]!;
      if (this.silenced || kind === GAP || p >= this.total) {
        out[i] = 0;
        this.levelDbfs = -Infinity;
        continue;
      }
      const start = this.segStart[s]!;
      const rampEnd = this.segRampEnd[s]!;
      const level = p < rampEnd ? this.startDb + ((this.topDb - this.startDb) * (p - start)) / (rampEnd - start) : this.topDb;
      this.levelDbfs = level;
      const a = Math.pow(10, level / 20);
      let v: number;
      if (kind === 1) {
        v = a * Math.sin(this.phase);
        this.phase += this.phaseStep;
        if (this.phase > 2 * Math.PI) this.phase -= 2 * Math.PI;
      } else if (kind === 2) {
        v = a * Math.SQRT1_2 * noise[i]!;
      } else {
        // adversarial, inline: a call returning a double would box it on every sample
        const j = p - start;
        const h = p - rampEnd;
        if (h >= 0 && h < SPECIAL_VALUES.length) {
          const sv = SPECIAL_VALUES[h]!;
          v = sv === 1e-40 || sv - sv !== 0 ? sv : sv * a;
        } else {
          const L = this.patternLen;
          const k = j % L;
          const sub = Math.floor(j / L) % 5;
          if (sub === 0) v = a * NYQUIST_FLIP_PATTERN[k % 12]!;
          else if (sub === 1) v = a * QUARTER_SQUARE[k & 3]!;
          else if (sub === 2) v = k < L / 2 ? a : -a;
          else if (sub === 3) v = k < 0.8 * L ? 0 : a * NYQUIST_FLIP_PATTERN[k % 12]!;
          else v = noise[i]! < 0 ? -a : a;
        }
      }
      out[i] = v;
      const av = v < 0 ? -v : v;
      if (av > peak && av - av === 0) peak = av;
    }
    this.hopPeak = peak;
    if (peak > this.maxPeak) this.maxPeak = peak;
  }
}

/** Guard settings with an action, by the cause their events carry. */
const CAUSE_SETTING: Partial<Record<EngineEvent['cause'], string>> = {
  'output-at-ceiling': 'outputAtCeiling',
  'error-rise': 'errorRise',
  'weights-unbounded': 'weights',
  'input-clipping': 'inputClipping',
  'non-finite': 'nonFinite',
};

/**
 * The guard of the check: the given settings with the dead-microphone detector off and every 'mute'
 * action turned into 'freeze-adaptation' (see the module comment). Returns the settings changed.
 */
function checkGuard(g: EngineConfig['guard']): { guard: EngineConfig['guard']; downgraded: string[] } {
  if (g === false) return { guard: false, downgraded: [] };
  const out: Record<string, unknown> = { ...(g ?? {}), deadMicrophone: { ...(g?.deadMicrophone ?? {}), enabled: false } };
  const downgraded: string[] = [];
  for (const key of ['outputAtCeiling', 'errorRise', 'weights', 'inputClipping', 'nonFinite'] as const) {
    const sec = (g ?? {})[key] as Record<string, unknown> | undefined;
    if (!sec || typeof sec !== 'object') continue;
    const copy = { ...sec };
    let changed = false;
    for (const field of ['action', 'inputAction', 'outputAction']) {
      if (copy[field] === 'mute') {
        copy[field] = 'freeze-adaptation';
        changed = true;
      }
    }
    if (changed) {
      out[key] = copy;
      downgraded.push(key);
    }
  }
  return { guard: out as EngineConfig['guard'], downgraded };
}

/**
 * The streaming level-cap check. Construct (validates, allocates everything), then call `process`
 * until `done`; `result()` (allocates) gives the figures. The host decides what happens to `out`:
 * the simulator measures it, a live session also sends it to the loudspeaker.
 */
export class LevelCapCheck {
  readonly engine: Engine;
  readonly sampleRate: number;
  readonly blockSize: number;
  readonly ceiling: EffectiveCeiling;
  readonly limiterMode: LimiterMode;
  /** Samples the check runs (plan + final silence). */
  readonly totalSamples: number;
  readonly startDbfs: number;
  readonly topDbfs: number;
  readonly toneHz: number;
  private readonly source: TestSignalSource;
  private readonly segments: LevelCapResult['segments'];
  private readonly ceilingLin: number;
  private readonly tpLimitLin: number;
  private readonly meter = new TruePeakMeter();
  private readonly refIn: Float32Array;
  private readonly errIn: Float32Array;
  private readonly micCal: MicCalibration | null;
  private readonly rampMs: number;
  private readonly hop: number;
  private readonly hist: LevelCapHistory;
  private histCount = 0;
  private hopFill = 0;
  private hopSample = 0;
  private hopTrue = 0;
  private hopGr = 0;
  private hopMic = -1;
  private position = 0;
  private endAt: number;
  private maxSample = 0;
  private maxTrue = 0;
  private maxMic = -1;
  private over = 0;
  private overTrue = 0;
  private nonFinite = 0;
  /** Guard settings whose action 'mute' the check turned into 'freeze-adaptation'. */
  private readonly mutesDowngraded: string[];
  private aborted = false;
  private readonly collected: EngineEvent[] = [];

  constructor(config: LevelCapCheckConfig) {
    if (typeof config !== 'object' || config === null) throw new TypeError('level-cap check config must be an object');
    const fs = check('sampleRate', config.sampleRate, 8000, 192000, ' Hz');
    const B = config.blockSize;
    if (typeof B !== 'number' || !Number.isInteger(B) || B < 1 || B > 16384) throw new RangeError(`blockSize must be an integer from 1 to 16384, got ${String(B)}`);
    const dbfsCeiling = config.limiter?.ceilingDbfs ?? config.ceilingDbfs ?? DEFAULT_CEILING_DBFS;
    check('ceilingDbfs', dbfsCeiling, -120, 0, ' dBFS');
    this.ceiling = effectiveCeiling(dbfsCeiling, config.outputCalibration, config.peakCeilingDbSpl);
    const sig = config.signal ?? {};
    const over = check('signal.overDb', sig.overDb ?? DEFAULT_OVER_DB, 0, 40, ' dB');
    const startReq = check('signal.startDbfs', sig.startDbfs ?? DEFAULT_START_DBFS, -120, 0, ' dBFS');
    const rampS = check('signal.rampS', sig.rampS ?? DEFAULT_RAMP_S, 0.05, 600, ' s');
    const holdS = check('signal.holdS', sig.holdS ?? DEFAULT_HOLD_S, 0, 600, ' s');
    const gapS = check('signal.gapS', sig.gapS ?? DEFAULT_GAP_S, 0, 10, ' s');
    const defaultHz = this.ceiling.spl ? Math.min(this.ceiling.spl.limitingHz, 0.45 * fs) : Math.min(DEFAULT_TONE_HZ, 0.45 * fs);
    this.toneHz = check('signal.toneHz', sig.toneHz ?? defaultHz, 0, fs / 2, ' Hz', true, true);
    const kinds = sig.kinds ?? ['tone', 'noise', 'adversarial'];
    if (!Array.isArray(kinds) || kinds.length === 0 || kinds.some((k) => !(k in KIND_CODE))) {
      throw new RangeError(`signal.kinds must be a non-empty list of "tone", "noise", "adversarial", got ${JSON.stringify(kinds)}`);
    }
    const seed = sig.seed ?? 1;
    if (!Number.isInteger(seed) || seed < 0 || seed > 0xffffffff) throw new RangeError(`signal.seed must be an integer from 0 to 4294967295, got ${String(seed)}`);
    const c = this.ceiling.ceilingDbfs;
    this.startDbfs = Math.min(startReq, c - over);
    this.topDbfs = c + over;

    const { guard, downgraded } = checkGuard(config.guard);
    this.mutesDowngraded = downgraded;
    this.engine = new Engine({
      sampleRate: fs,
      maxBlockSize: B,
      // a placeholder: the test-signal source replaces it below
      controller: { algorithm: 'fxlms', taps: 1, stepSize: 1e-6 },
      secondaryPathModel: new Float32Array([1]),
      limiter: { ...(config.limiter ?? {}), ceilingDbfs: c },
      ...(config.highPassHz !== undefined ? { highPassHz: config.highPassHz } : {}),
      ...(config.dcBlockerHz !== undefined ? { dcBlockerHz: config.dcBlockerHz } : {}),
      ...(config.rampMs !== undefined ? { rampMs: config.rampMs } : {}),
      guard,
      startMode: 'control',
      eventCapacity: 1024,
    });
    const lim = this.engine.limiter;
    this.limiterMode = lim.truePeak ? 'true-peak' : lim.truePeakFilter ? 'true-peak-filter' : lim.zeroLatency ? 'zero-latency' : 'look-ahead';
    this.sampleRate = fs;
    this.blockSize = B;

    // Plan: [kind ramp+hold, gap] per kind; the last gap covers at least the look-ahead + 50 ms.
    const segKind: number[] = [];
    const segStart: number[] = [];
    const segRampEnd: number[] = [];
    const rampN = Math.max(1, Math.round(rampS * fs));
    const holdN = Math.round(holdS * fs);
    const gapN = Math.round(gapS * fs);
    const tailN = Math.max(gapN, lim.latencySamples + Math.round(0.05 * fs));
    let t = 0;
    this.segments = [];
    kinds.forEach((k, i) => {
      segKind.push(KIND_CODE[k]);
      segStart.push(t);
      segRampEnd.push(t + rampN);
      this.segments.push({ kind: k, startS: t / fs, endS: (t + rampN + holdN) / fs });
      t += rampN + holdN;
      const g = i === kinds.length - 1 ? tailN : gapN;
      segKind.push(GAP);
      segStart.push(t);
      segRampEnd.push(t);
      this.segments.push({ kind: 'gap', startS: t / fs, endS: (t + g) / fs });
      t += g;
    });
    // a closing entry: its start is the end of the plan
    segKind.push(GAP);
    segStart.push(t);
    segRampEnd.push(t);
    this.totalSamples = t;
    this.endAt = t;
    this.source = new TestSignalSource(
      Uint8Array.from(segKind),
      Float64Array.from(segStart),
      Float64Array.from(segRampEnd),
      this.startDbfs,
      this.topDbfs,
      this.toneHz,
      fs,
      seed,
      this.blockSize,
    );
    this.engine.controller = this.source;

    this.ceilingLin = Math.pow(10, c / 20);
    this.tpLimitLin = Math.pow(10, (c + TRUE_PEAK_TOLERANCE_DB) / 20);
    this.refIn = new Float32Array(B);
    this.errIn = new Float32Array(B);
    this.micCal = config.micCalibration ?? null;
    this.rampMs = config.rampMs ?? DEFAULT_RAMP_MS;
    this.hop = Math.max(1, Math.round(HISTORY_HOP_S * fs));
    const hops = Math.ceil(t / this.hop) + 2;
    this.hist = {
      timeS: new Float64Array(hops),
      levelDbfs: new Float64Array(hops),
      inputPeakDbfs: new Float64Array(hops),
      samplePeakDbfs: new Float64Array(hops),
      truePeakDbtp: new Float64Array(hops),
      gainReductionDb: new Float64Array(hops),
      errorMicPeakDbfs: new Float64Array(hops),
    };
  }

  /** True once every sample of the plan (and its tail of silence) has been processed. */
  get done(): boolean {
    return this.position >= this.endAt;
  }

  /** Samples processed so far. */
  get samplesDone(): number {
    return this.position;
  }

  /**
   * Stop early (the user withdrew consent, or pressed stop): the test signal falls silent and the
   * output fades out now (the engine's stop ramp); the check ends once the look-ahead has emptied.
   * The result is then incomplete.
   */
  abort(): void {
    if (this.done || this.aborted) return;
    this.aborted = true;
    this.source.silenced = true;
    // fade out as a stop does (the high-pass may still ring), then let the look-ahead empty
    this.engine.setMode('idle');
    const fade = Math.ceil((this.rampMs / 1000) * this.sampleRate);
    this.endAt = Math.min(this.endAt, this.position + fade + this.engine.limiter.latencySamples + this.blockSize);
  }

  /**
   * Produce the next n ≤ blockSize output samples into `out` and measure them. `errorMic` (optional):
   * the error microphone's samples of the same instants, measured and handed to the engine's guard.
   * After `done`, writes silence. No allocation.
   */
  process(out: Float32Array, n: number, errorMic?: Float32Array): void {
    if (n > this.blockSize) n = this.blockSize;
    if (n > out.length) n = out.length;
    if (!(n > 0)) return;
    if (this.position >= this.endAt) {
      for (let i = 0; i < n; i++) out[i] = 0;
      return;
    }
    const engine = this.engine;
    // the guard sanitises its inputs in place: give it copies, never the host's buffers
    const ref = this.refIn;
    const err = this.errIn;
    for (let i = 0; i < n; i++) ref[i] = 0;
    let mic = this.hopMic;
    if (errorMic) {
      for (let i = 0; i < n; i++) {
        const v = errorMic[i]!;
        err[i] = v;
        const av = v < 0 ? -v : v;
        if (av > mic) mic = av;
      }
    } else {
      for (let i = 0; i < n; i++) err[i] = 0;
    }
    this.hopMic = mic;
    if (mic > this.maxMic) this.maxMic = mic;
    engine.process(ref, err, out, n);

    const c = this.ceilingLin;
    const tpLim = this.tpLimitLin;
    const meter = this.meter;
    let sp = this.hopSample;
    let tp = this.hopTrue;
    for (let i = 0; i < n; i++) {
      const v = out[i]!;
      if (!(v - v === 0)) this.nonFinite++;
      const av = v < 0 ? -v : v;
      if (av > c) this.over++;
      if (av > sp) sp = av;
      meter.pushAt(out, i);
      const ip = meter.intervalPeak;
      if (ip > tp) tp = ip;
      if (ip > tpLim) this.overTrue++;
    }
    this.hopSample = sp;
    this.hopTrue = tp;
    if (sp > this.maxSample) this.maxSample = sp;
    if (tp > this.maxTrue) this.maxTrue = tp;
    const gr = engine.limiter.readout.blockMaxGainReductionDb;
    if (gr > this.hopGr) this.hopGr = gr;
    this.position += n;
    this.hopFill += n;
    if (this.hopFill >= this.hop || this.position >= this.endAt) this.flushHop();
  }

  private flushHop(): void {
    const h = this.hist;
    const k = this.histCount;
    if (k < h.timeS.length) {
      h.timeS[k] = this.position / this.sampleRate;
      const lv = this.source.levelDbfs;
      h.levelDbfs[k] = lv > -Infinity ? lv : NaN;
      h.inputPeakDbfs[k] = 20 * Math.log10(this.source.hopPeak);
      h.samplePeakDbfs[k] = 20 * Math.log10(this.hopSample);
      h.truePeakDbtp[k] = 20 * Math.log10(this.hopTrue);
      h.gainReductionDb[k] = this.hopGr;
      h.errorMicPeakDbfs[k] = this.hopMic >= 0 ? 20 * Math.log10(this.hopMic) : NaN;
      this.histCount = k + 1;
    }
    this.source.hopPeak = 0;
    this.hopSample = 0;
    this.hopTrue = 0;
    this.hopGr = 0;
    this.hopMic = this.hopMic >= 0 ? 0 : -1;
    this.hopFill = 0;
  }

  /** Move the engine's queued events into the check's list (allocates: not on the audio thread). */
  collectEvents(): void {
    if (this.engine.events.size > 0) this.collected.push(...drainEvents(this.engine.events));
  }

  /** The figures so far (complete once `done`). Allocates. */
  result(): LevelCapResult {
    this.collectEvents();
    const lim = this.engine.limiter;
    const c = this.ceiling.ceilingDbfs;
    const db = (v: number): number => 20 * Math.log10(v);
    const maxSamplePeakDbfs = db(this.maxSample);
    const maxTruePeakDbtp = db(this.maxTrue);
    const reasons: string[] = [];
    const notes: string[] = [];
    if (this.nonFinite > 0) reasons.push(`${this.nonFinite} output samples were not finite`);
    // JSON writers turn non-finite figures into null: say why beside them
    for (const [k, v] of [['maxSamplePeakDbfs', maxSamplePeakDbfs], ['maxTruePeakDbtp', maxTruePeakDbtp]] as const) {
      if (v === Infinity) notes.push(`${k} is infinite: an output sample was ±Infinity`);
      else if (v === -Infinity) notes.push(`${k} is −Infinity: the output was silent`);
    }
    if (this.over > 0) reasons.push(`${this.over} output samples exceeded the ${c.toFixed(2)} dBFS ceiling (largest ${maxSamplePeakDbfs.toFixed(3)} dBFS)`);
    const truePeakMode = limitsTruePeak(this.limiterMode);
    if (truePeakMode && this.overTrue > 0) {
      reasons.push(`the 4× true peak reached ${maxTruePeakDbtp.toFixed(2)} dBTP, more than ${TRUE_PEAK_TOLERANCE_DB} dB above the ${c.toFixed(2)} dBFS ceiling`);
    }
    if (!truePeakMode) {
      notes.push(
        `${this.limiterMode} mode bounds sample peaks only: the 4×-oversampled true peak is reported, not limited (a sample-limited signal can read up to about 6 dB higher on the BS.1770-4 interpolator; here ${(maxTruePeakDbtp - c).toFixed(2)} dB above the ceiling)`,
      );
    }
    let maxPeakDbSplBound: number | null = null;
    const spl = this.ceiling.spl;
    if (spl) {
      maxPeakDbSplBound = maxSamplePeakDbfs + spl.peakSensitivityDbSpl;
      notes.push(`SPL figures are peak SPL at the listening position, bounded with the highest calibrated sensitivity (${spl.limitingHz} Hz); ${spl.note}`);
    } else {
      notes.push('no output calibration: SPL at the listening position is unknown');
    }
    let errorMic: LevelCapResult['errorMic'] = null;
    if (this.maxMic >= 0) {
      const micDb = db(this.maxMic);
      const micSpl = this.micCal ? micDb + SINE_CREST_DB + this.micCal.sensitivityDbSpl : null;
      const within = micSpl !== null && spl ? micSpl <= spl.peakCeilingDbSpl : null;
      if (within === false) reasons.push(`the error mic read ${micSpl!.toFixed(1)} dB SPL peak, above the ${spl!.peakCeilingDbSpl} dB SPL ceiling`);
      if (this.micCal) notes.push(`error-mic SPL holds where the microphone is flat (${this.micCal.validFromHz} … ${this.micCal.validToHz} Hz, as calibrated)`);
      errorMic = { maxSamplePeakDbfs: micDb, maxPeakDbSpl: micSpl, withinSplCeiling: within };
    }
    if (this.engine.guard === null) notes.push('the guard was off (as configured)');
    else notes.push("the guard's dead-microphone detector was off: the check feeds a silent reference input by design");
    let mutesObserved = 0;
    if (this.mutesDowngraded.length) {
      for (const e of this.collected) if (e.action === 'freeze-adaptation' && this.mutesDowngraded.includes(CAUSE_SETTING[e.cause] ?? '')) mutesObserved++;
      notes.push(
        `the guard is set to mute on ${this.mutesDowngraded.join(', ')}; during the check these freeze adaptation instead, so the ramp keeps testing the limiter (${mutesObserved} such event(s) would have muted)`,
      );
    }
    if (this.aborted) reasons.push('the check was stopped before the end of the ramp');
    const dropped = this.engine.events.pushed - this.collected.length;
    const h = this.hist;
    const m = this.histCount;
    return {
      ceilingDbfs: c,
      ceiling: this.ceiling,
      limiterMode: this.limiterMode,
      latencySamples: lim.latencySamples,
      maxSamplePeakDbfs,
      maxTruePeakDbtp,
      limiterTruePeakDbtp: lim.maxTruePeakDbtp,
      maxGainReductionDb: lim.maxGainReductionDb,
      maxInputPeakDbfs: db(this.source.maxPeak),
      samplesOverCeiling: this.over,
      nonFiniteOutputSamples: this.nonFinite,
      nonFiniteInputSamples: lim.nonFiniteCount,
      truePeakToleranceDb: truePeakMode ? TRUE_PEAK_TOLERANCE_DB : null,
      maxPeakDbSplBound,
      errorMic,
      passed: reasons.length === 0,
      reasons,
      completed: !this.aborted && this.done,
      sampleRate: this.sampleRate,
      blockSize: this.blockSize,
      durationS: this.position / this.sampleRate,
      startDbfs: this.startDbfs,
      topDbfs: this.topDbfs,
      toneHz: this.toneHz,
      segments: this.segments.map((s) => ({ ...s })),
      mutesObserved,
      events: [...this.collected],
      eventsDropped: dropped > 0 ? dropped : 0,
      history: {
        timeS: h.timeS.slice(0, m),
        levelDbfs: h.levelDbfs.slice(0, m),
        inputPeakDbfs: h.inputPeakDbfs.slice(0, m),
        samplePeakDbfs: h.samplePeakDbfs.slice(0, m),
        truePeakDbtp: h.truePeakDbtp.slice(0, m),
        gainReductionDb: h.gainReductionDb.slice(0, m),
        errorMicPeakDbfs: h.errorMicPeakDbfs.slice(0, m),
      },
      notes,
    };
  }
}

/**
 * Run a whole level-cap check in the simulator (no loudspeaker, no microphone): blocks of
 * `blockSize`, events collected as they come.
 */
export function runLevelCapCheck(config: LevelCapCheckConfig, opts: { onProgress?: (fraction: number) => void } = {}): LevelCapResult {
  const chk = new LevelCapCheck(config);
  const out = new Float32Array(chk.blockSize);
  let lastPct = -1;
  while (!chk.done) {
    chk.process(out, Math.min(chk.blockSize, chk.totalSamples - chk.samplesDone));
    if (chk.engine.events.size > chk.engine.events.capacity / 2) chk.collectEvents();
    if (opts.onProgress) {
      const pct = Math.floor((100 * chk.samplesDone) / chk.totalSamples);
      if (pct !== lastPct) {
        lastPct = pct;
        opts.onProgress(chk.samplesDone / chk.totalSamples);
      }
    }
  }
  return chk.result();
}
