/** Shared pieces of the browser tests: launching Debian's Chromium headless with the flags that work here. */
import { chromium, type Browser, type LaunchOptions } from 'playwright';

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
