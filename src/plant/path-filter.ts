/**
 * An acoustic or electro-acoustic path as a sparse FIR: `offset` whole samples of pure delay, then
 * `taps`. Input history lives in a mirrored ring (every sample written at t mod H and t mod H + H)
 * so each output is one contiguous dot product.
 *
 *   out(t) = Σ_k taps_k · in(t − offset − k)
 *
 * Two uses:
 * - source paths (reference, primary): push the block, then `render` the same instants;
 * - loop paths (secondary, feedback) whose offset is at least one block: `render` the block's
 *   instants first (they depend only on earlier outputs), then push the new controller output.
 */
export class PathFilter {
  readonly offset: number;
  readonly length: number;
  private readonly rev: Float64Array;
  private readonly ring: Float64Array;
  private readonly H: number;
  /** Samples pushed so far. */
  time = 0;

  constructor(offset: number, taps: ArrayLike<number>, maxBlock: number) {
    if (!Number.isInteger(offset) || offset < 0) throw new RangeError(`path offset must be an integer ≥ 0, got ${offset}`);
    if (taps.length < 1) throw new RangeError('a path needs at least one tap');
    this.offset = offset;
    this.length = taps.length;
    this.rev = new Float64Array(taps.length);
    for (let k = 0; k < taps.length; k++) this.rev[taps.length - 1 - k] = taps[k]!;
    this.H = offset + taps.length + maxBlock + 1;
    this.ring = new Float64Array(2 * this.H);
  }

  reset(): void {
    this.ring.fill(0);
    this.time = 0;
  }

  push(x: ArrayLike<number>, n: number): void {
    const H = this.H;
    const ring = this.ring;
    let p = this.time % H;
    for (let i = 0; i < n; i++) {
      const v = x[i]!;
      ring[p] = v;
      ring[p + H] = v;
      if (++p === H) p = 0;
    }
    this.time += n;
  }

  /**
   * Outputs for the n instants t0 … t0 + n − 1, adding into `out` when `add` is true.
   * Every input they need must already be pushed (t0 + n − 1 − offset < time) and still in the ring.
   */
  render(t0: number, out: Float32Array | Float64Array, n: number, add = false): void {
    const H = this.H;
    const T = this.length;
    const rev = this.rev;
    const ring = this.ring;
    for (let i = 0; i < n; i++) {
      const newest = t0 + i - this.offset; // in(newest) pairs with taps_0
      let acc = 0;
      if (newest >= 0) {
        const oldest = newest - T + 1;
        let start = oldest % H;
        if (start < 0) start += H;
        // inputs before time 0 are zero and the ring starts zeroed, so negative times read zeros
        // only while the ring has not yet wrapped; that holds since time < H at that point.
        for (let j = 0; j < T; j++) acc += rev[j]! * ring[start + j]!;
      }
      out[i] = add ? out[i]! + acc : acc;
    }
  }
}
