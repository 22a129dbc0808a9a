import { afterAll, beforeAll, describe, expect, inject, it } from 'vitest';
import type { Browser, Page } from 'playwright';
import { Engine, type EngineMode } from '../../src/engine/engine.ts';
import type { ControllerConfig } from '../../src/engine/controller-factory.ts';
import { Random } from '../../src/dsp/random.ts';
import { launch } from './helpers.ts';
import type { RenderRequest, RenderResult } from './harness/harness.ts';

/** Reference and error signals: a tone plus noise, and a filtered, delayed copy plus sensor noise (open loop). */
function signals(n: number, fs: number, seed: number): { ref: Float32Array; err: Float32Array } {
  const rng = new Random(seed);
  const ref = new Float32Array(n);
  const err = new Float32Array(n);
  for (let i = 0; i < n; i++) ref[i] = 0.3 * Math.sin((2 * Math.PI * 200 * i) / fs) + 0.05 * rng.gaussian();
  for (let i = 0; i < n; i++) err[i] = 0.5 * (ref[i - 40] ?? 0) - 0.2 * (ref[i - 41] ?? 0) + 0.001 * rng.gaussian();
  return { ref, err };
}

/** The engine in Node on the same input, in blocks of `block` samples. */
function runEngine(ref: Float32Array, err: Float32Array, controller: ControllerConfig, model: Float32Array, ceilingDbfs: number, startMode: EngineMode, block: number): Float32Array {
  const fs = 48000;
  const engine = new Engine({ sampleRate: fs, maxBlockSize: block, controller, secondaryPathModel: model, ceilingDbfs, startMode });
  const out = new Float32Array(ref.length);
  const r = new Float32Array(block);
  const e = new Float32Array(block);
  const o = new Float32Array(block);
  for (let t = 0; t < ref.length; t += block) {
    const m = Math.min(block, ref.length - t);
    r.set(ref.subarray(t, t + m));
    e.set(err.subarray(t, t + m));
    engine.process(r, e, o, m);
    out.set(o.subarray(0, m), t);
  }
  return out;
}

function maxAbsDiff(a: ArrayLike<number>, b: ArrayLike<number>): number {
  let d = 0;
  for (let i = 0; i < a.length; i++) d = Math.max(d, Math.abs(a[i]! - b[i]!));
  return d;
}

describe('live processor', () => {
  let browser: Browser;
  let page: Page;

  beforeAll(async () => {
    browser = await launch();
    page = await browser.newPage();
    await page.goto(`${inject('baseUrl')}/test/browser/harness/index.html`);
    await page.waitForFunction(() => 'harness' in globalThis);
  });

  afterAll(async () => {
    await browser?.close();
  });

  describe('with an OfflineAudioContext and buffer sources for reference and error', () => {
    it('should give the same output as the engine run in Node, sample for sample', async () => {
      const fs = 48000;
      const n = 24000; // 0.5 s; not a whole number of 128-sample quanta, so the last one is partial
      const { ref, err } = signals(n, fs, 7);
      const rng = new Random(11);
      const model = new Float32Array(48);
      for (let i = 40; i < 48; i++) model[i] = 0.4 * rng.gaussian();
      const controller: ControllerConfig = { algorithm: 'fxnlms', taps: 32, stepSize: 0.05 };
      const req: RenderRequest = {
        sampleRate: fs,
        ref: Array.from(ref),
        err: Array.from(err),
        controller,
        model: Array.from(model),
        ceilingDbfs: -6,
        startMode: 'control',
        connectInput: true,
        forcePosted: false,
      };
      const got = (await page.evaluate((r) => (globalThis as unknown as { harness: { renderLive(r: RenderRequest): Promise<RenderResult> } }).harness.renderLive(r), req)) as RenderResult;
      expect(got.processorError).toBe(false);
      expect(got.output.length).toBe(n);
      const expected = runEngine(ref, err, controller, model, -6, 'control', 128);
      // the same float32 arithmetic on the same blocks: equal to rounding (tolerance for a different JIT's fused ops)
      expect(maxAbsDiff(got.output, expected)).toBeLessThanOrEqual(1e-6);
      // the comparison is sensitive: the output is not silent, and another step size differs clearly
      let rms = 0;
      for (const v of expected) rms += v * v;
      expect(Math.sqrt(rms / n)).toBeGreaterThan(1e-3);
      const other = runEngine(ref, err, { ...controller, stepSize: 0.06 }, model, -6, 'control', 128);
      expect(maxAbsDiff(got.output, other)).toBeGreaterThan(1e-4);
      // meters arrived through the transport the page offers (shared memory: the page is cross-origin isolated)
      expect(got.crossOriginIsolated).toBe(true);
      expect(got.telemetry).toBe('shared');
      expect(got.frames).toBeGreaterThan(5);
    });
  });

  describe('with its input disconnected', () => {
    it('should output silence, keep running and report the missing input', async () => {
      const n = 4800;
      const req: RenderRequest = {
        sampleRate: 48000,
        ref: new Array(n).fill(0),
        err: new Array(n).fill(0),
        controller: { algorithm: 'fxnlms', taps: 16, stepSize: 0.1 },
        model: [0, 0, 0.5, 0.2],
        ceilingDbfs: -6,
        startMode: 'control',
        connectInput: false,
        forcePosted: false,
      };
      const got = (await page.evaluate((r) => (globalThis as unknown as { harness: { renderLive(r: RenderRequest): Promise<RenderResult> } }).harness.renderLive(r), req)) as RenderResult;
      expect(got.processorError).toBe(false);
      expect(got.nonFiniteOutput).toBe(0);
      expect(Math.max(...got.output.map(Math.abs))).toBe(0);
      expect(got.events.map((e) => e.cause)).toContain('input-missing');
      expect(got.lastFrame?.inputChannels).toBe(0);
    });
  });

  describe('with NaN and infinite samples in its input', () => {
    for (const forcePosted of [false, true]) {
      it(`should keep the output finite and report an event (${forcePosted ? 'posted' : 'shared'} telemetry)`, async () => {
        const fs = 48000;
        const n = 9600;
        const { ref, err } = signals(n, fs, 3);
        const r: (number | null)[] = Array.from(ref);
        const e: (number | null)[] = Array.from(err);
        // NaN in both channels for a stretch, and infinities (sent as huge values would be finite: use null → NaN, and ±1e39 → ±Infinity in float32)
        for (let i = 3000; i < 3300; i++) e[i] = null;
        for (let i = 5000; i < 5010; i++) r[i] = null;
        e[6000] = 1e39;
        r[6001] = -1e39;
        const req: RenderRequest = {
          sampleRate: fs,
          ref: r,
          err: e,
          controller: { algorithm: 'fxnlms', taps: 32, stepSize: 0.05 },
          model: [0, 0, 0, 0.5, -0.2],
          ceilingDbfs: -6,
          startMode: 'control',
          connectInput: true,
          forcePosted,
        };
        const got = (await page.evaluate((q) => (globalThis as unknown as { harness: { renderLive(r: RenderRequest): Promise<RenderResult> } }).harness.renderLive(q), req)) as RenderResult;
        expect(got.processorError).toBe(false);
        expect(got.telemetry).toBe(forcePosted ? 'posted' : 'shared');
        expect(got.nonFiniteOutput).toBe(0);
        const peak = Math.max(...got.output.map(Math.abs));
        expect(peak).toBeLessThanOrEqual(Math.pow(10, -6 / 20));
        // the controller kept working after the bad samples (output not stuck at silence)
        expect(Math.max(...got.output.slice(8000).map(Math.abs))).toBeGreaterThan(1e-3);
        const causes = got.events.map((ev) => ev.cause);
        expect(causes).toContain('non-finite');
        // source 0 = reference, 1 = error (events.ts NON_FINITE_SOURCES)
        expect(got.events.filter((ev) => ev.cause === 'non-finite').map((ev) => ev.values.source)).toEqual(expect.arrayContaining([0, 1]));
        expect(got.lastFrame?.nonFiniteIn).toBe(300 + 10 + 2);
      });
    }
  });
});
