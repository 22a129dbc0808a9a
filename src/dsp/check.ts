/**
 * The one message format for a value out of range, used by every layer that validates (scenario
 * files, worklet messages, engine and block constructors, CLI flags): the field, what is allowed and
 * the value received, e.g. `controller.taps: must be an integer ≥ 1 and ≤ 65536, got 0`.
 *
 * `showValue` formats what was received to a fixed depth and length (a deeply nested object in a file
 * cannot overflow the stack).
 */

/** Longest value shown in a message. */
const SHOW_CHARS = 60;

/**
 * A value for a message, at most SHOW_CHARS characters: JSON-like, but walked to a fixed depth and length
 * only (JSON.stringify recurses through the whole value, so a deeply nested one would overflow the stack).
 */
export function showValue(v: unknown): string {
  if (v === undefined) return 'nothing';
  let out = '';
  const room = SHOW_CHARS + 3;
  const put = (t: string): boolean => {
    out += t;
    return out.length < room;
  };
  const walk = (x: unknown, depth: number): boolean => {
    if (x === null || typeof x !== 'object') {
      if (typeof x === 'string') return put(JSON.stringify(x.length > SHOW_CHARS ? x.slice(0, SHOW_CHARS) : x));
      if (typeof x === 'number') return put(Number.isFinite(x) ? JSON.stringify(x) : String(x));
      return put(String(x));
    }
    const isArray = Array.isArray(x);
    if (depth >= 4) return put(isArray ? '[…]' : '{…}');
    if (!put(isArray ? '[' : '{')) return false;
    const keys = isArray ? null : Object.keys(x);
    const count = isArray ? (x as unknown[]).length : keys!.length;
    for (let i = 0; i < count; i++) {
      if (i > 0 && !put(',')) return false;
      if (keys && !put(`${JSON.stringify(keys[i]!.slice(0, SHOW_CHARS))}:`)) return false;
      if (!walk(isArray ? (x as unknown[])[i] : (x as Record<string, unknown>)[keys ? keys[i]! : i], depth + 1)) return false;
    }
    return put(isArray ? ']' : '}');
  };
  walk(v, 0);
  return out.length > SHOW_CHARS ? out.slice(0, SHOW_CHARS - 3) + '...' : out;
}

/** A field path as messages name it: `controller.taps`, `sources[2].hz`; `top` for the empty path. */
export function fieldPath(path: readonly PropertyKey[], top: string): string {
  let s = '';
  for (const p of path) s += typeof p === 'number' ? `[${p}]` : (s ? '.' : '') + String(p);
  return s || top;
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
