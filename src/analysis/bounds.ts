/**
 * Limits of feedforward control that can be read from measurements before any controller runs.
 *
 * Coherence bound (Nelson & Elliott, Active Control of Sound, 1992; Elliott, Signal Processing for
 * Active Control, 2001): a causal-or-not linear filter from the reference x can remove from the error
 * signal d only the part coherent with x. At each frequency the smallest achievable residual is
 * S_dd·(1 − γ²), so the largest attenuation is −10·log10(1 − γ²) dB; over a band it is
 * 10·log10(Σ S_dd / Σ S_dd·(1 − γ²)). γ² is capped at MAX_COHERENCE = 1 − 1e-6 (bound ≤ 60 dB) so that a
 * perfectly coherent bin gives a large finite number, not Infinity. The bound ignores causality: for
 * broadband noise it is reachable only when the causality verdict below is 'broadband'.
 *
 * Causality (Kuo & Morgan, "Active noise control: a tutorial review", Proc. IEEE 87(6), 1999, from
 * memory): broadband feedforward control needs the noise to take at least as long from the reference
 * microphone to the error microphone (primary delay) as the anti-noise takes to get there
 * (secondary-path bulk delay, which includes converter and audio I/O latency). With a deficit only the
 * predictable part (tones, periodic noise, strongly coloured noise) can be cancelled.
 */
import {
  requireFrequencyAxis,
  requireNonNegative,
  requireOutputLength,
  requirePositive,
  requireSameLength,
} from './validate.ts';

/** Largest coherence used in bounds; the bound tops out at −10·log10(1e-6) = 60 dB. */
export const MAX_COHERENCE = 1 - 1e-6;

/** Maximum attenuation (dB) allowed by coherence γ² in [0, 1]: −10·log10(1 − min(γ², MAX_COHERENCE)). */
export function coherenceBoundDb(coherence: number): number {
  requireCoherence('coherence', coherence);
  return 10 * Math.log10(1 / (1 - Math.min(Math.max(coherence, 0), MAX_COHERENCE)));
}

/** The coherence bound per bin (dB). */
export function coherenceBoundSpectrum(coherence: ArrayLike<number>, output?: Float64Array): Float64Array {
  const out = output ?? new Float64Array(coherence.length);
  requireOutputLength('output', out, coherence.length);
  for (let k = 0; k < coherence.length; k++) out[k] = coherenceBoundDb(coherence[k]!);
  return out;
}

export interface OverallBoundOptions {
  /** Bin frequencies (Hz, from 0 with uniform spacing); needed only with lowHz/highHz. */
  frequencies?: ArrayLike<number>;
  /** Only bins with lowHz ≤ f ≤ highHz count. Default: all bins. */
  lowHz?: number;
  highHz?: number;
}

/**
 * Overall maximum attenuation (dB) of the error signal: total error power over the total power left
 * when each bin is reduced by (1 − γ²), i.e. 10·log10(Σ S_ee / Σ S_ee·(1 − γ²)), with the error PSD S_ee
 * measured without control. Returns 0 when the selected bins hold no power.
 */
export function overallCoherenceBoundDb(
  coherence: ArrayLike<number>,
  errorPsd: ArrayLike<number>,
  options: OverallBoundOptions = {},
): number {
  requireSameLength('coherence', coherence, 'errorPsd', errorPsd);
  let from = 0;
  let to = coherence.length - 1;
  if (options.lowHz !== undefined || options.highHz !== undefined) {
    if (!options.frequencies) throw new RangeError('frequencies must be given with lowHz or highHz');
    requireSameLength('frequencies', options.frequencies, 'coherence', coherence);
    const df = requireFrequencyAxis('frequencies', options.frequencies);
    const low = options.lowHz ?? 0;
    const high = options.highHz ?? Infinity;
    requireNonNegative('lowHz', low);
    if (options.highHz !== undefined) requirePositive('highHz', high);
    if (!(high > low)) throw new RangeError(`highHz must be > lowHz (${low} Hz), got ${high}`);
    from = Math.max(0, Math.ceil(low / df - 1e-9));
    to = Math.min(to, Math.floor(high / df + 1e-9));
  }
  let total = 0;
  let residual = 0;
  for (let k = from; k <= to; k++) {
    const g = coherence[k]!;
    requireCoherence(`coherence[${k}]`, g);
    const p = errorPsd[k]!;
    if (!(p >= 0)) throw new RangeError(`errorPsd[${k}] must be a finite number ≥ 0, got ${p}`);
    total += p;
    residual += p * (1 - Math.min(Math.max(g, 0), MAX_COHERENCE));
  }
  return total > 0 ? 10 * Math.log10(total / residual) : 0;
}

/** Fixed strings: users' scripts match on them. */
export type CausalityVerdictKind = 'broadband' | 'predictable-only' | 'unknown';

export interface CausalityVerdict {
  /** Acoustic delay from the reference mic to the error mic along the noise path, ms. */
  primaryDelayMs: number;
  /** Secondary-path delay (loudspeaker drive to error mic, audio I/O included), ms; null when not identified yet. */
  secondaryDelayMs: number | null;
  /** Primary delay minus secondary-path delay (ms); null when the secondary delay is unknown. */
  marginMs: number | null;
  verdict: CausalityVerdictKind;
  /** The verdict in plain words, for reports and the panel. */
  sentence: string;
}

/**
 * Can broadband noise be cancelled? primaryDelayMs: acoustic delay from the reference microphone to the
 * error microphone (ms; negative if the error microphone hears the noise first). secondaryDelayMs: bulk
 * delay of the secondary path, loudspeaker drive to error microphone including I/O latency (ms, ≥ 0), or
 * null when not identified yet. A margin of exactly 0 counts as 'broadband'.
 */
export function causalityVerdict(primaryDelayMs: number, secondaryDelayMs: number | null): CausalityVerdict {
  if (typeof primaryDelayMs !== 'number' || !Number.isFinite(primaryDelayMs)) {
    throw new RangeError(`primaryDelayMs must be a finite number, got ${String(primaryDelayMs)}`);
  }
  if (secondaryDelayMs === null) {
    return {
      primaryDelayMs,
      secondaryDelayMs,
      marginMs: null,
      verdict: 'unknown',
      sentence:
        'The delay of the loudspeaker path is not known yet (identify the secondary path first), ' +
        'so it is not known whether broadband noise can be cancelled.',
    };
  }
  if (typeof secondaryDelayMs !== 'number' || !Number.isFinite(secondaryDelayMs) || secondaryDelayMs < 0) {
    throw new RangeError(`secondaryDelayMs must be a finite number ≥ 0 or null, got ${String(secondaryDelayMs)}`);
  }
  const marginMs = primaryDelayMs - secondaryDelayMs;
  const ms = (v: number): string => `${v.toFixed(2)} ms`;
  if (marginMs >= 0) {
    return {
      primaryDelayMs,
      secondaryDelayMs,
      marginMs,
      verdict: 'broadband',
      sentence:
        `The noise needs ${ms(primaryDelayMs)} from the reference to the error microphone and the loudspeaker ` +
        `path needs ${ms(secondaryDelayMs)}, leaving ${ms(marginMs)} to spare: broadband noise can be cancelled.`,
    };
  }
  return {
    primaryDelayMs,
    secondaryDelayMs,
    marginMs,
    verdict: 'predictable-only',
    sentence:
      `The loudspeaker path needs ${ms(secondaryDelayMs)} but the noise gets from the reference to the error ` +
      `microphone in ${ms(primaryDelayMs)}, so the controller is ${ms(-marginMs)} too late: only predictable ` +
      'noise (tones, hum, periodic sounds) can be cancelled, not random broadband noise. Move the reference ' +
      'mic closer to the source or use lower-latency audio for broadband noise.',
  };
}

function requireCoherence(field: string, value: number): void {
  // Estimates may exceed 1 or dip below 0 by rounding; anything further out is a caller's mistake.
  if (typeof value !== 'number' || !(value >= -1e-9 && value <= 1 + 1e-9)) {
    throw new RangeError(`${field} must be a coherence in [0, 1], got ${String(value)}`);
  }
}
