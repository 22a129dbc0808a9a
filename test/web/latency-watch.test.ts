import { describe, expect, it } from 'vitest';
import { LATENCY_WINDOW, LatencyJumpDetector } from '../../src/web/latency-watch.ts';

/**
 * Chromium's reported output latency, read twice a second through the virtual room with nothing
 * changing (ms, measured here on a loaded machine): it wanders by several ms and once drops 30 ms.
 * A quantum at 48 kHz is 2.67 ms, so reading-to-reading comparison called every other reading a jump.
 * The detector compares window medians (a median ignores a minority of wild values: its breakdown
 * point is one half, Hampel, "The influence curve and its role in robust estimation", JASA 69, 1974)
 * against the spread of the older readings.
 */
const STEADY_MS = [84.3, 84.3, 78.3, 83.3, 81.3, 76.3, 83.3, 83.3, 89.3, 87.3, 88.3, 84.3, 87.3, 85.3, 81.3, 85.3, 84.3, 81.3, 83.3, 78.3, 82.3, 81.3, 78.3, 77.3, 78.3, 74.3, 75.3, 84.3, 73.3, 80.3, 54.3, 81.3, 76.3, 80.3];
const QUANTUM_S = 128 / 48000;

function feed(d: LatencyJumpDetector, ms: number[]): { previousS: number; currentS: number }[] {
  const out = [];
  for (const v of ms) {
    const j = d.push(v / 1000);
    if (j) out.push(j);
  }
  return out;
}

describe('LatencyJumpDetector', () => {
  describe('with jittery readings of a steady latency', () => {
    it('should report no jump', () => {
      expect(feed(new LatencyJumpDetector(QUANTUM_S), STEADY_MS)).toEqual([]);
    });
  });

  describe('with a step of 45 ms (a larger output buffer)', () => {
    it('should report one jump, from about the old level to about the new one, within a window', () => {
      const d = new LatencyJumpDetector(QUANTUM_S);
      const before = STEADY_MS.slice(0, 12);
      const after = STEADY_MS.slice(12, 24).map((v) => v + 45);
      expect(feed(d, before)).toEqual([]);
      const jumps: number[] = [];
      after.forEach((v, i) => {
        if (d.push(v / 1000)) jumps.push(i);
      });
      expect(jumps).toHaveLength(1);
      expect(jumps[0]!).toBeLessThan(LATENCY_WINDOW);
      expect(d.referenceS * 1000).toBeGreaterThan(120);
      expect(d.referenceS * 1000).toBeLessThan(135);
    });
  });

  describe('with exact readings', () => {
    it('should report a step just over one quantum and not one just under it', () => {
      const base = 0.05;
      const over = new LatencyJumpDetector(QUANTUM_S);
      const under = new LatencyJumpDetector(QUANTUM_S);
      const steps = (dv: number): number[] => [...Array(LATENCY_WINDOW).fill(base), ...Array(LATENCY_WINDOW).fill(base + dv)].map((v) => v * 1000);
      expect(feed(over, steps(1.1 * QUANTUM_S))).toHaveLength(1);
      expect(feed(under, steps(0.9 * QUANTUM_S))).toHaveLength(0);
    });
  });
});
