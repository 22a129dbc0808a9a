/**
 * The one message format for a value out of range, used by every layer that validates (scenario
 * files, worklet messages, engine and block constructors, CLI flags): the field, what is allowed and
 * the value received, e.g. `controller.taps: must be an integer ≥ 1 and ≤ 65536, got 0`.
 *
 * `showValue` formats what was received without recursion (a deeply nested object in a file cannot
 * overflow the stack) and shortens long values.
 */

/** A short, flat description of any value: numbers and strings as themselves, objects by kind. */
export function showValue(v: unknown): string {
  if (v === undefined) return 'nothing';
  if (v === null) return 'null';
  if (typeof v === 'number') return Number.isNaN(v) ? 'NaN' : String(v);
  if (typeof v === 'string') return JSON.stringify(v.length > 60 ? v.slice(0, 57) + '...' : v);
  if (typeof v === 'boolean' || typeof v === 'bigint') return String(v);
  if (Array.isArray(v)) return `an array of ${v.length}`;
  if (ArrayBuffer.isView(v)) return `a ${v.constructor.name} of ${(v as unknown as ArrayLike<number>).length}`;
  if (typeof v === 'object') return `an object {${Object.keys(v as object).slice(0, 4).join(', ')}${Object.keys(v as object).length > 4 ? ', …' : ''}}`;
  return typeof v;
}

/** `field: must be <allowed>, got <value>`. */
export function rangeMessage(field: string, allowed: string, got: unknown): string {
  return `${field}: must be ${allowed}, got ${showValue(got)}`;
}

/** A finite number in [min, max]; throws a RangeError in the common format otherwise. */
export function checkNumber(field: string, v: unknown, min: number, max: number, unit = ''): number {
  if (typeof v !== 'number' || !Number.isFinite(v) || v < min || v > max) {
    throw new RangeError(rangeMessage(field, `a number from ${min} to ${max}${unit ? ` ${unit}` : ''}`, v));
  }
  return v;
}

/** An integer in [min, max]; throws a RangeError in the common format otherwise. */
export function checkInteger(field: string, v: unknown, min: number, max: number): number {
  if (typeof v !== 'number' || !Number.isInteger(v) || v < min || v > max) {
    throw new RangeError(rangeMessage(field, `an integer from ${min} to ${max}`, v));
  }
  return v;
}
