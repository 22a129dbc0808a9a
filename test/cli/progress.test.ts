// The long-run notice: a run seen (from the rate so far) to need more than LONG_RUN_S says so once, near
// its start, with the time left; a short one says nothing.
import { describe, expect, it } from 'vitest';
import { LONG_RUN_S, progressBar } from '../../src/cli/progress.ts';

function clocked(): { now: () => number; set(ms: number): void } {
  let t = 0;
  return { now: () => t, set: (ms: number) => void (t = ms) };
}

describe('progressBar long-run notice', () => {
  it('should say once how long a long run will take, estimated from the rate so far', () => {
    const lines: string[] = [];
    const clock = clocked();
    const p = progressBar('simulating', { bar: false, now: clock.now, write: (l) => lines.push(l) });
    clock.set(1000);
    p.update(0.001); // too early to estimate
    expect(lines).toEqual([]);
    clock.set(3000);
    p.update(0.01); // 1 % in 3 s: 300 s in all, 297 s left
    clock.set(4000);
    p.update(0.02);
    p.stop();
    expect(lines).toHaveLength(1);
    expect(lines[0]).toBe('ancbench: simulating will take about 5 min more (estimated from the first 3 s; Ctrl-C stops it and leaves no files)\n');
    expect(300).toBeGreaterThan(LONG_RUN_S);
  });

  it('should say nothing for a run that ends within the limit', () => {
    const lines: string[] = [];
    const clock = clocked();
    const p = progressBar('analysing', { bar: false, now: clock.now, write: (l) => lines.push(l) });
    clock.set(2500);
    p.update(0.05); // 50 s in all
    clock.set(40000);
    p.update(0.8);
    p.stop();
    expect(lines).toEqual([]);
  });
});
