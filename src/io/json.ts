/**
 * JSON text for the files and objects ancbench writes. Plain JavaScript only (no Node APIs), so the
 * command line and the browser panel write reports the same way.
 */

/**
 * JSON text in which no number is NaN or ±Infinity: such values become null (callers add a note
 * with the reason beside the field). Typed arrays become plain arrays.
 */
export function safeJson(value: unknown, indent = 2): string {
  return JSON.stringify(
    value,
    (_k, v: unknown) => {
      if (typeof v === 'number' && !Number.isFinite(v)) return null;
      if (ArrayBuffer.isView(v) && !(v instanceof DataView)) return Array.from(v as unknown as ArrayLike<number>);
      return v;
    },
    indent,
  );
}
