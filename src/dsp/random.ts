/**
 * Seeded pseudo-random numbers, so every simulation and test is reproducible.
 *
 * Generator: xoshiro128** (Blackman & Vigna, "Scrambled linear pseudorandom number generators", 2018),
 * seeded through splitmix32. Gaussian values by the Marsaglia polar method (Marsaglia & Bray, 1964).
 * No allocation after construction.
 */
export class Random {
  private s0 = 0;
  private s1 = 0;
  private s2 = 0;
  private s3 = 0;
  private spare = 0;
  private hasSpare = false;

  constructor(seed: number) {
    this.reseed(seed);
  }

  reseed(seed: number): void {
    let z = (seed >>> 0) ^ 0x9e3779b9;
    const next = (): number => {
      z = (z + 0x9e3779b9) >>> 0;
      let t = z;
      t = Math.imul(t ^ (t >>> 16), 0x85ebca6b) >>> 0;
      t = Math.imul(t ^ (t >>> 13), 0xc2b2ae35) >>> 0;
      return (t ^ (t >>> 16)) >>> 0;
    };
    this.s0 = next();
    this.s1 = next();
    this.s2 = next();
    this.s3 = next();
    if ((this.s0 | this.s1 | this.s2 | this.s3) === 0) this.s0 = 1;
    this.hasSpare = false;
  }

  /** Uniform 32-bit unsigned integer. */
  nextUint32(): number {
    const result = Math.imul(rotl(Math.imul(this.s1, 5) >>> 0, 7), 9) >>> 0;
    const t = (this.s1 << 9) >>> 0;
    this.s2 ^= this.s0;
    this.s3 ^= this.s1;
    this.s1 ^= this.s2;
    this.s0 ^= this.s3;
    this.s2 ^= t;
    this.s3 = rotl(this.s3, 11);
    return result;
  }

  /** Uniform in [0, 1). */
  uniform(): number {
    return this.nextUint32() / 4294967296;
  }

  /** Standard normal (mean 0, variance 1). */
  gaussian(): number {
    if (this.hasSpare) {
      this.hasSpare = false;
      return this.spare;
    }
    let u = 0;
    let v = 0;
    let s = 0;
    do {
      u = 2 * this.uniform() - 1;
      v = 2 * this.uniform() - 1;
      s = u * u + v * v;
    } while (s >= 1 || s === 0);
    const m = Math.sqrt((-2 * Math.log(s)) / s);
    this.spare = v * m;
    this.hasSpare = true;
    return u * m;
  }

  /**
   * Fill the first n entries of `out` with Gaussian samples of the given RMS. Per-block code should
   * use this rather than calling `gaussian()` per sample: a call that the JIT does not inline returns
   * its double boxed, which allocates on every sample.
   */
  fillGaussianN(out: Float32Array | Float64Array, n: number, rms = 1): void {
    for (let i = 0; i < n; i++) out[i] = rms * this.gaussian();
  }

  /** Fill `out` with Gaussian samples of the given RMS; returns `out`. */
  fillGaussian(out: Float32Array | Float64Array, rms = 1): Float32Array | Float64Array {
    for (let i = 0; i < out.length; i++) out[i] = rms * this.gaussian();
    return out;
  }
}

function rotl(x: number, k: number): number {
  return ((x << k) | (x >>> (32 - k))) >>> 0;
}
