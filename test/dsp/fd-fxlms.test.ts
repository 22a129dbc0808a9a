import { describe, expect, it } from 'vitest';
import { FdFxlmsController, type FdFxlmsOptions } from '../../src/dsp/fd-fxlms.ts';
import { FxlmsController, type FxlmsConfig } from '../../src/dsp/fxlms.ts';
import { Random } from '../../src/dsp/random.ts';
import { normRelError } from '../helpers/tolerance.ts';

/**
 * Time-domain block FxLMS in float64, written as plainly as possible: every sample's output uses the
 * weights held at the start of its block; per-sample gradients e(n)·f(n − k) (normalised by
 * δ + ‖f(n)‖² for FxNLMS, ‖f(n)‖² summed directly over the L newest f, with the reference's start-up
 * scaling) are summed and applied at the
 * block end with w ← (1 − μγ)^n·w − μ·Σ. Histories are whole arrays indexed by absolute time.
 */
class BlockFxlms64 {
  readonly w: Float64Array;
  private readonly x: Float64Array;
  private readonly f: Float64Array;
  private t = 0;
  private filled = 0;
  constructor(private readonly c: FxlmsConfig, private readonly s: Float32Array, totalSamples: number) {
    this.w = new Float64Array(c.taps);
    this.x = new Float64Array(totalSamples);
    this.f = new Float64Array(totalSamples);
  }
  process(ref: Float32Array, err: Float32Array, out: Float64Array, n: number): void {
    const L = this.c.taps;
    const mu = this.c.stepSize;
    const reg = this.c.regularization ?? 1e-6;
    const grad = new Float64Array(L);
    for (let i = 0; i < n; i++, this.t++) {
      const t = this.t;
      this.x[t] = ref[i]!;
      let y = 0;
      for (let k = 0; k < L && k <= t; k++) y += this.w[k]! * this.x[t - k]!;
      out[i] = y;
      let f = 0;
      for (let m = 0; m < this.s.length && m <= t; m++) f += this.s[m]! * this.x[t - m]!;
      this.f[t] = f;
      let energy = 0;
      for (let k = 0; k < L && k <= t; k++) energy += this.f[t - k]! ** 2;
      // start-up (src/dsp/fxlms.ts): scaled to a full window until L samples follow the first f ≠ 0
      if (this.filled < L && (this.filled > 0 || f !== 0)) this.filled++;
      const norm = this.filled === L ? energy : this.filled > 0 ? (energy * L) / this.filled : 0;
      const c = this.c.algorithm === 'fxnlms' ? (mu * err[i]!) / (reg + norm) : mu * err[i]!;
      for (let k = 0; k < L && k <= t; k++) grad[k] = grad[k]! + c * this.f[t - k]!;
    }
    const lf = Math.pow(1 - mu * (this.c.leakage ?? 0), n);
    for (let k = 0; k < L; k++) this.w[k] = lf * this.w[k]! - grad[k]!;
  }
}

function randomModel(M: number, rng: Random): Float32Array {
  const s = new Float32Array(M);
  for (let m = 0; m < M; m++) s[m] = rng.gaussian() * Math.exp(-m / (M / 3));
  return s;
}

interface BlockProcessor<T> {
  process(ref: Float32Array, err: Float32Array, out: T, n: number): void;
}

/**
 * Feed two processors the same random reference and error blocks (the error is given, not produced
 * by the output: open loop). Returns the worst norm-wise relative output difference after block 0.
 * `error` may fill the error block itself (from the reference samples so far).
 */
function openLoop<A extends Float32Array | Float64Array, B extends Float32Array | Float64Array>(
  a: BlockProcessor<A>, outA: A, b: BlockProcessor<B>, outB: B, blocks: number, rng: Random,
  error: (ref: Float32Array, err: Float32Array, block: number) => void = (_r, e) => rng.fillGaussian(e, 0.3),
): number {
  const P = outA.length;
  const ref = new Float32Array(P);
  const err = new Float32Array(P);
  let worst = 0;
  for (let k = 0; k < blocks; k++) {
    rng.fillGaussian(ref, 0.5);
    error(ref, err, k);
    a.process(ref, err, outA, P);
    b.process(ref, err, outB, P);
    if (k > 0) worst = Math.max(worst, normRelError(outA, outB));
  }
  return worst;
}

interface Case {
  name: string;
  config: FxlmsConfig;
  modelTaps: number;
  block: number;
}

const cases: Case[] = [
  { name: 'FxLMS with leakage, L not a multiple of P, M < L', config: { algorithm: 'fxlms', taps: 300, stepSize: 2e-4, leakage: 0.5, update: 'block' }, modelTaps: 100, block: 64 },
  { name: 'FxNLMS, M > L, M not a multiple of P', config: { algorithm: 'fxnlms', taps: 128, stepSize: 0.5, regularization: 1e-3, update: 'block' }, modelTaps: 200, block: 32 },
  { name: 'FxNLMS, one partition each', config: { algorithm: 'fxnlms', taps: 20, stepSize: 0.3, update: 'block' }, modelTaps: 7, block: 32 },
];

describe('FdFxlmsController', () => {
  // Constrained (full-constraint) frequency-domain LMS weights equal time-domain block-LMS weights on
  // the same data: Ferrara, "Fast implementation of LMS adaptive filters", IEEE TASSP 28(4), 1980;
  // Clark, Mitra & Parker, "Block implementation of adaptive digital filters", IEEE TCAS 28(6), 1981
  // (from memory). The same data: the error is an independent random signal (open loop).
  for (const cs of cases) {
    it(`should give block-LMS weights and outputs in float64 with the full constraint (${cs.name})`, () => {
      const rng = new Random(17);
      const P = cs.block;
      const blocks = 48;
      const s = randomModel(cs.modelTaps, rng);
      const fd = new FdFxlmsController(cs.config, s, P, { constraint: 'full', precision: 'float64' });
      const td = new BlockFxlms64(cs.config, s, blocks * P);
      // outputs pass through a Float32Array, so they are compared at float32 resolution
      const worstOut = openLoop(fd, new Float32Array(P), td, new Float64Array(P), blocks, rng);
      const w = new Float64Array(cs.config.taps);
      expect(fd.copyWeights(w)).toBe(cs.config.taps);
      const wErr = normRelError(w, td.w);
      expect(wErr).toBeLessThanOrEqual(1e-8);
      expect(worstOut).toBeLessThanOrEqual(1e-6);
      // ‖w‖² kept by the update pass equals the norm of the copied taps
      let n2 = 0;
      for (const v of w) n2 += v * v;
      expect(Math.abs(fd.weightNormSquared() - n2)).toBeLessThanOrEqual(1e-9 * n2);
    });
  }

  // Same sources (Ferrara 1980; Clark, Mitra & Parker 1981): float32 storage on both sides; the
  // time-domain side is the project's reference FxlmsController in block-update mode. The wasm kernel
  // runs the spectral loops in float32 SIMD.
  for (const kernel of ['js', 'wasm'] as const) {
    for (const cs of cases) {
      it(`should match the float32 time-domain block FxLMS within 1e-4 with the ${kernel} kernel (${cs.name})`, () => {
        const rng = new Random(5);
        const P = cs.block;
        const s = randomModel(cs.modelTaps, rng);
        const fd = new FdFxlmsController(cs.config, s, P, { constraint: 'full', precision: 'float32', kernel });
        const td = new FxlmsController(cs.config, s, P);
        const worstOut = openLoop(fd, new Float32Array(P), td, new Float32Array(P), 64, rng);
        const w1 = new Float32Array(cs.config.taps);
        const w2 = new Float32Array(cs.config.taps);
        fd.copyWeights(w1);
        td.copyWeights(w2);
        expect(normRelError(w1, w2)).toBeLessThanOrEqual(1e-4);
        expect(worstOut).toBeLessThanOrEqual(1e-4);
      });
    }
  }

  it('should run the alternating constraint alike with the js and wasm kernels', () => {
    // Both kernels compute the same update (Derkx, Egelmeers & Sommen 2002); float32 SIMD spectra
    // versus float64 TypeScript loops differ by rounding only. Outputs compared norm-wise per block.
    // δ is not tiny here: while ‖f‖² ≈ 0 (the first samples) ε = μe/(δ + ‖f‖²) would magnify the
    // float32 rounding of f by about 1/‖f‖², a start-up effect that is not the kernels' doing.
    const rng = new Random(12);
    const P = 64;
    const cfg: FxlmsConfig = { algorithm: 'fxnlms', taps: 500, stepSize: 0.3, leakage: 1e-3, regularization: 1e-2 };
    const s = randomModel(300, rng);
    const js = new FdFxlmsController(cfg, s, P, { constraint: 'alternating', kernel: 'js', precision: 'float64' });
    const wasm = new FdFxlmsController(cfg, s, P, { constraint: 'alternating', kernel: 'wasm' });
    const worst = openLoop(wasm, new Float32Array(P), js, new Float32Array(P), 100, rng);
    expect(worst).toBeLessThanOrEqual(1e-4);
    expect(Math.abs(wasm.weightNormSquared() / js.weightNormSquared() - 1)).toBeLessThanOrEqual(1e-4);
    expect(js.weightNormSquared()).toBeGreaterThan(0);
  });

  it('should produce exact outputs for a short last block and freeze the weights when adaptation is off', () => {
    const rng = new Random(8);
    const P = 32;
    const cfg: FxlmsConfig = { algorithm: 'fxlms', taps: 70, stepSize: 1e-3, update: 'block' };
    const s = randomModel(40, rng);
    const fd = new FdFxlmsController(cfg, s, P, { constraint: 'full' });
    const td = new BlockFxlms64(cfg, s, 40 * P);
    const y1 = new Float32Array(P);
    const y2 = new Float64Array(P);
    openLoop(fd, y1, td, y2, 30, rng);
    const ref = new Float32Array(P);
    const err = new Float32Array(P);
    const before = new Float64Array(cfg.taps);
    fd.copyWeights(before);
    fd.adapt = false;
    rng.fillGaussian(ref, 0.5);
    rng.fillGaussian(err, 0.3);
    fd.process(ref, err, y1, P);
    const after = new Float64Array(cfg.taps);
    fd.copyWeights(after);
    expect(normRelError(after, before)).toBe(0);
    fd.adapt = true;
    // td must see the same block; its weights then change, so compare only the outputs of this block
    const yFrozen = Float32Array.from(y1);
    td.process(ref, err, y2, P);
    expect(normRelError(yFrozen, y2)).toBeLessThanOrEqual(1e-6);
  });

  it('should compute exact outputs for a block shorter than the partition', () => {
    const rng = new Random(9);
    const P = 64;
    const cfg: FxlmsConfig = { algorithm: 'fxnlms', taps: 150, stepSize: 0.2, update: 'block' };
    const s = randomModel(90, rng);
    const fd = new FdFxlmsController(cfg, s, P, { constraint: 'full' });
    const td = new BlockFxlms64(cfg, s, 21 * P);
    const y1 = new Float32Array(P);
    const y2 = new Float64Array(P);
    openLoop(fd, y1, td, y2, 20, rng);
    const ref = new Float32Array(P);
    const err = new Float32Array(P);
    const n = 23;
    rng.fillGaussian(ref, 0.5);
    rng.fillGaussian(err, 0.3);
    y1.fill(99);
    fd.process(ref, err, y1, n);
    td.process(ref, err, y2, n);
    expect(normRelError(y1.subarray(0, n), y2.subarray(0, n))).toBeLessThanOrEqual(1e-6);
    expect(y1[n]).toBe(99); // nothing written past n
  });

  it('should keep the block-LMS taps under the alternating constraint while its output differs slightly', () => {
    // The alternating constraint (Derkx, Egelmeers & Sommen, IEEE TSP 50(9), 2002, from memory) adds
    // the unconstrained gradient IFFT(conj(F)·E) to every partition and projects one partition per
    // block. The first P samples of that gradient are the block-LMS gradient (Ferrara 1980), so with
    // an error that does not depend on the output (open loop) the taps equal block LMS, while the
    // output also sees the not-yet-projected tails and so differs a little from block LMS.
    // FxLMS here: with FxNLMS the alternating path floors ‖f(n)‖² (see the onset test below).
    const rng = new Random(21);
    const P = 32;
    const cfg: FxlmsConfig = { algorithm: 'fxlms', taps: 256, stepSize: 2e-3, update: 'block' };
    const s = randomModel(64, rng);
    const alt = new FdFxlmsController(cfg, s, P, { constraint: 'alternating' });
    const td = new BlockFxlms64(cfg, s, 200 * P);
    // the error follows a fixed target filter, so the weights grow into a definite filter
    const target = new Float64Array(64);
    for (let k = 0; k < 64; k++) target[k] = rng.gaussian() * 0.2;
    const xs = new Float64Array(200 * P);
    let t = 0;
    const follow = (ref: Float32Array, err: Float32Array): void => {
      for (let i = 0; i < P; i++, t++) {
        xs[t] = ref[i]!;
        let d = 0;
        for (let k = 0; k < 64 && k <= t; k++) d += target[k]! * xs[t - k]!;
        err[i] = d;
      }
    };
    const y1 = new Float32Array(P);
    const y2 = new Float64Array(P);
    openLoop(alt, y1, td, y2, 100, rng, follow); // converging
    const outErr = openLoop(alt, y1, td, y2, 100, rng, follow);
    const w = new Float64Array(cfg.taps);
    alt.copyWeights(w);
    expect(normRelError(w, td.w)).toBeLessThanOrEqual(1e-8);
    expect(outErr).toBeLessThan(0.3);
    expect(outErr).toBeGreaterThan(1e-5); // not the same algorithm: the tails must show
  });

  it('should keep the alternating-constraint FxNLMS bounded when a silent reference comes alive', () => {
    // Per-sample NLMS normalisation gives samples taken while ‖f‖² ≈ 0 an ε of about μe/δ; in the
    // time domain (and under the full constraint) they multiply f ≈ 0 and do nothing, but the
    // unprojected tails of the alternating constraint correlate them with the louder f that follows.
    // The weights must stay as small as under the full constraint (common practice: onsets and
    // start-ups are where normalised adaptive filters misbehave).
    const P = 64;
    const cfg: FxlmsConfig = { algorithm: 'fxnlms', taps: 512, stepSize: 0.05 };
    const s = new Float32Array(200);
    s[150] = 0.7; // a 150-sample bulk delay: f stays zero for a while after the onset
    s[151] = 0.2;
    const alt = new FdFxlmsController(cfg, s, P, { constraint: 'alternating' });
    const full = new FdFxlmsController(cfg, s, P, { constraint: 'full' });
    const rng = new Random(31);
    const ref = new Float32Array(P);
    const err = new Float32Array(P);
    const y1 = new Float32Array(P);
    const y2 = new Float32Array(P);
    let worstRatio = 0;
    let outAlt = 0;
    let outFull = 0;
    for (let b = 0; b < 60; b++) {
      if (b < 10) ref.fill(0);
      else rng.fillGaussian(ref, 0.3);
      rng.fillGaussian(err, 0.05); // the error mic hears noise all along
      alt.process(ref, err, y1, P);
      full.process(ref, err, y2, P);
      for (let i = 0; i < P; i++) {
        outAlt += y1[i]! ** 2;
        outFull += y2[i]! ** 2;
      }
      if (b >= 10) worstRatio = Math.max(worstRatio, alt.weightNormSquared() / full.weightNormSquared());
    }
    expect(full.weightNormSquared()).toBeGreaterThan(0);
    expect(worstRatio).toBeLessThan(3);
    expect(outAlt).toBeLessThan(3 * outFull);
  });

  it('should follow a secondary-path model replaced in place, as the time-domain reference does', () => {
    // Same check as the block-LMS equivalence (Ferrara 1980), across a change of ŝ: the model spectra
    // are recomputed, the filtered-reference history made with the old model stays as it is.
    const rng = new Random(45);
    const P = 32;
    const cfg: FxlmsConfig = { algorithm: 'fxlms', taps: 100, stepSize: 1e-3, update: 'block' };
    const s = randomModel(70, rng);
    const replacement = randomModel(50, rng);
    for (const kernel of ['js', 'wasm'] as const) {
      const fd = new FdFxlmsController(cfg, s, P, { constraint: 'full', precision: 'float32', kernel });
      const td = new FxlmsController(cfg, s, P);
      const y1 = new Float32Array(P);
      const y2 = new Float32Array(P);
      openLoop(fd, y1, td, y2, 20, rng);
      fd.setSecondaryPathModel(replacement);
      td.setSecondaryPathModel(replacement);
      expect(openLoop(fd, y1, td, y2, 40, rng)).toBeLessThanOrEqual(1e-4);
      const back = new Float32Array(70);
      fd.copySecondaryPathModel(back);
      expect(Array.from(back.subarray(0, 50))).toEqual(Array.from(replacement));
    }
  });

  it('should refuse block sizes that are not powers of two and per-sample updates', () => {
    const s = new Float32Array([1, 0.5]);
    const cfg: FxlmsConfig = { algorithm: 'fxlms', taps: 16, stepSize: 0.01 };
    expect(() => new FdFxlmsController(cfg, s, 96)).toThrow(/power of two from 2 to 16384, got 96/);
    expect(() => new FdFxlmsController({ ...cfg, update: 'sample' }, s, 64)).toThrow(/controller\.update "sample"/);
    expect(() => new FdFxlmsController(cfg, new Float32Array([1, NaN]), 64)).toThrow(/tap 1 is not finite/);
    const opts = { constraint: 'partial' } as unknown as FdFxlmsOptions;
    expect(() => new FdFxlmsController(cfg, s, 64, opts)).toThrow(/constraint must be "full" or "alternating", got partial/);
  });
});
