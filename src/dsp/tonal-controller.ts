/**
 * Narrowband (tonal) FxLMS controller: cancels a tone and its harmonics at the error microphone.
 *
 * Method: the adaptive canceller of a sinusoid with a synthesized quadrature reference (Widrow et al.,
 * "Adaptive noise cancelling: principles and applications", Proc. IEEE 63(12), 1975), with the
 * reference filtered by the secondary-path model (filtered-x LMS; Morgan, IEEE TASSP 28(4), 1980;
 * Burgess, JASA 70(3), 1981). Because each reference is a pure sinusoid, its filtered version is the
 * model's complex response at that frequency times the sinusoid, so no FIR filtering of references
 * is needed (Boucher, Elliott & Nelson, IEE Proc. F 138(4), 1991, analyse exactly this structure).
 *
 * Per harmonic k = 1 … H, with a continuous phase accumulator φ(n+1) = φ(n) + ω₀ (ω₀ = 2π f₀/fs,
 * changed only at block boundaries, so the synthesized sinusoids never jump in phase):
 *
 *     x_k(n) = [cos kφ, sin kφ],          y(n) = Σ_k g_k (a_k cos kφ + b_k sin kφ)
 *     Ŝ_k = Σ_m ŝ_m e^{−jkω₀m}             (path-response.ts, re-evaluated when ω₀ moved)
 *     r̂_k(n) = [Re(Ŝ_k e^{jkφ}), Im(Ŝ_k e^{jkφ})]   (the filtered reference: ŝ * x_k in steady state)
 *     [a_k, b_k] ← (1 − μγ)[a_k, b_k] − μ_k e(n) r̂_k(n),   μ_k = μ / (δ + ‖r̂_k‖²),  ‖r̂_k‖² = |Ŝ_k|²
 *
 * with μ = stepSize, γ = leakage, δ = regularization and g_k a 0…1 gain that ramps a harmonic in or
 * out over 20 ms when the harmonic count changes. This is the project's FxNLMS update applied to the
 * two-element filtered reference of each harmonic; the synthesized reference has amplitude A = 1, so
 * ‖r̂_k‖² = |Ŝ_k|²·A² is constant and the normalisation costs nothing per sample.
 *
 * Convergence (derivation): write the weights as a phasor W_k = a_k − j b_k (so the output at
 * harmonic k is Re{W_k e^{jkφ}}) and the error at that harmonic as E_k = D_k + S_k W_k (D_k the
 * disturbance phasor, S_k the true path response). Averaging the update over a period
 * (mean of Re{X e^{jφ}}·Re{Y e^{jφ}} = ½Re{X Y*}) gives W_k ← W_k − (μ_k/2) Ŝ_k* E_k, hence
 *     E_k ← [1 − (μ/2)·S_k Ŝ_k* / (δ + |Ŝ_k|²)] E_k.
 * With a perfect model and δ ≪ |Ŝ_k|² every harmonic's error phasor decays by (1 − μ/2) per
 * sample: time constant τ ≈ 2/μ samples, whatever the path gain or the tone amplitude. (This is
 * Widrow's single-sinusoid canceller, whose pole radius is 1 − μ_W C² in his convention
 * w ← w + 2μ_W e x with reference amplitude C: here 2μ_W C² = μ.) A model phase error ψ turns the
 * factor into 1 − (μ/2)|S_k/Ŝ_k| e^{jψ}: it converges, slowed by cos ψ, for |ψ| < 90° only.
 * With the path's bulk delay Δ samples the averaged error obeys E(n+1) = E(n) − (μ/2)E(n−Δ), stable
 * for μ/2 < 2 sin(π/(2(2Δ+1))) (the delayed-LMS bound; Long, Ling & Proakis, IEEE TASSP 37(9),
 * 1989): `stepSizeLimit` reports 4 sin(π/(2(2Δ+1))) with Δ the index of the model's largest tap.
 * Practical: 0 < stepSize ≪ 1 and well below stepSizeLimit (a quarter of it converges without
 * overshoot). Leakage γ (dimensionless, applied as 1 − μγ) leaves a residual of about 2γ/(1 + 2γ)
 * of the disturbance (γ = 1e-4: −74 dB) and keeps the weights bounded when the tone goes away.
 *
 * Frequency sources (applied at block boundaries):
 * - 'fixed': f₀ = hz.
 * - 'external': f₀ set by the host with `setFrequencyHz` (a tachometer, for instance); non-finite
 *   values are ignored, others clamped to [minHz, maxHz].
 * - 'reference': a ToneTracker follows the reference microphone.
 * - 'error' (single-microphone): the tracker must follow the error microphone, but once control
 *   works the tone it follows is cancelled there, the tracker loses lock and the controller would
 *   lose its frequency exactly when it succeeds. So the tracker is fed the disturbance as estimated
 *   from the error and the model, d̂(n) = e(n) − Σ_k g_k (a_k r̂_k,c(n) + b_k r̂_k,s(n)) (internal-model
 *   reconstruction: the second term is ŝ * y for the synthesized output), which keeps the tone as
 *   long as the disturbance has it, however well it is cancelled.
 * In the tracking modes f₀ follows the tracker's fundamental while it is locked and holds its last
 * value otherwise; adaptation waits for a first frequency.
 *
 * Meters (no allocation): for each harmonic, the error and the estimated counter-signal at the
 * microphone (g_k Ŝ_k W_k) are demodulated/smoothed through two one-pole low-passes of 50 ms each;
 * the disturbance estimate is their difference D̂ = Ê − Ŷ. See `readHarmonic`.
 *
 * Output constraint (src/dsp/output-constraint.ts; the engine sets the cap, A is the constraint level):
 * - 'rescale' budgets the output across harmonics so that Σ_k g_k|W_k| ≤ A (which bounds the peak of
 *   their sum by A). With u_k = |D̂_k|/|Ŝ_k| the amplitude harmonic k needs to cancel its disturbance,
 *   the residual power Σ_k (|D_k| − |S_k|a_k)² is least under Σ a_k ≤ A when a_k = clamp(u_k −
 *   ν/|Ŝ_k|², 0, u_k) with ν ≥ 0 chosen so the budget is met (Karush–Kuhn–Tucker; calculated): the
 *   harmonics that buy the most attenuation per unit of output (largest |S_k|·|D_k|) keep theirs,
 *   the others give up first. At each block end where the amplitudes sum to more than A, each W_k is
 *   scaled down to its a_k (never up), and a block whose output peak exceeds A is scaled to A.
 * - 'effort' adds the penalty as a per-harmonic leakage λ·S̄²/(δ + |Ŝ_k|²) (S̄² the mean |Ŝ_k|²
 *   over the active harmonics): the averaged update then settles at W_k = −Ŝ_k*D_k/(|Ŝ_k|² + β),
 *   β = 2λS̄²/μ, the effort-weighted optimum (Elliott, 2001, ch. 4), which also favours harmonics
 *   with a large path gain.
 *
 * Host sequence: construct once (validates, allocates); per block call `process(ref, err, out, n)`
 * (in 'external' mode call `setFrequencyHz` before it); `setFrequencySource`, `setHarmonics` and
 * `adapt` may change between blocks; read `readHarmonic(k, readout)` for k = 1 … harmonics,
 * `frequencyHz`, `trackerLocked`, `trackerConfidence`, `weightNormSquared` at display rate.
 * Cost per sample: two trigonometric calls and about 40 multiply-adds per harmonic, plus the
 * tracker in the 'reference' and 'error' modes; per frequency change O(8·M) for Ŝ (M model taps).
 */
import type { Controller } from './controller.ts';
import { pathResponsesAt } from './path-response.ts';
import { ToneTracker } from './tone-tracker.ts';
import { OutputConstraint, PENALTY, validateOutputConstraint, type OutputConstraintSettings } from './output-constraint.ts';

export type FrequencySource = 'reference' | 'error' | 'fixed' | 'external';

export interface TonalControllerConfig extends OutputConstraintSettings {
  /** Sample rate (Hz), 4000 … 384000. */
  sampleRate: number;
  /** Largest block `process` will receive, 1 … 65536. */
  maxBlockSize: number;
  /** FIR model of the secondary path ŝ (taps at the sample rate; 1 … 65536 finite taps, not all zero). */
  secondaryPathModel: Float32Array;
  /** Number of harmonics H controlled (f₀, 2f₀, … H·f₀), integer 1 … 8. */
  harmonics: number;
  /** Normalised step size μ (dimensionless), 0 < μ < 2; error time constant ≈ 2/μ samples. */
  stepSize: number;
  /** Leakage γ ≥ 0 (dimensionless, factor 1 − μγ per sample, μγ < 1); default 0. */
  leakage?: number;
  /** Regularisation δ ≥ 0 of the normalisation (units of squared model gain); default 1e-3·Σŝ_m². */
  regularization?: number;
  /** Where the fundamental comes from (see module comment). */
  frequencySource: FrequencySource;
  /** Fundamental (Hz) for 'fixed' (required) or the initial value for 'external' (optional); within [minHz, maxHz]. */
  hz?: number;
  /** Lowest fundamental (Hz); default 20. */
  minHz?: number;
  /** Highest fundamental (Hz); default min(2000, sampleRate/4); at most sampleRate/4. */
  maxHz?: number;
  /** Let the tracker look for a fundamental below the strongest line (ToneTracker harmonicsCheck); default false. */
  harmonicsCheck?: boolean;
}

/** One harmonic's meters, filled by `readHarmonic` into a caller-owned object. */
export interface HarmonicReadout {
  /** k·f₀ (Hz). */
  frequencyHz: number;
  /** Amplitude of the counter-signal at the controller output, g_k·|W_k| (output units). */
  counterAmplitude: number;
  /** Estimated amplitude of the disturbance at the error microphone, |D̂_k| (before control). */
  disturbanceAmplitude: number;
  /** Amplitude of the error at this harmonic, |Ê_k| (after control). */
  residualAmplitude: number;
  /** Phase of the counter-signal at the microphone relative to the disturbance (degrees, −180 … 180; ±180 = anti-phase). */
  counterPhaseDeg: number;
  /** 20·log10(|D̂_k| / |Ê_k|) (dB). */
  attenuationDb: number;
}

/** A zeroed readout object to pass to `readHarmonic` (allocate once, outside the audio path). */
export function createHarmonicReadout(): HarmonicReadout {
  return {
    frequencyHz: 0,
    counterAmplitude: 0,
    disturbanceAmplitude: 0,
    residualAmplitude: 0,
    counterPhaseDeg: 0,
    attenuationDb: 0,
  };
}

/** Most harmonics a controller can run. */
export const MAX_HARMONICS = 8;
const RAMP_S = 0.02;
const METER_TIME_S = 0.05;
/** Highest harmonic frequency controlled, as a fraction of the sample rate. */
const NYQUIST_GUARD = 0.45;
/** Re-evaluate Ŝ when the stale value could be off by more than this phase (rad). */
const PHASE_TOLERANCE = 1e-3;

const SOURCES: readonly FrequencySource[] = ['reference', 'error', 'fixed', 'external'];

function fail(field: string, range: string, value: unknown): never {
  throw new RangeError(`TonalController: ${field} must be ${range}, got ${String(value)}`);
}

function checkFinite(field: string, value: unknown, lo: number, hi: number, range: string): number {
  if (typeof value !== 'number' || !Number.isFinite(value) || value < lo || value > hi) fail(field, range, value);
  return value;
}

export class TonalController implements Controller {
  readonly kind = 'tonal';
  adapt = true;

  readonly sampleRate: number;
  readonly maxBlockSize: number;
  readonly minHz: number;
  readonly maxHz: number;
  stepSize: number;
  leakage: number;
  readonly regularization: number;
  /** Index of the model's largest tap (samples): the bulk delay used by `stepSizeLimit`. */
  readonly modelDelay: number;
  /** Delayed-LMS stability bound on stepSize for a perfect model: 4·sin(π / (2(2Δ + 1))). */
  readonly stepSizeLimit: number;
  /** Keeps the output below the cap (the engine sets the cap). */
  readonly outputConstraint: OutputConstraint;

  private readonly model: Float64Array;
  /** Index of the model's first non-zero tap: the responses skip the zeros before it (the bulk delay). */
  private firstTap = 0;
  private readonly tracker: ToneTracker;
  private readonly trackerInput: Float32Array;

  private source: FrequencySource;
  private fixedHz: number;
  private externalHz = NaN;
  private harmonicCount: number;

  private pendingSource: FrequencySource | null = null;
  private pendingFixedHz = NaN;
  private pendingHarmonics = 0;
  private pendingExternalHz = NaN;

  private f0 = 0;
  private omega = 0;
  private omegaEval = NaN;
  private hasFrequency = false;
  private phase = 0;

  // per harmonic, index k − 1
  private readonly wA = new Float64Array(MAX_HARMONICS);
  private readonly wB = new Float64Array(MAX_HARMONICS);
  private readonly sRe = new Float64Array(MAX_HARMONICS);
  private readonly sIm = new Float64Array(MAX_HARMONICS);
  private readonly muK = new Float64Array(MAX_HARMONICS);
  private readonly gain = new Float64Array(MAX_HARMONICS);
  private readonly target = new Float64Array(MAX_HARMONICS);
  private readonly eMeter = new Float64Array(4 * MAX_HARMONICS);
  private readonly yMeter = new Float64Array(4 * MAX_HARMONICS);
  private readonly omegaK = new Float64Array(MAX_HARMONICS);
  private readonly response = new Float64Array(2 * MAX_HARMONICS);
  /** Effort penalty weight per harmonic, S̄²/(δ + |Ŝ_k|²). */
  private readonly effortScale = new Float64Array(MAX_HARMONICS);
  /** Budget scratch: needed amplitude u_k and |Ŝ_k|² of each harmonic. */
  private readonly need = new Float64Array(MAX_HARMONICS);
  private readonly pathGainSq = new Float64Array(MAX_HARMONICS);
  private readonly estimate = new Float64Array(5);
  private readonly rampStep: number;
  private readonly meterAlpha: number;

  constructor(config: TonalControllerConfig) {
    if (config === null || typeof config !== 'object') {
      throw new TypeError('TonalController: config must be an object');
    }
    const fs = checkFinite('sampleRate', config.sampleRate, 4000, 384000, 'a number in [4000, 384000] Hz');
    const mb = config.maxBlockSize;
    if (!Number.isInteger(mb) || mb < 1 || mb > 65536) fail('maxBlockSize', 'an integer in [1, 65536]', mb);
    const s = config.secondaryPathModel;
    if (!(s instanceof Float32Array) || s.length < 1 || s.length > 65536) {
      fail('secondaryPathModel', 'a Float32Array of 1 … 65536 taps', s instanceof Float32Array ? `length ${s.length}` : s);
    }
    let energy = 0;
    let peak = 0;
    let peakAt = 0;
    for (let m = 0; m < s.length; m++) {
      const v = s[m]!;
      if (!Number.isFinite(v)) fail('secondaryPathModel', 'finite taps', `${v} at tap ${m}`);
      energy += v * v;
      if (Math.abs(v) > peak) {
        peak = Math.abs(v);
        peakAt = m;
      }
    }
    if (energy === 0) fail('secondaryPathModel', 'not all zero', 'all-zero taps');
    const h = config.harmonics;
    if (!Number.isInteger(h) || h < 1 || h > MAX_HARMONICS) fail('harmonics', `an integer in [1, ${MAX_HARMONICS}]`, h);
    const mu = config.stepSize;
    if (typeof mu !== 'number' || !Number.isFinite(mu) || mu <= 0 || mu >= 2) fail('stepSize', 'a number in (0, 2)', mu);
    const gamma = config.leakage ?? 0;
    if (typeof gamma !== 'number' || !Number.isFinite(gamma) || gamma < 0 || mu * gamma >= 1) {
      fail('leakage', `a number ≥ 0 with stepSize·leakage < 1 (leakage < ${1 / mu})`, gamma);
    }
    const delta = config.regularization ?? 1e-3 * energy;
    if (typeof delta !== 'number' || !Number.isFinite(delta) || delta < 0) fail('regularization', 'a finite number ≥ 0', delta);
    const minHz = checkFinite('minHz', config.minHz ?? 20, 1, fs / 4, `a number in [1, ${fs / 4}] Hz`);
    const maxHz = checkFinite(
      'maxHz',
      config.maxHz ?? Math.min(2000, fs / 4),
      minHz * 1.25,
      fs / 4,
      `a number in [1.25·minHz, sampleRate/4] = [${minHz * 1.25}, ${fs / 4}] Hz`,
    );
    const src = config.frequencySource;
    if (!SOURCES.includes(src)) fail('frequencySource', `one of ${SOURCES.join(', ')}`, src);
    let hz = NaN;
    if (src === 'fixed' || config.hz !== undefined) {
      hz = checkFinite('hz', config.hz, minHz, maxHz, `a number in [minHz, maxHz] = [${minHz}, ${maxHz}] Hz`);
    }
    const hc = config.harmonicsCheck ?? false;
    if (typeof hc !== 'boolean') fail('harmonicsCheck', 'a boolean', hc);
    validateOutputConstraint(config);

    this.sampleRate = fs;
    this.maxBlockSize = mb;
    this.minHz = minHz;
    this.maxHz = maxHz;
    this.stepSize = mu;
    this.leakage = gamma;
    this.regularization = delta;
    this.model = Float64Array.from(s);
    this.firstTap = firstNonZero(this.model);
    this.modelDelay = peakAt;
    this.stepSizeLimit = 4 * Math.sin(Math.PI / (2 * (2 * peakAt + 1)));
    this.tracker = new ToneTracker({ sampleRate: fs, minHz, maxHz, harmonicsCheck: hc });
    this.trackerInput = new Float32Array(mb);
    this.source = src;
    this.fixedHz = src === 'fixed' ? hz : NaN;
    this.externalHz = src === 'external' ? hz : NaN;
    this.harmonicCount = h;
    this.rampStep = 1 / Math.max(1, Math.round(RAMP_S * fs));
    this.meterAlpha = 1 - Math.exp(-1 / (METER_TIME_S * fs));
    this.outputConstraint = new OutputConstraint(config, fs);
    this.reset();
  }

  setOutputCap(cap: number): void {
    this.outputConstraint.setCap(cap);
  }

  /** The frequency source in use (a pending change shows after the next block). */
  /** Change μ at the next block (0 < μ < 2); the per-harmonic normalisation is recomputed. */
  setStepSize(mu: number): void {
    if (!(mu > 0 && mu < 2)) return;
    this.stepSize = mu;
    this.omegaEval = NaN;
  }

  /** Replace the secondary-path model in place (same length or shorter); responses are recomputed. */
  setSecondaryPathModel(taps: ArrayLike<number>): void {
    const n = Math.min(taps.length, this.model.length);
    for (let i = 0; i < n; i++) this.model[i] = taps[i]!;
    for (let i = n; i < this.model.length; i++) this.model[i] = 0;
    this.firstTap = firstNonZero(this.model);
    this.omegaEval = NaN;
  }

  /** Change γ at the next block (γ ≥ 0, μγ < 1). */
  setLeakage(gamma: number): void {
    if (gamma >= 0 && this.stepSize * gamma < 1) this.leakage = gamma;
  }

  get frequencySource(): FrequencySource {
    return this.source;
  }

  /** Harmonics controlled (a pending change shows after the next block). */
  get harmonics(): number {
    return this.harmonicCount;
  }

  /** Fundamental f₀ in use (Hz); 0 until a first frequency is known. */
  get frequencyHz(): number {
    return this.hasFrequency ? this.f0 : 0;
  }

  /** Whether a fundamental is known (adaptation and output wait for it). */
  get frequencyKnown(): boolean {
    return this.hasFrequency;
  }

  /** The tracker's lock state (meaningful in 'reference' and 'error' modes). */
  get trackerLocked(): boolean {
    return this.tracker.locked;
  }

  /** The tracker's confidence 0 … 1 (meaningful in 'reference' and 'error' modes). */
  get trackerConfidence(): number {
    return this.tracker.confidence;
  }

  /** Clear weights, phase, meters and the tracker; the frequency returns to its configured start. */
  reset(): void {
    this.wA.fill(0);
    this.wB.fill(0);
    this.eMeter.fill(0);
    this.yMeter.fill(0);
    this.gain.fill(0);
    this.target.fill(0);
    this.phase = 0;
    this.tracker.reset();
    this.applyPending();
    this.hasFrequency = false;
    this.omegaEval = NaN;
    this.f0 = 0;
    this.omega = 0;
    this.chooseFrequency();
    for (let k = 0; k < MAX_HARMONICS; k++) this.gain[k] = this.target[k]!;
    this.outputConstraint.reset();
  }

  /**
   * Change the frequency source at the next block boundary. Throws on an invalid request (this is a
   * configuration call, not the audio path). The synthesized phase continues, so the output does not
   * step; in a tracking mode f₀ holds its value until the tracker locks.
   */
  setFrequencySource(source: FrequencySource, hz?: number): void {
    if (!SOURCES.includes(source)) fail('frequencySource', `one of ${SOURCES.join(', ')}`, source);
    let v = NaN;
    if (source === 'fixed' || hz !== undefined) {
      v = checkFinite('hz', hz, this.minHz, this.maxHz, `a number in [minHz, maxHz] = [${this.minHz}, ${this.maxHz}] Hz`);
    }
    this.pendingSource = source;
    this.pendingFixedHz = v;
  }

  /** Change the number of harmonics at the next block boundary (1 … 8); removed harmonics fade out over 20 ms. */
  setHarmonics(harmonics: number): void {
    if (!Number.isInteger(harmonics) || harmonics < 1 || harmonics > MAX_HARMONICS) {
      fail('harmonics', `an integer in [1, ${MAX_HARMONICS}]`, harmonics);
    }
    this.pendingHarmonics = harmonics;
  }

  /**
   * Fundamental for the 'external' source (Hz), applied at the next block. Real-time safe: never
   * throws, never allocates; non-finite or non-positive values are ignored, others clamped to
   * [minHz, maxHz]. (A caller that computes `hz` may itself box the number when the call is not
   * inlined; pass a value read from a typed array to avoid that on the audio thread.)
   */
  setFrequencyHz(hz: number): void {
    if (Number.isFinite(hz) && hz > 0) this.pendingExternalHz = hz;
  }

  process(ref: Float32Array, err: Float32Array, out: Float32Array, n: number): void {
    let len = n < this.maxBlockSize ? n : this.maxBlockSize;
    if (ref.length < len) len = ref.length;
    if (err.length < len) len = err.length;
    if (out.length < len) len = out.length;
    if (!(len > 0)) return;

    this.applyPending();
    this.chooseFrequency();

    // harmonics to visit: the configured ones and any still fading out
    let H = this.harmonicCount;
    for (let k = H; k < MAX_HARMONICS; k++) if (this.gain[k]! > 0) H = k + 1;
    const wA = this.wA;
    const wB = this.wB;
    const sRe = this.sRe;
    const sIm = this.sIm;
    const muK = this.muK;
    const gain = this.gain;
    const target = this.target;
    const em = this.eMeter;
    const ym = this.yMeter;
    const ma = this.meterAlpha;
    const ramp = this.rampStep;
    const learn = this.adapt && this.hasFrequency;
    const leak = 1 - this.stepSize * this.leakage;
    const penalty = this.outputConstraint.state[PENALTY]!;
    const effort = this.effortScale;
    const omega = this.omega;
    const twoPi = 2 * Math.PI;
    const reconstruct = this.source === 'error';
    const dHat = this.trackerInput;
    let phase = this.phase;

    for (let i = 0; i < len; i++) {
      const e = err[i]!;
      const c1 = Math.cos(phase);
      const s1 = Math.sin(phase);
      let ck = c1;
      let sk = s1;
      let y = 0;
      let yHat = 0;
      for (let k = 0; k < H; k++) {
        let g = gain[k]!;
        const t = target[k]!;
        if (g !== t) {
          g = g < t ? Math.min(t, g + ramp) : Math.max(t, g - ramp);
          gain[k] = g;
          if (g === 0) {
            wA[k] = 0;
            wB[k] = 0;
          }
        }
        if (g > 0) {
          const a = wA[k]!;
          const b = wB[k]!;
          const sr = sRe[k]!;
          const si = sIm[k]!;
          y += g * (a * ck + b * sk);
          // filtered reference r̂ = [Re(Ŝ e^{jkφ}), Im(Ŝ e^{jkφ})]
          const rc = sr * ck - si * sk;
          const rs = sr * sk + si * ck;
          yHat += g * (a * rc + b * rs);
          if (learn && t === 1) {
            const m = muK[k]! * e;
            const pk = penalty * effort[k]!;
            const lk = leak - (pk < 0.5 ? pk : 0.5);
            wA[k] = lk * a - m * rc;
            wB[k] = lk * b - m * rs;
          }
          // meters: Ŷ = g Ŝ W (a phasor already) and Ê = demodulated error, each through two one-poles
          const o = 4 * k;
          const yr = g * (sr * a + si * b);
          const yi = g * (si * a - sr * b);
          ym[o] = ym[o]! + ma * (yr - ym[o]!);
          ym[o + 1] = ym[o + 1]! + ma * (yi - ym[o + 1]!);
          ym[o + 2] = ym[o + 2]! + ma * (ym[o]! - ym[o + 2]!);
          ym[o + 3] = ym[o + 3]! + ma * (ym[o + 1]! - ym[o + 3]!);
        }
        const o = 4 * k;
        em[o] = em[o]! + ma * (2 * e * ck - em[o]!);
        em[o + 1] = em[o + 1]! + ma * (-2 * e * sk - em[o + 1]!);
        em[o + 2] = em[o + 2]! + ma * (em[o]! - em[o + 2]!);
        em[o + 3] = em[o + 3]! + ma * (em[o + 1]! - em[o + 3]!);
        const cn = ck * c1 - sk * s1;
        sk = sk * c1 + ck * s1;
        ck = cn;
      }
      out[i] = y;
      if (reconstruct) dHat[i] = e - yHat;
      phase += omega;
      if (phase >= twoPi) phase -= twoPi;
    }
    this.phase = phase;
    this.outputConstraint.afterBlock(out, len);
    if (this.outputConstraint.method === 'rescale') this.budget(H);

    if (this.source === 'reference') this.tracker.process(ref, len);
    else if (reconstruct) this.tracker.process(dHat, len);
  }

  weightNormSquared(): number {
    let s = 0;
    for (let k = 0; k < MAX_HARMONICS; k++) s += this.wA[k]! * this.wA[k]! + this.wB[k]! * this.wB[k]!;
    return s;
  }

  /** Writes [a_1, b_1, a_2, b_2, …] for the configured harmonics (as many as fit); returns the count written. */
  copyWeights(out: Float32Array): number {
    const count = Math.min(out.length, 2 * this.harmonicCount);
    for (let i = 0; i < count; i++) out[i] = (i & 1) === 0 ? this.wA[i >> 1]! : this.wB[i >> 1]!;
    return count;
  }

  /**
   * Fill `out` with the meters of harmonic k (1-based, 1 … harmonics). Returns false (and leaves
   * `out` untouched) when k is outside that range. No allocation. Amplitudes are peak amplitudes of the
   * sinusoid at k·f₀, smoothed over about 0.1 s.
   */
  readHarmonic(k: number, out: HarmonicReadout): boolean {
    if (!Number.isInteger(k) || k < 1 || k > this.harmonicCount) return false;
    const i = k - 1;
    const o = 4 * i;
    const er = this.eMeter[o + 2]!;
    const ei = this.eMeter[o + 3]!;
    const yr = this.yMeter[o + 2]!;
    const yi = this.yMeter[o + 3]!;
    const dr = er - yr;
    const di = ei - yi;
    const dAmp = Math.hypot(dr, di);
    const eAmp = Math.hypot(er, ei);
    out.frequencyHz = k * this.frequencyHz;
    out.counterAmplitude = this.gain[i]! * Math.hypot(this.wA[i]!, this.wB[i]!);
    out.disturbanceAmplitude = dAmp;
    out.residualAmplitude = eAmp;
    // arg(Ŷ · conj(D̂))
    out.counterPhaseDeg = (Math.atan2(yi * dr - yr * di, yr * dr + yi * di) * 180) / Math.PI;
    out.attenuationDb = 20 * Math.log10((dAmp + 1e-30) / (eAmp + 1e-30));
    return true;
  }

  /**
   * The rescale budget (see the module comment): when Σ g_k|W_k| exceeds the constraint level A,
   * scale each W_k down to a_k = clamp(u_k − ν/|Ŝ_k|², 0, u_k), ν ≥ 0 found by bisection so that
   * Σ a_k = min(A, Σ u_k). No allocation.
   */
  private budget(H: number): void {
    const A = this.outputConstraint.level;
    if (!(A < Infinity)) return;
    const wA = this.wA;
    const wB = this.wB;
    const gain = this.gain;
    let sum = 0;
    for (let k = 0; k < H; k++) sum += gain[k]! * Math.hypot(wA[k]!, wB[k]!);
    if (!(sum > A)) return;
    const need = this.need;
    const s2 = this.pathGainSq;
    let needSum = 0;
    let nuHi = 0;
    for (let k = 0; k < H; k++) {
      const o = 4 * k;
      const p = this.sRe[k]! * this.sRe[k]! + this.sIm[k]! * this.sIm[k]!;
      const dAmp = Math.hypot(this.eMeter[o + 2]! - this.yMeter[o + 2]!, this.eMeter[o + 3]! - this.yMeter[o + 3]!);
      const u = gain[k]! > 0 && p > 0 ? dAmp / Math.sqrt(p) : 0;
      need[k] = u;
      s2[k] = p;
      needSum += u;
      if (u * p > nuHi) nuHi = u * p;
    }
    let nu = 0;
    if (needSum > A) {
      // Σ max(0, u_k − ν/s2_k) falls from needSum (ν = 0) to 0 (ν = max u_k·s2_k)
      let lo = 0;
      let hi = nuHi;
      for (let it = 0; it < 50; it++) {
        const mid = 0.5 * (lo + hi);
        let f = 0;
        for (let k = 0; k < H; k++) {
          const a = need[k]! - (s2[k]! > 0 ? mid / s2[k]! : need[k]!);
          if (a > 0) f += a;
        }
        if (f > A) lo = mid;
        else hi = mid;
      }
      nu = hi;
    }
    for (let k = 0; k < H; k++) {
      let a = need[k]! - (nu > 0 ? (s2[k]! > 0 ? nu / s2[k]! : need[k]!) : 0);
      if (a < 0) a = 0;
      const c = gain[k]! * Math.hypot(wA[k]!, wB[k]!);
      if (c > a) {
        const r = c > 0 ? a / c : 0;
        wA[k] = wA[k]! * r;
        wB[k] = wB[k]! * r;
      }
    }
  }

  private applyPending(): void {
    const src = this.pendingSource;
    if (src !== null) {
      const wasTracking = this.source === 'reference' || this.source === 'error';
      const tracking = src === 'reference' || src === 'error';
      if (tracking && !wasTracking) this.tracker.reset();
      this.source = src;
      if (src === 'fixed') this.fixedHz = this.pendingFixedHz;
      if (src === 'external' && Number.isFinite(this.pendingFixedHz)) this.externalHz = this.pendingFixedHz;
      this.pendingSource = null;
    }
    if (this.pendingHarmonics > 0) {
      this.harmonicCount = this.pendingHarmonics;
      this.pendingHarmonics = 0;
    }
    if (Number.isFinite(this.pendingExternalHz)) {
      const v = this.pendingExternalHz;
      this.externalHz = v < this.minHz ? this.minHz : v > this.maxHz ? this.maxHz : v;
      this.pendingExternalHz = NaN;
    }
  }

  /** Pick f₀ for the coming block and refresh everything that depends on it. */
  private chooseFrequency(): void {
    let f = NaN;
    switch (this.source) {
      case 'fixed':
        f = this.fixedHz;
        break;
      case 'external':
        f = this.externalHz;
        break;
      default:
        this.tracker.copyEstimate(this.estimate, 0);
        if (this.estimate[3] === 1) f = this.estimate[0]!;
    }
    if (Number.isFinite(f)) {
      this.f0 = f;
      this.hasFrequency = true;
    }
    if (!this.hasFrequency) return;
    const fs = this.sampleRate;
    this.omega = (2 * Math.PI * this.f0) / fs;
    for (let k = 0; k < MAX_HARMONICS; k++) {
      this.target[k] = k < this.harmonicCount && (k + 1) * this.f0 < NYQUIST_GUARD * fs ? 1 : 0;
    }
    this.updateEffortScale();
    const drift = Math.abs(this.omega - this.omegaEval) * MAX_HARMONICS * this.model.length;
    if (!(drift <= PHASE_TOLERANCE)) {
      this.omegaEval = this.omega;
      for (let k = 0; k < MAX_HARMONICS; k++) this.omegaK[k] = (k + 1) * this.omega;
      pathResponsesAt(this.model, this.omegaK, MAX_HARMONICS, this.response, this.firstTap);
      for (let k = 0; k < MAX_HARMONICS; k++) {
        const sr = this.response[2 * k]!;
        const si = this.response[2 * k + 1]!;
        this.sRe[k] = sr;
        this.sIm[k] = si;
        this.muK[k] = this.stepSize / (this.regularization + sr * sr + si * si);
      }
      this.updateEffortScale();
    }
  }

  /** S̄²/(δ + |Ŝ_k|²) per harmonic, S̄² the mean |Ŝ_k|² over the harmonics in use. */
  private updateEffortScale(): void {
    let mean = 0;
    let count = 0;
    for (let k = 0; k < MAX_HARMONICS; k++) {
      if (this.target[k] === 1) {
        mean += this.sRe[k]! * this.sRe[k]! + this.sIm[k]! * this.sIm[k]!;
        count++;
      }
    }
    mean = count > 0 ? mean / count : 0;
    for (let k = 0; k < MAX_HARMONICS; k++) {
      this.effortScale[k] = mean / (this.regularization + this.sRe[k]! * this.sRe[k]! + this.sIm[k]! * this.sIm[k]!);
    }
  }
}

function firstNonZero(x: Float64Array): number {
  let i = 0;
  while (i < x.length - 1 && x[i] === 0) i++;
  return i;
}
