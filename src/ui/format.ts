/** Number formatting for the panel: fixed decimals, a real minus sign, a dash for "no value". */
export const NO_VALUE = '—';

export function fmtDb(v: number, decimals = 1): string {
  if (!Number.isFinite(v)) return v === -Infinity ? '−∞' : NO_VALUE;
  return v.toFixed(decimals).replace('-', '−');
}

export function fmtHz(v: number): string {
  if (!Number.isFinite(v)) return NO_VALUE;
  return v >= 1000 ? `${(v / 1000).toFixed(2)} kHz` : `${v.toFixed(v < 100 ? 1 : 0)} Hz`;
}

export function fmtMs(v: number, decimals = 1): string {
  return Number.isFinite(v) ? `${v.toFixed(decimals).replace('-', '−')} ms` : NO_VALUE;
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
