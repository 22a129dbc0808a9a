/**
 * Calibration arithmetic: how digital levels (dBFS) map to sound pressure levels (dB SPL re 20 µPa).
 *
 * Levels in dBFS follow AES17 as everywhere in ancbench (src/dsp/units.ts): a full-scale sine reads
 * 0 dBFS, so for a sine the RMS level in dBFS equals its sample-peak level in dBFS.
 *
 * Output (loudspeaker) calibration: at each frequency a sine is played at `dbfs` and its SPL is
 * measured (RMS, as a sound level meter shows) at the listening point: `measuredDbSpl`. The
 * sensitivity S(f) = measuredDbSpl − dbfs is the RMS SPL a full-scale sine would give there.
 * Between measured frequencies S is interpolated linearly in log-frequency; outside the measured
 * range nothing is known, and conversions return null with a reason: SPL is never invented.
 *
 * SPL ceilings are peak-based: the limiter bounds sample peaks, so a ceiling given in dB SPL is a
 * peak sound pressure level, L_peak = 20·log10(p_peak / 20 µPa). A sine's peak pressure level is
 * its RMS level + 20·log10(√2) = 3.01 dB, so the peak sensitivity is S(f) + 3.01 dB. The
 * strictest-ceiling rule: the output ceiling in dBFS is the SPL ceiling minus the highest peak
 * sensitivity measured across the calibrated frequencies, so no calibrated frequency can exceed it.
 *
 * Microphone calibration: a source of known SPL (a sound calibrator; 94 dB SPL ≈ 1 Pa at 1 kHz is
 * common practice) is recorded; the mic sensitivity is knownDbSpl − measured dBFS (the SPL that
 * reads 0 dBFS). It holds at the calibration frequency and, if the user states it, over a range
 * where the microphone is flat; elsewhere conversions return null with a reason.
 */
import { powerToDbfs } from '../dsp/units.ts';

/** 20·log10(√2): peak level minus RMS level of a sine, dB. */
export const SINE_CREST_DB = 10 * Math.log10(2);

export interface OutputCalibrationPoint {
  /** Frequency of the test sine, Hz (> 0). */
  hz: number;
  /** Level of the test sine, dBFS (AES17), −150 … 0. */
  dbfs: number;
  /** Measured RMS SPL at the listening point, dB SPL, −50 … 200. */
  measuredDbSpl: number;
}

export interface OutputCalibration {
  /** Points sorted by frequency, each with its sensitivity (RMS dB SPL of a full-scale sine). */
  readonly points: readonly (OutputCalibrationPoint & { sensitivityDbSpl: number })[];
  readonly minHz: number;
  readonly maxHz: number;
}

/** A level or the reason there is none. */
export type LevelResult = { value: number; reason: null } | { value: null; reason: string };

function ok(value: number): LevelResult {
  return { value, reason: null };
}

function none(reason: string): LevelResult {
  return { value: null, reason };
}

function checkNumber(field: string, value: unknown, lo: number, hi: number, unit: string, openLo = false): number {
  if (typeof value !== 'number' || !(openLo ? value > lo : value >= lo) || !(value <= hi)) {
    throw new RangeError(`${field} must be a number in ${openLo ? '(' : '['}${lo}, ${hi}]${unit}, got ${String(value)}`);
  }
  return value;
}

/** Validate the points and compute the sensitivities. At least one point; no frequency twice. */
export function createOutputCalibration(points: readonly OutputCalibrationPoint[]): OutputCalibration {
  if (!Array.isArray(points) || points.length === 0) {
    throw new RangeError(`points must be a non-empty array of calibration points, got ${Array.isArray(points) ? 'an empty array' : String(points)}`);
  }
  const out = points.map((p, i) => {
    if (typeof p !== 'object' || p === null) throw new RangeError(`points[${i}] must be an object {hz, dbfs, measuredDbSpl}, got ${String(p)}`);
    const hz = checkNumber(`points[${i}].hz`, p.hz, 0, 1e6, ' Hz', true);
    const dbfs = checkNumber(`points[${i}].dbfs`, p.dbfs, -150, 0, ' dBFS');
    const measuredDbSpl = checkNumber(`points[${i}].measuredDbSpl`, p.measuredDbSpl, -50, 200, ' dB SPL');
    return { hz, dbfs, measuredDbSpl, sensitivityDbSpl: measuredDbSpl - dbfs };
  });
  out.sort((a, b) => a.hz - b.hz);
  for (let i = 1; i < out.length; i++) {
    if (out[i]!.hz === out[i - 1]!.hz) throw new RangeError(`points must not repeat a frequency, got ${out[i]!.hz} Hz twice`);
  }
  return { points: out, minHz: out[0]!.hz, maxHz: out[out.length - 1]!.hz };
}

/** RMS dB SPL of a full-scale sine at `hz`, interpolated in log-frequency; null outside the calibrated range. */
export function outputSensitivityAt(cal: OutputCalibration, hz: number): LevelResult {
  if (typeof hz !== 'number' || !(hz > 0)) return none(`frequency must be a number above 0 Hz, got ${String(hz)}`);
  if (hz < cal.minHz || hz > cal.maxHz) {
    return none(`${hz} Hz is outside the calibrated range ${cal.minHz} … ${cal.maxHz} Hz: the output SPL there is unknown`);
  }
  const pts = cal.points;
  let i = 0;
  while (i < pts.length - 1 && pts[i + 1]!.hz < hz) i++;
  const a = pts[i]!;
  if (a.hz === hz || i === pts.length - 1) return ok(a.sensitivityDbSpl);
  const b = pts[i + 1]!;
  const t = Math.log(hz / a.hz) / Math.log(b.hz / a.hz);
  return ok(a.sensitivityDbSpl + t * (b.sensitivityDbSpl - a.sensitivityDbSpl));
}

/** SPL of a sine at `dbfs` (AES17) and `hz` through the calibrated output; RMS in, RMS out (peak in, peak out). */
export function dbfsToDbSpl(cal: OutputCalibration, dbfs: number, hz: number): LevelResult {
  if (typeof dbfs !== 'number' || Number.isNaN(dbfs)) return none(`dbfs must be a number, got ${String(dbfs)}`);
  const s = outputSensitivityAt(cal, hz);
  return s.value === null ? s : ok(dbfs + s.value);
}

/** Digital level (dBFS) that gives `dbSpl` at `hz` through the calibrated output. */
export function dbSplToDbfs(cal: OutputCalibration, dbSpl: number, hz: number): LevelResult {
  if (typeof dbSpl !== 'number' || Number.isNaN(dbSpl)) return none(`dbSpl must be a number, got ${String(dbSpl)}`);
  const s = outputSensitivityAt(cal, hz);
  return s.value === null ? s : ok(dbSpl - s.value);
}

export interface SplCeiling {
  /** The limiter ceiling (sample peak, dBFS), at most 0. */
  ceilingDbfs: number;
  /** Before the cap at 0 dBFS; above 0 the output cannot reach the SPL ceiling at any calibrated frequency. */
  uncappedDbfs: number;
  /** Frequency with the highest sensitivity (the one that sets the ceiling), Hz. */
  limitingHz: number;
  /** Peak SPL of a full-scale sine at limitingHz, dB SPL (sensitivity + 3.01 dB). */
  peakSensitivityDbSpl: number;
  /** What the ceiling covers. */
  note: string;
}

/**
 * The strictest-ceiling rule: the dBFS ceiling for a peak SPL ceiling, using the highest sensitivity
 * measured across the calibrated frequencies (interpolation cannot exceed the measured maximum).
 */
export function ceilingDbfsForPeakSpl(cal: OutputCalibration, peakCeilingDbSpl: number): SplCeiling {
  checkNumber('peakCeilingDbSpl', peakCeilingDbSpl, -50, 200, ' dB SPL');
  let best = cal.points[0]!;
  for (const p of cal.points) if (p.sensitivityDbSpl > best.sensitivityDbSpl) best = p;
  const peakSensitivityDbSpl = best.sensitivityDbSpl + SINE_CREST_DB;
  const uncappedDbfs = peakCeilingDbSpl - peakSensitivityDbSpl;
  return {
    ceilingDbfs: Math.min(0, uncappedDbfs),
    uncappedDbfs,
    limitingHz: best.hz,
    peakSensitivityDbSpl,
    note: `peak SPL bound for ${cal.minHz} … ${cal.maxHz} Hz; outside that range the output SPL is not calibrated`,
  };
}

export interface MicCalibration {
  /** Calibration frequency, Hz. */
  hz: number;
  /** SPL that reads 0 dBFS (AES17) at the microphone input, dB SPL. */
  sensitivityDbSpl: number;
  /** Range where the microphone is stated to be flat (defaults to the calibration frequency alone), Hz. */
  validFromHz: number;
  validToHz: number;
}

export interface MicCalibrationInput {
  /** SPL of the reference source, dB SPL (RMS), 0 … 200. */
  knownDbSpl: number;
  /** Frequency of the reference source, Hz (> 0). */
  hz: number;
  /** Range over which the user states the microphone is flat; default [hz, hz]. */
  validFromHz?: number;
  validToHz?: number;
}

/** Microphone calibration from the level (dBFS, AES17) read while recording the known source. */
export function micCalibrationFromLevel(input: MicCalibrationInput & { measuredDbfs: number }): MicCalibration {
  const knownDbSpl = checkNumber('knownDbSpl', input.knownDbSpl, 0, 200, ' dB SPL');
  const measuredDbfs = checkNumber('measuredDbfs', input.measuredDbfs, -200, 3.02, ' dBFS');
  return micCalibration(input, knownDbSpl - measuredDbfs);
}

/** Microphone calibration from a recording of the known source (its AES17 RMS level is measured here). */
export function micCalibrationFromRecording(input: MicCalibrationInput & { samples: ArrayLike<number> }): MicCalibration {
  const knownDbSpl = checkNumber('knownDbSpl', input.knownDbSpl, 0, 200, ' dB SPL');
  const x = input.samples;
  if (x === null || typeof x !== 'object' || !(x.length > 0)) throw new RangeError(`samples must be a non-empty array, got ${String(x)}`);
  let sum = 0;
  for (let i = 0; i < x.length; i++) {
    const v = x[i]!;
    if (!Number.isFinite(v)) throw new RangeError(`samples[${i}] must be a finite number, got ${v}`);
    sum += v * v;
  }
  if (sum === 0) throw new RangeError('samples must not be digital silence: the microphone or its input is dead');
  return micCalibration(input, knownDbSpl - powerToDbfs(sum / x.length));
}

function micCalibration(input: MicCalibrationInput, sensitivityDbSpl: number): MicCalibration {
  const hz = checkNumber('hz', input.hz, 0, 1e6, ' Hz', true);
  const validFromHz = checkNumber('validFromHz', input.validFromHz ?? hz, 0, hz, ' Hz (the calibration frequency)', true);
  const validToHz = checkNumber('validToHz', input.validToHz ?? hz, hz, 1e6, ' Hz');
  return { hz, sensitivityDbSpl, validFromHz, validToHz };
}

function micRange(cal: MicCalibration, hz: number): string | null {
  if (typeof hz !== 'number' || !(hz >= cal.validFromHz && hz <= cal.validToHz)) {
    return `${String(hz)} Hz is outside the microphone's calibrated range ${cal.validFromHz} … ${cal.validToHz} Hz`;
  }
  return null;
}

/** SPL at the microphone for an input level in dBFS (AES17) at `hz`. */
export function micDbfsToDbSpl(cal: MicCalibration, dbfs: number, hz: number): LevelResult {
  const r = micRange(cal, hz);
  if (r !== null) return none(r);
  if (typeof dbfs !== 'number' || Number.isNaN(dbfs)) return none(`dbfs must be a number, got ${String(dbfs)}`);
  return ok(dbfs + cal.sensitivityDbSpl);
}

/** Input level in dBFS (AES17) that an SPL at `hz` produces at the microphone. */
export function micDbSplToDbfs(cal: MicCalibration, dbSpl: number, hz: number): LevelResult {
  const r = micRange(cal, hz);
  if (r !== null) return none(r);
  if (typeof dbSpl !== 'number' || Number.isNaN(dbSpl)) return none(`dbSpl must be a number, got ${String(dbSpl)}`);
  return ok(dbSpl - cal.sensitivityDbSpl);
}
