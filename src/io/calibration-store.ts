/**
 * Calibrations the panel keeps between visits, in the browser's localStorage (one JSON entry):
 *  - per output device: the readings of its output calibration (tone frequency, the dBFS level handed
 *    to the output, the SPL measured at the ear position) and the peak SPL cap the user set;
 *  - per microphone (device and channel): its calibration from a source of known SPL.
 * Device ids are the browser's own (stable per site); '' (the system default) is kept as 'default'.
 *
 * Stored readings are checked again on load with src/engine/calibration.ts (createOutputCalibration,
 * the microphone ranges): an entry that no longer validates is dropped and reported, never used.
 * No Node APIs: the storage is anything with getItem/setItem (localStorage, or a stand-in in tests);
 * when storage is unavailable the store keeps its data for the page's lifetime only.
 */
import { createOutputCalibration, type MicCalibration, type OutputCalibration, type OutputCalibrationPoint } from '../engine/calibration.ts';

export const CALIBRATION_STORAGE_KEY = 'ancbench.calibration.v1';
const VERSION = 1;

export interface StorageLike {
  getItem(key: string): string | null;
  setItem(key: string, value: string): void;
}

export interface StoredOutputCalibration {
  /** Readings as taken (hz, dbfs handed to the output, measuredDbSpl). */
  points: OutputCalibrationPoint[];
  /** Peak SPL cap at the ear position, dB SPL, or null for none. */
  peakCeilingDbSpl: number | null;
  /** Device label when saved (for the user; the key is the id). */
  label: string;
  /** ISO time of the last change. */
  savedAt: string;
}

export interface StoredMicCalibration {
  calibration: MicCalibration;
  /** The reference source's level, dB SPL, and what the microphone read, dBFS (AES17). */
  knownDbSpl: number;
  measuredDbfs: number;
  label: string;
  savedAt: string;
}

interface StoreData {
  version: number;
  outputs: Record<string, StoredOutputCalibration>;
  mics: Record<string, StoredMicCalibration>;
}

/** The storage key of a device: its id, or 'default' for the system default (''). */
export function deviceKey(deviceId: string, channel?: number): string {
  const id = deviceId === '' ? 'default' : deviceId;
  return channel === undefined ? id : `${id}#${channel}`;
}

function finite(v: unknown): v is number {
  return typeof v === 'number' && Number.isFinite(v);
}

function validMic(c: unknown): c is MicCalibration {
  if (typeof c !== 'object' || c === null) return false;
  const m = c as Record<string, unknown>;
  return finite(m.hz) && m.hz > 0 && finite(m.sensitivityDbSpl) && finite(m.validFromHz) && finite(m.validToHz) && m.validFromHz > 0 && m.validFromHz <= m.hz && m.validToHz >= m.hz;
}

export class CalibrationStore {
  private data: StoreData = { version: VERSION, outputs: {}, mics: {} };
  /** Entries dropped on load because they no longer validate, with the reason. */
  readonly dropped: string[] = [];

  constructor(private readonly storage: StorageLike | null) {
    this.load();
  }

  private load(): void {
    let raw: string | null = null;
    try {
      raw = this.storage?.getItem(CALIBRATION_STORAGE_KEY) ?? null;
    } catch {
      raw = null; // storage disabled: start empty
    }
    if (!raw) return;
    let o: unknown;
    try {
      o = JSON.parse(raw);
    } catch (e) {
      this.dropped.push(`stored calibrations are not valid JSON (${(e as Error).message}); starting afresh`);
      return;
    }
    if (typeof o !== 'object' || o === null || (o as StoreData).version !== VERSION) {
      this.dropped.push(`stored calibrations have an unknown layout (version ${String((o as StoreData | null)?.version)}); starting afresh`);
      return;
    }
    const d = o as Partial<StoreData>;
    for (const [key, e] of Object.entries(d.outputs ?? {})) {
      try {
        createOutputCalibration(e.points);
        const p = e.peakCeilingDbSpl;
        if (p !== null && !(finite(p) && p >= -50 && p <= 200)) throw new RangeError(`peakCeilingDbSpl must be null or a number from -50 to 200 dB SPL, got ${String(p)}`);
        this.data.outputs[key] = { points: e.points.map((q) => ({ hz: q.hz, dbfs: q.dbfs, measuredDbSpl: q.measuredDbSpl })), peakCeilingDbSpl: p, label: String(e.label ?? key), savedAt: String(e.savedAt ?? '') };
      } catch (err) {
        this.dropped.push(`output calibration of "${String(e?.label ?? key)}" dropped: ${(err as Error).message}`);
      }
    }
    for (const [key, e] of Object.entries(d.mics ?? {})) {
      if (e && validMic(e.calibration) && finite(e.knownDbSpl) && finite(e.measuredDbfs)) this.data.mics[key] = e;
      else this.dropped.push(`microphone calibration of "${String(e?.label ?? key)}" dropped: its fields are missing or out of range`);
    }
  }

  private save(): void {
    try {
      this.storage?.setItem(CALIBRATION_STORAGE_KEY, JSON.stringify(this.data));
    } catch {
      // storage full or disabled: the calibration lasts for this page only
    }
  }

  /** The stored output calibration of a device (copy), or null. */
  output(key: string): StoredOutputCalibration | null {
    const e = this.data.outputs[key];
    return e ? { ...e, points: e.points.map((p) => ({ ...p })) } : null;
  }

  /** The device's calibration ready for the arithmetic, or null when there is none. */
  outputCalibration(key: string): OutputCalibration | null {
    const e = this.data.outputs[key];
    return e && e.points.length ? createOutputCalibration(e.points) : null;
  }

  /**
   * Add a reading (replacing one at the same frequency). Validates with createOutputCalibration
   * before storing: a bad reading throws RangeError naming the field and is not stored.
   */
  addReading(key: string, label: string, point: OutputCalibrationPoint, now = new Date()): StoredOutputCalibration {
    const prev = this.data.outputs[key];
    const points = [...(prev?.points ?? []).filter((p) => p.hz !== point.hz), { hz: point.hz, dbfs: point.dbfs, measuredDbSpl: point.measuredDbSpl }];
    createOutputCalibration(points);
    points.sort((a, b) => a.hz - b.hz);
    this.data.outputs[key] = { points, peakCeilingDbSpl: prev?.peakCeilingDbSpl ?? null, label, savedAt: now.toISOString() };
    this.save();
    return this.output(key)!;
  }

  /** Remove the reading at `hz`; the entry goes when its last reading goes (with its SPL cap). */
  removeReading(key: string, hz: number, now = new Date()): StoredOutputCalibration | null {
    const prev = this.data.outputs[key];
    if (!prev) return null;
    const points = prev.points.filter((p) => p.hz !== hz);
    if (points.length === 0) delete this.data.outputs[key];
    else this.data.outputs[key] = { ...prev, points, savedAt: now.toISOString() };
    this.save();
    return this.output(key);
  }

  /** Set or clear (null) the peak SPL cap of a calibrated device. */
  setPeakCeiling(key: string, peakDbSpl: number | null, now = new Date()): StoredOutputCalibration {
    const prev = this.data.outputs[key];
    if (!prev) throw new RangeError('an SPL cap needs an output calibration of this device: take at least one reading first');
    if (peakDbSpl !== null && !(finite(peakDbSpl) && peakDbSpl >= -50 && peakDbSpl <= 200)) {
      throw new RangeError(`the SPL cap must be a number from -50 to 200 dB SPL, got ${String(peakDbSpl)}`);
    }
    this.data.outputs[key] = { ...prev, peakCeilingDbSpl: peakDbSpl, savedAt: now.toISOString() };
    this.save();
    return this.output(key)!;
  }

  clearOutput(key: string): void {
    delete this.data.outputs[key];
    this.save();
  }

  mic(key: string): StoredMicCalibration | null {
    const e = this.data.mics[key];
    return e ? { ...e, calibration: { ...e.calibration } } : null;
  }

  saveMic(key: string, entry: Omit<StoredMicCalibration, 'savedAt'>, now = new Date()): StoredMicCalibration {
    if (!validMic(entry.calibration)) throw new RangeError('the microphone calibration is incomplete or out of range');
    this.data.mics[key] = { ...entry, calibration: { ...entry.calibration }, savedAt: now.toISOString() };
    this.save();
    return this.mic(key)!;
  }

  clearMic(key: string): void {
    delete this.data.mics[key];
    this.save();
  }
}

/** The page's store on localStorage (or in memory when the page may not use it). */
export function browserCalibrationStore(): CalibrationStore {
  let storage: StorageLike | null = null;
  try {
    storage = globalThis.localStorage ?? null;
  } catch {
    storage = null;
  }
  return new CalibrationStore(storage);
}
