/**
 * "Will cancellation work here, and how well?" from recordings: the computation behind `ancbench analyze`
 * and the simulator's report. Inputs are the reference and error microphones recorded together with
 * control off, optionally the error microphone with control on, and optionally a secondary-path model.
 *
 * What is computed, and how:
 * 1. Reference → error delay by GCC-PHAT on the control-off pair (Knapp & Carter, IEEE Trans. ASSP 24(4),
 *    1976; delay-estimate.ts), both Hann-windowed over the whole record (see the code for why). A peak below
 *    10/√M (M the correlation length; delay-estimate.ts explains the threshold), or less than 1.25 times as high as the
 *    correlation anywhere more than 2 ms from it, is no detection: the delay is then reported as unknown.
 *    Polarity is free (a path may invert). Purely tonal noise carries its delay only modulo its period and gives
 *    no detection: the verdict is then 'unknown', which is honest.
 * 2. Coherence γ² between reference and error by Welch's method (Welch, 1967; welch.ts), after removing the
 *    estimated delay to the nearest sample (alignByDelay), since an unremoved delay biases γ² low. Segment
 *    length (ours): about 4 Hz resolution (the power of two nearest fs/4 from above), or with a model at least
 *    8 times its response's length (onset to 99.9 % of its energy), the rule of welch.ts for the part of the
 *    reference → error response a segment must hold (a reverberant room's 0.15 s response read 18 dB with 0.25 s
 *    segments and 30 dB with 1 s ones); then shortened so that at least 16 segments fit without a model, 8 with
 *    one, which keeps the bias of γ² between unrelated signals, about 1/n_d (Carter, Knapp & Nuttall, IEEE
 *    Trans. AU-21(4), 1973; n_d ≈ 2× segments at 50 % overlap), below 0.07. With tones the bound grows with
 *    the resolution (a narrower filter leaves less noise beside a tone): `resolution` reports it.
 * 3. Coherence bound, per bin −10·log10(1 − γ²) and overall 10·log10(Σ S_ee / Σ S_ee·(1 − γ²)) over the
 *    analysed bands (Nelson & Elliott, Active Control of Sound, 1992; bounds.ts), S_ee the control-off error
 *    PSD with the chosen frequency weighting, so it bounds the same weighted level the bands report. Per band
 *    the same ratio over the band's bins.
 * 4. Band levels per IEC 61260-1:2014 (bands.ts) with A/C/Z weighting per IEC 61672-1:2013 Annex E
 *    (weighting.ts), control off and on, and their difference (band-attenuation.ts), from Welch PSDs whose
 *    resolution is a fifth of the lowest band's width when the recording is long enough
 *    (segmentLengthForBands), otherwise the longest segment that fits (a note says so).
 * 5. Causality (Kuo & Morgan, Proc. IEEE 87(6), 1999, from memory; bounds.ts): the reference → error delay
 *    against the model's bulk delay, as a margin in ms and a verdict.
 *
 * Off and on levels may come from a window of the recordings (`comparisonStartS`), e.g. the simulator's
 * steady state; the coherence always uses the whole control-off pair.
 *
 * Long recordings, bounded memory: the signals may be arrays or `SampleSource`s read on demand (a WAV
 * file on disk). Welch estimates read one segment at a time, so their memory does not depend on the
 * length. The delay (step 1) is the one whole-record computation; it uses at most DELAY_WINDOW samples
 * (2^20: 21.8 s at 48 kHz), taken from the middle of a longer recording, which bounds its memory
 * (about 150 MB) and time; the `delayWindow` note says when it applies. A delay that changes during
 * the recording is therefore measured over that window only.
 */
import { bandAttenuation, type LevelChange } from './band-attenuation.ts';
import { bandPowers, fractionalOctaveBands, segmentLengthForBands, type BandFraction } from './bands.ts';
import { causalityVerdict, coherenceBoundDb as boundOfCoherence, coherenceBoundSpectrum, overallCoherenceBoundDb, type CausalityVerdictKind } from './bounds.ts';
import { estimateDelay, gccPhat } from './delay-estimate.ts';
import { nextPow2 } from '../dsp/fft.ts';
import { summarizePathModel, type FrequencyResponse } from './path-model.ts';
import { applyWeightingToPsd, type FrequencyWeighting } from './weighting.ts';
import { coherenceDelayBias, hannWindow, isSampleSource, readAll, sliceSource, welchCrossSpectra, welchPsd, type SampleSource } from './welch.ts';

type Signal = Float32Array | Float64Array | SampleSource;

/** Most samples the reference → error delay is estimated from (the middle of a longer recording). */
export const DELAY_WINDOW = 2 ** 20;

/** A delay peak must be this many times higher than any correlation value more than 2 ms away (ours). */
export const UNIQUE_PEAK_RATIO = 1.25;

/** Fewest samples a recording must hold to be analysed. */
export const MIN_ANALYSIS_SAMPLES = 1024;

export interface RecordingAnalysisInput {
  sampleRate: number;
  /** Reference microphone, control off. */
  reference: Signal;
  /** Error microphone, control off, recorded at the same instants as `reference`. */
  errorOff: Signal;
  /** Error microphone with control on (may be a separate recording of another length). */
  errorOn?: Signal | undefined;
  /** Secondary-path model at `sampleRate`: taps and bulk delay (ms). */
  model?: { taps: ArrayLike<number>; delayMs: number } | undefined;
}

export interface RecordingAnalysisOptions {
  /** Frequency weighting of levels and of the overall bound (default 'Z'). */
  weighting?: FrequencyWeighting;
  /** 1 = octave, 3 = one-third-octave bands (default 3). */
  fraction?: BandFraction;
  /** Lowest and highest frequency analysed (Hz; default 20 and 20000, the top limited to fs/2). */
  lowHz?: number;
  highHz?: number;
  /** Largest |delay| searched between reference and error (ms; default 500, at most half the recording). */
  maxDelayMs?: number;
  /** Off and on levels use the recordings from this time on (s; default 0). */
  comparisonStartS?: number;
  /** Welch segment for coherence and plotted spectra (power of two; default: see file comment). */
  coherenceSegmentLength?: number;
}

export interface BandRow {
  centerHz: number;
  nominalHz: number;
  lowHz: number;
  highHz: number;
  /** Level with control off (dBFS, AES17, weighted). */
  offDb: number;
  /** Level with control on, and offDb − onDb; present only with a control-on recording. */
  onDb?: number;
  attenuationDb?: number;
  /** Coherence bound in this band (dB). */
  boundDb: number;
}

export interface CausalityResult {
  /** Reference → error delay (ms) by GCC-PHAT; null when no clear peak was found. */
  primaryDelayMs: number | null;
  /** The model's bulk delay (ms), null without a model. */
  secondaryDelayMs: number | null;
  /** primaryDelayMs − secondaryDelayMs (ms), null when either is unknown. */
  marginMs: number | null;
  verdict: CausalityVerdictKind;
  sentence: string;
  /** Height of the whitened correlation peak, and the height that counts as a detection. */
  delayPeak: number;
  delayThreshold: number;
}

export interface AnalysisSpectra {
  /** Bin frequencies (Hz), at the coherence resolution. */
  frequencies: Float64Array;
  /** Unweighted one-sided PSDs ((full scale)²/Hz); off/on over the comparison window. */
  referencePsd: Float64Array;
  errorOffPsd: Float64Array;
  errorOnPsd: Float64Array | null;
  /** γ² per bin and the bound −10·log10(1 − γ²) (dB). */
  coherence: Float64Array;
  boundDb: Float64Array;
}

export interface RecordingAnalysis {
  sampleRate: number;
  /** Length of the analysed control-off pair (s). */
  durationS: number;
  weighting: FrequencyWeighting;
  fraction: BandFraction;
  /** Overall coherence bound (dB) over bandRangeHz, weighted as the levels. */
  coherenceBoundDb: number;
  /** Lower edge of the first band and upper edge of the last (Hz). */
  bandRangeHz: [number, number];
  causality: CausalityResult;
  /** Overall weighted level off (and on, and the attenuation) over bandRangeHz. */
  overall: { offDb: number; onDb?: number; attenuationDb?: number };
  bands: BandRow[];
  spectra: AnalysisSpectra;
  resolution: {
    bandSegmentLength: number;
    bandResolutionHz: number;
    coherenceSegmentLength: number;
    coherenceResolutionHz: number;
    coherenceSegments: number;
  };
  /** Present when a model was given. */
  model: { delayMs: number; taps: Float64Array; response: FrequencyResponse } | null;
  /** Remarks a reader needs (shortened recordings, coarse resolution, no delay found ...), keyed by topic. */
  notes: Record<string, string>;
}

/** Largest magnitude accepted in an array input (60 dB above full scale; sources check their own samples). */
const MAX_SAMPLE = 1000;

function requireSignal(name: string, x: Signal): void {
  if (x.length < MIN_ANALYSIS_SAMPLES) {
    throw new RangeError(`${name} is too short to analyse: ${x.length} samples, need at least ${MIN_ANALYSIS_SAMPLES}`);
  }
  if (isSampleSource(x)) return;
  for (let i = 0; i < x.length; i++) {
    if (Math.abs(x[i]!) > MAX_SAMPLE) throw new RangeError(`${name}[${i}] is ${x[i]}, beyond ±${MAX_SAMPLE} (60 dB above full scale)`);
    if (!Number.isFinite(x[i])) throw new RangeError(`${name}[${i}] must be a finite number, got ${x[i]}`);
  }
}

/** Largest power of two ≤ n (n ≥ 1). */
function floorPow2(n: number): number {
  return 2 ** Math.floor(Math.log2(n));
}

export function analyzeRecordings(input: RecordingAnalysisInput, options: RecordingAnalysisOptions = {}): RecordingAnalysis {
  const fs = input.sampleRate;
  if (!Number.isFinite(fs) || fs <= 0) throw new RangeError(`sampleRate must be a finite number of Hz > 0, got ${fs}`);
  requireSignal('reference', input.reference);
  requireSignal('errorOff', input.errorOff);
  if (input.errorOn) requireSignal('errorOn', input.errorOn);
  const weighting = options.weighting ?? 'Z';
  const fraction = options.fraction ?? 3;
  const lowHz = options.lowHz ?? 20;
  const highHz = Math.min(options.highHz ?? 20000, fs / 2);
  if (!(lowHz > 0 && lowHz < highHz)) throw new RangeError(`lowHz must be > 0 Hz and below highHz (${highHz} Hz), got ${lowHz}`);
  const notes: Record<string, string> = {};

  // The pair must be simultaneous: use the common length, and say so.
  let reference = input.reference;
  let errorOff = input.errorOff;
  if (reference.length !== errorOff.length) {
    const n = Math.min(reference.length, errorOff.length);
    notes.length =
      `the reference (${reference.length} samples) and control-off error (${errorOff.length} samples) recordings differ in length; ` +
      `the first ${n} samples (${(n / fs).toFixed(3)} s) of each were used, assuming both start at the same instant`;
    reference = sliceSource(reference, 0, n);
    errorOff = sliceSource(errorOff, 0, n);
  }
  const n = reference.length;

  // 1. Delay from reference to error, control off, over at most DELAY_WINDOW samples from the middle.
  const dw = Math.min(n, DELAY_WINDOW);
  const dStart = Math.floor((n - dw) / 2);
  if (dw < n) {
    notes.delayWindow = `the reference → error delay was estimated from the middle ${(dw / fs).toFixed(1)} s of the recordings (from ${(dStart / fs).toFixed(1)} s), the most ancbench uses for it`;
  }
  const maxDelayS = Math.min((options.maxDelayMs ?? 500) / 1000, (dw - 1) / fs / 2);
  // Both signals are Hann-windowed over the whole record first. Without it, strong tones leak across many
  // bins of the record-long DFT with one common phase, and the whitened cross spectrum then holds a spurious
  // peak at lag 0 (measured: −0.17 on a 100 Hz hum whose true delay is 7.1 ms, far above the 0.01 threshold).
  // The window confines the leakage to a few bins; a delay D ≪ record length is unaffected.
  const window = hannWindow(dw);
  const tapered = (x: Signal) => readAll(x, dStart, dw).map((v, i) => v * window[i]!);
  const taperedRef = tapered(reference);
  const taperedErr = tapered(errorOff);
  const delay = estimateDelay(taperedRef, taperedErr, fs, { maxDelayS, polarity: 'either' });
  // A detection must clear two tests: the height 10/√M that unrelated signals' correlation stays below, and
  // uniqueness: at least UNIQUE_PEAK_RATIO times any value more than 2 ms away from it. Tonal signals fail the
  // second: their correlation repeats every period, so the largest of many near-equal ripples is no delay.
  // Measured ratios: hum and drifting tones of the demo scenarios 1.02–1.07; broadband ones 4–49; a reverberant
  // room (test/plant/room-paths.test.ts), whose reflections make peaks of their own, 1.48.
  const threshold = 10 / Math.sqrt(nextPow2(2 * dw));
  const maxLag = Math.floor(maxDelayS * fs + 1e-9);
  const correlation = gccPhat(taperedRef, taperedErr, { maxLagSamples: maxLag });
  const peakLag = Math.round(delay.delaySamples);
  const guard = Math.max(1, Math.round(0.002 * fs));
  let runnerUp = 0;
  for (let i = 0; i < correlation.length; i++) {
    if (Math.abs(i - maxLag - peakLag) > guard) runnerUp = Math.max(runnerUp, Math.abs(correlation[i]!));
  }
  const peak = Math.abs(delay.peakValue);
  const detected = peak >= threshold && peak >= UNIQUE_PEAK_RATIO * runnerUp;
  if (!detected) {
    notes.delay =
      peak < threshold
        ? `no clear delay between the reference and the error microphone (correlation peak ${peak.toFixed(4)}, below ${threshold.toFixed(4)}): ` +
          'the signals share too little broadband content (tonal noise, or unrelated signals)'
        : `no clear delay between the reference and the error microphone: the correlation peak (${peak.toFixed(4)}) is not ` +
          `${UNIQUE_PEAK_RATIO} times higher than the next one (${runnerUp.toFixed(4)}), as with tonal or periodic noise, whose delay is known only modulo its period`;
  }

  // 2. Coherence on the aligned pair.
  const shift = detected ? Math.round(delay.delaySamples) : 0;
  const m = n - Math.abs(shift);
  const aligned = { x: sliceSource(reference, shift < 0 ? -shift : 0, m), y: sliceSource(errorOff, shift > 0 ? shift : 0, m) };
  const spread = input.model ? responseSpread(input.model.taps) : 0;
  const wantedLc = Math.max(nextPow2(Math.ceil(fs / 4)), nextPow2(8 * spread));
  let lc = options.coherenceSegmentLength ?? Math.max(64, Math.min(wantedLc, floorPow2(m / (input.model ? 8 : 16))));
  lc = Math.min(lc, floorPow2(m));
  const cross = welchCrossSpectra(aligned.x, aligned.y, fs, { segmentLength: lc });
  if (lc < wantedLc && options.coherenceSegmentLength === undefined) {
    notes.coherenceSegments = `the recordings are too short for segments of 8 times the model's response (${wantedLc} samples): with ${lc} the coherence of a reverberant path reads low; record longer`;
  }
  if (cross.segmentCount < 12) {
    notes.coherence = `only ${cross.segmentCount} segments were averaged for the coherence: it reads high between unrelated signals (about 1/${cross.segmentCount}); record longer`;
  }
  if (!detected) {
    const cap = boundOfCoherence(coherenceDelayBias(0.01 * fs, lc));
    notes.alignment =
      'no delay was found to align the reference and error before the coherence was estimated: an unremoved delay lowers the ' +
      `coherence of broadband noise (a 10 ms delay would cap its bound near ${cap.toFixed(0)} dB with these ${((1000 * lc) / fs).toFixed(0)} ms segments; ` +
      'steady tones are not affected), so read the bound for broadband noise as a lower estimate';
  }
  const boundSpectrum = coherenceBoundSpectrum(cross.coherence);

  // Bands covered: IEC 61260-1 bands wholly below fs/2.
  const bandList = fractionalOctaveBands({ fraction, lowHz, highHz }).filter((b) => b.highHz <= fs / 2);
  if (bandList.length === 0) throw new RangeError(`no ${fraction === 1 ? 'octave' : 'one-third-octave'} band between ${lowHz} and ${highHz} Hz lies below fs/2 = ${fs / 2} Hz`);
  const bandRangeHz: [number, number] = [bandList[0]!.lowHz, bandList[bandList.length - 1]!.highHz];

  // 3. Overall and per-band bounds from the weighted control-off error PSD of the aligned pair.
  const weightedErr = applyWeightingToPsd(cross.pyy, cross.frequencies, { weighting });
  const coherenceBoundDb = overallCoherenceBoundDb(cross.coherence, weightedErr, {
    frequencies: cross.frequencies,
    lowHz: bandRangeHz[0],
    highHz: Math.min(bandRangeHz[1], fs / 2),
  });
  const residual = weightedErr.map((p, k) => p * (1 - Math.min(cross.coherence[k]!, 1 - 1e-6)));
  const bandErr = bandPowers(weightedErr, cross.frequencies, bandList);
  const bandResidual = bandPowers(residual, cross.frequencies, bandList);

  // 4. Levels off and on over the comparison window.
  const startS = options.comparisonStartS ?? 0;
  if (!(startS >= 0)) throw new RangeError(`comparisonStartS must be ≥ 0 s, got ${startS}`);
  const from = (x: Signal, name: string): Signal => {
    const s = Math.round(startS * fs);
    if (x.length - s < MIN_ANALYSIS_SAMPLES) {
      throw new RangeError(
        `comparisonStartS (${startS} s) leaves ${Math.max(0, x.length - s)} samples of ${name} (${(x.length / fs).toFixed(2)} s long); at least ${MIN_ANALYSIS_SAMPLES} are needed`,
      );
    }
    return sliceSource(x, s, x.length - s);
  };
  const offPart = from(errorOff, 'errorOff');
  const onPart = input.errorOn ? from(input.errorOn, 'errorOn') : null;
  const shortest = Math.min(offPart.length, onPart ? onPart.length : Infinity);
  const wanted = segmentLengthForBands(fs, { fraction, lowHz: bandList[0]!.centerHz });
  const lb = Math.min(wanted, floorPow2(shortest));
  if (lb < wanted) {
    notes.resolution =
      `the recordings are too short for a resolution of a fifth of the lowest band's width (${wanted} samples per segment); ` +
      `${lb} samples give ${(fs / lb).toFixed(2)} Hz, so the lowest bands share bins with their neighbours`;
  }
  const offPsd = welchPsd(offPart, fs, { segmentLength: lb });
  const onPsd = onPart ? welchPsd(onPart, fs, { segmentLength: lb }) : null;
  const levels = bandAttenuation(offPsd.psd, (onPsd ?? offPsd).psd, offPsd.frequencies, { fraction, weighting, lowHz, highHz });
  const bands: BandRow[] = levels.bands.map((b, i) => {
    const row: BandRow = {
      centerHz: b.centerHz,
      nominalHz: b.nominalHz,
      lowHz: b.lowHz,
      highHz: b.highHz,
      offDb: b.offDb,
      boundDb: boundDb(bandErr[i]!, bandResidual[i]!),
    };
    if (onPsd) {
      row.onDb = b.onDb;
      // A band silent with control off or on has no attenuation to report (null in JSON, a note says why).
      row.attenuationDb = Number.isFinite(b.offDb) && Number.isFinite(b.onDb) ? b.attenuationDb : NaN;
    }
    return row;
  });
  const overall: LevelChange | { offDb: number } = onPsd
    ? { ...levels.overall, attenuationDb: Number.isFinite(levels.overall.offDb) && Number.isFinite(levels.overall.onDb) ? levels.overall.attenuationDb : NaN }
    : { offDb: levels.overall.offDb };
  const silentOff = bands.filter((b) => !Number.isFinite(b.offDb)).length;
  const silentOn = onPsd ? bands.filter((b) => b.onDb !== undefined && !Number.isFinite(b.onDb)).length : 0;
  if (!Number.isFinite(levels.overall.offDb) || (onPsd && !Number.isFinite(levels.overall.onDb))) {
    notes.silence = `the ${!Number.isFinite(levels.overall.offDb) ? 'control-off' : 'control-on'} error recording is silent (all samples equal) over the analysed window: no level, attenuation or coherence bound can be measured from it`;
  } else if (silentOff || silentOn) {
    notes.silence = `${silentOff + silentOn} band level(s) read silent (${silentOff} with control off, ${silentOn} with control on): their attenuation is left out (null)`;
  }
  if (onPsd && levels.overall.attenuationDb > coherenceBoundDb + 3) {
    notes.boundExceeded =
      `control removed ${levels.overall.attenuationDb.toFixed(1)} dB, more than the ${coherenceBoundDb.toFixed(1)} dB coherence bound: the bound holds for a ` +
      'fixed linear filter of this reference, so the controller used something else (its own tonal reference from the error signal), or tracked ' +
      'noise that changes over time (a drifting tone), or the bound read low (see the other notes)';
  }

  // Spectra for plots at the coherence resolution (the band PSDs may have 10⁴–10⁵ bins).
  const plotPsd = (x: Signal) => welchPsd(x, fs, { segmentLength: Math.min(lc, floorPow2(x.length)) });
  const offPlot = plotPsd(offPart);
  const onPlot = onPart ? plotPsd(onPart) : null;
  if (offPlot.segmentLength !== lc || (onPlot && onPlot.segmentLength !== lc)) {
    notes.spectra = `the comparison window is shorter than one ${lc}-sample segment: the plotted control-off spectrum covers the whole recording and the control-on one is left out`;
  }
  const spectra: AnalysisSpectra = {
    frequencies: cross.frequencies,
    referencePsd: cross.pxx,
    errorOffPsd: offPlot.segmentLength === lc ? offPlot.psd : cross.pyy,
    errorOnPsd: onPlot && onPlot.segmentLength === lc ? onPlot.psd : null,
    coherence: cross.coherence,
    boundDb: boundSpectrum,
  };

  // 5. Model and causality.
  let model: RecordingAnalysis['model'] = null;
  if (input.model) {
    const summary = summarizePathModel(input.model.taps, fs);
    model = { delayMs: input.model.delayMs, taps: Float64Array.from(input.model.taps), response: summary.response };
  }
  const causality = causalityOf(detected ? delay.delayMs : null, model ? model.delayMs : null);
  if (detected && delay.delayMs < 0) {
    notes.delaySign = 'the error microphone hears the noise before the reference microphone: the reference is downstream of the error microphone';
  }

  return {
    sampleRate: fs,
    durationS: n / fs,
    weighting,
    fraction,
    coherenceBoundDb,
    bandRangeHz,
    causality: { ...causality, delayPeak: delay.peakValue, delayThreshold: threshold },
    overall,
    bands,
    spectra,
    resolution: {
      bandSegmentLength: lb,
      bandResolutionHz: fs / lb,
      coherenceSegmentLength: lc,
      coherenceResolutionHz: fs / lc,
      coherenceSegments: cross.segmentCount,
    },
    model,
    notes,
  };
}

/** Samples from a response's first non-zero tap to where 99.9 % of its energy has arrived. */
function responseSpread(taps: ArrayLike<number>): number {
  let total = 0;
  let first = -1;
  for (let i = 0; i < taps.length; i++) {
    total += taps[i]! * taps[i]!;
    if (first < 0 && taps[i] !== 0) first = i;
  }
  if (!(total > 0)) return 0;
  let acc = 0;
  for (let i = 0; i < taps.length; i++) {
    acc += taps[i]! * taps[i]!;
    if (acc >= 0.999 * total) return i - first + 1;
  }
  return taps.length - first;
}

/** 10·log10(total / residual); 0 for a silent band. */
function boundDb(total: number, residual: number): number {
  return total > 0 ? 10 * Math.log10(total / residual) : 0;
}

function causalityOf(primaryDelayMs: number | null, secondaryDelayMs: number | null): Omit<CausalityResult, 'delayPeak' | 'delayThreshold'> {
  if (primaryDelayMs === null) {
    return {
      primaryDelayMs: null,
      secondaryDelayMs,
      marginMs: null,
      verdict: 'unknown',
      sentence:
        'No clear delay was found between the reference and the error microphone, so whether broadband noise can be cancelled is unknown. ' +
        'Tonal and periodic noise can be cancelled whatever the delay.',
    };
  }
  const v = causalityVerdict(primaryDelayMs, secondaryDelayMs);
  return { primaryDelayMs, secondaryDelayMs, marginMs: v.marginMs, verdict: v.verdict, sentence: v.sentence };
}
