/**
 * Attenuation over time, steady state, convergence time and divergence, from per-hop error energies
 * of the same run with control off and on (same seed, so the same disturbance and sensor noise).
 *
 * Definitions (the project's own, stated in the README):
 * - steady-state attenuation: 10·log10(Σ e_off² / Σ e_on²) over the last 25 % of the run;
 * - attenuation over time: the same ratio over a trailing 100 ms window, at every hop;
 * - convergence time: seconds from the start of control to the first instant after which the
 *   trailing-window attenuation stays within 3 dB of the steady-state value (null if never);
 * - divergence: a trailing window whose control-on error power is more than 10 dB above control off.
 */
export interface HopEnergies {
  /** Hop length in samples. */
  hop: number;
  sampleRate: number;
  /** Σ e_off² per hop. */
  off: ArrayLike<number>;
  /** Σ e_on² per hop. */
  on: ArrayLike<number>;
  /** Samples per hop actually accumulated (the last hop may be short). */
  counts: ArrayLike<number>;
}

export interface ConvergenceOptions {
  /** Trailing window in seconds (default 0.1). */
  windowS?: number;
  /** Control start in seconds (default 0). */
  controlStartS?: number;
  /** Fraction of the run, at its end, that defines the steady state (default 0.25). */
  steadyFraction?: number;
  /** Band around the steady state that counts as converged, dB (default 3). */
  toleranceDb?: number;
  /** Rise over control off that counts as divergence, dB (default 10). */
  divergenceDb?: number;
}

export interface ConvergenceResult {
  /** Steady-state attenuation, dB (may be ±Infinity for silent signals: callers turn that into null). */
  attenuationDb: number;
  offPower: number;
  onPower: number;
  convergenceS: number | null;
  diverged: boolean;
  /** First time (s) a trailing window exceeded the divergence threshold, or null. */
  divergedAtS: number | null;
  /** Time of the end of each trailing window (s) and its attenuation (dB), plus levels (mean square). */
  timeS: Float64Array;
  attenuationOverTimeDb: Float64Array;
  offPowerOverTime: Float64Array;
  onPowerOverTime: Float64Array;
}

export function convergenceMetrics(h: HopEnergies, opts: ConvergenceOptions = {}): ConvergenceResult {
  const windowS = opts.windowS ?? 0.1;
  const start = opts.controlStartS ?? 0;
  const steadyFraction = opts.steadyFraction ?? 0.25;
  const tol = opts.toleranceDb ?? 3;
  const divDb = opts.divergenceDb ?? 10;
  const nh = h.off.length;
  const hopS = h.hop / h.sampleRate;
  const W = Math.max(1, Math.round(windowS / hopS));

  // steady state: last 25 % of the run, by samples
  let total = 0;
  for (let i = 0; i < nh; i++) total += h.counts[i]!;
  const steadyStart = total * (1 - steadyFraction);
  let offS = 0, onS = 0, nS = 0, acc = 0;
  for (let i = 0; i < nh; i++) {
    const c = h.counts[i]!;
    if (acc + c > steadyStart) {
      offS += h.off[i]!;
      onS += h.on[i]!;
      nS += c;
    }
    acc += c;
  }
  const offPower = nS ? offS / nS : 0;
  const onPower = nS ? onS / nS : 0;
  const attenuationDb = 10 * Math.log10(offS / onS);

  const count = Math.max(0, nh - W + 1);
  const timeS = new Float64Array(count);
  const att = new Float64Array(count);
  const offT = new Float64Array(count);
  const onT = new Float64Array(count);
  let so = 0, sn = 0, sc = 0;
  let diverged = false;
  let divergedAtS: number | null = null;
  const divRatio = Math.pow(10, divDb / 10);
  for (let i = 0; i < nh; i++) {
    so += h.off[i]!;
    sn += h.on[i]!;
    sc += h.counts[i]!;
    if (i >= W) {
      so -= h.off[i - W]!;
      sn -= h.on[i - W]!;
      sc -= h.counts[i - W]!;
    }
    if (i >= W - 1) {
      const j = i - W + 1;
      const t = (i + 1) * hopS;
      timeS[j] = t;
      att[j] = 10 * Math.log10(so / sn);
      offT[j] = so / sc;
      onT[j] = sn / sc;
      if (!diverged && (!(Number.isFinite(sn)) || sn > divRatio * so) && t > start) {
        diverged = true;
        divergedAtS = t;
      }
    }
  }

  // convergence: the last trailing window (after control starts) outside ±tol of the steady state
  let convergenceS: number | null = null;
  if (Number.isFinite(attenuationDb) && count > 0) {
    let lastBad = -1;
    let firstAfterStart = -1;
    for (let j = 0; j < count; j++) {
      if (timeS[j]! - windowS < start - 1e-12) continue; // window must lie after the start of control
      if (firstAfterStart < 0) firstAfterStart = j;
      const a = att[j]!;
      if (!(Math.abs(a - attenuationDb) <= tol)) lastBad = j;
    }
    if (firstAfterStart >= 0 && lastBad < count - 1) {
      const j = lastBad < 0 ? firstAfterStart : lastBad + 1;
      convergenceS = Math.max(0, timeS[j]! - start);
    }
  }
  return { attenuationDb, offPower, onPower, convergenceS, diverged, divergedAtS, timeS, attenuationOverTimeDb: att, offPowerOverTime: offT, onPowerOverTime: onT };
}
