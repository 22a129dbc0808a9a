/**
 * Watches for what makes a secondary-path model stale while control runs: the round trip through
 * the audio I/O can jump (a device change, a buffer resize) and one render quantum is already about
 * 48° of phase at 50 Hz (128 samples at 48 kHz = 2.67 ms; 360° · 50 Hz · 2.67 ms = 48°). Signals:
 *  - devicechange events from the media devices;
 *  - a change of the context's reported baseLatency/outputLatency by more than one quantum;
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

export class LatencyWatch {
  private timer: ReturnType<typeof setInterval> | null = null;
  private lastLatencyS = NaN;
  private lastUnderruns = NaN;
  private riseSince = NaN;
  private readonly riseDb: number;
  private readonly riseS: number;
  private readonly quantum: number;
  private readonly onDeviceChange = (): void => this.report({ timeS: this.ctx.currentTime, cause: 'device-change', action: 'freeze-adaptation', values: {} }, true);

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
    this.lastLatencyS = (Number.isFinite(s.baseLatencyS) ? s.baseLatencyS : 0) + (Number.isFinite(s.outputLatencyS) ? s.outputLatencyS : 0);
    this.lastUnderruns = s.underrunEvents;
    this.timer = setInterval(() => this.tick(), 500);
    navigator.mediaDevices?.addEventListener?.('devicechange', this.onDeviceChange);
  }

  stop(): void {
    if (this.timer !== null) clearInterval(this.timer);
    this.timer = null;
    navigator.mediaDevices?.removeEventListener?.('devicechange', this.onDeviceChange);
  }

  private tick(): void {
    const s = contextStats(this.ctx);
    const lat = (Number.isFinite(s.baseLatencyS) ? s.baseLatencyS : 0) + (Number.isFinite(s.outputLatencyS) ? s.outputLatencyS : 0);
    const q = this.quantum / this.ctx.sampleRate;
    if (Math.abs(lat - this.lastLatencyS) > q) {
      this.report({ timeS: this.ctx.currentTime, cause: 'latency-jump', action: 'freeze-adaptation', values: { previousMs: this.lastLatencyS * 1000, currentMs: lat * 1000 } }, true);
      this.lastLatencyS = lat;
    }
    if (Number.isFinite(s.underrunEvents) && s.underrunEvents > this.lastUnderruns) {
      this.report({ timeS: this.ctx.currentTime, cause: 'underrun', action: 'none', values: { events: s.underrunEvents - this.lastUnderruns, durationMs: s.underrunDurationS * 1000 } }, false);
    }
    if (Number.isFinite(s.underrunEvents)) this.lastUnderruns = s.underrunEvents;
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
