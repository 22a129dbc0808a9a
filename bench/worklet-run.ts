/**
 * `npm run bench -- --worklet`: the engine in a real-time AudioWorklet of headless Chromium (the
 * browser the browser tests use: ANCBENCH_CHROMIUM or /usr/bin/chromium). For each variant the page
 * runs an AudioContext at 48 kHz for the given time; the processor reports the share of the render
 * budget its `process` calls took, and Chromium's AudioContext.playbackStats (an experimental API,
 * enabled with a Blink feature flag) the underruns of the audio output.
 */
import http from 'node:http';
import type { AddressInfo } from 'node:net';
import { fileURLToPath } from 'node:url';
import { dirname, join } from 'node:path';
import { BLOCK, SAMPLE_RATE, type Variant } from './bench-engine.ts';

export interface WorkletResult {
  variant: string;
  taps: number;
  modelTaps: number;
  seconds: number;
  /** Mean wall time of one process call over the render quantum's duration. */
  renderBudgetShare: number;
  microsecondsPerQuantum: number;
  quanta: number;
  underrunEvents: number | null;
  underrunDurationS: number | null;
  host: string;
}

const here = dirname(fileURLToPath(import.meta.url));

/** Bundle the processor and its imports into one ES module (vite, the project's bundler). */
async function bundleProcessor(): Promise<string> {
  const { build } = await import('vite');
  const result = await build({
    configFile: false,
    logLevel: 'silent',
    root: join(here, '..'),
    build: {
      write: false,
      minify: false,
      lib: { entry: join(here, 'worklet-processor.ts'), formats: ['es'], fileName: 'worklet-processor' },
    },
  });
  const outputs = Array.isArray(result) ? result : [result];
  for (const o of outputs) {
    if ('output' in o) {
      const chunk = o.output.find((c) => c.type === 'chunk');
      if (chunk && 'code' in chunk) return chunk.code;
    }
  }
  throw new Error('bundling bench/worklet-processor.ts produced no code');
}

const PAGE = `<!doctype html><html><head><meta charset="utf-8"><title>ancbench worklet bench</title></head><body>
<script type="module">
window.runBench = async (opts) => {
  const ctx = new AudioContext({ sampleRate: ${SAMPLE_RATE}, latencyHint: 'interactive' });
  await ctx.audioWorklet.addModule('/processor.js');
  const node = new AudioWorkletNode(ctx, 'ancbench-engine-bench', { numberOfInputs: 0, numberOfOutputs: 1, outputChannelCount: [1], processorOptions: opts });
  let last = null, host = null, first = null;
  node.port.onmessage = (e) => {
    if (e.data.type === 'ready') host = e.data.host;
    if (e.data.type === 'totals') { if (!first) first = e.data; last = e.data; }
  };
  node.connect(ctx.destination);
  await ctx.resume();
  const s0 = ctx.playbackStats ? { ev: ctx.playbackStats.underrunEvents, dur: ctx.playbackStats.underrunDuration } : null;
  await new Promise((r) => setTimeout(r, opts.seconds * 1000));
  const s1 = ctx.playbackStats ? { ev: ctx.playbackStats.underrunEvents, dur: ctx.playbackStats.underrunDuration } : null;
  node.disconnect();
  await ctx.close();
  return { first, last, host, underruns: s0 && s1 ? { events: s1.ev - s0.ev, duration: s1.dur - s0.dur } : null };
};
</script></body></html>`;

export async function runWorkletBench(variants: Variant[], sizes: [number, number][], seconds: number, log: (s: string) => void): Promise<WorkletResult[]> {
  const code = await bundleProcessor();
  const server = http.createServer((req, res) => {
    if (req.url === '/processor.js') {
      res.writeHead(200, { 'Content-Type': 'text/javascript' });
      res.end(code);
    } else {
      res.writeHead(200, { 'Content-Type': 'text/html' });
      res.end(PAGE);
    }
  });
  await new Promise<void>((r) => server.listen(0, '127.0.0.1', () => r()));
  const url = `http://127.0.0.1:${(server.address() as AddressInfo).port}/`;
  const { chromium } = await import('playwright');
  const browser = await chromium.launch({
    executablePath: process.env.ANCBENCH_CHROMIUM || '/usr/bin/chromium',
    headless: true,
    args: ['--no-sandbox', '--disable-gpu', '--autoplay-policy=no-user-gesture-required', '--enable-blink-features=AudioContextPlaybackStats'],
  });
  const results: WorkletResult[] = [];
  try {
    for (const [L, M] of sizes) {
      for (const v of variants) {
        const page = await browser.newPage();
        await page.goto(url);
        const reportEvery = Math.round(SAMPLE_RATE / BLOCK); // about once a second
        log(`  worklet: ${v.name} at (${L}, ${M}) for ${seconds} s ...`);
        type PageResult = { first: { quanta: number; busyMs: number; quantum: number } | null; last: { quanta: number; busyMs: number; quantum: number } | null; host: string | null; underruns: { events: number; duration: number } | null };
        const r = (await page.evaluate(
          (o) => (window as unknown as { runBench(o: unknown): Promise<unknown> }).runBench(o),
          { variant: v.name, taps: L, modelTaps: M, reportEvery, seconds },
        )) as PageResult;
        await page.close();
        if (!r.first || !r.last || r.last.quanta === r.first.quanta) throw new Error(`the worklet reported no render quanta for ${v.name} at (${L}, ${M})`);
        // the first report (one second in) is left out: it holds the JIT's warm-up
        const quanta = r.last.quanta - r.first.quanta;
        const busyMs = r.last.busyMs - r.first.busyMs;
        const quantumMs = (1000 * r.last.quantum) / SAMPLE_RATE;
        results.push({
          variant: v.name,
          taps: L,
          modelTaps: M,
          seconds,
          renderBudgetShare: busyMs / quanta / quantumMs,
          microsecondsPerQuantum: (1000 * busyMs) / quanta,
          quanta,
          underrunEvents: r.underruns ? r.underruns.events : null,
          underrunDurationS: r.underruns ? r.underruns.duration : null,
          host: r.host ?? 'unknown',
        });
      }
    }
  } finally {
    await browser.close();
    await new Promise<void>((r) => server.close(() => r()));
  }
  return results;
}
