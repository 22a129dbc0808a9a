import { describe, expect, it } from 'vitest';
import { Random } from '../../src/dsp/random.ts';
import { bandAttenuation, bandAttenuationFromSignals } from '../../src/analysis/band-attenuation.ts';
import { expectClose } from '../helpers/tolerance.ts';

function axis(count: number, df: number): Float64Array {
  return new Float64Array(count).map((_, k) => k * df);
}

function sine(amplitude: number, f: number, fs: number, count: number): Float64Array {
  return new Float64Array(count).map((_, n) => amplitude * Math.sin((2 * Math.PI * f * n) / fs));
}

describe('bandAttenuation', () => {
  it('should report 10 dB in bands wholly under a 10 dB cut and 0 dB above, and the overall power ratio', () => {
    const df = 1;
    const frequencies = axis(8193, df);
    const off = new Float64Array(8193).fill(1e-6);
    // Control removes 90 % of the power below 500 Hz (10 dB), nothing above.
    const on = off.map((p, k) => (frequencies[k]! < 500 ? p / 10 : p));
    const r = bandAttenuation(off, on, frequencies, { fraction: 3, lowHz: 50, highHz: 4000 });
    expect(r.weighting).toBe('Z');
    expect(r.bands[0]!.nominalHz).toBe(50);
    expect(r.bands[r.bands.length - 1]!.nominalHz).toBe(4000);
    for (const band of r.bands) {
      if (band.highHz < 500) expectClose(band.attenuationDb, 10, 0.05, `${band.nominalHz} Hz`);
      else if (band.lowHz > 500) expectClose(band.attenuationDb, 0, 1e-12, `${band.nominalHz} Hz`);
      // AES17 level of a flat PSD: 10·log10(2·P·width).
      expectClose(band.offDb, 10 * Math.log10(2 * 1e-6 * (band.highHz - band.lowHz)), 1e-9, `level ${band.nominalHz}`);
    }
    const lo = r.bands[0]!.lowHz;
    const hi = r.bands[r.bands.length - 1]!.highHz;
    const expected = 10 * Math.log10((hi - lo) / ((500 - lo) / 10 + (hi - 500)));
    expectClose(r.overall.attenuationDb, expected, 0.01, 'overall');
  });

  it('should read a full-scale sine as 0 dBFS in its band (AES17)', () => {
    // AES17 (src/dsp/units.ts): a full-scale sine reads 0 dBFS RMS.
    const fs = 48000;
    const r = bandAttenuationFromSignals(sine(1, 1000, fs, 1 << 16), sine(0.1, 1000, fs, 1 << 16), fs, {
      fraction: 1,
      lowHz: 500,
      highHz: 2000,
    });
    const band = r.bands.find((b) => b.nominalHz === 1000)!;
    expectClose(band.offDb, 0, 0.05, '1 kHz band off');
    expectClose(band.attenuationDb, 20, 0.01, '1 kHz band attenuation');
    expectClose(r.overall.offDb, 0, 0.05, 'overall off');
  });

  it('should apply A-weighting: a full-scale 100 Hz sine reads −19.1 dBFS overall', () => {
    // IEC 61672-1:2013 Table 3 (from memory): A at 100 Hz (an exact base-ten frequency) = −19.1 dB.
    const fs = 16000;
    const x = sine(1, 100, fs, 1 << 17);
    const quiet = sine(0.5, 100, fs, 1 << 17);
    const r = bandAttenuationFromSignals(x, quiet, fs, { fraction: 3, weighting: 'A', lowHz: 20, highHz: 5000 });
    expect(r.weighting).toBe('A');
    expect(r.resolutionHz).toBeLessThanOrEqual(4.604 / 5); // 20 Hz band width / 5 (bands.ts)
    expectClose(r.overall.offDb, -19.1, 0.1, 'A-weighted level');
    expectClose(r.overall.attenuationDb, 20 * Math.log10(2), 0.01, '6 dB quieter');
    const z = bandAttenuationFromSignals(x, quiet, fs, { fraction: 3, lowHz: 20, highHz: 5000 });
    expectClose(z.overall.offDb, 0, 0.05, 'Z-weighted level');
  });

  it('should treat silence as −Infinity dBFS and a band silent both ways as 0 dB attenuation', () => {
    const frequencies = axis(1025, 10);
    const off = new Float64Array(1025);
    const on = new Float64Array(1025);
    for (let k = 0; k < 1025; k++) if (frequencies[k]! > 1500) off[k] = 1e-6;
    const r = bandAttenuation(off, on, frequencies, { fraction: 1, lowHz: 100, highHz: 4000 });
    const quiet = r.bands.find((b) => b.nominalHz === 125)!;
    expect(quiet.offDb).toBe(-Infinity);
    expect(quiet.attenuationDb).toBe(0);
    const loud = r.bands.find((b) => b.nominalHz === 4000)!;
    expect(loud.attenuationDb).toBe(Infinity);
  });

  it('should leave out bands above fs/2 and refuse when none is left', () => {
    const frequencies = axis(513, 8000 / 1024); // fs = 8 kHz
    const psd = new Float64Array(513).fill(1e-6);
    const r = bandAttenuation(psd, psd, frequencies, { fraction: 1 });
    expect(r.bands[r.bands.length - 1]!.nominalHz).toBe(2000); // the 4 kHz band reaches 5.6 kHz > 4 kHz
    expect(() => bandAttenuation(psd, psd, frequencies, { fraction: 1, lowHz: 5000, highHz: 8000 })).toThrow(
      /no band between lowHz 5000 Hz and highHz 8000 Hz lies wholly below fs\/2 = 4000 Hz/,
    );
    expect(() => bandAttenuation(psd, psd.subarray(1), frequencies, { fraction: 1 })).toThrow(/same length/);
  });

  it('should measure a noise cut made by a known filter within 0.5 dB per octave band', () => {
    // On = off passed through a 2-tap average y[n] = (x[n] + x[n−1])/2, |H|² = cos²(πf/fs): known per band.
    const fs = 8000;
    const count = 1 << 17;
    const off = new Float64Array(count);
    new Random(31).fillGaussian(off, 0.1);
    const on = off.map((v, n) => (n > 0 ? (v + off[n - 1]!) / 2 : v / 2));
    const r = bandAttenuationFromSignals(off, on, fs, { fraction: 1, lowHz: 60, highHz: 2000, segmentLength: 1024 });
    for (const band of r.bands) {
      // Mean of |H|² over the band (flat input), integrated in closed form: ∫cos²(πf/fs) df.
      const F = (f: number): number => f / 2 + (fs / (4 * Math.PI)) * Math.sin((2 * Math.PI * f) / fs);
      const gain = (F(band.highHz) - F(band.lowHz)) / (band.highHz - band.lowHz);
      expectClose(band.attenuationDb, -10 * Math.log10(gain), 0.5, `${band.nominalHz} Hz`);
    }
  });
});
