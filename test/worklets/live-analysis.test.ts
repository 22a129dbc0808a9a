import { describe, expect, it } from 'vitest';
import { LiveAnalysis, MIN_USABLE_SNR_DB } from '../../src/analysis/live-analysis.ts';
import { causalityVerdict } from '../../src/analysis/bounds.ts';
import { ExponentialSweep } from '../../src/dsp/sweep.ts';
import { bandMisalignmentDb } from '../../src/analysis/path-model.ts';
import { Random } from '../../src/dsp/random.ts';
import type { ProbeSpec } from '../../src/protocol/messages.ts';
import { expectClose } from '../helpers/tolerance.ts';

const FS = 48000;
const PROBE: ProbeSpec = { startHz: 40, endHz: 16000, durationS: 1.5, amplitude: 0.03, tailS: 0.5 };

/** What a microphone records while the probe plays through a path (delay + FIR) with sensor noise. */
function record(delay: number, fir: number[], gain: number, noiseRms: number, seed: number): Float32Array {
  const sweep = new ExponentialSweep({ sampleRate: FS, startHz: PROBE.startHz, endHz: PROBE.endHz, durationS: PROBE.durationS, amplitude: PROBE.amplitude });
  const n = sweep.lengthSamples + Math.round(PROBE.tailS * FS);
  const x = new Float64Array(n);
  sweep.process(x, n);
  const rng = new Random(seed);
  const y = new Float32Array(n);
  for (let i = 0; i < n; i++) {
    let v = 0;
    for (let k = 0; k < fir.length; k++) {
      const j = i - delay - k;
      if (j >= 0) v += fir[k]! * x[j]!;
    }
    y[i] = gain * v + noiseRms * rng.gaussian();
  }
  return y;
}

describe('LiveAnalysis.identify', () => {
  describe('with a sweep recorded through a known path', () => {
    // exponential-sweep deconvolution: Farina, AES 108th Convention, preprint 5093, 2000
    it('should find the round-trip delay and a model that matches the path in band', () => {
      const delay = 300;
      const fir = [0.6, 0.25, -0.1];
      const err = record(delay, fir, 1, 1e-4, 1);
      const ref = record(delay + 40, fir, 0.1, 1e-4, 2); // the loudspeaker reaches the reference mic 20 dB weaker
      const r = new LiveAnalysis().identify({ err, ref, probe: PROBE, sampleRate: FS }, { firTaps: 128 });
      // onset rule of path-model.ts (first tap within 20 dB of the peak): the estimate is band-limited
      // to the sweep's 40 Hz … 16 kHz, whose pre-ringing can trip the rule a few samples early
      expect(r.delaySamples).toBeLessThanOrEqual(delay);
      expect(r.delaySamples).toBeGreaterThanOrEqual(delay - 3);
      const truth = new Float64Array(delay + fir.length);
      fir.forEach((v, k) => (truth[delay + k] = v));
      // inside the swept band the model is the path (band-limited estimate outside it)
      expect(bandMisalignmentDb(r.model, truth, FS, [100, 10000])).toBeLessThan(-20);
      expect(r.usable).toBe(true);
      expect(r.snrDb!).toBeGreaterThan(MIN_USABLE_SNR_DB);
      expectClose(r.feedbackRatioDb, 20 * Math.log10(0.1), 1, 'loudspeaker → reference mic relative level (dB)');
      expect(r.model.length).toBe(r.delaySamples + 128);
    });
  });

  describe('with a recording that never heard the probe', () => {
    it('should mark the result unusable and say why', () => {
      const quiet = record(0, [0], 1, 0.01, 3);
      const r = new LiveAnalysis().identify({ err: quiet, ref: quiet, probe: PROBE, sampleRate: FS }, { firTaps: 64 });
      expect(r.usable).toBe(false);
      expect(r.warnings.join(' ')).toContain('no response to the probe');
    });
  });
});

describe('LiveAnalysis.spectra', () => {
  it('should keep control-off and control-on audio apart', () => {
    const a = new LiveAnalysis();
    const chunk = 4096;
    const hz = (64 * FS) / 8192; // a bin centre of the 8192-point segments
    let t = 0;
    const tone = (amp: number): Float32Array => Float32Array.from({ length: chunk }, (_, i) => amp * Math.sin((2 * Math.PI * hz * (t + i)) / FS));
    for (let c = 0; c < 8; c++, t += chunk) a.pushChunk({ type: 'audio-chunk', sampleRate: FS, err: tone(0.1), errOff: null, ref: tone(0.1), controlOn: false });
    for (let c = 0; c < 8; c++, t += chunk) a.pushChunk({ type: 'audio-chunk', sampleRate: FS, err: tone(0.01), errOff: null, ref: tone(0.1), controlOn: true });
    const s = a.spectra()!;
    expect(s.resolutionHz).toBe(FS / 8192);
    const k = Math.round(hz / s.resolutionHz);
    // amplitudes 0.1 and 0.01: 20 dB apart
    expectClose(s.offDb[k]! - s.onDb[k]!, 20, 0.1, 'off − on at the tone (dB)');
    // Welch density: the PSD integrates to the mean square, A²/2 for a sine (Welch, IEEE Trans. AU-15(2), 1967);
    // on the AES17 dBFS/Hz scale (10·log10(2·PSD)) the integral is 2·A²/2 = A², i.e. 20·log10(A) dBFS
    let total = 0;
    for (let i = 0; i < s.offDb.length; i++) total += Math.pow(10, s.offDb[i]! / 10) * s.resolutionHz;
    expectClose(total, 0.1 ** 2, 0.0004, 'integrated control-off PSD (2 × mean square)');
  });
});

describe('causalityVerdict', () => {
  // broadband feedforward control needs the primary path at least as long as the secondary path:
  // Kuo & Morgan, "Active noise control: a tutorial review", Proc. IEEE 87(6), 1999 (from memory)
  it('should call a geometry causal only when the noise arrives no sooner than the control signal', () => {
    const yes = causalityVerdict(7.1, 6);
    expect(yes.verdict).toBe('broadband');
    expectClose(yes.marginMs!, 1.1, 1e-9, 'margin');
    const no = causalityVerdict(2, 6);
    expect(no.verdict).toBe('predictable-only');
    expect(no.sentence).toContain('only predictable noise (tones, hum, periodic sounds) can be cancelled');
    expect(causalityVerdict(6, 6).verdict).toBe('broadband');
  });
});
