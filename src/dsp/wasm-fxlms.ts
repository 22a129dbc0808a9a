import type { Controller } from './controller.ts';
import { copyPrefix, replacePadded } from './copy.ts';
import { FXNLMS_DEFAULT_REGULARIZATION, validateFxlmsConfig, type FxlmsConfig, validateSecondaryPathModel } from './fxlms.ts';
import { instantiateFxlmsKernels, type FxlmsKernelExports } from './wasm-module.ts';
import { OutputConstraint, PENALTY } from './output-constraint.ts';

/**
 * Time-domain FxLMS / FxNLMS whose whole block loop runs in the WebAssembly SIMD kernel
 * (asm/fxlms.ts): the same equations, timing and options as the reference FxlmsController in
 * src/dsp/fxlms.ts (Morgan, IEEE TASSP 28(4), 1980; Widrow & Stearns, 1985), per-sample or block
 * weight update, in float32 with 4-lane vectors.
 *
 * Filter lengths are padded to multiples of 16 inside the kernel; the padding taps stay at zero and
 * are left out of ‖f‖². Each controller owns one module instance and its linear memory; the views
 * below are created after the kernel has laid out (and grown) that memory, and never change after.
 * Per block the host copies the n input samples in and the n output samples out (no allocation).
 *
 * Output constraint (src/dsp/output-constraint.ts), as in the reference: the effort penalty λ enters
 * the kernel as extra leakage (γ + λ/μ, so the per-sample loss is μγ + λ); a rescale scales the
 * block's output and the L weights in the kernel's memory from here (the weights are current between
 * blocks: the kernel applies its last pending update at the end of the block).
 */
export class WasmFxlmsController implements Controller {
  readonly kind: 'fxlms' | 'fxnlms';
  readonly implementation = 'wasm' as const;
  adapt = true;
  readonly taps: number;
  readonly modelTaps: number;
  stepSize: number;
  leakage: number;
  readonly regularization: number;
  readonly update: 'sample' | 'block';
  readonly maxBlockSize: number;
  /** Keeps the output below the cap (the engine sets the cap). */
  readonly outputConstraint: OutputConstraint;
  private readonly k: FxlmsKernelExports;
  private readonly w: Float32Array;
  private readonly wPadded: Float32Array;
  private readonly model: Float32Array;
  private readonly refBuf: Float32Array;
  private readonly errBuf: Float32Array;
  private readonly outBuf: Float32Array;
  /** μ, γ, δ, 1 − (1 − μγ)^n in the kernel's memory: numbers written here are never boxed. */
  private readonly params: Float64Array;
  private readonly normalized: number;
  private readonly blockUpdate: number;

  constructor(config: FxlmsConfig, secondaryPathModel: Float32Array | Float64Array, maxBlockSize: number, module?: WebAssembly.Module) {
    validateFxlmsConfig(config);
    validateSecondaryPathModel(secondaryPathModel);
    if (!Number.isInteger(maxBlockSize) || maxBlockSize < 1 || maxBlockSize > 1 << 16) throw new RangeError(`maxBlockSize must be an integer from 1 to 65536, got ${maxBlockSize}`);
    this.kind = config.algorithm;
    this.taps = config.taps;
    this.modelTaps = secondaryPathModel.length;
    this.stepSize = config.stepSize;
    this.leakage = config.leakage ?? 0;
    this.regularization = config.regularization ?? FXNLMS_DEFAULT_REGULARIZATION;
    this.update = config.update ?? 'sample';
    this.maxBlockSize = maxBlockSize;
    this.normalized = config.algorithm === 'fxnlms' ? 1 : 0;
    this.blockUpdate = this.update === 'block' ? 1 : 0;

    const k = module ? instantiateFxlmsKernels(module) : instantiateFxlmsKernels();
    if (k.tdInit(this.taps, this.modelTaps, maxBlockSize) !== 1) {
      throw new RangeError(`cannot allocate WebAssembly memory for ${this.taps} taps and a ${this.modelTaps}-tap model`);
    }
    this.k = k;
    // Views only now: the memory has reached its final size.
    const buf = k.memory.buffer;
    this.w = new Float32Array(buf, k.tdWeights(), this.taps);
    this.wPadded = new Float32Array(buf, k.tdWeights(), k.tdPaddedTaps());
    this.model = new Float32Array(buf, k.tdModel(), this.modelTaps);
    for (let i = 0; i < this.modelTaps; i++) this.model[i] = secondaryPathModel[i]!;
    this.refBuf = new Float32Array(buf, k.tdRef(), maxBlockSize);
    this.errBuf = new Float32Array(buf, k.tdErr(), maxBlockSize);
    this.outBuf = new Float32Array(buf, k.tdOut(), maxBlockSize);
    this.params = new Float64Array(buf, k.tdParams(), 4);
    this.outputConstraint = new OutputConstraint(config, config.sampleRate);
  }

  setOutputCap(cap: number): void {
    this.outputConstraint.setCap(cap);
  }

  /** Taps after padding to a multiple of 16 (the kernel's loop length). */
  get paddedTaps(): number {
    return this.k.tdPaddedTaps();
  }

  reset(): void {
    this.k.tdReset();
    this.outputConstraint.reset();
  }

  /** Clear the weights only (delay lines keep their history). */
  resetWeights(): void {
    this.k.tdResetWeights();
  }

  weightNormSquared(): number {
    return this.k.tdWeightNormSquared();
  }

  setStepSize(mu: number): void {
    if (mu > 0 && Number.isFinite(mu)) this.stepSize = mu;
  }

  setLeakage(gamma: number): void {
    if (gamma >= 0 && Number.isFinite(gamma)) this.leakage = gamma;
  }

  copyWeights(out: Float32Array | Float64Array): number {
    const n = Math.min(out.length, this.taps);
    const w = this.w;
    for (let i = 0; i < n; i++) out[i] = w[i]!;
    return n;
  }

  /** Replace the weights (missing taps are zero). */
  setWeights(w: ArrayLike<number>): void {
    const n = Math.min(w.length, this.taps);
    for (let i = 0; i < n; i++) this.w[i] = w[i]!;
    for (let i = n; i < this.taps; i++) this.w[i] = 0;
  }

  /** Replace the secondary-path model in place (M taps at most; missing taps are zero). Not per block. */
  setSecondaryPathModel(taps: ArrayLike<number>): void {
    replacePadded(this.model, taps, this.modelTaps);
  }

  /** Copy the secondary-path model into `out`; returns the count written. */
  copySecondaryPathModel(out: Float32Array): number {
    return copyPrefix(this.model, out, this.modelTaps);
  }

  /** ‖f(n)‖² of the filtered-reference window. */
  filteredReferenceEnergy(): number {
    return this.k.tdEnergy();
  }

  /** The kernel's padded weight vector, padding included (for tests of the padding). */
  paddedWeights(out: Float32Array): number {
    const all = this.wPadded;
    const n = Math.min(out.length, all.length);
    for (let i = 0; i < n; i++) out[i] = all[i]!;
    return n;
  }

  process(ref: Float32Array, err: Float32Array, out: Float32Array, n: number): void {
    if (n > this.maxBlockSize) n = this.maxBlockSize;
    const rb = this.refBuf;
    const eb = this.errBuf;
    for (let i = 0; i < n; i++) {
      rb[i] = ref[i]!;
      eb[i] = err[i]!;
    }
    const mu = this.stepSize;
    const pr = this.params;
    // the effort penalty λ is a per-sample loss: as leakage it is λ/μ
    const leakage = this.leakage + this.outputConstraint.state[PENALTY]! / mu;
    pr[0] = mu;
    pr[1] = leakage;
    pr[2] = this.regularization;
    // 1 − (1 − μγ)^n, passed as a loss so float32 does not round the factor near 1 (see asm/fxlms.ts)
    pr[3] = leakage === 0 ? 0 : -Math.expm1(n * Math.log1p(-mu * leakage));
    this.k.tdProcess(n, this.adapt ? 1 : 0, this.normalized, this.blockUpdate);
    const ob = this.outBuf;
    for (let i = 0; i < n; i++) out[i] = ob[i]!;
    const oc = this.outputConstraint;
    oc.afterBlock(out, n);
    oc.scaleWeights(this.w);
  }
}
