import { BS1770_INTERPOLATOR, INTERPOLATOR_TAPS, TruePeakMeter } from './true-peak.ts';
import { instantiateFxlmsKernels, wasmSimdSupported, type FxlmsKernelExports } from './wasm-module.ts';

/**
 * The running maximum of the 4× oversampled true peak (ITU-R BS.1770-4 Annex 2 interpolator), for
 * meters that only need that maximum, such as the limiter's report of its output. With WebAssembly
 * SIMD the four phases of each step are computed at once in f32x4 (asm/fxlms.ts `tpBlockMax`), about
 * four times faster than the scalar meter; without it the scalar `TruePeakMeter.processMax` runs. The
 * f32 sums differ from the scalar float64 ones by rounding only (relative 1e-6).
 * No allocation after construction; non-finite samples count as 0 and are counted.
 */
export class TruePeakMax {
  private readonly kernels: FxlmsKernelExports | null;
  private readonly win: Float32Array | null = null;
  private readonly winPtr: number = 0;
  private readonly coefPtr: number = 0;
  private readonly resultPtr: number = 0;
  private readonly result: Float32Array | null = null;
  private readonly fallback: TruePeakMeter | null;
  private readonly maxBlock: number;
  private peakLinear = 0;
  private nonFinite = 0;

  constructor(maxBlockSize: number) {
    if (!Number.isInteger(maxBlockSize) || maxBlockSize < 1) throw new RangeError(`maxBlockSize must be an integer ≥ 1, got ${maxBlockSize}`);
    this.maxBlock = maxBlockSize;
    let k: FxlmsKernelExports | null = null;
    if (wasmSimdSupported()) {
      try {
        k = instantiateFxlmsKernels();
        const winBytes = (INTERPOLATOR_TAPS - 1 + maxBlockSize) * 4;
        if (!k.reserve(192 + 16 + winBytes + 16)) k = null;
      } catch {
        k = null;
      }
    }
    this.kernels = k;
    if (k) {
      const base = k.heapBase();
      this.coefPtr = base;
      this.resultPtr = base + 192;
      this.winPtr = base + 208;
      const coef = new Float32Array(k.memory.buffer, base, 48);
      for (let tap = 0; tap < INTERPOLATOR_TAPS; tap++) {
        for (let p = 0; p < 4; p++) coef[4 * tap + p] = BS1770_INTERPOLATOR[p * INTERPOLATOR_TAPS + tap]!;
      }
      this.win = new Float32Array(k.memory.buffer, this.winPtr, INTERPOLATOR_TAPS - 1 + maxBlockSize);
      this.result = new Float32Array(k.memory.buffer, this.resultPtr, 1);
      this.fallback = null;
    } else {
      this.fallback = new TruePeakMeter();
    }
  }

  /** Whether the SIMD kernel runs (false: the scalar meter). */
  get simd(): boolean {
    return this.kernels !== null;
  }

  /** Largest true peak so far (linear). */
  get peak(): number {
    return this.fallback ? this.fallback.peak : this.peakLinear;
  }

  get nonFiniteCount(): number {
    return this.fallback ? this.fallback.nonFiniteCount : this.nonFinite;
  }

  reset(): void {
    if (this.fallback) this.fallback.reset();
    if (this.win) this.win.fill(0);
    this.peakLinear = 0;
    this.nonFinite = 0;
  }

  /** Forget the maximum, keep the interpolator's history. */
  resetPeak(): void {
    if (this.fallback) this.fallback.resetPeak();
    this.peakLinear = 0;
    this.nonFinite = 0;
  }

  processMax(x: Float32Array | Float64Array, n: number): void {
    if (this.fallback) {
      this.fallback.processMax(x, n);
      return;
    }
    const count = n < x.length ? (n < this.maxBlock ? n : this.maxBlock) : x.length < this.maxBlock ? x.length : this.maxBlock;
    const win = this.win!;
    const H = INTERPOLATOR_TAPS - 1;
    for (let i = 0; i < count; i++) {
      const v = x[i]!;
      if (v - v === 0) win[H + i] = v;
      else {
        win[H + i] = 0;
        this.nonFinite++;
      }
    }
    this.kernels!.tpBlockMax(this.winPtr, this.coefPtr, count, this.resultPtr);
    const m = this.result![0]!;
    if (m > this.peakLinear) this.peakLinear = m;
    win.copyWithin(0, count, count + H);
  }
}
