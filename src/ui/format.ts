/**
 * Number formatting for the panel. Rules every figure on the panel follows:
 *  - a true minus sign (U+2212), never a hyphen, and never "−0.0": a value that rounds to zero has no sign;
 *  - a placeholder (NO_VALUE) for a value that is not known yet (NaN, a tone not found, a frequency of 0);
 *  - levels have a floor: anything below LEVEL_FLOOR_DBFS (silence included, which is −∞ in the core)
 *    reads "below −120", so no meter shows −1064 dBFS or −∞.
 */
export const NO_VALUE = '—';
export const MINUS = '−';
/** Lowest level the panel prints, dBFS (and dB for levels relative to full scale, dBTP). */
export const LEVEL_FLOOR_DBFS = -120;

/** A fixed-decimal number with a true minus sign; a value that rounds to zero is unsigned. NaN/±∞ → NO_VALUE. */
export function fmtNumber(v: number, decimals = 1): string {
  if (!Number.isFinite(v)) return NO_VALUE;
  let text = v.toFixed(decimals);
  // "-0.0", "-0.00", "-0": the rounded value is zero, so it has no sign
  if (/^-0(\.0+)?$/.test(text)) text = text.slice(1);
  return text.replace('-', MINUS);
}

/** A dB figure that is a difference or a gain (attenuation, gain reduction): any finite value, signed. */
export function fmtDb(v: number, decimals = 1): string {
  return fmtNumber(v, decimals);
}

/** A dB figure with an explicit sign ("+3.0", "−2.5", "0.0"). */
export function fmtSignedDb(v: number, decimals = 1): string {
  const t = fmtNumber(v, decimals);
  if (t === NO_VALUE || t.startsWith(MINUS) || Number(t) === 0) return t;
  return `+${t}`;
}

/**
 * A level in dBFS (or dBTP): below `floor` (silence included) it reads "below −120"; NaN (not measured
 * yet) reads NO_VALUE.
 */
export function fmtLevel(v: number, decimals = 1, floor = LEVEL_FLOOR_DBFS): string {
  if (Number.isNaN(v)) return NO_VALUE;
  if (v < floor) return `below ${fmtNumber(floor, 0)}`;
  return fmtNumber(v, decimals);
}

/** Whether a level reads as its floor ("below …") rather than a number. */
export function belowFloor(v: number, floor = LEVEL_FLOOR_DBFS): boolean {
  return !Number.isNaN(v) && v < floor;
}

/** A frequency: NO_VALUE when not known (NaN, 0 or negative: a tone follower still searching). */
export function fmtHz(v: number): string {
  if (!Number.isFinite(v) || v <= 0) return NO_VALUE;
  return v >= 1000 ? `${(v / 1000).toFixed(2)} kHz` : `${v.toFixed(v < 100 ? 1 : 0)} Hz`;
}

export function fmtMs(v: number, decimals = 1): string {
  const t = fmtNumber(v, decimals);
  return t === NO_VALUE ? t : `${t} ms`;
}

/** Seconds with a unit: "12.30 s". */
export function fmtSeconds(v: number, decimals = 2): string {
  const t = fmtNumber(v, decimals);
  return t === NO_VALUE ? t : `${t} s`;
}

/** An angle in whole degrees ("12°"), NO_VALUE when not known. */
export function fmtDeg(v: number): string {
  const t = fmtNumber(v, 0);
  return t === NO_VALUE ? t : `${t}°`;
}

/**
 * The value of a number field inside `root` (by id), or the problem with it: a message naming the
 * field, its range and what was typed.
 */
export function readNumberField(root: ParentNode, id: string, field: string, lo: number, hi: number): { value: number } | { problem: string } {
  const el = root.querySelector<HTMLInputElement>(`#${id}`);
  const raw = el?.value ?? '';
  const v = Number(raw);
  if (raw.trim() === '' || !Number.isFinite(v) || v < lo || v > hi) return { problem: `${field} must be a number from ${lo} to ${hi}, got "${raw}"` };
  return { value: v };
}

/** A figure for a `data-value` attribute (tests and assistive technology): 3 decimals, '' when there is none. */
export function dataValue(v: number | null | undefined): string {
  return v === null || v === undefined || !Number.isFinite(v) ? '' : v.toFixed(3);
}
