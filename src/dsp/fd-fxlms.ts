import FFT from 'fft.js';
import { copyPrefix } from './copy.ts';
import type { Controller } from './controller.ts';
import { FXNLMS_DEFAULT_REGULARIZATION, validateFxlmsConfig, type FxlmsConfig, validateSecondaryPathModel } from './fxlms.ts';
import { instantiateFxlmsKernels, type FxlmsKernelExports } from './wasm-module.ts';
import { OutputConstraint, PENALTY, WEIGHT_SCALE } from './output-constraint.ts';

/**
 * Uniformly partitioned, overlap-save frequency-domain FxLMS / FxNLMS (Soo & Pang, IEEE TASSP 38(2),
 * 1990; Shynk, IEEE SP Magazine 9(1), 1992), for long control filters and long secondary-path models.
 *
 * The partition size P equals the block size (the engine's maxBlockSize, a power of two); the FFT
 * size is N = 2P. With x_b the b-th block of reference samples and X_b = FFT([x_{b−1}, x_b]):
 *
 *   output             y_b = last P samples of IFFT( Σ_{j<K_L} W_j · X_{b−j} )
 *   filtered reference f_b = last P samples of IFFT( Σ_{i<K_M} Ŝ_i · X_{b−i} ),  Ŝ_i = FFT([ŝ_i, 0])
 *   scaled error       ε(n) = μ·e(n)                         (FxLMS)
 *                      ε(n) = μ·e(n) / (δ + ‖f(n)‖²)         (FxNLMS; ‖f(n)‖² over the L newest f,
 *                                                             scaled by L/k during the first k < L
 *                                                             samples after the first non-zero f, as
 *                                                             in fxlms.ts; the alternating constraint
 *                                                             floors it, see updateAlternating)
 *   gradient           G_j = conj(F_{b−j}) · FFT([0, ε_b]),  F_b = FFT([f_{b−1}, f_b])
 *                      g_j = first P samples of IFFT(G_j)    (the correlation Σ_n ε(n)·f(n − jP − k))
 *   update             w_j ← (1 − μγ)^n · w_j − g_j
 *
 * This is exactly the time-domain FxLMS of src/dsp/fxlms.ts with `update: 'block'` (a block's output
 * from the weights held at its start; the per-sample gradients of the block summed, each normalised
 * by its own ‖f(n)‖²). The full gradient constraint keeps every W_j the transform of P taps followed
 * by P zeros, which makes the frequency-domain weights equal block-LMS weights on the same data
 * (Ferrara, IEEE TASSP 28(4), 1980; Clark, Mitra & Parker, IEEE TCAS 28(6), 1981); it costs an
 * inverse and a forward FFT per partition and block.
 *
 * The alternating constraint (Derkx, Egelmeers & Sommen, IEEE TSP 50(9), 2002) adds the
 * unconstrained gradient −G_j to every W_j in the frequency domain and projects partitions back onto
 * P taps in rotation, here two partitions every second block (one complex inverse FFT serves both),
 * so each partition is projected once every K_L blocks at a cost of about one FFT per block.
 *
 * Latency: a block's output is computed from that block's reference samples, so block-in /
 * block-out I/O (a worklet render quantum, the simulator's block loop) adds none. Blocks shorter
 * than P (the simulator's last block) are zero-padded: their outputs are exact, but the reference
 * history then holds P − n zeros, like a short dropout, so hosts should keep the block size constant.
 *
 * Spectra are stored split (re, im), P + 1 bins padded to a multiple of 4 (the padding bins stay
 * zero). The spectral loops (complex multiply-accumulate over partitions, the unconstrained update)
 * run either in TypeScript or in the WebAssembly SIMD kernel (asm/fxlms.ts; float32 spectra in its
 * memory). FFTs are fft.js on float64 scratch with every plan and buffer allocated here: its
 * `realTransform` fills the lower half only and it has no real inverse, so two real signals share one
 * complex transform (Z = A + iB) wherever two are due together; inverses run as forward transforms of
 * the conjugate, which spares `inverseTransform`'s division pass.
 *
 * Output constraint (src/dsp/output-constraint.ts), as in the reference: the effort penalty λ is
 * added to the block's leakage loss, (1 − μγ − λ)^n; a rescale by g scales the block's output and
 * every weight spectrum (and the time-domain master copy) by g, ‖w_j‖² by g².
 */
export type GradientConstraint = 'full' | 'alternating';
export type FdPrecision = 'float32' | 'float64';
export type FdKernel = 'js' | 'wasm';

export interface FdFxlmsOptions {
  /** Gradient constraint. 'full' (default): exact block LMS; 'alternating': rotating projection, faster, slower to converge. */
  constraint?: GradientConstraint;
  /** Spectral loops in TypeScript or in the WebAssembly SIMD kernel. Default 'js'. */
  kernel?: FdKernel;
  /** Storage of spectra, weights and delay lines with the 'js' kernel (the 'wasm' kernel stores float32). Default 'float64'. */
  precision?: FdPrecision;
  /** A compiled kernel module to instantiate (kernel 'wasm'); default: the module of wasm-module.ts. */
  module?: WebAssembly.Module;
}

type Real = Float32Array | Float64Array;

const RECOMPUTE_EVERY = 8192;
export const FD_MAX_PARTITION = 16384;

export class FdFxlmsController implements Controller {
  readonly kind: 'fxlms' | 'fxnlms';
  readonly implementation = 'fd' as const;
  adapt = true;
  readonly taps: number;
  readonly modelTaps: number;
  /** Partition size P = block size (samples). */
  readonly partitionSize: number;
  readonly constraint: GradientConstraint;
  readonly kernel: FdKernel;
  readonly precision: FdPrecision;
  stepSize: number;
  leakage: number;
  readonly regularization: number;
  /** Keeps the output below the cap (the engine sets the cap). */
  readonly outputConstraint: OutputConstraint;
  private readonly normalized: boolean;
  private readonly plan: FFT;
  private readonly KL: number;
  private readonly KM: number;
  private readonly KX: number;
  /** Bins per stored spectrum: P + 1 rounded up to a multiple of 4. */
  private readonly bins: number;
  /** Taps of the last weight partition that belong to the filter. */
  private readonly lastLen: number;
  // time-domain windows [previous block, current block], N samples each
  private readonly xWin: Real;
  private readonly fWin: Real;
  private readonly tWin: Real;
  // fft.js scratch (interleaved complex, 2N; inside the kernel's memory with the wasm kernel)
  private readonly spec: Float64Array;
  private readonly zIn: Float64Array;
  private readonly zOut: Float64Array;
  /** 1/N: the pair inverse leaves its output unscaled (see inversePair). */
  private readonly invN: number;
  // split half spectra
  private readonly Xr: Real;
  private readonly Xi: Real;
  private readonly Sr: Real;
  private readonly Si: Real;
  private readonly Wr: Real;
  private readonly Wi: Real;
  private readonly Fr: Real;
  private readonly Fi: Real;
  private readonly Er: Real;
  private readonly Ei: Real;
  private readonly Yr: Real;
  private readonly Yi: Real;
  private readonly FSr: Real;
  private readonly FSi: Real;
  /** Full constraint: the gradient spectra of two partitions (float64 scratch). */
  private readonly gaR: Float64Array;
  private readonly gaI: Float64Array;
  private readonly gbR: Float64Array;
  private readonly gbI: Float64Array;
  /** ‖w_j‖² per partition (float64; inside the kernel's memory with the wasm kernel). */
  private readonly partNorm: Float64Array;
  /** The secondary-path model as given (time domain), for copySecondaryPathModel. */
  private readonly modelTime: Float32Array;
  /** Full constraint: the time-domain weights (K_L·P) are the master copy. */
  private readonly wTime: Real;
  private readonly fRing: Real;
  private readonly R: number;
  private readonly wasm: FxlmsKernelExports | null;
  // byte offsets of the split arrays in the kernel's memory (wasm kernel only)
  private readonly ptr: Record<'Xr' | 'Xi' | 'Sr' | 'Si' | 'Wr' | 'Wi' | 'Fr' | 'Fi' | 'Er' | 'Ei' | 'Yr' | 'Yi' | 'FSr' | 'FSi' | 'norm' | 'loss' | 'spec' | 'zIn' | 'zOut', number>;
  /**
   * [0] the block's leakage factor (1 − μγ)^n, [1] its loss 1 − (1 − μγ)^n (inside the kernel's memory
   * with the wasm kernel). Kept in an array because a fresh double passed to a call that is not
   * inlined is boxed on the heap: a few bytes of garbage per block.
   */
  private readonly leak: Float64Array;
  private xHead = 0;
  private fHead = 0;
  private fPos = 0;
  private rotate = 0;
  private parity = 0;
  private fEnergy = 0;
  private sinceRecompute = 0;
  /** Samples since the first non-zero f, capped at L (start-up scaling of ‖f‖², as in fxlms.ts). */
  private filled = 0;

  constructor(config: FxlmsConfig, secondaryPathModel: Float32Array | Float64Array, maxBlockSize: number, options: FdFxlmsOptions = {}) {
    validateFxlmsConfig(config);
    validateSecondaryPathModel(secondaryPathModel);
    if (!Number.isInteger(maxBlockSize) || maxBlockSize < 2 || maxBlockSize > FD_MAX_PARTITION || (maxBlockSize & (maxBlockSize - 1)) !== 0) {
      throw new RangeError(`the frequency-domain FxLMS needs a block size that is a power of two from 2 to ${FD_MAX_PARTITION}, got ${maxBlockSize}`);
    }
    if (config.update === 'sample') {
      throw new RangeError('controller.update "sample" asks for per-sample weight updates; the frequency-domain FxLMS updates once per block (use "block" or another implementation)');
    }
    const constraint = options.constraint ?? 'full';
    if (constraint !== 'full' && constraint !== 'alternating') throw new RangeError(`constraint must be "full" or "alternating", got ${String(constraint)}`);
    const kernel = options.kernel ?? 'js';
    if (kernel !== 'js' && kernel !== 'wasm') throw new RangeError(`kernel must be "js" or "wasm", got ${String(kernel)}`);
    const precision = options.precision ?? (kernel === 'wasm' ? 'float32' : 'float64');
    if (precision !== 'float32' && precision !== 'float64') throw new RangeError(`precision must be "float32" or "float64", got ${String(precision)}`);
    if (kernel === 'wasm' && precision !== 'float32') throw new RangeError('the wasm kernel stores float32 spectra: precision must be "float32"');

    this.kind = config.algorithm;
    this.normalized = config.algorithm === 'fxnlms';
    this.taps = config.taps;
    this.stepSize = config.stepSize;
    this.leakage = config.leakage ?? 0;
    this.regularization = config.regularization ?? FXNLMS_DEFAULT_REGULARIZATION;
    this.modelTaps = secondaryPathModel.length;
    this.constraint = constraint;
    this.kernel = kernel;
    this.precision = precision;

    const P = maxBlockSize;
    const N = 2 * P;
    this.partitionSize = P;
    this.plan = new FFT(N);
    this.invN = 1 / N;
    const KL = Math.ceil(this.taps / P);
    const KM = Math.ceil(this.modelTaps / P);
    const KX = Math.max(KL, KM);
    this.KL = KL;
    this.KM = KM;
    this.KX = KX;
    const bins = (P + 1 + 3) & ~3;
    this.bins = bins;
    this.lastLen = this.taps - (KL - 1) * P;
    const make = precision === 'float32' ? (n: number): Real => new Float32Array(n) : (n: number): Real => new Float64Array(n);
    this.xWin = make(N);
    this.fWin = make(N);
    this.tWin = make(N);
    this.wTime = make(constraint === 'full' ? KL * P : 0);
    const gBins = constraint === 'full' ? bins : 0;
    this.gaR = new Float64Array(gBins);
    this.gaI = new Float64Array(gBins);
    this.gbR = new Float64Array(gBins);
    this.gbI = new Float64Array(gBins);
    this.R = this.taps + P;
    this.fRing = make(this.R);

    // Split spectra: JS arrays, or float32 views into the kernel's memory laid out here.
    const sizes = { Xr: KX * bins, Xi: KX * bins, Sr: KM * bins, Si: KM * bins, Wr: KL * bins, Wi: KL * bins, Fr: KL * bins, Fi: KL * bins, Er: bins, Ei: bins, Yr: bins, Yi: bins, FSr: bins, FSi: bins };
    const ptr = { Xr: 0, Xi: 0, Sr: 0, Si: 0, Wr: 0, Wi: 0, Fr: 0, Fi: 0, Er: 0, Ei: 0, Yr: 0, Yi: 0, FSr: 0, FSi: 0, norm: 0, loss: 0, spec: 0, zIn: 0, zOut: 0 };
    let arrays: Record<keyof typeof sizes, Real>;
    if (kernel === 'wasm') {
      const k = options.module ? instantiateFxlmsKernels(options.module) : instantiateFxlmsKernels();
      const base = k.heapBase();
      let off = 0;
      for (const key of Object.keys(sizes) as (keyof typeof sizes)[]) {
        ptr[key] = base + off;
        off += sizes[key] * 4; // bins is a multiple of 4, so every array stays 16-byte aligned
      }
      ptr.norm = base + off;
      off += KL * 8;
      const leakBase = base + off;
      ptr.loss = leakBase + 8;
      off += 16;
      for (const key of ['spec', 'zIn', 'zOut'] as const) {
        ptr[key] = base + off;
        off += 2 * N * 8;
      }
      if (k.reserve(off) !== 1) throw new RangeError(`cannot allocate ${off} bytes of WebAssembly memory for the frequency-domain FxLMS`);
      // Views only now: the memory has reached its final size.
      const buf = k.memory.buffer;
      arrays = {} as Record<keyof typeof sizes, Real>;
      for (const key of Object.keys(sizes) as (keyof typeof sizes)[]) arrays[key] = new Float32Array(buf, ptr[key], sizes[key]);
      this.partNorm = new Float64Array(buf, ptr.norm, KL);
      this.leak = new Float64Array(buf, ptr.loss - 8, 2); // [factor, loss]: loss at ptr.loss
      this.spec = new Float64Array(buf, ptr.spec, 2 * N);
      this.zIn = new Float64Array(buf, ptr.zIn, 2 * N);
      this.zOut = new Float64Array(buf, ptr.zOut, 2 * N);
      this.wasm = k;
    } else {
      arrays = {} as Record<keyof typeof sizes, Real>;
      for (const key of Object.keys(sizes) as (keyof typeof sizes)[]) arrays[key] = make(sizes[key]);
      this.partNorm = new Float64Array(KL);
      this.leak = new Float64Array(2);
      this.spec = new Float64Array(2 * N);
      this.zIn = new Float64Array(2 * N);
      this.zOut = new Float64Array(2 * N);
      this.wasm = null;
    }
    this.ptr = ptr;
    this.Xr = arrays.Xr;
    this.Xi = arrays.Xi;
    this.Sr = arrays.Sr;
    this.Si = arrays.Si;
    this.Wr = arrays.Wr;
    this.Wi = arrays.Wi;
    this.Fr = arrays.Fr;
    this.Fi = arrays.Fi;
    this.Er = arrays.Er;
    this.Ei = arrays.Ei;
    this.Yr = arrays.Yr;
    this.Yi = arrays.Yi;
    this.FSr = arrays.FSr;
    this.FSi = arrays.FSi;

    this.modelTime = new Float32Array(this.modelTaps);
    this.setSecondaryPathModel(secondaryPathModel);
    this.outputConstraint = new OutputConstraint(config, config.sampleRate);
  }

  /**
   * Replace the secondary-path model in place (M taps at most; missing taps are zero): the model
   * partition spectra Ŝ_i = FFT([ŝ_i, 0]) are recomputed (K_M FFTs). Not per block.
   */
  setSecondaryPathModel(taps: ArrayLike<number>): void {
    const P = this.partitionSize;
    const M = this.modelTaps;
    const mt = this.modelTime;
    for (let m = 0; m < M; m++) mt[m] = m < taps.length ? taps[m]! : 0;
    const t = this.tWin;
    for (let i = 0; i < this.KM; i++) {
      t.fill(0);
      for (let k = 0; k < P && i * P + k < M; k++) t[k] = mt[i * P + k]!;
      this.forwardReal(t, this.Sr, this.Si, i * this.bins);
    }
  }

  /** Copy the secondary-path model into `out`; returns the count written. */
  copySecondaryPathModel(out: Float32Array): number {
    return copyPrefix(this.modelTime, out, this.modelTaps);
  }

  reset(): void {
    this.xWin.fill(0);
    this.fWin.fill(0);
    this.Xr.fill(0);
    this.Xi.fill(0);
    this.Fr.fill(0);
    this.Fi.fill(0);
    this.fRing.fill(0);
    this.resetWeights();
    this.xHead = 0;
    this.fHead = 0;
    this.fPos = 0;
    this.rotate = 0;
    this.parity = 0;
    this.fEnergy = 0;
    this.sinceRecompute = 0;
    this.filled = 0;
    this.outputConstraint.reset();
  }

  setOutputCap(cap: number): void {
    this.outputConstraint.setCap(cap);
  }

  /**
   * Scale every weight by the output constraint's `weightScale`: spectra, time-domain copy, norms
   * (read here: no double crosses a call).
   */
  private applyWeightScale(): void {
    const g = this.outputConstraint.state[WEIGHT_SCALE]!;
    const wr = this.Wr;
    const wi = this.Wi;
    for (let i = 0; i < wr.length; i++) {
      wr[i] = wr[i]! * g;
      wi[i] = wi[i]! * g;
    }
    const wt = this.wTime;
    for (let i = 0; i < wt.length; i++) wt[i] = wt[i]! * g;
    const pn = this.partNorm;
    for (let j = 0; j < pn.length; j++) pn[j] = pn[j]! * g * g;
  }

  /** Clear the weights only (delay lines keep their history). */
  resetWeights(): void {
    this.Wr.fill(0);
    this.Wi.fill(0);
    this.wTime.fill(0);
    this.partNorm.fill(0);
  }

  /**
   * ‖w‖². With the full constraint: the norm of the L taps. With the alternating constraint: the norm
   * of every partition's whole 2P-sample impulse response (Parseval), not-yet-projected tails
   * included; the update pass keeps it current at no extra cost.
   */
  weightNormSquared(): number {
    const pn = this.partNorm;
    let s = 0;
    for (let j = 0; j < pn.length; j++) s += pn[j]!;
    return s;
  }

  setStepSize(mu: number): void {
    if (mu > 0 && Number.isFinite(mu)) this.stepSize = mu;
  }

  setLeakage(gamma: number): void {
    if (gamma >= 0 && Number.isFinite(gamma)) this.leakage = gamma;
  }

  /**
   * Copy the L time-domain taps into `out`. With the alternating constraint these are the first P
   * samples of each partition's impulse response, i.e. the weights as the next projection leaves
   * them. Costs K_L/2 inverse FFTs; meant for displays and tests, not for every block.
   */
  copyWeights(out: Float32Array | Float64Array): number {
    const n = Math.min(out.length, this.taps);
    const P = this.partitionSize;
    if (this.constraint === 'full') {
      for (let i = 0; i < n; i++) out[i] = this.wTime[i]!;
      return n;
    }
    const bins = this.bins;
    const z = this.zOut;
    for (let j = 0; j * P < n; j += 2) {
      const j2 = j + 1 < this.KL ? j + 1 : j;
      this.inversePair(this.Wr, this.Wi, j * bins, this.Wr, this.Wi, j2 * bins);
      for (let h = 0; h < 2 && j + h < this.KL; h++) {
        const g = h === 0 ? this.invN : -this.invN; // zOut = N·conj(a + ib), see inversePair
        for (let k = 0; k < P && (j + h) * P + k < n; k++) out[(j + h) * P + k] = g * z[2 * k + h]!;
      }
    }
    return n;
  }

  /** Replace the weights (L taps; missing taps are zero). For tests and for restoring a converged filter. */
  setWeights(w: ArrayLike<number>): void {
    const P = this.partitionSize;
    const t = this.tWin;
    for (let j = 0; j < this.KL; j++) {
      t.fill(0);
      let e = 0;
      const len = j === this.KL - 1 ? this.lastLen : P;
      for (let k = 0; k < len; k++) {
        const m = j * P + k;
        const v = m < w.length ? w[m]! : 0;
        t[k] = v;
        if (this.constraint === 'full') this.wTime[m] = t[k]!;
        e += t[k]! * t[k]!;
      }
      this.partNorm[j] = e;
      this.forwardReal(t, this.Wr, this.Wi, j * this.bins);
    }
  }

  /** Energy ‖f(n)‖² of the filtered-reference window at the end of the last block. */
  filteredReferenceEnergy(): number {
    return this.fEnergy;
  }

  process(ref: Float32Array, err: Float32Array, out: Float32Array, n: number): void {
    if (n > this.partitionSize) n = this.partitionSize;
    if (!(n > 0)) return;
    this.run(ref, err, out, n);
    const oc = this.outputConstraint;
    oc.afterBlock(out, n);
    if (oc.state[WEIGHT_SCALE]! < 1) this.applyWeightScale();
  }

  private run(ref: Float32Array, err: Float32Array, out: Float32Array, n: number): void {
    const P = this.partitionSize;
    const bins = this.bins;
    const KX = this.KX;
    const adapt = this.adapt;
    if (n > P) n = P;
    if (!(n > 0)) return;

    // 1. Reference window [x_{b−1}, x_b] and its spectrum X_b into the history ring.
    const xw = this.xWin;
    for (let i = 0; i < P; i++) xw[i] = xw[P + i]!;
    for (let i = 0; i < n; i++) xw[P + i] = ref[i]!;
    for (let i = n; i < P; i++) xw[P + i] = 0;
    const xHead = this.xHead === KX - 1 ? 0 : this.xHead + 1;
    this.xHead = xHead;
    if (this.wasm) {
      this.plan.realTransform(this.spec, xw);
      this.wasm.unpackReal(this.ptr.spec, this.ptr.Xr + 4 * xHead * bins, this.ptr.Xi + 4 * xHead * bins, P);
    } else {
      this.forwardReal(xw, this.Xr, this.Xi, xHead * bins);
    }

    // 2. Y = Σ W_j·X_{b−j}; FS = Σ Ŝ_i·X_{b−i} (only while adapting: frozen weights need no f).
    const k = this.wasm;
    if (k) {
      const p = this.ptr;
      k.cmacPartitions(p.Yr, p.Yi, p.Wr, p.Wi, p.Xr, p.Xi, this.KL, xHead, KX, bins);
      if (adapt) k.cmacPartitions(p.FSr, p.FSi, p.Sr, p.Si, p.Xr, p.Xi, this.KM, xHead, KX, bins);
    } else {
      macPartitions(this.Yr, this.Yi, this.Wr, this.Wi, this.Xr, this.Xi, this.KL, xHead, KX, bins);
      if (adapt) macPartitions(this.FSr, this.FSi, this.Sr, this.Si, this.Xr, this.Xi, this.KM, xHead, KX, bins);
    }
    if (!adapt) {
      this.FSr.fill(0);
      this.FSi.fill(0);
    }

    // 3. One complex inverse gives both: y = Re, f = Im (last P samples).
    if (k) {
      const p = this.ptr;
      k.packPair(p.zIn, p.Yr, p.Yi, p.FSr, p.FSi, P);
      this.plan.transform(this.zOut, this.zIn);
    } else {
      this.inversePair(this.Yr, this.Yi, 0, this.FSr, this.FSi, 0);
    }
    const z = this.zOut;
    const invN = this.invN;
    for (let i = 0; i < n; i++) out[i] = invN * z[2 * (P + i)]!;
    if (!adapt) return;

    // 4. Filtered reference block, its running energy and the scaled error ε(n), placed straight
    //    into zIn as f + iε for one complex forward FFT of both windows [f_{b−1}, f_b] and [0, ε_b].
    const fw = this.fWin;
    const zi = this.zIn;
    const ring = this.fRing;
    const R = this.R;
    const L = this.taps;
    const mu = this.stepSize;
    const reg = this.regularization;
    const normalized = this.normalized;
    let energy = this.fEnergy;
    let since = this.sinceRecompute;
    let pos = this.fPos;
    let filled = this.filled;
    let norm = 0;
    for (let i = 0; i < P; i++) {
      const prev = fw[P + i]!;
      fw[i] = prev;
      zi[2 * i] = prev;
      zi[2 * i + 1] = 0;
    }
    for (let i = 0; i < P; i++) {
      fw[P + i] = -invN * z[2 * (P + i) + 1]!;
      const f = fw[P + i]!; // rounded to the storage precision, as kept in the ring
      let old = pos - L;
      if (old < 0) old += R;
      const leaving = ring[old]!;
      ring[pos] = f;
      if (++since >= RECOMPUTE_EVERY) {
        let e2 = 0;
        let q = pos;
        for (let j = 0; j < L; j++) {
          e2 += ring[q]! * ring[q]!;
          q = q === 0 ? R - 1 : q - 1;
        }
        energy = e2;
        since = 0;
      } else {
        energy += f * f - leaving * leaving;
      }
      pos = pos === R - 1 ? 0 : pos + 1;
      // start-up: until L samples have followed the first non-zero f, scale ‖f‖² to a full window
      if (filled < L && (filled > 0 || f !== 0)) filled++;
      norm = filled === L ? energy : filled > 0 ? (energy * L) / filled : 0;
      zi[2 * (P + i)] = f;
      zi[2 * (P + i) + 1] = norm > 0 ? norm : 0; // ‖f(n)‖² for now, ε below
    }
    this.filled = filled;
    // ε(n). With the alternating constraint each ‖f(n)‖² is taken at least as large as the block's
    // last one: the not-yet-projected gradient tails correlate ε(n) with the later f of the block,
    // and a sample just before an onset (start-up, a silent reference coming alive) would otherwise
    // put μe/δ-sized values into them. In steady state the two energies differ by a few P/L.
    const floor = normalized && this.constraint === 'alternating' && norm > 0 ? norm : 0;
    for (let i = 0; i < P; i++) {
      let eps = 0;
      if (i < n) {
        const e = err[i]!;
        const en = zi[2 * (P + i) + 1]!;
        eps = normalized ? (mu * e) / (reg + (en > floor ? en : floor)) : mu * e;
      }
      zi[2 * (P + i) + 1] = eps;
    }
    this.fEnergy = energy;
    this.sinceRecompute = since;
    this.fPos = pos;

    // 5. F_b into its ring slot and E.
    const fHead = this.fHead === this.KL - 1 ? 0 : this.fHead + 1;
    this.fHead = fHead;
    if (k) {
      const p = this.ptr;
      this.plan.transform(this.spec, this.zIn);
      k.unpackPair(p.spec, p.Fr + 4 * fHead * bins, p.Fi + 4 * fHead * bins, p.Er, p.Ei, P);
    } else {
      this.forwardPairFromZ(this.Fr, this.Fi, fHead * bins, this.Er, this.Ei, 0);
    }

    // 6. Weight update, w ← (1 − μγ)^n·w − g.
    // (1 − μγ)^n, and 1 minus it computed without cancellation for the float32 kernel
    const lk = this.leak;
    const loss = mu * this.leakage + this.outputConstraint.state[PENALTY]!; // per sample: μγ + λ
    lk[1] = loss === 0 ? 0 : -Math.expm1(n * Math.log1p(-loss));
    lk[0] = 1 - lk[1]!;
    if (this.constraint === 'full') this.updateFull();
    else this.updateAlternating();
  }

  /** w_j ← lf·w_j − g_j (lf = leak[0]), g_j = first P of IFFT(conj(F_{b−j})·E); two partitions per complex inverse and forward. */
  private updateFull(): void {
    const lf = this.leak[0]!;
    const invN = this.invN;
    const P = this.partitionSize;
    const N = 2 * P;
    const bins = this.bins;
    const KL = this.KL;
    const Fr = this.Fr, Fi = this.Fi, Er = this.Er, Ei = this.Ei;
    const zi = this.zIn;
    const z = this.zOut;
    const wt = this.wTime;
    for (let j = 0; j < KL; j += 2) {
      const two = j + 1 < KL;
      let sa = this.fHead - j;
      if (sa < 0) sa += KL;
      let sb = sa - 1;
      if (sb < 0) sb += KL;
      const ao = sa * bins;
      const bo = sb * bins;
      // G_j and G_{j+1} as half spectra, then both gradients from one complex inverse.
      const gaR = this.gaR, gaI = this.gaI, gbR = this.gbR, gbI = this.gbI;
      for (let q = 0; q <= P; q++) {
        const er = Er[q]!, ei = Ei[q]!;
        const far = Fr[ao + q]!, fai = Fi[ao + q]!;
        gaR[q] = far * er + fai * ei;
        gaI[q] = far * ei - fai * er;
        if (two) {
          const fbr = Fr[bo + q]!, fbi = Fi[bo + q]!;
          gbR[q] = fbr * er + fbi * ei;
          gbI[q] = fbr * ei - fbi * er;
        } else {
          gbR[q] = 0;
          gbI[q] = 0;
        }
      }
      this.inversePair(gaR, gaI, 0, gbR, gbI, 0);
      // New weights of both partitions, as w_j + i·w_{j+1} windows [w, 0] for one forward FFT.
      let ea = 0, eb = 0;
      const lenA = j === KL - 1 ? this.lastLen : P;
      const lenB = two ? (j + 1 === KL - 1 ? this.lastLen : P) : 0;
      for (let q = 0; q < P; q++) {
        let va = 0, vb = 0;
        if (q < lenA) {
          wt[j * P + q] = lf * wt[j * P + q]! - invN * z[2 * q]!;
          va = wt[j * P + q]!;
          ea += va * va;
        }
        if (q < lenB) {
          wt[(j + 1) * P + q] = lf * wt[(j + 1) * P + q]! + invN * z[2 * q + 1]!;
          vb = wt[(j + 1) * P + q]!;
          eb += vb * vb;
        }
        zi[2 * q] = va;
        zi[2 * q + 1] = vb;
      }
      for (let q = 2 * P; q < 2 * N; q++) zi[q] = 0;
      this.partNorm[j] = ea;
      if (two) {
        this.partNorm[j + 1] = eb;
        this.forwardPairFromZ(this.Wr, this.Wi, j * bins, this.Wr, this.Wi, (j + 1) * bins);
      } else {
        this.forwardPairFromZ(this.Wr, this.Wi, j * bins, this.Er, this.Ei, 0); // E is spent: scratch
      }
    }
  }

  /**
   * W_j ← lf·W_j − conj(F_{b−j})·E for every partition (lf = leak[0]), then the rotating projection.
   * For FxNLMS the scaled error of this path uses max(‖f(n)‖², ‖f(end of block)‖²) (see process):
   * the first P taps of each partition then follow block NLMS except right at onsets, and the
   * unprojected tails stay bounded.
   */
  private updateAlternating(): void {
    const invN = this.invN;
    const P = this.partitionSize;
    const N = 2 * P;
    const bins = this.bins;
    const KL = this.KL;
    const k = this.wasm;
    if (k) {
      const p = this.ptr;
      k.cupdateUnconstrained(p.Wr, p.Wi, p.Fr, p.Fi, p.Er, p.Ei, KL, this.fHead, bins, P, p.loss, p.norm);
    } else {
      updateUnconstrained(this.Wr, this.Wi, this.Fr, this.Fi, this.Er, this.Ei, KL, this.fHead, bins, P, this.leak, this.partNorm);
    }
    // Project two partitions every second block (one partition every block when K_L = 1).
    if (KL > 1 && (this.parity ^= 1) === 1) return;
    const ca = this.rotate;
    const cb = ca + 1 < KL ? ca + 1 : 0;
    const two = KL > 1;
    this.rotate = two ? (cb + 1 < KL ? cb + 1 : 0) : 0;
    if (k) {
      const p = this.ptr;
      const cbb = two ? cb : ca;
      k.packPair(p.zIn, p.Wr + 4 * ca * bins, p.Wi + 4 * ca * bins, p.Wr + 4 * cbb * bins, p.Wi + 4 * cbb * bins, P);
      this.plan.transform(this.zOut, this.zIn);
    } else {
      this.inversePair(this.Wr, this.Wi, ca * bins, this.Wr, this.Wi, (two ? cb : ca) * bins);
    }
    const z = this.zOut;
    const zi = this.zIn;
    const lenA = ca === KL - 1 ? this.lastLen : P;
    const lenB = cb === KL - 1 ? this.lastLen : P;
    let ea = 0, eb = 0;
    for (let q = 0; q < P; q++) {
      const va = q < lenA ? invN * z[2 * q]! : 0;
      const vb = two && q < lenB ? -invN * z[2 * q + 1]! : 0;
      zi[2 * q] = va;
      zi[2 * q + 1] = vb;
      ea += va * va;
      eb += vb * vb;
    }
    for (let q = 2 * P; q < 2 * N; q++) zi[q] = 0;
    // the second half spectrum goes to partition cb, or into E (spent by now) as scratch
    if (k) {
      const p = this.ptr;
      this.plan.transform(this.spec, zi);
      k.unpackPair(p.spec, p.Wr + 4 * ca * bins, p.Wi + 4 * ca * bins, two ? p.Wr + 4 * cb * bins : p.Er, two ? p.Wi + 4 * cb * bins : p.Ei, P);
    } else if (two) {
      this.forwardPairFromZ(this.Wr, this.Wi, ca * bins, this.Wr, this.Wi, cb * bins);
    } else {
      this.forwardPairFromZ(this.Wr, this.Wi, ca * bins, this.Er, this.Ei, 0);
    }
    if (two) this.partNorm[cb] = eb;
    this.partNorm[ca] = ea;
    // the float32 spectra round the projection: the stored norm is computed from the time samples,
    // which differ from Parseval on the stored spectrum by that rounding only
  }

  /** Real forward FFT of a time window (N samples) into a split half spectrum at offset `o`. */
  private forwardReal(src: Real, dr: Real, di: Real, o: number): void {
    const s = this.spec;
    this.plan.realTransform(s, src);
    const P = this.partitionSize;
    dr[o] = s[0]!;
    di[o] = 0;
    for (let q = 1; q < P; q++) {
      dr[o + q] = s[2 * q]!;
      di[o + q] = s[2 * q + 1]!;
    }
    dr[o + P] = s[2 * P]!;
    di[o + P] = 0;
  }

  /**
   * Forward FFT of zIn = a + i·b (two real windows interleaved) and separation into the two half
   * spectra: A[k] = (Z[k] + conj(Z[N − k]))/2, B[k] = (Z[k] − conj(Z[N − k]))/(2i).
   */
  private forwardPairFromZ(ar: Real, ai: Real, ao: number, br: Real, bi: Real, bo: number): void {
    const P = this.partitionSize;
    const N = 2 * P;
    const z = this.spec;
    this.plan.transform(z, this.zIn);
    ar[ao] = z[0]!;
    ai[ao] = 0;
    br[bo] = z[1]!;
    bi[bo] = 0;
    for (let q = 1; q < P; q++) {
      const zr = z[2 * q]!, zim = z[2 * q + 1]!;
      const m = 2 * (N - q);
      const wr = z[m]!, wim = z[m + 1]!;
      ar[ao + q] = 0.5 * (zr + wr);
      ai[ao + q] = 0.5 * (zim - wim);
      br[bo + q] = 0.5 * (zim + wim);
      bi[bo + q] = 0.5 * (wr - zr);
    }
    ar[ao + P] = z[2 * P]!;
    ai[ao + P] = 0;
    br[bo + P] = z[2 * P + 1]!;
    bi[bo + P] = 0;
  }

  /**
   * The inverse of Z = A + i·B for two Hermitian spectra given as split half spectra, where
   * Z[k] = A[k] + i·B[k] and Z[N − k] = conj(A[k]) + i·conj(B[k]), so that IFFT(Z) = a + i·b.
   * Computed as zOut ← FFT(conj(Z)) = N·conj(IFFT(Z)): a = Re(zOut)/N, b = −Im(zOut)/N. The forward
   * transform saves fft.js's division pass over the output; the readers scale by 1/N (invN).
   */
  private inversePair(ar: Real, ai: Real, ao: number, br: Real, bi: Real, bo: number): void {
    const P = this.partitionSize;
    const N = 2 * P;
    const zi = this.zIn;
    for (let q = 0; q <= P; q++) {
      const xr = ar[ao + q]!, xi = ai[ao + q]!;
      const yr = br[bo + q]!, yi = bi[bo + q]!;
      zi[2 * q] = xr - yi;
      zi[2 * q + 1] = -(xi + yr);
      if (q > 0 && q < P) {
        const m = 2 * (N - q);
        zi[m] = xr + yi;
        zi[m + 1] = xi - yr;
      }
    }
    this.plan.transform(this.zOut, zi);
  }

}

/** acc = Σ_{j<K} H_j · X_{slot(head − j)} per bin (split spectra, X a ring of KX slots). */
function macPartitions(accR: Real, accI: Real, hR: Real, hI: Real, xR: Real, xI: Real, K: number, head: number, KX: number, bins: number): void {
  accR.fill(0);
  accI.fill(0);
  let s = head;
  for (let j = 0; j < K; j++) {
    const ho = j * bins;
    const xo = s * bins;
    for (let q = 0; q < bins; q++) {
      const hr = hR[ho + q]!, hi = hI[ho + q]!;
      const xr = xR[xo + q]!, xi = xI[xo + q]!;
      accR[q] = accR[q]! + hr * xr - hi * xi;
      accI[q] = accI[q]! + hr * xi + hi * xr;
    }
    s = s === 0 ? KX - 1 : s - 1;
  }
}

/**
 * W_j ← lf·W_j − conj(F_{slot(fHead − j)})·E for every partition (lf = leak[0]), and ‖w_j‖² by
 * Parseval: (2·Σ_k |W_j[k]|² − |W_j[0]|² − |W_j[P]|²) / N (bins 0 and P appear once in the full spectrum).
 */
function updateUnconstrained(wR: Real, wI: Real, fR: Real, fI: Real, eR: Real, eI: Real, K: number, fHead: number, bins: number, P: number, leak: Float64Array, norms: Float64Array): void {
  const lf = leak[0]!;
  const invN = 1 / (2 * P);
  let s = fHead;
  for (let j = 0; j < K; j++) {
    const wo = j * bins;
    const fo = s * bins;
    let sum = 0;
    for (let q = 0; q < bins; q++) {
      const er = eR[q]!, ei = eI[q]!;
      const fr = fR[fo + q]!, fi = fI[fo + q]!;
      const wr = lf * wR[wo + q]! - (fr * er + fi * ei);
      const wi = lf * wI[wo + q]! - (fr * ei - fi * er);
      wR[wo + q] = wr;
      wI[wo + q] = wi;
      sum += wr * wr + wi * wi;
    }
    const d0 = wR[wo]! * wR[wo]! + wI[wo]! * wI[wo]!;
    const dP = wR[wo + P]! * wR[wo + P]! + wI[wo + P]! * wI[wo + P]!;
    norms[j] = (2 * sum - d0 - dP) * invN;
    s = s === 0 ? K - 1 : s - 1;
  }
}
