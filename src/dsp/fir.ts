/**
 * FIR filter with a mirrored (doubled) circular delay line, so the inner product never wraps:
 * every input sample is written twice, at p and p + L, and the L most recent samples are always
 * the contiguous run buf[p .. p + L − 1], newest first.
 *
 *   y(n) = Σ_{k=0}^{L−1} h_k · x(n − k)
 *
 * The constructor validates and allocates; `process` and `processSample` never allocate.
 */
export class FirFilter {
  readonly length: number;
  private readonly taps: Float32Array;
  private readonly line: Float32Array;
  private pos = 0;

  constructor(taps: ArrayLike<number>) {
    if (taps.length < 1) throw new RangeError(`FIR filter needs at least one tap, got ${taps.length}`);
    for (let i = 0; i < taps.length; i++) {
      if (!Number.isFinite(taps[i]!)) throw new RangeError(`FIR tap ${i} must be finite, got ${taps[i]}`);
    }
    this.length = taps.length;
    this.taps = Float32Array.from(taps);
    this.line = new Float32Array(2 * taps.length);
  }

  reset(): void {
    this.line.fill(0);
    this.pos = 0;
  }

  /** Copy of the taps into `out` (caller-owned). */
  copyTaps(out: Float32Array): void {
    out.set(this.taps.subarray(0, Math.min(out.length, this.length)));
  }

  /** Filter one sample. */
  processSample(x: number): number {
    const L = this.length;
    let p = this.pos - 1;
    if (p < 0) p += L;
    this.pos = p;
    const line = this.line;
    line[p] = x;
    line[p + L] = x;
    const h = this.taps;
    let acc = 0;
    for (let k = 0; k < L; k++) acc += h[k]! * line[p + k]!;
    return acc;
  }

  /** Filter n samples of `input` into `output` (may be the same array). */
  process(input: Float32Array, output: Float32Array, n: number): void {
    for (let i = 0; i < n; i++) output[i] = this.processSample(input[i]!);
  }
}
