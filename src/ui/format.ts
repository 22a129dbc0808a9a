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
