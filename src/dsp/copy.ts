/** Small typed-array helpers shared by the controllers' accessors (no allocation). */

/** Copy min(out.length, count) values of `src` into `out`; returns the count written. */
export function copyPrefix(src: ArrayLike<number>, out: Float32Array | Float64Array, count: number): number {
  const n = Math.min(out.length, count);
  for (let i = 0; i < n; i++) out[i] = src[i]!;
  return n;
}

/** Overwrite the first `count` entries of `dst` with `src`, zero beyond src.length (a shorter source pads with zeros). */
export function replacePadded(dst: Float32Array | Float64Array, src: ArrayLike<number>, count: number): void {
  const n = Math.min(src.length, count);
  for (let i = 0; i < n; i++) dst[i] = src[i]!;
  for (let i = n; i < count; i++) dst[i] = 0;
}

