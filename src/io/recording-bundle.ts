/**
 * The recording bundle: what a recorded run (live or simulated panel, or `ancbench replay --bundle`) leaves
 * behind, as one `.zip` or one folder holding five parts:
 *
 *   recording.json   the manifest (this project's own format, below)
 *   signals.wav      32-bit float, one channel per entry of the manifest's `channels`, in that order
 *   model.json       the secondary-path model in use (an ancbench-path-model file)
 *   events.json      guard and limiter events, in order ([{timeS, cause, values, action}])
 *   report.html      a self-contained summary page
 *
 * Manifest (`format` "ancbench-recording", `version` 1):
 *
 * ```json
 * {
 *   "format": "ancbench-recording", "version": 1,
 *   "name": "fan, 30 s",                       // optional
 *   "source": "live",                          // "live", "simulated" or "replay"
 *   "sampleRate": 48000, "blockSize": 128,
 *   "channels": ["reference", "error", "output", "state"],
 *   "devices": { "input": "USB audio (2ch)", "output": "Speakers" },   // labels as the browser gave them
 *   "startedAt": "2026-01-02T10:00:00.000Z",
 *   "settings": { "controller": {...}, "limiter": {...}, "highPassHz": 20, "rampMs": 50 },
 *   "ranges": { "controlOff": [[0, 5]], "controlOn": [[5.2, 30]] },   // seconds into signals.wav
 *   "meters": { "controlOff": { "referenceDbfs": -31.2, "errorDbfs": -28.4 } },   // optional, as shown
 *   "tool": { "name": "ancbench", "version": "0.1.0" }
 * }
 * ```
 *
 * `channels` names: "reference" and "error" (the microphones), "output" (the engine's output, after the
 * limiter), "state" (per sample: 0 control off, 1 control on, 2 muted, as the engine reported per block).
 * Reference, error and state are required. `settings` uses the scenario's vocabulary and is checked by
 * the same tables as a scenario. Loading checks every part before returning anything: a missing or
 * wrong part gets one error naming it.
 *
 * Plain JavaScript (zod, fflate): runs in the browser and in Node.
 */
import { z } from 'zod';
import { unzipSync, zipSync } from 'fflate';
import { decodeFloat32Wav, encodeFloat32Wav, FloatWavError } from './wav-float32.ts';
import { parsePathModel, serializePathModel, PathModelError, type PathModel } from './path-model-file.ts';
import { safeJson } from './json.ts';
import { EVENT_ACTIONS, EVENT_CAUSES, type EngineEvent } from '../engine/events.ts';
import { replaySettingsSchema, settingsIssues, type ReplaySettings } from '../plant/replay.ts';

export const RECORDING_FORMAT = 'ancbench-recording';
export const RECORDING_VERSION = 1;
export const BUNDLE_PARTS = ['recording.json', 'signals.wav', 'model.json', 'events.json', 'report.html'] as const;
export const CHANNEL_NAMES = ['reference', 'error', 'output', 'state'] as const;
export type ChannelName = (typeof CHANNEL_NAMES)[number];
/** Values of the state channel. */
export const STATE_CODE = { off: 0, on: 1, muted: 2 } as const;

const seconds = z.number({ error: 'must be a time in seconds' }).min(0, 'must be ≥ 0 s').max(86400, 'must be at most 86400 s');
const range = z.tuple([seconds, seconds], { error: 'must be [startS, endS]' }).refine(([a, b]) => a < b, 'must be [startS, endS] with start < end');
const dbfs = z.number({ error: 'must be a level in dBFS' }).max(0, 'must be ≤ 0 dBFS').nullable();

export const manifestSchema = z.strictObject({
  format: z.literal(RECORDING_FORMAT, { error: `must be "${RECORDING_FORMAT}"` }),
  version: z.literal(RECORDING_VERSION, { error: `must be ${RECORDING_VERSION} (the version this program reads)` }),
  name: z.string({ error: 'must be text' }).max(200, 'must be at most 200 characters').optional(),
  source: z.enum(['live', 'simulated', 'replay'], { error: 'must be "live", "simulated" or "replay"' }),
  sampleRate: z.number({ error: 'must be an integer from 8000 to 192000' }).int('must be an integer from 8000 to 192000').min(8000, 'must be an integer from 8000 to 192000').max(192000, 'must be an integer from 8000 to 192000'),
  blockSize: z.number({ error: 'must be a power of two from 32 to 4096' }).int().refine((b) => b >= 32 && b <= 4096 && (b & (b - 1)) === 0, 'must be a power of two from 32 to 4096'),
  channels: z.array(z.enum(CHANNEL_NAMES, { error: `must each be one of ${CHANNEL_NAMES.map((c) => `"${c}"`).join(', ')}` }), { error: 'must be an array of channel names' })
    .refine((c) => new Set(c).size === c.length, 'must not name a channel twice')
    .refine((c) => c.includes('reference') && c.includes('error') && c.includes('state'), 'must include "reference", "error" and "state"'),
  devices: z.record(z.string(), z.string({ error: 'must be a device label (text)' }), { error: 'must be an object of device labels' }),
  startedAt: z.string({ error: 'must be an ISO 8601 date and time' }).refine((s) => /^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}/.test(s) && !Number.isNaN(Date.parse(s)), 'must be an ISO 8601 date and time'),
  settings: z.unknown(),
  ranges: z.strictObject({
    controlOff: z.array(range, { error: 'must be an array of [startS, endS]' }).min(1, 'needs at least one control-off range (every recording starts with one)'),
    controlOn: z.array(range, { error: 'must be an array of [startS, endS]' }),
  }, { error: 'must be {controlOff, controlOn}' }),
  meters: z.strictObject({ controlOff: z.strictObject({ referenceDbfs: dbfs, errorDbfs: dbfs }) }).optional(),
  tool: z.strictObject({ name: z.literal('ancbench'), version: z.string() }, { error: 'must be {name: "ancbench", version}' }),
});

export type RecordingManifest = Omit<z.infer<typeof manifestSchema>, 'settings'> & { settings: ReplaySettings };

const eventsSchema = z.array(z.strictObject({
  timeS: z.number({ error: 'must be a time in seconds' }),
  cause: z.enum(EVENT_CAUSES, { error: `must be one of ${EVENT_CAUSES.join(', ')}` }),
  values: z.record(z.string(), z.number().nullable()),
  action: z.enum(EVENT_ACTIONS, { error: `must be one of ${EVENT_ACTIONS.join(', ')}` }),
}), { error: 'must be an array of events' });

export interface RecordingBundle {
  manifest: RecordingManifest;
  /** One array per manifest channel, by name. */
  signals: Partial<Record<ChannelName, Float32Array>> & { reference: Float32Array; error: Float32Array; state: Float32Array };
  model: PathModel;
  events: EngineEvent[];
  reportHtml: string;
}

/** A bundle that failed to load: the message names the part and what is wrong with it. */
export class BundleError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'BundleError';
  }
}

const text = (b: Uint8Array): string => new TextDecoder().decode(b);

function zodLines(err: z.ZodError): string {
  return err.issues.map((iss) => {
    const where = iss.path.map((p) => (typeof p === 'number' ? `[${p}]` : `.${String(p)}`)).join('').replace(/^\./, '') || '(top level)';
    return iss.code === 'unrecognized_keys' ? `${where}: unknown field(s) ${iss.keys.map((k) => `"${k}"`).join(', ')}` : `${where}: ${iss.message}`;
  }).join('; ');
}

function json(part: string, bytes: Uint8Array): unknown {
  try {
    return JSON.parse(text(bytes));
  } catch (e) {
    throw new BundleError(`${part}: not valid JSON (${(e as Error).message})`);
  }
}

/**
 * Check and decode a bundle's parts (file name → bytes). Throws BundleError naming the first wrong or
 * missing part; returns only a wholly valid bundle.
 */
export function parseRecordingBundle(files: ReadonlyMap<string, Uint8Array>): RecordingBundle {
  const missing = BUNDLE_PARTS.filter((p) => !files.has(p));
  if (missing.length) throw new BundleError(`${missing.join(', ')}: missing (a recording bundle holds ${BUNDLE_PARTS.join(', ')})`);
  const m = manifestSchema.safeParse(json('recording.json', files.get('recording.json')!));
  if (!m.success) throw new BundleError(`recording.json: ${zodLines(m.error)}`);
  const settingsProblems = settingsIssues(replaySettingsSchema, m.data.settings, 'settings');
  if (settingsProblems.length) throw new BundleError(`recording.json: ${settingsProblems.join('; ')}`);
  const manifest = m.data as RecordingManifest;
  let wav;
  try {
    wav = decodeFloat32Wav(files.get('signals.wav')!, 'signals.wav');
  } catch (e) {
    if (e instanceof FloatWavError) throw new BundleError(e.message);
    throw e;
  }
  if (wav.sampleRate !== manifest.sampleRate) throw new BundleError(`signals.wav: sample rate ${wav.sampleRate} Hz, but recording.json says ${manifest.sampleRate} Hz`);
  if (wav.channels.length !== manifest.channels.length) {
    throw new BundleError(`signals.wav: ${wav.channels.length} channel(s), but recording.json names ${manifest.channels.length} (${manifest.channels.join(', ')})`);
  }
  const durationS = wav.channels[0]!.length / wav.sampleRate;
  for (const [kind, list] of Object.entries(manifest.ranges)) {
    list.forEach(([, end], i) => {
      if (end > durationS + 1e-6) throw new BundleError(`recording.json: ranges.${kind}[${i}] ends at ${end} s, after the end of signals.wav (${durationS.toFixed(3)} s)`);
    });
  }
  let model: PathModel;
  try {
    model = parsePathModel(text(files.get('model.json')!), { expectedSampleRate: manifest.sampleRate, resample: true });
  } catch (e) {
    if (e instanceof PathModelError) throw new BundleError(`model.json: ${e.problems.join('; ')}`);
    throw e;
  }
  const ev = eventsSchema.safeParse(json('events.json', files.get('events.json')!));
  if (!ev.success) throw new BundleError(`events.json: ${zodLines(ev.error)}`);
  const reportHtml = text(files.get('report.html')!);
  if (!/<html[\s>]/i.test(reportHtml)) throw new BundleError('report.html: not an HTML page');
  const signals = {} as RecordingBundle['signals'];
  manifest.channels.forEach((name, i) => (signals[name] = wav.channels[i]!));
  return { manifest, signals, model, events: ev.data as EngineEvent[], reportHtml };
}

/** The parts of a `.zip` bundle (files may sit in one top folder, as archivers often put them). */
export function unzipBundle(zip: Uint8Array): Map<string, Uint8Array> {
  let entries: Record<string, Uint8Array>;
  try {
    entries = unzipSync(zip);
  } catch (e) {
    throw new BundleError(`not a readable .zip archive (${(e as Error).message})`);
  }
  const files = new Map<string, Uint8Array>();
  for (const [path, data] of Object.entries(entries)) {
    if (path.endsWith('/')) continue;
    const name = path.slice(path.lastIndexOf('/') + 1);
    if ((BUNDLE_PARTS as readonly string[]).includes(name)) files.set(name, data);
  }
  return files;
}

export interface BundleContents {
  manifest: RecordingManifest;
  signals: Partial<Record<ChannelName, Float32Array>>;
  model: PathModel;
  events: EngineEvent[];
  reportHtml: string;
}

/** A bundle's parts as bytes (validated by reading them back, so nothing invalid is ever written). */
export function bundleFiles(b: BundleContents): Map<string, Uint8Array> {
  const enc = new TextEncoder();
  const channels = b.manifest.channels.map((c) => {
    const s = b.signals[c];
    if (!s) throw new BundleError(`signals: no samples for channel "${c}"`);
    return s;
  });
  const files = new Map<string, Uint8Array>([
    ['recording.json', enc.encode(safeJson(b.manifest) + '\n')],
    ['signals.wav', encodeFloat32Wav(channels, b.manifest.sampleRate)],
    ['model.json', enc.encode(serializePathModel(b.model))],
    ['events.json', enc.encode(safeJson(b.events) + '\n')],
    ['report.html', enc.encode(b.reportHtml)],
  ]);
  parseRecordingBundle(files);
  return files;
}

/** The parts zipped (stored order: manifest first). */
export function zipBundle(files: ReadonlyMap<string, Uint8Array>): Uint8Array {
  const entries: Record<string, Uint8Array> = {};
  for (const p of BUNDLE_PARTS) entries[p] = files.get(p)!;
  return zipSync(entries, { level: 6 });
}

/** Samples of one time range, [startS, endS), clamped to the signal. */
export function rangeSamples(x: Float32Array, [startS, endS]: [number, number], sampleRate: number): Float32Array {
  const a = Math.max(0, Math.round(startS * sampleRate));
  const b = Math.min(x.length, Math.round(endS * sampleRate));
  return x.subarray(a, Math.max(a, b));
}

/** The reference and error of the longest control-off range: what a replay runs on. */
export function controlOffSignals(b: RecordingBundle): { reference: Float32Array; error: Float32Array; range: [number, number] } {
  const longest = b.manifest.ranges.controlOff.reduce((best, r) => (r[1] - r[0] > best[1] - best[0] ? r : best));
  const fs = b.manifest.sampleRate;
  return { reference: rangeSamples(b.signals.reference, longest, fs), error: rangeSamples(b.signals.error, longest, fs), range: longest };
}
