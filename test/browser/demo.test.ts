import { afterAll, beforeAll, describe, expect, inject, it } from 'vitest';
import { mkdirSync } from 'node:fs';
import { resolve } from 'node:path';
import type { Browser, Page } from 'playwright';
import { createServer, type ViteDevServer } from 'vite';
import { launch, panelValue, serveStatic, watchPage } from './helpers.ts';
import { BUILD_DIR } from './global-setup.ts';

const root = resolve(import.meta.dirname, '../..');
const ARTEFACTS = resolve(root, 'test-results/browser');

/** Our target for the demo tone (the simulator reaches about 46 dB on this scenario; 20 dB leaves room for a slow machine). */
const TARGET_DB = 20;

/** Start runs the simulated plant with control on (one press from opening the page to cancellation). */
async function startSimulation(page: Page): Promise<void> {
  await page.locator('#start').click();
  await page.locator('#start', { hasText: 'Stop' }).waitFor({ timeout: 15000 });
  await page.locator('#control-state[data-state="on"]').waitFor({ timeout: 5000 });
}

/** Wait until the panel's "attenuation now" exceeds the target; returns wall seconds and audio seconds it took. */
async function waitForAttenuation(page: Page, timeoutMs: number): Promise<{ wallS: number; reading: number }> {
  const t0 = Date.now();
  await page.waitForFunction(
    (target) => {
      const el = document.querySelector('ancb-app')?.shadowRoot?.querySelector<HTMLElement>('#att-now');
      return Number(el?.dataset.value ?? NaN) > target;
    },
    TARGET_DB,
    { timeout: timeoutMs, polling: 100 },
  );
  return { wallS: (Date.now() - t0) / 1000, reading: await panelValue(page, '#att-now') };
}

describe('demo page', () => {
  let browser: Browser;

  beforeAll(async () => {
    browser = await launch();
    mkdirSync(ARTEFACTS, { recursive: true });
  });

  afterAll(async () => {
    await browser?.close();
  });

  describe('from the production build, served with COOP/COEP', () => {
    it('should open on the hum scenario and show more than 20 dB of attenuation within 30 s', async () => {
      const page = await browser.newPage({ viewport: { width: 1600, height: 1000 } });
      const watch = await watchPage(page);
      await page.goto(`${inject('baseUrl')}/demo/index.html`);
      await expect.poll(() => page.locator('#scenario').inputValue()).toBe('workshop-extractor-hum');
      await startSimulation(page);
      const r = await waitForAttenuation(page, 30000);
      console.log(`demo: attenuation ${r.reading} dB after ${r.wallS.toFixed(1)} s of wall time`);
      // let the plots fill in, then keep a picture of the panel as a test artefact
      await page.waitForTimeout(2500);
      await page.screenshot({ path: resolve(ARTEFACTS, 'panel-simulated.png'), fullPage: true });
      expect(await page.locator('footer').textContent()).toContain('meters via shared memory');
      // the meters are live: the error mic reads far below the reference mic
      const ref = await panelValue(page, 'ancb-meter[channel=ref]');
      const err = await panelValue(page, 'ancb-meter[channel=err]');
      expect(ref - err).toBeGreaterThan(TARGET_DB);
      expect(await watch.csp()).toEqual([]);
      expect(watch.errors).toEqual([]);
      await page.close();
    });
  });

  describe('from the same files on a static server without COOP/COEP', () => {
    it('should fall back to posted meter messages and still reach the target', async () => {
      const server = await serveStatic(BUILD_DIR);
      try {
        const page = await browser.newPage({ viewport: { width: 1400, height: 900 } });
        const watch = await watchPage(page);
        await page.goto(`${server.url}/demo/index.html`);
        expect(await page.evaluate(() => globalThis.crossOriginIsolated)).toBe(false);
        await startSimulation(page);
        await waitForAttenuation(page, 30000);
        expect(await page.locator('footer').textContent()).toContain('meters via messages');
        expect(await watch.csp()).toEqual([]);
        expect(watch.errors).toEqual([]);
        await page.close();
      } finally {
        await server.close();
      }
    });
  });

  describe('from the vite dev server (what npm start serves)', () => {
    let dev: ViteDevServer | null = null;
    afterAll(async () => {
      await dev?.close();
    });

    it('should run the simulated plant with shared-memory meters', async () => {
      dev = await createServer({ configFile: resolve(root, 'vite.config.ts'), logLevel: 'warn', server: { port: 0, host: '127.0.0.1', hmr: false } });
      await dev.listen();
      const url = dev.resolvedUrls?.local[0];
      expect(url).toBeTruthy();
      const page = await browser.newPage({ viewport: { width: 1400, height: 900 } });
      const watch = await watchPage(page);
      await page.goto(url!);
      await startSimulation(page);
      await waitForAttenuation(page, 45000);
      expect(await page.locator('footer').textContent()).toContain('meters via shared memory');
      expect(await watch.csp()).toEqual([]);
      await page.close();
    });
  });
});
