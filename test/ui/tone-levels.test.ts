import { describe, expect, it } from 'vitest';
import { toneLevelDbfs } from '../../src/ui/tone-levels.ts';
import { psdToDbfsPerHz, welchPsd } from '../../src/analysis/welch.ts';

const FS = 48000;
const L = 8192;

function spectrumOf(x: Float64Array): { frequencyHz: Float64Array; densityDb: Float64Array; resolutionHz: number } {
  const r = welchPsd(x, FS, { segmentLength: L });
  const densityDb = Float64Array.from(r.psd, psdToDbfsPerHz);
  const frequencyHz = Float64Array.from({ length: densityDb.length }, (_, k) => (k * FS) / L);
  return { frequencyHz, densityDb, resolutionHz: FS / L };
}

describe('toneLevelDbfs', () => {
  it('should read a sine of peak A as 20·log10(A) dBFS (AES17), between bins and off by a bin', () => {
    // AES17: a sine of peak A reads 20·log10(A) dBFS; Welch's PSD integrates to the mean square
    // (Welch, IEEE Trans. Audio Electroacoust. AU-15(2), 1967), so the band sum gives it back.
    const hz = 123.4; // between bins (5.86 Hz apart)
    const A = 0.3;
    const x = Float64Array.from({ length: FS * 2 }, (_, i) => A * Math.sin((2 * Math.PI * hz * i) / FS) + 1e-4 * Math.sin(i * 1.7));
    const s = spectrumOf(x);
    expect(toneLevelDbfs(s, hz)).toBeCloseTo(20 * Math.log10(A), 1);
    // a frequency estimate 2 Hz off the tone still reads its level (the band is ±3 bins)
    expect(Math.abs(toneLevelDbfs(s, hz + 2) - 20 * Math.log10(A))).toBeLessThan(0.1);
  });
  it('should give NaN for a frequency not known yet or a spectrum without data', () => {
    const s = { frequencyHz: [0, 10, 20, 30], densityDb: [NaN, NaN, NaN, NaN], resolutionHz: 10 };
    expect(toneLevelDbfs(s, 20)).toBeNaN();
    expect(toneLevelDbfs({ ...s, densityDb: [0, 0, 0, 0] }, 0)).toBeNaN();
    expect(toneLevelDbfs({ ...s, densityDb: [0, 0, 0, 0] }, NaN)).toBeNaN();
  });
});
