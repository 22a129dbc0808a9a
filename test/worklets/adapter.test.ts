import { describe, expect, it } from 'vitest';
import { ChunkSender, InputConditioner, Telemetry } from '../../worklets/adapter.ts';
import { Engine } from '../../src/engine/engine.ts';
import { M, createTelemetryBuffer, TelemetryReader, type AudioChunkMessage, type PortLike } from '../../src/protocol/messages.ts';

class FakePort implements PortLike {
  readonly posted: unknown[] = [];
  postMessage(message: unknown): void {
    this.posted.push(message);
  }
  close(): void {}
}

describe('InputConditioner', () => {
  describe('with NaN and infinite samples', () => {
    it('should replace them by silence and count them per channel', () => {
      const c = new InputConditioner();
      const ch0 = Float32Array.from([0.5, NaN, -0.25, Infinity]);
      const ch1 = Float32Array.from([-Infinity, 0.125, 0, 0]);
      const a = new Float32Array(4);
      const b = new Float32Array(4);
      expect(c.begin([ch0, ch1])).toBe(2);
      c.copy([ch0, ch1], 0, 0, a, 4);
      c.copy([ch0, ch1], 1, 0, b, 4);
      expect(Array.from(a)).toEqual([0.5, 0, -0.25, 0]);
      expect(Array.from(b)).toEqual([0, 0.125, 0, 0]);
      expect(Array.from(c.badLast)).toEqual([2, 1]);
      expect(c.badTotal).toBe(3);
    });
  });

  describe('with a disconnected input', () => {
    it('should read silence and report no channels', () => {
      const c = new InputConditioner();
      const dest = Float32Array.from([1, 1, 1]);
      expect(c.begin([])).toBe(0);
      expect(c.copy([], 1, 0, dest, 3)).toBe(false);
      expect(Array.from(dest)).toEqual([0, 0, 0]);
      // channels of length 0 (a disconnected input as Chromium delivers it) count as missing too
      expect(c.begin([new Float32Array(0), new Float32Array(0)])).toBe(0);
    });
  });
});

describe('Telemetry', () => {
  it('should average power over every block since the last frame, and reuse one posted payload', () => {
    const port = new FakePort();
    // 30 frames/s at 48 kHz: a frame every 1600 samples
    const t = new Telemetry(port, { displayRateHz: 30, chunkSamples: 0 }, 48000);
    t.addBlock(1000, 0.1, 0, 0, 0.5, 0, 0);
    expect(t.due).toBe(false);
    t.addBlock(600, 0.4, 0, 0, 0.9, 0, 0);
    expect(t.due).toBe(true);
    const engine = new Engine({ sampleRate: 48000, maxBlockSize: 128, controller: { algorithm: 'fxnlms', taps: 4, stepSize: 0.1 }, secondaryPathModel: Float32Array.of(1) });
    t.fillFromEngine(engine);
    // a length-weighted mean square, and the largest peak, over both blocks
    expect(t.frame[M.refPower]).toBeCloseTo((1000 * 0.1 + 600 * 0.4) / 1600, 12);
    expect(t.frame[M.refPeak]).toBe(0.9);
    t.publish();
    t.addBlock(1600, 0.2, 0, 0, 0.3, 0, 0);
    t.publish();
    expect(port.posted.length).toBe(2);
    // the same object each time (structured cloning copies it), carrying the latest frame
    expect(port.posted[0]).toBe(port.posted[1]);
  });

  it('should send frames and events through shared memory when given a buffer', () => {
    const port = new FakePort();
    const sab = createTelemetryBuffer();
    const reader = new TelemetryReader(sab);
    const t = new Telemetry(port, { displayRateHz: 30, chunkSamples: 0, sharedBuffer: sab }, 48000);
    t.frame[M.timeS] = 0.25;
    t.publish();
    t.event(0.3, 'input-missing', 'none', 0, NaN, NaN, false);
    const frames: number[] = [];
    const events: number[] = [];
    reader.poll(
      (f) => frames.push(f[M.timeS]!),
      (e) => events.push(e[0]!),
    );
    expect(frames).toEqual([0.25]);
    expect(events).toEqual([0.3]);
    expect(port.posted.length).toBe(0);
  });

  it('should report the largest step between consecutive output samples, across block edges', () => {
    const port = new FakePort();
    const t = new Telemetry(port, { displayRateHz: 30, chunkSamples: 0 }, 48000);
    const engine = new Engine({ sampleRate: 48000, maxBlockSize: 128, controller: { algorithm: 'fxnlms', taps: 4, stepSize: 0.1 }, secondaryPathModel: Float32Array.of(1) });
    // a sine of peak A at f steps by at most A·2·sin(π·f/fs) between samples (chord of the unit circle)
    const fs = 48000;
    const A = 0.5;
    const f = 120;
    const n = 128;
    const block = new Float32Array(n);
    for (let b = 0; b < 10; b++) {
      for (let i = 0; i < n; i++) block[i] = A * Math.sin((2 * Math.PI * f * (b * n + i)) / fs);
      t.addOutput(block, n);
    }
    t.fillFromEngine(engine);
    const bound = 2 * A * Math.sin((Math.PI * f) / fs);
    expect(t.frame[M.outMaxStep]!).toBeLessThanOrEqual(bound + 1e-7);
    expect(t.frame[M.outMaxStep]!).toBeGreaterThan(0.99 * bound);
    t.publish();
    // a jump at the edge between two blocks: the last sample of one and the first of the next
    const a = Float32Array.of(0.1, 0.2, 0.3);
    const c = Float32Array.of(-0.4, -0.4, -0.4);
    t.addOutput(a, 3);
    t.addOutput(c, 3);
    t.fillFromEngine(engine);
    expect(t.frame[M.outMaxStep]).toBeCloseTo(0.7, 6);
    // each frame starts afresh (publish clears it), but remembers the last sample for the next edge
    t.publish();
    t.addOutput(Float32Array.of(-0.4, -0.35), 2);
    t.fillFromEngine(engine);
    expect(t.frame[M.outMaxStep]).toBeCloseTo(0.05, 6);
  });

  it('should hold back repeats of a cause within a second, per slot', () => {
    const port = new FakePort();
    const t = new Telemetry(port, { displayRateHz: 30, chunkSamples: 0 }, 48000);
    t.event(1.0, 'non-finite', 'none', 0, 5, NaN, true, 1);
    t.event(1.2, 'non-finite', 'none', 0, 5, NaN, true, 1); // same channel: held back
    t.event(1.2, 'non-finite', 'none', 1, 5, NaN, true, 2); // other channel: sent
    t.event(2.1, 'non-finite', 'none', 0, 5, NaN, true, 1); // a second later: sent
    expect(port.posted.length).toBe(3);
  });
});

describe('ChunkSender', () => {
  it('should cut chunks across block boundaries and mark a chunk on only when every block was', () => {
    const s = new ChunkSender(256, 48000, false);
    const port = new FakePort();
    const chunks: { first: number; last: number; on: boolean }[] = [];
    port.postMessage = (m: unknown): void => {
      const c = m as AudioChunkMessage;
      chunks.push({ first: c.err[0]!, last: c.err[255]!, on: c.controlOn });
    };
    s.attach(port);
    const block = new Float32Array(100);
    for (let b = 0; b < 6; b++) {
      for (let i = 0; i < 100; i++) block[i] = b * 100 + i;
      s.push(block, null, block, 100, b >= 3);
    }
    // 600 samples → two full chunks: 0 … 255 (blocks 0–2, off) and 256 … 511 (blocks 2–5: block 2 was off)
    expect(chunks).toEqual([
      { first: 0, last: 255, on: false },
      { first: 256, last: 511, on: false },
    ]);
  });
});
