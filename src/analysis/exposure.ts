/**
 * Test-only so far: no command or panel shows exposure figures yet (the panel defers to local
 * regulations and occupational-health practice); kept with its checks against NIOSH and OSHA for
 * when a calibrated exposure read-out is added.
 *
 * Noise exposure: permissible durations and daily dose, to put SPL readings in context.
 *
 * NIOSH (Criteria for a Recommended Standard: Occupational Noise Exposure, revised 1998): criterion
 * level 85 dBA over 8 h with a 3 dB exchange rate,
 *   T = 8 / 2^((L − 85)/3) hours,
 * and the daily dose D = 100·Σ C_n/T_n percent, C_n the time spent at level L_n.
 * OSHA (29 CFR 1910.95, Table G-16 and Appendix A), for comparison: 90 dBA over 8 h with a 5 dB
 * exchange rate, T = 8 / 2^((L − 90)/5) hours, the same dose sum.
 * Equivalent time-weighted average of a dose: the exact inverse of T, TWA = L_c + (q/log10 2)·log10(D/100)
 * with criterion L_c and exchange rate q; the documents print the coefficient rounded (from memory):
 * NIOSH 10.0 (exact 9.966), OSHA 16.61.
 * Levels are A-weighted slow-response levels in dBA, as both documents define them; no threshold
 * below which levels are left out of the dose is applied here: callers pass only the segments they
 * want counted.
 */

export type ExposureCriterion = 'niosh' | 'osha';

export interface ExposureSegment {
  /** A-weighted level during the segment, dBA, 0 … 200. */
  levelDba: number;
  /** Duration, hours, ≥ 0. */
  hours: number;
}

const CRITERIA = {
  niosh: { criterionDba: 85, exchangeDb: 3 },
  osha: { criterionDba: 90, exchangeDb: 5 },
} as const;

function checkLevel(field: string, level: unknown): number {
  if (typeof level !== 'number' || !(level >= 0 && level <= 200)) {
    throw new RangeError(`${field} must be a number from 0 to 200 dBA, got ${String(level)}`);
  }
  return level;
}

function checkCriterion(criterion: unknown): ExposureCriterion {
  if (criterion !== 'niosh' && criterion !== 'osha') throw new RangeError(`criterion must be 'niosh' or 'osha', got ${String(criterion)}`);
  return criterion;
}

/** Permissible exposure time at a constant level, hours. */
export function permissibleHours(levelDba: number, criterion: ExposureCriterion = 'niosh'): number {
  const c = CRITERIA[checkCriterion(criterion)];
  const L = checkLevel('levelDba', levelDba);
  return 8 / Math.pow(2, (L - c.criterionDba) / c.exchangeDb);
}

/** NIOSH permissible time, hours: 8 / 2^((L − 85)/3). */
export function nioshPermissibleHours(levelDba: number): number {
  return permissibleHours(levelDba, 'niosh');
}

/** OSHA permissible time, hours: 8 / 2^((L − 90)/5). */
export function oshaPermissibleHours(levelDba: number): number {
  return permissibleHours(levelDba, 'osha');
}

/** Daily noise dose in percent: 100·Σ C_n/T_n (100 % = the criterion exposure). */
export function noiseDosePercent(segments: readonly ExposureSegment[], criterion: ExposureCriterion = 'niosh'): number {
  checkCriterion(criterion);
  if (!Array.isArray(segments)) throw new RangeError(`segments must be an array of {levelDba, hours}, got ${String(segments)}`);
  let sum = 0;
  segments.forEach((s, i) => {
    if (typeof s !== 'object' || s === null) throw new RangeError(`segments[${i}] must be an object {levelDba, hours}, got ${String(s)}`);
    const L = checkLevel(`segments[${i}].levelDba`, s.levelDba);
    if (typeof s.hours !== 'number' || !(s.hours >= 0 && s.hours <= 24 * 366)) {
      throw new RangeError(`segments[${i}].hours must be a number from 0 to 8784 hours, got ${String(s.hours)}`);
    }
    sum += s.hours / permissibleHours(L, criterion);
  });
  return 100 * sum;
}

/** The constant level that gives the same dose over 8 h (time-weighted average), dBA. */
export function doseToTwaDba(dosePercent: number, criterion: ExposureCriterion = 'niosh'): number {
  const c = CRITERIA[checkCriterion(criterion)];
  if (typeof dosePercent !== 'number' || !(dosePercent > 0) || !Number.isFinite(dosePercent)) {
    throw new RangeError(`dosePercent must be a finite number above 0 %, got ${String(dosePercent)}`);
  }
  return c.criterionDba + (c.exchangeDb / Math.log10(2)) * Math.log10(dosePercent / 100);
}
