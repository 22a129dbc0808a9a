/**
 * The analysis behind the live panel, run in a Web Worker (src/analysis/worker.ts exposes it with
 * comlink) and testable in Node:
 *  - error-mic spectra with control off and on (Welch's method, welch.ts), from audio chunks the
 *    worklet sends on a dedicated port;
 *  - secondary-path identification from an exponential-sweep recording (Farina 2000, via
 *    sweep-deconvolve.ts): round-trip delay by the onset rule of path-model.ts, a model of bulk delay
 *    + FIR, measurement SNR, and how strongly the loudspeaker reaches the reference mic;
 *  - the geometry and the causality verdict: the acoustic delay from the reference mic to the error
 *    mic (GCC-PHAT, delay-estimate.ts) against the secondary-path delay (Kuo & Morgan, "Active noise
 *    control: a tutorial review", Proc. IEEE 87(6), 1999: broadband feedforward control needs the
 *    primary path to be no shorter than the secondary path plus processing; from memory).
 */
import { psdToDbfsPerHz, welchPsd } from './welch.ts';
import { deconvolveSweep } from './sweep-deconvolve.ts';
import { onsetDelaySamples, pathFrequencyResponse } from './path-model.ts';
import { estimateDelay } from './delay-estimate.ts';
import { nextPow2 } from '../dsp/fft.ts';
import { causalityVerdict, type CausalityVerdict } from './bounds.ts';
import type { ProbeSpec, AudioChunkMessage } from '../protocol/messages.ts';

/** Seconds of audio kept per signal for spectra and geometry. */
export const HISTORY_S = 2;

export interface SpectraView {
  frequencyHz: Float64Array;
  /** Error-mic PSD with control off and on in the project's spectrum scale, dBFS/Hz AES17 (psdToDbfsPerHz; NaN where no data yet). */
  offDb: Float64Array;
  onDb: Float64Array;
  resolutionHz: number;
  /** Seconds of audio behind each curve. */
  offSeconds: number;
  onSeconds: number;
}

export interface IdentifyOptions {
  /** FIR taps kept after the bulk delay (1 … 16384). */
  firTaps: number;
  /** Longest round trip searched, s (default 0.25 s; must fit in the recorded tail). */
  maxDelayS?: number;
}

export interface IdentificationResult {
  /** Model for the engine: zeros up to the bulk delay (minus a guard), then the measured response. */
  model: Float32Array;
  /** Round-trip delay (output → loudspeaker → air → error mic → input), samples and ms. */
  delaySamples: number;
  delayMs: number;
  /** Measurement SNR in dB (null when the tail was too short to measure the noise). */
  snrDb: number | null;
  /** Peak of the loudspeaker → reference-mic response relative to the loudspeaker → error-mic peak, dB. */
  feedbackRatioDb: number;
  /** Problems a user should act on (quiet probe, no response, strong feedback). */
  warnings: string[];
  /** False when the measurement is too poor to control with (the panel then asks before loading it). */
  usable: boolean;
  sampleRate: number;
}

export interface PathView {
  timeMs: Float64Array;
  taps: Float64Array;
  frequencyHz: Float64Array;
  magnitudeDb: Float64Array;
  /** Bulk delay by the onset rule, ms (NaN for an all-zero model). */
  delayMs: number;
  truePath: Float64Array | null;
}


export interface GeometryResult {
  primaryDelayMs: number | null;
  /** Height of the whitened correlation peak (see delay-estimate.ts); small means no trustworthy delay. */
  peakValue: number;
  note: string;
}

/**
 * Below this measurement SNR a model is not loaded without the user's say-so (our threshold: at
 * 10 dB the model's error is about a third of its magnitude, enough to slow FxLMS or, with the phase
 * error it brings, to destabilise it; Morgan 1980 bounds the phase error at 90°, from memory).
 */
export const MIN_USABLE_SNR_DB = 10;

/** Number of samples of model kept before the onset (pre-ringing of the band-limited estimate). */
export const ONSET_GUARD_SAMPLES = 8;

class Ring {
  readonly data: Float32Array;
  private pos = 0;
  filled = 0;
  constructor(size: number) {
    this.data = new Float32Array(size);
  }
  push(x: Float32Array): void {
    const N = this.data.length;
    for (let i = 0; i < x.length; i++) {
      this.data[this.pos] = x[i]!;
      this.pos = (this.pos + 1) % N;
    }
    this.filled = Math.min(N, this.filled + x.length);
  }
  /** The newest `filled` samples in time order. */
  latest(): Float32Array {
    const N = this.data.length;
    const out = new Float32Array(this.filled);
    const start = (this.pos - this.filled + N) % N;
    for (let i = 0; i < this.filled; i++) out[i] = this.data[(start + i) % N]!;
    return out;
  }
  clear(): void {
    this.pos = 0;
    this.filled = 0;
  }
}


export class LiveAnalysis {
  private sampleRate = 0;
  private on: Ring | null = null;
  private off: Ring | null = null;
  private refOff: Ring | null = null;
  private errOff: Ring | null = null;
  private port: MessagePort | null = null;

  /** Forget every sample (new session, new device or new scenario). */
  reset(): void {
    this.on?.clear();
    this.off?.clear();
    this.refOff?.clear();
    this.errOff?.clear();
  }

  /** Receive audio chunks from a worklet on this port (replaces any earlier port). */
  attachAudioPort(port: MessagePort): void {
    if (this.port) this.port.close();
    this.port = port;
    port.onmessage = (e) => {
      const m = e.data as AudioChunkMessage;
      if (m && m.type === 'audio-chunk') this.pushChunk(m);
    };
  }

  pushChunk(m: AudioChunkMessage): void {
    if (m.sampleRate !== this.sampleRate || !this.on) {
      this.sampleRate = m.sampleRate;
      const size = nextPow2(Math.ceil(HISTORY_S * m.sampleRate));
      this.on = new Ring(size);
      this.off = new Ring(size);
      this.refOff = new Ring(size);
      this.errOff = new Ring(size);
    }
    if (m.errOff) {
      // simulated plant: the control-off twin runs all the time
      this.off!.push(m.errOff);
      if (m.controlOn) this.on!.push(m.err);
      this.refOff!.push(m.ref);
      this.errOff!.push(m.errOff);
    } else if (m.controlOn) {
      this.on!.push(m.err);
    } else {
      this.off!.push(m.err);
      this.refOff!.push(m.ref);
      this.errOff!.push(m.err);
    }
  }

  /** Segment length for spectra: about 1/6 s (≈ 6 Hz resolution), a power of two. */
  segmentLength(): number {
    return nextPow2(Math.max(256, Math.round(this.sampleRate / 6)));
  }

  spectra(): SpectraView | null {
    if (!this.on || !this.off) return null;
    const L = this.segmentLength();
    const fs = this.sampleRate;
    const bins = L / 2 + 1;
    const frequencyHz = new Float64Array(bins);
    for (let k = 0; k < bins; k++) frequencyHz[k] = (k * fs) / L;
    const curve = (r: Ring): Float64Array => {
      const out = new Float64Array(bins).fill(NaN);
      if (r.filled < L) return out;
      const psd = welchPsd(r.latest(), fs, { segmentLength: L }).psd;
      for (let k = 0; k < bins; k++) out[k] = psdToDbfsPerHz(Math.max(psd[k]!, 1e-30));
      return out;
    };
    return {
      frequencyHz,
      offDb: curve(this.off),
      onDb: curve(this.on),
      resolutionHz: fs / L,
      offSeconds: this.off.filled / fs,
      onSeconds: this.on.filled / fs,
    };
  }

  /** Acoustic delay from the reference mic to the error mic, from the control-off history. */
  measureGeometry(maxDelayS = 0.05): GeometryResult {
    if (!this.refOff || !this.errOff || this.refOff.filled < this.sampleRate * 0.5) {
      return { primaryDelayMs: null, peakValue: 0, note: 'needs at least 0.5 s of microphone audio with control off' };
    }
    const ref = this.refOff.latest();
    const err = this.errOff.latest();
    const d = estimateDelay(ref, err, this.sampleRate, { maxDelayS: Math.min(maxDelayS, (ref.length - 1) / this.sampleRate), polarity: 'either' });
    // treat a peak below ~10/√M as no detection (delay-estimate.ts)
    const threshold = 10 / Math.sqrt(nextPow2(2 * ref.length));
    if (Math.abs(d.peakValue) < threshold) {
      return { primaryDelayMs: null, peakValue: d.peakValue, note: 'no clear delay: the noise is too quiet, too tonal, or the mics hear different sources' };
    }
    return { primaryDelayMs: d.delayMs, peakValue: d.peakValue, note: 'GCC-PHAT delay from reference to error mic' };
  }

  identify(rec: { err: Float32Array; ref: Float32Array; probe: ProbeSpec; sampleRate: number }, options: IdentifyOptions): IdentificationResult {
    const { probe, sampleRate: fs } = rec;
    const firTaps = options.firTaps;
    if (!Number.isInteger(firTaps) || firTaps < 1 || firTaps > 16384) throw new RangeError(`firTaps must be an integer from 1 to 16384, got ${firTaps}`);
    const tail = rec.err.length - Math.round(probe.durationS * fs);
    const maxDelay = Math.round((options.maxDelayS ?? 0.25) * fs);
    const irLength = Math.max(16, Math.min(maxDelay + firTaps, tail - 64));
    const sweep = { sampleRate: fs, startHz: probe.startHz, endHz: probe.endHz, durationS: probe.durationS, amplitude: probe.amplitude };
    const warnings: string[] = [];
    const e = deconvolveSweep(rec.err, sweep, { irLength });
    const r = deconvolveSweep(rec.ref, sweep, { irLength });
    let peakE = 0;
    let peakR = 0;
    for (let i = 0; i < irLength; i++) {
      peakE = Math.max(peakE, Math.abs(e.linearIr[i]!));
      peakR = Math.max(peakR, Math.abs(r.linearIr[i]!));
    }
    if (peakE === 0) {
      throw new RangeError('the error mic recorded nothing during the probe: check the input device and the error channel');
    }
    const onset = onsetDelaySamples(e.linearIr);
    const usable = e.snrDb === null || e.snrDb >= MIN_USABLE_SNR_DB;
    if (!usable) {
      warnings.push(
        e.snrDb! < 0
          ? 'no response to the probe: the error mic does not seem to hear the loudspeaker (check the output device, the volume and the error channel)'
          : `low measurement SNR (${e.snrDb!.toFixed(1)} dB): raise the probe level a little or reduce background noise`,
      );
    }
    if (onset + firTaps > irLength) warnings.push('the response runs past the analysed window: the model is cut short');
    const feedbackRatioDb = peakR > 0 ? 20 * Math.log10(peakR / peakE) : -Infinity;
    if (feedbackRatioDb > -6) warnings.push(`the loudspeaker reaches the reference mic strongly (${feedbackRatioDb.toFixed(1)} dB relative to the error mic): expect feedback; move the reference mic away from the loudspeaker`);
    const len = Math.min(irLength, onset + firTaps);
    const model = new Float32Array(len);
    const first = Math.max(0, onset - ONSET_GUARD_SAMPLES);
    // raised-cosine taper over the last eighth so the cut does not ring
    const taper = Math.max(1, Math.floor((len - first) / 8));
    for (let i = first; i < len; i++) {
      const fromEnd = len - 1 - i;
      const w = fromEnd < taper ? 0.5 - 0.5 * Math.cos((Math.PI * (fromEnd + 1)) / (taper + 1)) : 1;
      model[i] = e.linearIr[i]! * w;
    }
    return { model, delaySamples: onset, delayMs: (1000 * onset) / fs, snrDb: e.snrDb, feedbackRatioDb, warnings, usable, sampleRate: fs };
  }

  pathView(model: Float32Array, sampleRate: number, truePath: Float32Array | null = null): PathView {
    const n = model.length;
    const timeMs = new Float64Array(n);
    const taps = new Float64Array(n);
    let any = false;
    for (let i = 0; i < n; i++) {
      timeMs[i] = (1000 * i) / sampleRate;
      taps[i] = model[i]!;
      if (model[i] !== 0) any = true;
    }
    const fr = pathFrequencyResponse(model, sampleRate);
    const tp = truePath ? Float64Array.from({ length: n }, (_, i) => truePath[i] ?? 0) : null;
    return {
      timeMs,
      taps,
      frequencyHz: fr.frequencyHz,
      magnitudeDb: fr.magnitudeDb,
      delayMs: any ? (1000 * onsetDelaySamples(model)) / sampleRate : NaN,
      truePath: tp,
    };
  }

  causality(primaryDelayMs: number, secondaryDelayMs: number): CausalityVerdict {
    return causalityVerdict(primaryDelayMs, secondaryDelayMs);
  }
}
