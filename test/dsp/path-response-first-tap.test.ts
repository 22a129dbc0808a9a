import { describe, expect, it } from 'vitest';
import { pathResponseAt, pathResponsesAt } from '../../src/dsp/path-response.ts';
import { expectClose } from '../helpers/tolerance.ts';

// Reference: the DTFT of a delayed FIR in closed form, S(ω) = e^{−jωD}(a + b e^{−jω})
// (the shift theorem, Oppenheim & Schafer, Discrete-Time Signal Processing, 3rd ed., 2010, §2.9),
// not the Horner recursion under test.
describe('pathResponseAt', () => {
  describe('with the leading zeros skipped (first > 0)', () => {
    it('should equal the closed form of a long bulk delay and a 2-tap FIR', () => {
      const D = 11000; // a round trip through the audio I/O, in samples
      const a = 0.5;
      const b = -0.25; // exact in float32, like a
      const model = new Float32Array(D + 2);
      model[D] = a;
      model[D + 1] = b;
      const out = new Float64Array(2);
      for (const w of [0.001, 0.0157, 0.3, 2.5]) {
        pathResponseAt(model, w, out, 0, model.length, D);
        const re = a + b * Math.cos(w);
        const im = -b * Math.sin(w);
        expectClose(out[0]!, re * Math.cos(w * D) + im * Math.sin(w * D), 1e-9, `Re S(${w})`);
        expectClose(out[1]!, im * Math.cos(w * D) - re * Math.sin(w * D), 1e-9, `Im S(${w})`);
      }
    });

    it('should give what the full sum gives, for several frequencies at once', () => {
      const model = new Float32Array(300);
      for (let i = 120; i < 300; i++) model[i] = Math.sin(i) / (i - 100);
      const omegas = Float64Array.from([0.01, 0.2, 1.1]);
      const skipped = new Float64Array(6);
      const full = new Float64Array(6);
      pathResponsesAt(model, omegas, 3, skipped, 120);
      pathResponsesAt(model, omegas, 3, full);
      for (let i = 0; i < 6; i++) expect(Math.abs(skipped[i]! - full[i]!)).toBeLessThan(1e-9);
    });
  });
});
