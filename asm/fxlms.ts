// WebAssembly SIMD (f32x4) kernels for ancbench's FxLMS controllers, in AssemblyScript.
// Built by scripts/build-wasm.mjs into src/dsp/fxlms-wasm-bytes.ts; src/dsp/wasm-fxlms.ts and
// src/dsp/fd-fxlms.ts drive them. No allocator, no imports: every buffer is laid out by hand after
// __heap_base, and the host creates its typed-array views only after the layout is final (growing
// the memory detaches earlier views).
//
// Two independent parts share the module:
//
// 1. A time-domain FxLMS / FxNLMS (Morgan, 1980; Widrow & Stearns, 1985) whose whole block loop runs
//    here, with the equations and timing of src/dsp/fxlms.ts:
//      y(n) = Σ_{k<L} w_k·x(n − k),  f(n) = Σ_{m<M} ŝ_m·x(n − m)
//      w ← (1 − μγ)·w − c(n)·f(n),  c(n) = μ·e(n)  or  μ·e(n) / (δ + ‖f(n)‖²)
//    per sample, or summed over the block and applied at its end (block update).
//    L and M are padded to multiples of 16 for a 4-way unrolled f32x4 loop; the padding taps of w
//    and ŝ are zero, and the update loops stop at L, so padding taps stay frozen at zero. ‖f(n)‖² is a
//    float64 running sum over the L newest f (never the padding), recomputed every 8192 samples.
//    Delay lines are mirrored (each sample written at p and p + N) so every inner product is one
//    contiguous, unaligned v128 run. Start-up: until L samples have followed the first non-zero f,
//    ‖f‖² is scaled by L/k after k samples, as in the reference.
//
// 2. Stateless spectral loops for the partitioned frequency-domain FxLMS: complex multiply-accumulate
//    over partitions and the unconstrained gradient update, on split (re, im) half spectra whose bin
//    count is a multiple of 4, and the loops that move data between fft.js's interleaved float64
//    arrays (the transforms themselves run in the host) and those split spectra.

// ---------------------------------------------------------------------------------------------
// 1. Time-domain FxLMS

const RECOMPUTE_EVERY: i32 = 8192;

let L: i32 = 0;
let Lp: i32 = 0;
let M: i32 = 0;
let Mp: i32 = 0;
let NX: i32 = 0;
let maxBlock: i32 = 0;
let wPtr: usize = 0;
let gPtr: usize = 0;
let sPtr: usize = 0;
let xPtr: usize = 0;
let fPtr: usize = 0;
let refPtr: usize = 0;
let errPtr: usize = 0;
let outPtr: usize = 0;
let paramPtr: usize = 0;
let endPtr: usize = 0;
let px: i32 = 0;
let pf: i32 = 0;
let since: i32 = 0;
let energy: f64 = 0;
let filled: i32 = 0;

function align16(p: usize): usize {
  return (p + 15) & ~(<usize>15);
}

/** Grow the memory so that [0, end) is addressable; false when the host refuses. */
function ensureMemory(end: usize): bool {
  const have = <usize>memory.size() << 16;
  if (end <= have) return true;
  const pages = <i32>((end - have + 0xffff) >> 16);
  return memory.grow(pages) >= 0;
}

/** First free byte after the module's static data (16-byte aligned). */
export function heapBase(): usize {
  return align16(__heap_base);
}

/** Make room for `bytes` bytes from heapBase(); returns 1, or 0 when the memory cannot grow. */
export function reserve(bytes: usize): i32 {
  return ensureMemory(heapBase() + bytes) ? 1 : 0;
}

/**
 * Lay out a time-domain controller of `taps` taps, a model of `modelTaps` taps and blocks of up to
 * `blockSize` samples. Returns 1, or 0 when the memory cannot grow. Everything starts zeroed.
 */
export function tdInit(taps: i32, modelTaps: i32, blockSize: i32): i32 {
  L = taps;
  Lp = (taps + 15) & ~15;
  M = modelTaps;
  Mp = (modelTaps + 15) & ~15;
  NX = Lp > Mp ? Lp : Mp;
  maxBlock = blockSize;
  let p = heapBase();
  wPtr = p;
  p = align16(p + (<usize>Lp << 2));
  gPtr = p;
  p = align16(p + (<usize>Lp << 2));
  sPtr = p;
  p = align16(p + (<usize>Mp << 2));
  xPtr = p;
  p = align16(p + (<usize>(2 * NX) << 2));
  fPtr = p;
  p = align16(p + (<usize>(2 * L) << 2));
  refPtr = p;
  p = align16(p + (<usize>blockSize << 2));
  errPtr = p;
  p = align16(p + (<usize>blockSize << 2));
  outPtr = p;
  p = align16(p + (<usize>blockSize << 2));
  paramPtr = p;
  p += 4 << 3;
  endPtr = p;
  if (!ensureMemory(endPtr)) return 0;
  memory.fill(wPtr, 0, endPtr - wPtr);
  px = 0;
  pf = 0;
  since = 0;
  energy = 0;
  filled = 0;
  return 1;
}

export function tdWeights(): usize { return wPtr; }
export function tdModel(): usize { return sPtr; }
export function tdRef(): usize { return refPtr; }
export function tdErr(): usize { return errPtr; }
export function tdOut(): usize { return outPtr; }
/** Four float64 parameters the host writes before each block: μ, γ, δ, 1 − (1 − μγ)^n. */
export function tdParams(): usize { return paramPtr; }
export function tdPaddedTaps(): i32 { return Lp; }
export function tdPaddedModelTaps(): i32 { return Mp; }
export function tdEnergy(): f64 { return energy; }

/** Clear weights, gradient and delay lines (the model stays). */
export function tdReset(): void {
  memory.fill(wPtr, 0, <usize>Lp << 2);
  memory.fill(gPtr, 0, <usize>Lp << 2);
  memory.fill(xPtr, 0, <usize>(2 * NX) << 2);
  memory.fill(fPtr, 0, <usize>(2 * L) << 2);
  px = 0;
  pf = 0;
  since = 0;
  energy = 0;
  filled = 0;
}

/** Clear the weights and the pending block gradient only. */
export function tdResetWeights(): void {
  memory.fill(wPtr, 0, <usize>Lp << 2);
  memory.fill(gPtr, 0, <usize>Lp << 2);
}

/** Σ_{k<L} w_k², in float64. */
export function tdWeightNormSquared(): f64 {
  let s: f64 = 0;
  for (let k = 0; k < L; k++) {
    const v = <f64>load<f32>(wPtr + (<usize>k << 2));
    s += v * v;
  }
  return s;
}

/** Σ_{k<n} a_k·b_k over a length that is a multiple of 16 (4 accumulators of 4 lanes). */
// @ts-ignore: decorator
@inline
function dot16(a: usize, b: usize, n: i32): f32 {
  let a0 = f32x4.splat(0);
  let a1 = f32x4.splat(0);
  let a2 = f32x4.splat(0);
  let a3 = f32x4.splat(0);
  const end = a + (<usize>n << 2);
  while (a < end) {
    a0 = f32x4.add(a0, f32x4.mul(v128.load(a), v128.load(b)));
    a1 = f32x4.add(a1, f32x4.mul(v128.load(a, 16), v128.load(b, 16)));
    a2 = f32x4.add(a2, f32x4.mul(v128.load(a, 32), v128.load(b, 32)));
    a3 = f32x4.add(a3, f32x4.mul(v128.load(a, 48), v128.load(b, 48)));
    a += 64;
    b += 64;
  }
  const s = f32x4.add(f32x4.add(a0, a1), f32x4.add(a2, a3));
  return f32x4.extract_lane(s, 0) + f32x4.extract_lane(s, 1) + f32x4.extract_lane(s, 2) + f32x4.extract_lane(s, 3);
}

/**
 * dst_k ← dst_k − (a·dst_k + c·src_k) for k < n, stopping exactly at n (a = 0 skips the multiply).
 * The leakage enters as a = 1 − g rather than as the factor g: g = 1 − μγ is within one float32
 * rounding of 1, and that rounding, repeated every sample, would scale the weights visibly.
 */
// @ts-ignore: decorator
@inline
function axpby(dst: usize, src: usize, n: i32, a: f32, c: f32): void {
  const cv = f32x4.splat(c);
  const n16 = n & ~15;
  const n4 = n & ~3;
  let k = 0;
  if (a == 0) {
    for (; k < n16; k += 16) {
      const o = <usize>k << 2;
      v128.store(dst + o, f32x4.sub(v128.load(dst + o), f32x4.mul(cv, v128.load(src + o))));
      v128.store(dst + o, f32x4.sub(v128.load(dst + o, 16), f32x4.mul(cv, v128.load(src + o, 16))), 16);
      v128.store(dst + o, f32x4.sub(v128.load(dst + o, 32), f32x4.mul(cv, v128.load(src + o, 32))), 32);
      v128.store(dst + o, f32x4.sub(v128.load(dst + o, 48), f32x4.mul(cv, v128.load(src + o, 48))), 48);
    }
    for (; k < n4; k += 4) {
      const o = <usize>k << 2;
      v128.store(dst + o, f32x4.sub(v128.load(dst + o), f32x4.mul(cv, v128.load(src + o))));
    }
    for (; k < n; k++) {
      const o = <usize>k << 2;
      store<f32>(dst + o, load<f32>(dst + o) - c * load<f32>(src + o));
    }
  } else {
    const av = f32x4.splat(a);
    for (; k < n4; k += 4) {
      const o = <usize>k << 2;
      const d = v128.load(dst + o);
      v128.store(dst + o, f32x4.sub(d, f32x4.add(f32x4.mul(av, d), f32x4.mul(cv, v128.load(src + o)))));
    }
    for (; k < n; k++) {
      const o = <usize>k << 2;
      const d = load<f32>(dst + o);
      store<f32>(dst + o, d - (a * d + c * load<f32>(src + o)));
    }
  }
}

/**
 * The per-sample update of sample n − 1 fused with the output of sample n (one pass over w instead
 * of two): w_k ← w_k − (a·w_k + c·f_k), y = Σ w_k·x_k over k < n, n = L (the padding taps are zero
 * and stay untouched, so they add nothing to y). Same arithmetic as axpby then a dot product.
 */
// @ts-ignore: decorator
@inline
function updateDot(w: usize, f: usize, x: usize, n: i32, a: f32, c: f32): f32 {
  const cv = f32x4.splat(c);
  let a0 = f32x4.splat(0);
  let a1 = f32x4.splat(0);
  let a2 = f32x4.splat(0);
  let a3 = f32x4.splat(0);
  const n16 = n & ~15;
  let k = 0;
  if (a == 0) {
    for (; k < n16; k += 16) {
      const o = <usize>k << 2;
      const w0 = f32x4.sub(v128.load(w + o), f32x4.mul(cv, v128.load(f + o)));
      const w1 = f32x4.sub(v128.load(w + o, 16), f32x4.mul(cv, v128.load(f + o, 16)));
      const w2 = f32x4.sub(v128.load(w + o, 32), f32x4.mul(cv, v128.load(f + o, 32)));
      const w3 = f32x4.sub(v128.load(w + o, 48), f32x4.mul(cv, v128.load(f + o, 48)));
      v128.store(w + o, w0);
      v128.store(w + o, w1, 16);
      v128.store(w + o, w2, 32);
      v128.store(w + o, w3, 48);
      a0 = f32x4.add(a0, f32x4.mul(w0, v128.load(x + o)));
      a1 = f32x4.add(a1, f32x4.mul(w1, v128.load(x + o, 16)));
      a2 = f32x4.add(a2, f32x4.mul(w2, v128.load(x + o, 32)));
      a3 = f32x4.add(a3, f32x4.mul(w3, v128.load(x + o, 48)));
    }
  } else {
    const av = f32x4.splat(a);
    for (; k < n16; k += 4) {
      const o = <usize>k << 2;
      const d = v128.load(w + o);
      const w0 = f32x4.sub(d, f32x4.add(f32x4.mul(av, d), f32x4.mul(cv, v128.load(f + o))));
      v128.store(w + o, w0);
      a0 = f32x4.add(a0, f32x4.mul(w0, v128.load(x + o)));
    }
  }
  const v = f32x4.add(f32x4.add(a0, a1), f32x4.add(a2, a3));
  let y = f32x4.extract_lane(v, 0) + f32x4.extract_lane(v, 1) + f32x4.extract_lane(v, 2) + f32x4.extract_lane(v, 3);
  for (; k < n; k++) {
    const o = <usize>k << 2;
    const d = load<f32>(w + o);
    const wk = d - (a * d + c * load<f32>(f + o));
    store<f32>(w + o, wk);
    y += wk * load<f32>(x + o);
  }
  return y;
}

/**
 * Process n samples from the ref/err buffers into the out buffer.
 * adapt: 0 freezes the weights; normalized: FxNLMS; blockUpdate: sum the gradients over the block.
 * The float64 parameters come from memory (tdParams), so the host passes no fresh doubles per call:
 * μ the step size, γ the leakage, δ the regularisation, and 1 − (1 − μγ)^n for a block update.
 * With per-sample updates, the update from sample n − 1 is applied in the same pass that computes
 * y(n) (before f(n) overwrites the slot of f(n − L) that the update still needs); the last one of
 * the block is applied at its end, so the weights are current between blocks.
 */
export function tdProcess(n: i32, adapt: i32, normalized: i32, blockUpdate: i32): void {
  const mu = load<f64>(paramPtr);
  const leakage = load<f64>(paramPtr, 8);
  const reg = load<f64>(paramPtr, 16);
  const blockLeakLoss = load<f64>(paramPtr, 24);
  const leakLoss = <f32>(mu * leakage);
  let pending = false;
  let pendingC: f32 = 0;
  let pendingF: usize = 0;
  for (let i = 0; i < n; i++) {
    // push x(n)
    px = px == 0 ? NX - 1 : px - 1;
    const x = load<f32>(refPtr + (<usize>i << 2));
    store<f32>(xPtr + (<usize>px << 2), x);
    store<f32>(xPtr + (<usize>(px + NX) << 2), x);
    const xl = xPtr + (<usize>px << 2);

    // y(n) = wᵀx(n) with w(n); padding taps of w are zero
    let y: f32;
    if (pending) {
      y = updateDot(wPtr, pendingF, xl, L, leakLoss, pendingC);
      pending = false;
    } else {
      y = dot16(wPtr, xl, Lp);
    }
    store<f32>(outPtr + (<usize>i << 2), y);
    if (!adapt) continue;

    // f(n) = ŝᵀx(n); padding taps of ŝ are zero
    const f = dot16(sPtr, xl, Mp);
    pf = pf == 0 ? L - 1 : pf - 1;
    const leaving = load<f32>(fPtr + (<usize>pf << 2)); // f(n − L)
    store<f32>(fPtr + (<usize>pf << 2), f);
    store<f32>(fPtr + (<usize>(pf + L) << 2), f);
    const fl = fPtr + (<usize>pf << 2);
    if (++since >= RECOMPUTE_EVERY) {
      let e2: f64 = 0;
      for (let j = 0; j < L; j++) {
        const v = <f64>load<f32>(fl + (<usize>j << 2));
        e2 += v * v;
      }
      energy = e2;
      since = 0;
    } else {
      energy += <f64>f * <f64>f - <f64>leaving * <f64>leaving;
    }

    // start-up: until L samples have followed the first non-zero f, ‖f‖² covers part of the window
    // only and is scaled up to a full one (as src/dsp/fxlms.ts does)
    if (filled < L && (filled > 0 || f != 0)) filled++;
    const norm: f64 = filled == L ? energy : filled > 0 ? (energy * <f64>L) / <f64>filled : 0;
    const e = <f64>load<f32>(errPtr + (<usize>i << 2));
    const c: f64 = normalized ? (mu * e) / (reg + (norm > 0 ? norm : 0)) : mu * e;
    if (blockUpdate) {
      axpby(gPtr, fl, L, 0, <f32>(-c)); // g ← g + c·f
    } else {
      // w ← (1 − μγ)·w − c·f, applied with the next sample's output
      pending = true;
      pendingC = <f32>c;
      pendingF = fl;
    }
  }
  if (pending) axpby(wPtr, pendingF, L, leakLoss, pendingC);
  if (adapt && blockUpdate) {
    axpby(wPtr, gPtr, L, <f32>blockLeakLoss, 1); // w ← (1 − μγ)^n·w − Σ
    memory.fill(gPtr, 0, <usize>L << 2);
  }
}

// ---------------------------------------------------------------------------------------------
// 2. Spectral loops for the partitioned frequency-domain FxLMS (split re/im half spectra)

/**
 * acc = Σ_{j<K} H_j · X_{slot(head − j)} per bin, where partition j of H starts at hR/hI + j·bins
 * and slot s of X at xR/xI + s·bins (a ring of KX slots). bins is a multiple of 4.
 */
export function cmacPartitions(accR: usize, accI: usize, hR: usize, hI: usize, xR: usize, xI: usize, K: i32, head: i32, KX: i32, bins: i32): void {
  const stride = <usize>bins << 2;
  // 8 bins at a time, all partitions, accumulators kept in registers
  for (let o: usize = 0; o < stride; o += 32) {
    let yr0 = f32x4.splat(0);
    let yi0 = f32x4.splat(0);
    let yr1 = f32x4.splat(0);
    let yi1 = f32x4.splat(0);
    let s = head;
    let ho = o;
    const lastChunk = o + 16 >= stride; // bins = 4 (mod 8): the last chunk has one vector
    for (let j = 0; j < K; j++) {
      const xo = <usize>s * stride + o;
      const hr0 = v128.load(hR + ho);
      const hi0 = v128.load(hI + ho);
      const xr0 = v128.load(xR + xo);
      const xi0 = v128.load(xI + xo);
      yr0 = f32x4.add(yr0, f32x4.sub(f32x4.mul(hr0, xr0), f32x4.mul(hi0, xi0)));
      yi0 = f32x4.add(yi0, f32x4.add(f32x4.mul(hr0, xi0), f32x4.mul(hi0, xr0)));
      if (!lastChunk) {
        const hr1 = v128.load(hR + ho, 16);
        const hi1 = v128.load(hI + ho, 16);
        const xr1 = v128.load(xR + xo, 16);
        const xi1 = v128.load(xI + xo, 16);
        yr1 = f32x4.add(yr1, f32x4.sub(f32x4.mul(hr1, xr1), f32x4.mul(hi1, xi1)));
        yi1 = f32x4.add(yi1, f32x4.add(f32x4.mul(hr1, xi1), f32x4.mul(hi1, xr1)));
      }
      s = s == 0 ? KX - 1 : s - 1;
      ho += stride;
    }
    v128.store(accR + o, yr0);
    v128.store(accI + o, yi0);
    if (!lastChunk) {
      v128.store(accR + o, yr1, 16);
      v128.store(accI + o, yi1, 16);
    }
  }
}

/**
 * Unconstrained gradient step for every partition:
 *   W_j ← W_j − (a·W_j + conj(F_{slot(fHead − j)})·E)   (F a ring of K slots; a = 1 − (1 − μγ)^n,
 *                                                       the leakage as a loss (see axpby), read as
 *                                                       float64 from lossPtr)
 * and the squared norm of each partition's 2P-sample impulse response by Parseval,
 *   ‖w_j‖² = (2·Σ_k |W_j[k]|² − |W_j[0]|² − |W_j[P]|²) / N,  N = 2P,
 * written as float64 into norms[j]. Padding bins (k > P) of F and E are zero, so they stay zero in W.
 */
export function cupdateUnconstrained(wR: usize, wI: usize, fR: usize, fI: usize, eR: usize, eI: usize, K: i32, fHead: i32, bins: i32, P: i32, lossPtr: usize, norms: usize): void {
  const stride = <usize>bins << 2;
  const av = f32x4.splat(<f32>load<f64>(lossPtr));
  const invN: f64 = 1.0 / <f64>(2 * P);
  let s = fHead;
  for (let j = 0; j < K; j++) {
    const wo = <usize>j * stride;
    const fo = <usize>s * stride;
    let acc = f32x4.splat(0);
    for (let o: usize = 0; o < stride; o += 16) {
      const er = v128.load(eR + o);
      const ei = v128.load(eI + o);
      const fr = v128.load(fR + fo + o);
      const fi = v128.load(fI + fo + o);
      const gr = f32x4.add(f32x4.mul(fr, er), f32x4.mul(fi, ei));
      const gi = f32x4.sub(f32x4.mul(fr, ei), f32x4.mul(fi, er));
      const w0r = v128.load(wR + wo + o);
      const w0i = v128.load(wI + wo + o);
      const wr = f32x4.sub(w0r, f32x4.add(f32x4.mul(av, w0r), gr));
      const wi = f32x4.sub(w0i, f32x4.add(f32x4.mul(av, w0i), gi));
      v128.store(wR + wo + o, wr);
      v128.store(wI + wo + o, wi);
      acc = f32x4.add(acc, f32x4.add(f32x4.mul(wr, wr), f32x4.mul(wi, wi)));
    }
    const sum = <f64>f32x4.extract_lane(acc, 0) + <f64>f32x4.extract_lane(acc, 1) + <f64>f32x4.extract_lane(acc, 2) + <f64>f32x4.extract_lane(acc, 3);
    const d0r = <f64>load<f32>(wR + wo);
    const d0i = <f64>load<f32>(wI + wo);
    const dPr = <f64>load<f32>(wR + wo + (<usize>P << 2));
    const dPi = <f64>load<f32>(wI + wo + (<usize>P << 2));
    store<f64>(norms + (<usize>j << 3), (2 * sum - (d0r * d0r + d0i * d0i) - (dPr * dPr + dPi * dPi)) * invN);
    s = s == 0 ? K - 1 : s - 1;
  }
}

/**
 * Glue between fft.js (interleaved float64 complex arrays in this memory) and the split float32
 * half spectra: the host runs the transforms, these loops move the data.
 *
 * packPair: z ← conj(Z), Z the full N-point spectrum A + i·B (N = 2P) of two Hermitian spectra given
 * as half spectra: Z[k] = A[k] + i·B[k], Z[N − k] = conj(A[k]) + i·conj(B[k]), whose inverse is
 * a + i·b. The host takes the forward transform of conj(Z), N·conj(a + i·b), and scales it.
 */
export function packPair(z: usize, aR: usize, aI: usize, bR: usize, bI: usize, P: i32): void {
  const N = 2 * P;
  for (let q = 0; q <= P; q++) {
    const o = <usize>q << 2;
    const xr = <f64>load<f32>(aR + o);
    const xi = <f64>load<f32>(aI + o);
    const yr = <f64>load<f32>(bR + o);
    const yi = <f64>load<f32>(bI + o);
    const zo = z + (<usize>q << 4);
    store<f64>(zo, xr - yi);
    store<f64>(zo, -(xi + yr), 8);
    if (q > 0 && q < P) {
      const mo = z + (<usize>(N - q) << 4);
      store<f64>(mo, xr + yi);
      store<f64>(mo, xi - yr, 8);
    }
  }
}

/**
 * unpackPair: the spectrum z = FFT(a + i·b) of two real signals, separated into their half spectra,
 * A[k] = (Z[k] + conj(Z[N − k]))/2, B[k] = (Z[k] − conj(Z[N − k]))/(2i); bins 0 and P are real.
 */
export function unpackPair(z: usize, aR: usize, aI: usize, bR: usize, bI: usize, P: i32): void {
  const N = 2 * P;
  store<f32>(aR, <f32>load<f64>(z));
  store<f32>(aI, 0);
  store<f32>(bR, <f32>load<f64>(z, 8));
  store<f32>(bI, 0);
  for (let q = 1; q < P; q++) {
    const zo = z + (<usize>q << 4);
    const mo = z + (<usize>(N - q) << 4);
    const zr = load<f64>(zo);
    const zi = load<f64>(zo, 8);
    const wr = load<f64>(mo);
    const wi = load<f64>(mo, 8);
    const o = <usize>q << 2;
    store<f32>(aR + o, <f32>(0.5 * (zr + wr)));
    store<f32>(aI + o, <f32>(0.5 * (zi - wi)));
    store<f32>(bR + o, <f32>(0.5 * (zi + wi)));
    store<f32>(bI + o, <f32>(0.5 * (wr - zr)));
  }
  const po = z + (<usize>P << 4);
  const o = <usize>P << 2;
  store<f32>(aR + o, <f32>load<f64>(po));
  store<f32>(aI + o, 0);
  store<f32>(bR + o, <f32>load<f64>(po, 8));
  store<f32>(bI + o, 0);
}

/** unpackReal: the lower half of a real signal's spectrum (fft.js realTransform) into split form. */
export function unpackReal(z: usize, dR: usize, dI: usize, P: i32): void {
  for (let q = 0; q <= P; q++) {
    const zo = z + (<usize>q << 4);
    const o = <usize>q << 2;
    store<f32>(dR + o, <f32>load<f64>(zo));
    store<f32>(dI + o, q == 0 || q == P ? <f32>0 : <f32>load<f64>(zo, 8));
  }
}

// ---------------------------------------------------------------------------------------------
// 3. Largest true peak of a block (ITU-R BS.1770-4 Annex 2 interpolator, 4 phases × 12 taps)
//
// The window at `win` holds the 11 samples before the block and then the n new ones (f32). `coef`
// holds 12 v128 vectors, coef[k] = (h0[k], h1[k], h2[k], h3[k]), so the four interpolated points of
// one input step come out of one f32x4 accumulator: y = Σ_k splat(x[m − k])·coef[k]. The largest
// |y| of the block is stored at `out` (a float returned to JavaScript would be boxed on every call);
// the host shifts the window.

/** max |Σ_k x[m − k]·h_p[k]| over the block's samples m and the four phases p, stored at out. */
export function tpBlockMax(win: usize, coef: usize, n: i32, out: usize): void {
  const c0 = v128.load(coef), c1 = v128.load(coef + 16), c2 = v128.load(coef + 32), c3 = v128.load(coef + 48);
  const c4 = v128.load(coef + 64), c5 = v128.load(coef + 80), c6 = v128.load(coef + 96), c7 = v128.load(coef + 112);
  const c8 = v128.load(coef + 128), c9 = v128.load(coef + 144), c10 = v128.load(coef + 160), c11 = v128.load(coef + 176);
  let best = f32x4.splat(0);
  for (let j: i32 = 0; j < n; j++) {
    // newest sample of this step at win[11 + j]; x[m − k] = win[11 + j − k]
    const p = win + (<usize>j << 2);
    let acc = f32x4.mul(f32x4.splat(load<f32>(p, 44)), c0);
    acc = f32x4.add(acc, f32x4.mul(f32x4.splat(load<f32>(p, 40)), c1));
    acc = f32x4.add(acc, f32x4.mul(f32x4.splat(load<f32>(p, 36)), c2));
    acc = f32x4.add(acc, f32x4.mul(f32x4.splat(load<f32>(p, 32)), c3));
    acc = f32x4.add(acc, f32x4.mul(f32x4.splat(load<f32>(p, 28)), c4));
    acc = f32x4.add(acc, f32x4.mul(f32x4.splat(load<f32>(p, 24)), c5));
    acc = f32x4.add(acc, f32x4.mul(f32x4.splat(load<f32>(p, 20)), c6));
    acc = f32x4.add(acc, f32x4.mul(f32x4.splat(load<f32>(p, 16)), c7));
    acc = f32x4.add(acc, f32x4.mul(f32x4.splat(load<f32>(p, 12)), c8));
    acc = f32x4.add(acc, f32x4.mul(f32x4.splat(load<f32>(p, 8)), c9));
    acc = f32x4.add(acc, f32x4.mul(f32x4.splat(load<f32>(p, 4)), c10));
    acc = f32x4.add(acc, f32x4.mul(f32x4.splat(load<f32>(p, 0)), c11));
    best = f32x4.max(best, f32x4.abs(acc));
  }
  store<f32>(out, max(max(f32x4.extract_lane(best, 0), f32x4.extract_lane(best, 1)), max(f32x4.extract_lane(best, 2), f32x4.extract_lane(best, 3))));
}
