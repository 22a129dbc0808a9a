/**
 * Watches for what makes a secondary-path model stale while control runs: the round trip through
 * the audio I/O can jump (a device change, a buffer resize) and one render quantum is already about
 * 48° of phase at 50 Hz (128 samples at 48 kHz = 2.67 ms; 360° · 50 Hz · 2.67 ms = 48°). Signals:
 *  - devicechange events from the media devices, and a change of the listed audio devices found by
 *    asking for the list every DEVICE_POLL_TICKS ticks (Chromium on Linux sends no devicechange when
 *    a sound-server device comes or goes, found with the virtual room; the list does change);
 *  - a lasting change of the context's reported baseLatency + outputLatency by more than one quantum
 *    (LatencyJumpDetector: the browser's figure jitters from one reading to the next by several ms
 *    while nothing changes, so readings are compared as medians, against their own spread);
 *  - the error level rising more than `riseDb` above the control-off level for `riseS` seconds;
 *  - output underruns (overload) from playbackStats, reported but not acted on.
 * On the first three the session freezes adaptation and asks the user to re-identify. Events use the
 * engine's causes and actions (src/engine/events.ts) where one fits: latency-jump, error-rise,
 * freeze-adaptation. When the engine's guard runs, it watches the error rise too (on the audio
 * thread); this page-side check is the one that also asks for a new identification.
 */
import type { IAudioContext } from 'standardized-audio-context';
import { contextStats } from './native-context.ts';
import { M } from '../protocol/messages.ts';
import type { PanelEvent } from '../protocol/messages.ts';

export interface LatencyWatchOptions {
  /** Error rise above the control-off level that counts, dB (default 6). */
  riseDb?: number;
  /** How long the rise must last, s (default 0.5). */
  riseS?: number;
  /** Render quantum used to judge latency changes, samples (default 128). */
  quantum?: number;
}

/** Readings (one per tick) a verdict rests on. */
export const LATENCY_WINDOW = 5;
/** Readings kept to judge the jitter (the older ones, before the window). */
export const LATENCY_HISTORY = 25;

/**
 * Decides when the reported latency has really moved. The median of the last LATENCY_WINDOW
 * readings is the level; the jitter is the spread of the older readings kept: their largest
 * deviation from their median, leaving out the single largest (one wild reading). The first full
 * window sets the reference; a later window whose median differs from it by more than
 * max(one quantum, 2 × jitter) is a jump, and becomes the new reference (the history then starts
 * again from that window). A single wild reading moves no median; a step moves the window's median
 * once most of the window has it, while the older readings still show the jitter before it.
 */
export class LatencyJumpDetector {
  private readonly readings: number[] = [];
  referenceS = NaN;

  constructor(private readonly quantumS: number) {}

  /** Add a reading (s); returns the jump {previousS, currentS} when there is one, else null. */
  push(latencyS: number): { previousS: number; currentS: number } | null {
    if (!Number.isFinite(latencyS)) return null;
    const r = this.readings;
    r.push(latencyS);
    if (r.length > LATENCY_HISTORY) r.shift();
    if (r.length < LATENCY_WINDOW) return null;
    const m = median(r.slice(-LATENCY_WINDOW));
    if (Number.isNaN(this.referenceS)) {
      this.referenceS = m;
      return null;
    }
    const older = r.length >= 2 * LATENCY_WINDOW ? r.slice(0, -LATENCY_WINDOW) : r;
    const om = median(older);
    const dev = older.map((v) => Math.abs(v - om)).sort((a, b) => b - a);
    const jitter = dev[1] ?? 0;
    if (Math.abs(m - this.referenceS) <= Math.max(this.quantumS, 2 * jitter)) return null;
    const previousS = this.referenceS;
    this.referenceS = m;
    r.splice(0, r.length - LATENCY_WINDOW);
    return { previousS, currentS: m };
  }
}

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  const h = s.length >> 1;
  return s.length % 2 ? s[h]! : (s[h - 1]! + s[h]!) / 2;
}

function reportedLatencyS(s: ReturnType<typeof contextStats>): number {
  return (Number.isFinite(s.baseLatencyS) ? s.baseLatencyS : 0) + (Number.isFinite(s.outputLatencyS) ? s.outputLatencyS : 0);
}

/** Device-change signals this close together are one change, ms. */
export const DEVICE_CHANGE_MERGE_MS = 3000;

/** Ticks (0.5 s each) between two looks at the device list. */
export const DEVICE_POLL_TICKS = 4;

/** The audio devices the browser lists now, as one comparable string ('' when it cannot say). */
async function audioDevicesKey(): Promise<string> {
  try {
    const all = (await navigator.mediaDevices?.enumerateDevices?.()) ?? [];
    return all
      .filter((d) => d.kind === 'audioinput' || d.kind === 'audiooutput')
      .map((d) => `${d.kind}:${d.deviceId}`)
      .sort()
      .join('|');
  } catch {
    return '';
  }
}

export class LatencyWatch {
  private timer: ReturnType<typeof setInterval> | null = null;
  private ticks = 0;
  private devicesKey: string | null = null;
  private jumps: LatencyJumpDetector | null = null;
  private lastUnderruns = NaN;
  private riseSince = NaN;
  private readonly riseDb: number;
  private readonly riseS: number;
  private readonly quantum: number;
  private lastDeviceChangeMs = -Infinity;
  /** One report per change: the browser's event and the list comparison may both see it, and one change can come as several events. */
  private readonly onDeviceChange = (): void => {
    const now = performance.now();
    if (now - this.lastDeviceChangeMs < DEVICE_CHANGE_MERGE_MS) return;
    this.lastDeviceChangeMs = now;
    this.report({ timeS: this.ctx.currentTime, cause: 'device-change', action: 'freeze-adaptation', values: {} }, true);
  };

  constructor(
    private readonly ctx: IAudioContext,
    private readonly report: (e: PanelEvent, stale: boolean) => void,
    options: LatencyWatchOptions = {},
  ) {
    this.riseDb = options.riseDb ?? 6;
    this.riseS = options.riseS ?? 0.5;
    this.quantum = options.quantum ?? 128;
  }

  start(): void {
    this.stop();
    const s = contextStats(this.ctx);
    this.jumps = new LatencyJumpDetector(this.quantum / this.ctx.sampleRate);
    this.jumps.push(reportedLatencyS(s));
    this.lastUnderruns = s.underrunEvents;
    this.timer = setInterval(() => this.tick(), 500);
    navigator.mediaDevices?.addEventListener?.('devicechange', this.onDeviceChange);
    this.ticks = 0;
    this.devicesKey = null;
    void audioDevicesKey().then((k) => {
      if (this.timer !== null && this.devicesKey === null) this.devicesKey = k;
    });
  }

  /**
   * Start judging jumps afresh from the next readings: call when a model is loaded, since the
   * latency it was measured with is the one that matters (the figure the browser reports also
   * settles for a few seconds after the audio starts).
   */
  rebase(): void {
    if (this.timer !== null) this.jumps = new LatencyJumpDetector(this.quantum / this.ctx.sampleRate);
  }

  stop(): void {
    if (this.timer !== null) clearInterval(this.timer);
    this.timer = null;
    navigator.mediaDevices?.removeEventListener?.('devicechange', this.onDeviceChange);
  }

  private tick(): void {
    const s = contextStats(this.ctx);
    const jump = this.jumps?.push(reportedLatencyS(s));
    if (jump) {
      this.report({ timeS: this.ctx.currentTime, cause: 'latency-jump', action: 'freeze-adaptation', values: { previousMs: jump.previousS * 1000, currentMs: jump.currentS * 1000 } }, true);
    }
    if (Number.isFinite(s.underrunEvents) && s.underrunEvents > this.lastUnderruns) {
      this.report({ timeS: this.ctx.currentTime, cause: 'underrun', action: 'none', values: { events: s.underrunEvents - this.lastUnderruns, durationMs: s.underrunDurationS * 1000 } }, false);
    }
    if (Number.isFinite(s.underrunEvents)) this.lastUnderruns = s.underrunEvents;
    if (++this.ticks % DEVICE_POLL_TICKS === 0) void this.checkDevices();
  }

  private async checkDevices(): Promise<void> {
    const k = await audioDevicesKey();
    if (this.timer === null || k === '') return;
    const before = this.devicesKey;
    this.devicesKey = k;
    if (before !== null && before !== '' && k !== before) this.onDeviceChange();
  }

  /** Feed each meter frame (control on only): detects a lasting rise of the error level. */
  checkFrame(f: Float64Array): void {
    const controlling = f[M.mode] === 1 && f[M.adapting] === 1 && f[M.rampGain] === 1;
    const base = f[M.baselineErrPower]!;
    const now = f[M.errPowerFast]!;
    if (!controlling || !(base > 0)) {
      this.riseSince = NaN;
      return;
    }
    const riseDb = 10 * Math.log10(now / base);
    const t = f[M.timeS]!;
    if (riseDb > this.riseDb) {
      if (Number.isNaN(this.riseSince)) this.riseSince = t;
      else if (t - this.riseSince >= this.riseS) {
        this.report({ timeS: t, cause: 'error-rise', action: 'freeze-adaptation', values: { riseDb, thresholdDb: this.riseDb, heldMs: (t - this.riseSince) * 1000, baselinePower: base } }, true);
        this.riseSince = NaN;
      }
    } else this.riseSince = NaN;
  }
}
