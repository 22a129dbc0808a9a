import { afterAll, beforeAll, describe, expect, inject, it } from 'vitest';
import type { Browser, Page } from 'playwright';
import { focusedName, launch, panelValue, tabTo } from './helpers.ts';

function settings(page: Page): Promise<{ algorithm: string; stepSize: number; ceilingDbfs: number; adaptation: boolean }> {
  return page.evaluate(() => {
    const s = document.querySelector('ancb-app')!.settings;
    return { algorithm: s.controller.algorithm, stepSize: s.controller.stepSize, ceilingDbfs: s.ceilingDbfs, adaptation: s.adaptation };
  });
}

describe('panel from the keyboard', () => {
  let browser: Browser;
  let page: Page;

  beforeAll(async () => {
    browser = await launch();
    page = await browser.newPage({ viewport: { width: 1500, height: 1000 } });
    await page.goto(`${inject('baseUrl')}/demo/index.html`);
    await page.locator('#scenario').waitFor();
  });

  afterAll(async () => {
    await browser?.close();
  });

  it('should reach every control with Tab', async () => {
    const seen = new Set<string>();
    await page.locator('body').focus();
    for (let i = 0; i < 60; i++) {
      await page.keyboard.press('Tab');
      seen.add(await focusedName(page));
    }
    const expected = ['source=sim', 'safety', 'theme', 'start', 'scenario', 'listen', 'src=on', 'alg', 'taps', 'mu-slider', 'mu', 'leak', 'cap-slider', 'cap', 'adapt', 'reset'];
    expect(expected.filter((n) => !seen.has(n))).toEqual([]);
  });

  it('should run the demo and change settings without a mouse', async () => {
    expect(await tabTo(page, 'start')).toBe(true);
    await page.keyboard.press('Enter');
    await page.locator('#start', { hasText: 'Stop' }).waitFor({ timeout: 15000 });
    // Stop keeps the focus's place in the tab order; Control follows it
    expect(await tabTo(page, 'control')).toBe(true);
    await page.keyboard.press('Space');
    await page.locator('#control[aria-pressed="true"]').waitFor({ timeout: 5000 });
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
