/**
 * Argument checks shared by the analysis functions. Each throws a RangeError that names the field,
 * the allowed range and the value received, so a caller (CLI flag, UI form, scenario file) can show it as is.
 */

/** A finite number > 0 (sample rates, frequencies, durations). */
export function requirePositive(field: string, value: number): void {
  if (typeof value !== 'number' || !Number.isFinite(value) || value <= 0) {
    throw new RangeError(`${field} must be a finite number > 0, got ${String(value)}`);
  }
}

/** A finite number ≥ 0. */
export function requireNonNegative(field: string, value: number): void {
  if (typeof value !== 'number' || !Number.isFinite(value) || value < 0) {
    throw new RangeError(`${field} must be a finite number ≥ 0, got ${String(value)}`);
  }
}

/** An integer in [min, max]. */
export function requireIntegerInRange(field: string, value: number, min: number, max: number): void {
  if (typeof value !== 'number' || !Number.isInteger(value) || value < min || value > max) {
    throw new RangeError(`${field} must be an integer in [${min}, ${max}], got ${String(value)}`);
  }
}

/** A power of two in [min, max]. */
export function requirePowerOfTwo(field: string, value: number, min: number, max: number): void {
  if (
    typeof value !== 'number' ||
    !Number.isInteger(value) ||
    value < min ||
    value > max ||
    (value & (value - 1)) !== 0
  ) {
    throw new RangeError(`${field} must be a power of two in [${min}, ${max}], got ${String(value)}`);
  }
}

/** Two arrays that must be of equal length (a spectrum and its frequency axis, two recordings). */
export function requireSameLength(fieldA: string, a: { readonly length: number }, fieldB: string, b: { readonly length: number }): void {
  if (a.length !== b.length) {
    throw new RangeError(`${fieldA} and ${fieldB} must have the same length, got ${a.length} and ${b.length}`);
  }
}

/** An optional output array must have exactly the length the function will fill. */
export function requireOutputLength(field: string, output: ArrayLike<number>, length: number): void {
  if (output.length !== length) {
    throw new RangeError(`${field} must have length ${length}, got ${output.length}`);
  }
}

/**
 * A one-sided frequency axis as produced by the Welch functions: starts at 0 Hz with uniform spacing.
 * Returns the spacing (Hz). Only the first two points are read: the axis is trusted to be uniform.
 */
export function requireFrequencyAxis(field: string, frequencies: ArrayLike<number>): number {
  if (frequencies.length < 2 || frequencies[0] !== 0 || !(frequencies[1]! > 0)) {
    throw new RangeError(
      `${field} must start at 0 Hz with uniform spacing > 0 and at least 2 points, got length ${frequencies.length}` +
        (frequencies.length >= 2 ? ` starting ${frequencies[0]}, ${frequencies[1]} Hz` : ''),
    );
  }
  return frequencies[1]! - frequencies[0]!;
}
