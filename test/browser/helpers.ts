/** Shared pieces of the browser tests: launching Debian's Chromium headless with the flags that work here. */
import { writeFileSync } from 'node:fs';
import { afterAll, beforeAll, inject } from 'vitest';
import { chromium, type Browser, type LaunchOptions, type Page } from 'playwright';
import wavefile from 'wavefile';

/** Debian's Chromium (scripts/ensure-browser.mjs makes sure it exists), or ANCBENCH_CHROMIUM. */
export const CHROMIUM = process.env.ANCBENCH_CHROMIUM || '/usr/bin/chromium';

/** Flags for a headless run as root with no network; autoplay allowed so contexts start without a click. */
export const BASE_ARGS = [
  '--no-sandbox',
  '--disable-gpu',
  '--disable-quic',
  '--no-first-run',
  '--disable-background-networking',
  '--disable-component-update',
  '--disable-sync',
  '--autoplay-policy=no-user-gesture-required',
];

/** Chromium's fake capture device, fed from a WAV file (absolute path). */
export function fakeMicArgs(wavPath: string): string[] {
  return ['--use-fake-ui-for-media-stream', '--use-fake-device-for-media-stream', `--use-file-for-fake-audio-capture=${wavPath}`];
}

export function launch(extraArgs: string[] = [], options: LaunchOptions = {}): Promise<Browser> {
  return chromium.launch({ executablePath: CHROMIUM, headless: true, args: [...BASE_ARGS, ...extraArgs], ...options });
}

/** Serve a directory as plain static files, with no COOP/COEP headers (a host that sends nothing special). */
export async function serveStatic(dir: string): Promise<{ url: string; close(): Promise<void> }> {
  const { createServer } = await import('node:http');
  const { readFile } = await import('node:fs/promises');
  const { extname, join, normalize } = await import('node:path');
  const types: Record<string, string> = { '.html': 'text/html', '.js': 'text/javascript', '.css': 'text/css', '.json': 'application/json', '.png': 'image/png' };
  const server = createServer((req, res) => {
    const path = normalize(decodeURIComponent(new URL(req.url ?? '/', 'http://x').pathname)).replace(/^(\.\.[/\\])+/, '');
    readFile(join(dir, path))
      .then((body) => {
        res.writeHead(200, { 'Content-Type': types[extname(path)] ?? 'application/octet-stream' });
        res.end(body);
      })
      .catch(() => {
        res.writeHead(404);
        res.end();
      });
  });
  await new Promise<void>((r) => server.listen(0, '127.0.0.1', () => r()));
  const a = server.address();
  const port = typeof a === 'object' && a ? a.port : 0;
  return { url: `http://127.0.0.1:${port}`, close: () => new Promise((r) => server.close(() => r())) };
}

/** Collects console errors and Content-Security-Policy violations of a page. */
export async function watchPage(page: import('playwright').Page): Promise<{ errors: string[]; csp: () => Promise<string[]> }> {
  const errors: string[] = [];
  page.on('console', (m) => {
    if (m.type() === 'error') errors.push(m.text());
  });
  page.on('pageerror', (e) => errors.push(e.message));
  await page.addInitScript(() => {
    const list: string[] = [];
    (globalThis as unknown as { __csp: string[] }).__csp = list;
    document.addEventListener('securitypolicyviolation', (e) => list.push(`${e.violatedDirective} ${e.blockedURI}`));
  });
  return { errors, csp: () => page.evaluate(() => (globalThis as unknown as { __csp: string[] }).__csp) };
}

/** A number the panel shows: data-value of an element inside <ancb-app>'s shadow root (NaN when empty). */
export function panelValue(page: import('playwright').Page, selector: string): Promise<number> {
  return page.evaluate((sel) => {
    const el = document.querySelector('ancb-app')?.shadowRoot?.querySelector<HTMLElement>(sel);
    const v = el?.dataset.value;
    return v ? Number(v) : NaN;
  }, selector);
}

/**
 * A stereo 16-bit WAV for the fake capture device: one steady sine per channel ([hz, peak amplitude]),
 * at 44.1 kHz (the device may deliver another rate; the context resamples). Choose frequencies with a
 * whole number of periods in `seconds`, so the device's loop is seamless.
 */
export function writeStereoToneWav(path: string, channels: [[number, number], [number, number]], seconds: number): void {
  const fs = 44100;
  const n = Math.round(seconds * fs);
  const data = channels.map(([hz, a]) => {
    const x = new Int16Array(n);
    for (let i = 0; i < n; i++) x[i] = Math.round(32767 * a * Math.sin((2 * Math.PI * hz * i) / fs));
    return x;
  });
  // wavefile is CommonJS: its exports object is the default import under Node's ESM loader
  const w = new (wavefile as unknown as typeof import('wavefile')).WaveFile();
  w.fromScratch(2, fs, '16', data);
  writeFileSync(path, w.toBuffer());
}

/** A name for the focused element, looking through shadow roots: its id, or name=value for radios. */
export function focusedName(page: Page): Promise<string> {
  return page.evaluate(() => {
    let el: Element | null = document.activeElement;
    while (el?.shadowRoot?.activeElement) el = el.shadowRoot.activeElement;
    if (!el || el === document.body) return '';
    const input = el as HTMLInputElement;
    if (input.type === 'radio') return `${input.name}=${input.value}`;
    return el.id || el.tagName.toLowerCase();
  });
}

/** Press Tab until `name` has focus (at most `limit` presses); returns whether it got there. */
export async function tabTo(page: Page, name: string, limit = 80): Promise<boolean> {
  for (let i = 0; i < limit; i++) {
    if ((await focusedName(page)) === name) return true;
    await page.keyboard.press('Tab');
  }
  return (await focusedName(page)) === name;
}

/**
 * The demo page from the build under test, opened once for a describe block: registers beforeAll and
 * afterAll, and returns a holder whose `page` is ready inside the tests.
 */
export function useDemoPage(viewport = { width: 1500, height: 1000 }): { page: Page } {
  const holder = { page: undefined as unknown as Page };
  let browser: Browser | undefined;
  beforeAll(async () => {
    browser = await launch();
    holder.page = await browser.newPage({ viewport });
    await holder.page.goto(`${inject('baseUrl')}/demo/index.html`);
    await holder.page.locator('#scenario').waitFor();
  });
  afterAll(async () => {
    await browser?.close();
  });
  return holder;
}
