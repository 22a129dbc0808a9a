/**
 * Read-only facts and the output-device choice that standardized-audio-context does not expose:
 * `outputLatency`, `playbackStats` (underruns: the reliable overload signal in Chromium) and
 * `setSinkId`. They live on the native AudioContext behind the wrapper; we look it up in the
 * wrapper's own context store (an internal module of standardized-audio-context 25.x, pinned in
 * package.json). No native node is ever created or connected here, so native and wrapped audio
 * objects never mix. Every accessor degrades to "unknown" when a browser lacks the feature.
 */
import type { IAudioContext } from 'standardized-audio-context';
import { CONTEXT_STORE } from 'standardized-audio-context/build/es2019/globals.js';

interface NativeExtras {
  baseLatency?: number;
  outputLatency?: number;
  playbackStats?: { underrunEvents?: number; underrunDuration?: number; totalDuration?: number };
  setSinkId?: (id: string) => Promise<void>;
  sinkId?: string;
}

function nativeOf(ctx: IAudioContext): NativeExtras | null {
  const n = (CONTEXT_STORE as WeakMap<object, unknown>).get(ctx);
  return (n as NativeExtras | undefined) ?? null;
}

export interface ContextStats {
  /** Seconds; NaN when the browser does not say. */
  baseLatencyS: number;
  outputLatencyS: number;
  /** Cumulative underrun count and duration (s); NaN when unavailable. */
  underrunEvents: number;
  underrunDurationS: number;
}

export function contextStats(ctx: IAudioContext): ContextStats {
  const n = nativeOf(ctx);
  const num = (v: unknown): number => (typeof v === 'number' && Number.isFinite(v) ? v : NaN);
  const ps = n?.playbackStats;
  // Chromium reports underrunDuration in seconds
  return {
    baseLatencyS: num(ctx.baseLatency),
    outputLatencyS: num(n?.outputLatency),
    underrunEvents: num(ps?.underrunEvents),
    underrunDurationS: num(ps?.underrunDuration),
  };
}

/** True when the output device can be chosen (AudioContext.setSinkId). */
export function canChooseOutput(ctx: IAudioContext): boolean {
  return typeof nativeOf(ctx)?.setSinkId === 'function';
}

/** Route the context's output to a device ('' = the system default). */
export async function setOutputDevice(ctx: IAudioContext, deviceId: string): Promise<void> {
  const n = nativeOf(ctx);
  if (!n || typeof n.setSinkId !== 'function') throw new Error('this browser cannot choose the output device of an AudioContext; use the system settings');
  await n.setSinkId(deviceId);
}
