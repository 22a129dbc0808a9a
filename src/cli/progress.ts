/** A progress bar on stderr for long runs, shown only when stderr is a terminal. */
import cliProgress from 'cli-progress';

export interface Progress {
  update(fraction: number): void;
  stop(): void;
}

export function progressBar(label: string, enabled = Boolean(process.stderr.isTTY)): Progress {
  if (!enabled) return { update() {}, stop() {} };
  const bar = new cliProgress.SingleBar(
    { format: `${label} [{bar}] {percentage}% | {eta_formatted} left`, stream: process.stderr, hideCursor: true, clearOnComplete: true },
    cliProgress.Presets.shades_classic,
  );
  bar.start(100, 0);
  return {
    update(f: number) {
      bar.update(Math.round(f * 100));
    },
    stop() {
      bar.stop();
    },
  };
}
