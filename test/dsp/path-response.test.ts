import { describe, expect, it } from 'vitest';
import { pathResponseAt, pathResponseAtHz } from '../../src/dsp/path-response.ts';
import { expectClose } from '../helpers/tolerance.ts';

// Reference values come from the definition of the discrete-time Fourier transform,
// S(ω) = Σ s_m e^{−jωm} (Oppenheim & Schafer, Discrete-Time Signal Processing, 3rd ed., 2010, §2.7),
// evaluated in closed form, not from the Horner recursion under test.
describe('pathResponseAt', () => {
  const omegas = [0, 0.001, 0.05, 0.7, 1.9, Math.PI - 1e-3, Math.PI, 4.5];
  const out = new Float64Array(4);

  it('should equal e^{−jωD} for a pure delay of D samples', () => {
    for (const D of [0, 1, 17, 600]) {
      const model = new Float32Array(D + 1);
      model[D] = 1;
      for (const w of omegas) {
        pathResponseAt(model, w, out, 0);
        expectClose(out[0]!, Math.cos(w * D), 1e-9, `Re S(${w}) for D = ${D}`);
        expectClose(out[1]!, -Math.sin(w * D), 1e-9, `Im S(${w}) for D = ${D}`);
      }
    }
  });

  it('should match the closed form of a 2-tap FIR a + b e^{−jω}', () => {
    // |S|² = a² + b² + 2ab cos ω and arg S = atan2(−b sin ω, a + b cos ω)
    const pairs: Array<[number, number]> = [[1, 1], [0.5, -0.25], [-0.75, 2]];
    for (const [a, b] of pairs) {
      const model = new Float32Array([a, b]);
      for (const w of omegas) {
        pathResponseAt(model, w, out, 2);
        const mag = Math.sqrt(a * a + b * b + 2 * a * b * Math.cos(w));
        expectClose(Math.hypot(out[2]!, out[3]!), mag, 1e-12, `|S| for [${a}, ${b}] at ω = ${w}`);
        if (mag > 1e-9) {
          const arg = Math.atan2(-b * Math.sin(w), a + b * Math.cos(w));
          const diff = Math.atan2(Math.sin(Math.atan2(out[3]!, out[2]!) - arg), Math.cos(Math.atan2(out[3]!, out[2]!) - arg));
          expectClose(diff, 0, 1e-12, `arg S for [${a}, ${b}] at ω = ${w}`);
        }
      }
    }
    // [1, 1] has its zero at ω = π
    pathResponseAt(new Float32Array([1, 1]), Math.PI, out, 0);
    expect(Math.hypot(out[0]!, out[1]!)).toBeLessThan(1e-12);
  });

  it('should match a direct sum for a long delay plus FIR, in Hz as well', () => {
    const model = new Float32Array(200);
    model[150] = 0.8;
    model[151] = 0.3;
    model[152] = -0.2;
    const fs = 48000;
    for (const hz of [20, 333.3, 2000, 23999]) {
      const w = (2 * Math.PI * hz) / fs;
      let re = 0;
      let im = 0;
      for (let m = 0; m < model.length; m++) {
        re += model[m]! * Math.cos(w * m);
        im -= model[m]! * Math.sin(w * m);
      }
      pathResponseAtHz(model, hz, fs, out, 0);
      expectClose(out[0]!, re, 1e-9, `Re S at ${hz} Hz`);
      expectClose(out[1]!, im, 1e-9, `Im S at ${hz} Hz`);
    }
  });
});
