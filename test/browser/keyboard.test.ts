import { beforeAll, describe, expect, inject, it } from 'vitest';
import type { Page } from 'playwright';
import { focusedName, panelValue, tabTo, useDemoPage } from './helpers.ts';

function settings(page: Page): Promise<{ algorithm: string; stepSize: number; ceilingDbfs: number; adaptation: boolean }> {
  return page.evaluate(() => {
    const s = document.querySelector('ancb-app')!.settings;
    return { algorithm: s.controller.algorithm, stepSize: s.controller.stepSize, ceilingDbfs: s.ceilingDbfs, adaptation: s.adaptation };
  });
}

describe('panel from the keyboard', () => {
  const demo = useDemoPage();
  let page: Page;
  beforeAll(() => {
    page = demo.page;
  });

  it('should reach every control with Tab', async () => {
    const seen = new Set<string>();
    await page.locator('body').focus();
    for (let i = 0; i < 60; i++) {
      await page.keyboard.press('Tab');
      seen.add(await focusedName(page));
    }
    const expected = ['source=sim', 'safety', 'theme', 'start', 'scenario', 'listen', 'src=on', 'alg', 'taps', 'impl', 'mu-slider', 'mu', 'leak', 'cap-slider', 'cap', 'adapt', 'reset'];
    expect(expected.filter((n) => !seen.has(n))).toEqual([]);
  });

  it('should run the demo and change settings without a mouse', async () => {
    expect(await tabTo(page, 'start')).toBe(true);
    await page.keyboard.press('Enter');
    await page.locator('#start', { hasText: 'Stop' }).waitFor({ timeout: 15000 });
    // Start runs the plant with control on; the control button beside it turns control off and on again
    await page.locator('#control-state[data-state="on"]').waitFor({ timeout: 5000 });
    expect(await tabTo(page, 'control')).toBe(true);
    await page.keyboard.press('Space');
    await page.locator('#control-state[data-state="off"]').waitFor({ timeout: 5000 });
    await page.keyboard.press('Space');
    await page.locator('#control-state[data-state="on"]').waitFor({ timeout: 5000 });
    await expect.poll(() => panelValue(page, '#att-now'), { timeout: 30000, interval: 200 }).toBeGreaterThan(10);

    expect(await tabTo(page, 'mu')).toBe(true);
    await page.keyboard.press('Control+A');
    await page.keyboard.type('0.004');
    await page.keyboard.press('Enter');
    await expect.poll(async () => (await settings(page)).stepSize).toBe(0.004);

    const capBefore = (await settings(page)).ceilingDbfs;
    expect(await tabTo(page, 'cap-slider')).toBe(true);
    await page.keyboard.press('ArrowLeft');
    await expect.poll(async () => (await settings(page)).ceilingDbfs).toBe(capBefore - 0.5);

    expect(await tabTo(page, 'adapt')).toBe(true);
    await page.keyboard.press('Space');
    await expect.poll(async () => (await settings(page)).adaptation).toBe(false);

    expect(await tabTo(page, 'alg')).toBe(true);
    await page.keyboard.press('ArrowDown');
    await expect.poll(async () => (await settings(page)).algorithm).toBe('fxlms');

    expect(await tabTo(page, 'theme')).toBe(true);
    const before = await page.evaluate(() => document.documentElement.dataset.theme);
    await page.keyboard.press('Enter');
    expect(await page.evaluate(() => document.documentElement.dataset.theme)).not.toBe(before);
  });

  it('should show what runs the controller, and rebuild on the implementation chosen from the keyboard', async () => {
    const runsAs = page.locator('#runs-as');
    // automatic: Chromium runs WebAssembly SIMD, so the time-domain kernel in wasm (src/engine/implementation.ts)
    await expect.poll(() => runsAs.textContent(), { timeout: 5000 }).toMatch(/^time domain \(wasm SIMD, sample update\)$/);
    expect(await tabTo(page, 'impl')).toBe(true);
    // type-ahead: "f" picks the first frequency-domain option, the full constraint
    await page.keyboard.press('f');
    await expect.poll(() => runsAs.textContent(), { timeout: 10000 }).toMatch(/^frequency domain \(wasm SIMD spectral loops, full constraint, partition 128\)$/);
    const c = await page.evaluate(() => document.querySelector('ancb-app')!.settings.controller);
    expect(c).toMatchObject({ implementation: 'fd', fdConstraint: 'full', update: 'block' });
    expect(await page.locator('#start').textContent()).toContain('Stop');
  });

  it('should refuse a choice the platform cannot run, say why, and keep the engine running', async () => {
    // a platform without WebAssembly: the same build, its Content-Security-Policy without
    // 'wasm-unsafe-eval', so compiling the SIMD kernels is refused (src/dsp/wasm-module.ts)
    const noWasm = await page.context().browser()!.newPage({ viewport: { width: 1500, height: 1000 } });
    await noWasm.route('**/demo/index.html', async (route) => {
      const response = await route.fetch();
      const body = (await response.text()).replace(" 'wasm-unsafe-eval'", '');
      await route.fulfill({ response, body });
    });
    try {
      await noWasm.goto(`${inject('baseUrl')}/demo/index.html`);
      await noWasm.locator('#start').click();
      await noWasm.locator('#start', { hasText: 'Stop' }).waitFor({ timeout: 15000 });
      const runsAs = noWasm.locator('#runs-as');
      // automatic falls back to TypeScript (time or frequency domain, by the filter lengths), said openly
      await expect.poll(() => runsAs.textContent(), { timeout: 5000 }).toMatch(/\(TypeScript/);
      const before = await runsAs.textContent();
      const audioTime = (): Promise<number> => noWasm.evaluate(() => document.querySelector('ancb-app')!.display.timeS);
      await expect.poll(audioTime, { timeout: 5000 }).toBeGreaterThan(1);
      const t0 = await audioTime();
      await noWasm.locator('#impl').selectOption('wasm');
      const problem = noWasm.locator('ancb-controls .problem');
      await problem.filter({ hasText: 'WebAssembly SIMD' }).waitFor({ timeout: 5000 });
      expect(await problem.textContent()).toContain('controller.implementation "wasm"');
      // nothing changed behind the message: same engine, the choice it runs shown, the plant's clock ran on
      await expect.poll(() => noWasm.locator('#impl').inputValue()).toBe('auto');
      expect(await runsAs.textContent()).toBe(before);
      await noWasm.waitForTimeout(300);
      expect(await audioTime()).toBeGreaterThan(t0);
      expect(await noWasm.locator('#start').textContent()).toContain('Stop');
    } finally {
      await noWasm.close();
    }
  });

  it('should show the hearing-safety cautions before a live start, and honour Escape', async () => {
    expect(await tabTo(page, 'source=sim')).toBe(true);
    // arrow keys move within the radio group
    await page.keyboard.press('ArrowRight');
    await page.locator('ancb-live-setup').waitFor();
    expect(await tabTo(page, 'start')).toBe(true);
    await page.keyboard.press('Enter');
    const dialog = page.locator('ancb-cautions dialog');
    await dialog.waitFor({ state: 'visible' });
    // the confirm button has the focus inside the modal dialog
    expect(await focusedName(page)).toBe('ok');
    await page.keyboard.press('Escape');
    await dialog.waitFor({ state: 'hidden' });
    expect(await page.locator('#start').textContent()).toContain('Start');
    expect(await page.evaluate(() => document.querySelector('ancb-app')!.running)).toBe(false);
    // the cautions are also on a button of their own
    expect(await tabTo(page, 'safety')).toBe(true);
    await page.keyboard.press('Enter');
    await dialog.waitFor({ state: 'visible' });
    expect(await focusedName(page)).toBe('ok');
    await page.keyboard.press('Shift+Tab');
    expect(await focusedName(page)).toBe('cancel');
    await page.keyboard.press('Escape');
    await dialog.waitFor({ state: 'hidden' });
  });
});
