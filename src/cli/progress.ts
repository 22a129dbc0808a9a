/**
 * Progress for long runs, on stderr: a bar with the estimated time left when stderr is a terminal, and,
 * whatever stderr is, one line as soon as a run is seen to need more than LONG_RUN_S in all (estimated
 * from the first seconds of work: the rate so far times what is left), so a long run says so near its start.
 */
import cliProgress from 'cli-progress';

/** A run expected to take longer than this (s) says so once, near its start. */
export const LONG_RUN_S = 180;
/** Seconds of work before the first estimate (earlier rates include start-up costs). */
const ESTIMATE_AFTER_S = 2;

export interface Progress {
  update(fraction: number): void;
  stop(): void;
}

export interface ProgressOptions {
  /** Draw the bar (default: when stderr is a terminal). */
  bar?: boolean;
  /** Where the long-run notice goes (default stderr). */
  write?: (line: string) => void;
  /** Clock in ms (tests). */
  now?: () => number;
}

function minutes(s: number): string {
  return s < 90 ? `${Math.round(s)} s` : s < 5400 ? `${Math.round(s / 60)} min` : `${(s / 3600).toFixed(1)} h`;
}

/** `enabledOrOptions`: a boolean draws the bar or not (the earlier signature), or the options. */
export function progressBar(label: string, enabledOrOptions: boolean | ProgressOptions = {}): Progress {
  const options: ProgressOptions = typeof enabledOrOptions === 'boolean' ? { bar: enabledOrOptions } : enabledOrOptions;
  const now = options.now ?? (() => performance.now());
  const write = options.write ?? ((line: string) => process.stderr.write(line));
  const start = now();
  let warned = false;
  const showBar = options.bar ?? Boolean(process.stderr.isTTY);
  const bar = showBar
    ? new cliProgress.SingleBar(
        { format: `${label} [{bar}] {percentage}% | {eta_formatted} left`, stream: process.stderr, hideCursor: true, clearOnComplete: true },
        cliProgress.Presets.shades_classic,
      )
    : null;
  bar?.start(100, 0);
  let shown = -1;
  return {
    update(f: number) {
      const pct = Math.round(f * 100);
      if (bar && pct !== shown) {
        shown = pct;
        bar.update(pct);
      }
      if (warned || !(f > 0)) return;
      const elapsed = (now() - start) / 1000;
      if (elapsed < ESTIMATE_AFTER_S) return;
      const totalS = elapsed / Math.min(1, f);
      warned = true;
      if (totalS > LONG_RUN_S) {
        const line = `ancbench: ${label} will take about ${minutes(totalS - elapsed)} more (estimated from the first ${minutes(elapsed)}; Ctrl-C stops it and leaves no files)\n`;
        if (bar) bar.stop();
        write(line);
        if (bar) bar.start(100, pct);
      }
    },
    stop() {
      bar?.stop();
    },
  };
}
