import { describe, expect, it } from 'vitest';
import { analyzeRecordings } from '../../src/analysis/recording-analysis.ts';
import { Random } from '../../src/dsp/random.ts';
import { addFractionalDelay } from '../../src/plant/fractional-delay.ts';
import { fftConvolve } from '../../src/dsp/fft.ts';
import { expectClose } from '../helpers/tolerance.ts';

const fs = 8000;

/** White noise and, per sample, a delayed and scaled copy of it (windowed-sinc fractional delay) plus independent noise. */
function delayedPair(n: number, delaySamples: number, gain: number, noiseRms: number, seed = 3): { x: Float64Array; y: Float64Array } {
  const rng = new Random(seed);
  const x = new Float64Array(n);
  for (let i = 0; i < n; i++) x[i] = 0.1 * rng.gaussian();
  const kernel = new Float64Array(Math.ceil(delaySamples) + 20);
  addFractionalDelay(kernel, delaySamples, gain, 16);
  const y = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    let acc = 0;
    for (let k = 0; k < kernel.length && k <= i; k++) acc += kernel[k]! * x[i - k]!;
    y[i] = acc + noiseRms * rng.gaussian();
  }
  return { x, y };
}

describe('analyzeRecordings', () => {
  it('should find the delay and a coherence bound of 10·log10(1 + SNR) for a delayed copy with independent noise', () => {
    // y = g·x(t − D) + n: γ² = S/(S + N) per bin, so the bound −10·log10(1 − γ²) = 10·log10(1 + S/N)
    // (Nelson & Elliott, Active Control of Sound, 1992, from memory); 10 dB SNR → 10.41 dB. GCC-PHAT delay
    // (Knapp & Carter, IEEE Trans. ASSP 24(4), 1976). D = 240.4 samples is 12 % of the 2048-sample segment: left
    // in, it would lower γ² by ρ(0.117)² ≈ 0.72 (welch.ts), so only the alignment gets the bound right.
    const D = 240.4;
    const gain = 0.7;
    const snr = 10;
    const noiseRms = Math.sqrt((0.01 * gain * gain) / snr);
    const { x, y } = delayedPair(10 * fs, D, gain, noiseRms);
    const a = analyzeRecordings({ sampleRate: fs, reference: x, errorOff: y });
    expectClose(a.causality.primaryDelayMs!, (1000 * D) / fs, 0.1 * (1000 / fs), 'delay (ms)');
    expectClose(a.coherenceBoundDb, 10 * Math.log10(1 + snr), 0.3, 'overall bound (dB)');
    for (const b of a.bands.filter((r) => r.centerHz > 100 && r.centerHz < 3000)) expectClose(b.boundDb, 10 * Math.log10(1 + snr), 1, `bound at ${b.nominalHz} Hz`);
    expect(a.causality.verdict).toBe('unknown'); // no model given
    expect(a.causality.secondaryDelayMs).toBeNull();
  });

  it('should take segments long enough for a reverberant path when a model gives its length', () => {
    // A segment holds the error caused by the reference in the same segment only up to the response's length, so
    // short segments bias γ² low (Carter, Proc. IEEE 75(2), 1987, from memory). Here the reference → error response
    // decays over ~400 samples; at 20 dB SNR the bound is 10·log10(1 + 100) = 20.04 dB. With the model's length
    // the segments grow from 2048 to 4096 samples and the estimate comes within 1.5 dB (ours); without, 4 dB short.
    const n = 6 * fs;
    const rng = new Random(11);
    const h = new Float64Array(600).map((_, i) => (i < 30 ? 0 : rng.gaussian() * Math.exp(-(i - 30) / 120)));
    const x = new Float64Array(n).map(() => 0.1 * rng.gaussian());
    const d = fftConvolve(x, h).subarray(0, n);
    const pd = d.reduce((s, v) => s + v * v, 0) / n;
    const y = d.map((v) => v + Math.sqrt(pd / 100) * rng.gaussian());
    const analytic = 10 * Math.log10(101);
    const withModel = analyzeRecordings({ sampleRate: fs, reference: x, errorOff: y, model: { taps: h, delayMs: 30 / 8 } });
    const without = analyzeRecordings({ sampleRate: fs, reference: x, errorOff: y });
    expect(withModel.resolution.coherenceSegmentLength).toBe(4096);
    expectClose(withModel.coherenceBoundDb, analytic, 1.5, 'bound with the model\'s length (dB)');
    expect(without.coherenceBoundDb).toBeLessThan(analytic - 3);
  });

  it('should judge causality against the model\'s delay', () => {
    // Kuo & Morgan, Proc. IEEE 87(6), 1999 (from memory): broadband control needs primary delay ≥ secondary delay.
    const { x, y } = delayedPair(4 * fs, 40, 1, 0.001);
    const taps = new Float64Array(64);
    taps[48] = 0.5;
    const late = analyzeRecordings({ sampleRate: fs, reference: x, errorOff: y, model: { taps, delayMs: 6 } });
    expect(late.causality.verdict).toBe('predictable-only');
    expectClose(late.causality.marginMs!, 5 - 6, 0.02, 'margin (ms)');
    const early = analyzeRecordings({ sampleRate: fs, reference: x, errorOff: y, model: { taps, delayMs: 4 } });
    expect(early.causality.verdict).toBe('broadband');
    expectClose(early.causality.marginMs!, 1, 0.02, 'margin (ms)');
  });

  it('should not report a delay for hum alone, where the delay is known only modulo the period', () => {
    // Two sines of 100 Hz, the error one 7 ms late, each with its own sensor noise. A whole-record DFT of strong
    // tones leaks with one phase across many bins, which put a false GCC-PHAT peak at lag 0 before the analysis
    // tapered the record; a pure tone carries no broadband delay information (delay-estimate.ts), so: unknown.
    const n = 6 * fs;
    const rng = new Random(5);
    const x = new Float64Array(n);
    const y = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      x[i] = 0.3 * Math.sin((2 * Math.PI * 100 * i) / fs + 0.4) + 0.0005 * rng.gaussian();
      y[i] = 0.2 * Math.sin((2 * Math.PI * 100 * (i - 56)) / fs + 0.4) + 0.0005 * rng.gaussian();
    }
    const a = analyzeRecordings({ sampleRate: fs, reference: x, errorOff: y, model: { taps: [0, 1], delayMs: 5 } });
    expect(a.causality.primaryDelayMs).toBeNull();
    expect(a.causality.verdict).toBe('unknown');
    expect(a.notes.delay).toMatch(/no clear delay/);
  });

  it('should not report a delay for periodic noise whose correlation peaks repeat every period', () => {
    // 78 harmonics of 50 Hz with random phases fill the band, so the whitened correlation is high (above 10/√M),
    // but at every 20 ms period alike: the delay is known only modulo the period (delay-estimate.ts), so no peak
    // is 1.25 times the others and the verdict stays unknown. The true delay is 3 ms.
    const n = 6 * fs;
    const rng = new Random(2);
    const phases = Array.from({ length: 78 }, () => 2 * Math.PI * rng.uniform());
    const periodic = (t: number) => phases.reduce((s, p, h) => s + 0.02 * Math.sin((2 * Math.PI * 50 * (h + 1) * t) / fs + p), 0);
    const x = new Float64Array(n).map((_, i) => periodic(i) + 0.0005 * rng.gaussian());
    const y = new Float64Array(n).map((_, i) => 0.6 * periodic(i - 24) + 0.0005 * rng.gaussian());
    const a = analyzeRecordings({ sampleRate: fs, reference: x, errorOff: y, model: { taps: [0, 1], delayMs: 1 } });
    expect(Math.abs(a.causality.delayPeak)).toBeGreaterThan(a.causality.delayThreshold);
    expect(a.causality.primaryDelayMs).toBeNull();
    expect(a.causality.verdict).toBe('unknown');
    expect(a.notes.delay).toMatch(/not 1\.25 times higher than the next one/);
  });

  it('should read a sine of amplitude A as 20·log10(A) dBFS in its band, A-weighted by the IEC 61672-1 value', () => {
    // AES17: a full-scale sine reads 0 dBFS. IEC 61260-1 one-third-octave band at 1 kHz holds 1 kHz; IEC 61672-1
    // Table 3: A-weighting at 125 Hz is −16.1 dB (the formula gives −16.19 at exactly 125 Hz).
    const n = 4 * fs;
    const rng = new Random(9);
    const ref = new Float64Array(n).map(() => 0.01 * rng.gaussian());
    const sine = (hz: number, amp: number) => new Float64Array(n).map((_, i) => amp * Math.sin((2 * Math.PI * hz * i) / fs));
    const z = analyzeRecordings({ sampleRate: fs, reference: ref, errorOff: sine(1000, 0.25) });
    const band = z.bands.find((b) => b.nominalHz === 1000)!;
    expectClose(band.offDb, 20 * Math.log10(0.25), 0.05, '1 kHz band level (dBFS)');
    expectClose(z.overall.offDb, 20 * Math.log10(0.25), 0.05, 'overall level (dBFS)');
    const za = analyzeRecordings({ sampleRate: fs, reference: ref, errorOff: sine(125, 0.25) }, { weighting: 'A' });
    expectClose(za.bands.find((b) => b.nominalHz === 125)!.offDb, 20 * Math.log10(0.25) - 16.19, 0.1, 'A-weighted 125 Hz band (dBFS)');
  });

  it('should give the attenuation per band between control off and on, from a chosen time on', () => {
    // The error with control on is the control-off error scaled by 0.1 after 1 s (a level change of 20 dB), and
    // unchanged before: from 1 s on every band reads 20 dB; from 0 s the bands read less.
    const { x, y } = delayedPair(6 * fs, 24, 0.8, 0.001);
    const on = y.map((v, i) => (i >= fs ? 0.1 * v : v));
    const later = analyzeRecordings({ sampleRate: fs, reference: x, errorOff: y, errorOn: on }, { comparisonStartS: 1, fraction: 1 });
    for (const b of later.bands) expectClose(b.attenuationDb!, 20, 1e-6, `octave ${b.nominalHz} Hz`);
    expectClose(later.overall.attenuationDb!, 20, 1e-6, 'overall');
    const whole = analyzeRecordings({ sampleRate: fs, reference: x, errorOff: y, errorOn: on }, { fraction: 1 });
    expect(whole.overall.attenuationDb!).toBeLessThan(10);
    const offOnly = analyzeRecordings({ sampleRate: fs, reference: x, errorOff: y });
    expect(offOnly.bands[0]).not.toHaveProperty('attenuationDb');
    expect(offOnly.overall).not.toHaveProperty('onDb');
  });

  it('should say when control removed more than the bound allows a fixed filter of this reference', () => {
    // Reference unrelated to the error (γ² ≈ 1/n_d, bound ≈ 0 dB) but the error is 30 dB quieter with control on,
    // as with a tonal controller that takes its reference from the error signal.
    const rng = new Random(6);
    const x = new Float64Array(4 * fs).map(() => 0.1 * rng.gaussian());
    const y = new Float64Array(4 * fs).map(() => 0.1 * rng.gaussian());
    const a = analyzeRecordings({ sampleRate: fs, reference: x, errorOff: y, errorOn: y.map((v) => v * 10 ** (-30 / 20)) });
    expect(a.coherenceBoundDb).toBeLessThan(0.5);
    expect(a.notes.boundExceeded).toMatch(/^control removed 30\.0 dB, more than the 0\.\d dB coherence bound/);
    expect(a.notes.alignment).toMatch(/no delay was found to align/);
  });

  it('should use the common length of a reference and error of different lengths, and say so', () => {
    const { x, y } = delayedPair(3 * fs, 24, 0.8, 0.001);
    const a = analyzeRecordings({ sampleRate: fs, reference: x, errorOff: y.subarray(0, 2 * fs) });
    expect(a.durationS).toBe(2);
    expect(a.notes.length).toMatch(/differ in length.*first 16000 samples \(2\.000 s\)/);
  });

  it('should refuse recordings too short to analyse or holding non-finite samples, naming them', () => {
    expect(() => analyzeRecordings({ sampleRate: fs, reference: new Float64Array(100), errorOff: new Float64Array(100) })).toThrow(
      /reference is too short to analyse: 100 samples, need at least 1024/,
    );
    const bad = new Float64Array(2048);
    bad[7] = Number.NaN;
    expect(() => analyzeRecordings({ sampleRate: fs, reference: new Float64Array(2048), errorOff: bad })).toThrow(/errorOff\[7\] must be a finite number, got NaN/);
  });
});
