import { afterAll, beforeAll, describe, expect, inject, it } from 'vitest';
import { mkdirSync, readFileSync } from 'node:fs';
import { resolve } from 'node:path';
import type { Browser, Page } from 'playwright';
import { fakeMicArgs, focusedName, launch, tabTo, watchPage, writeStereoToneWav } from './helpers.ts';

const root = resolve(import.meta.dirname, '../..');
const WAV = resolve(root, 'test-results/browser/fake-mic-level-check.wav');

/** Keys the report starts with, in this order: the same as `ancbench check-limits --json` (issue 5). */
const FIXED_KEYS = ['ceilingDbfs', 'maxSamplePeakDbfs', 'maxTruePeakDbtp', 'limiterMode', 'passed', 'events'];
/** Ramp per signal kind, s: short, to keep the suite quick (tone and noise: about 2.5 s in all). */
const RAMP_S = 0.5;

async function download(page: Page, id: string): Promise<{ name: string; text: string }> {
  const wait = page.waitForEvent('download');
  // keyboard: the save links are reachable with Tab and open with Enter
  expect(await tabTo(page, id, 120)).toBe(true);
  await page.keyboard.press('Enter');
  const d = await wait;
  return { name: d.suggestedFilename(), text: readFileSync((await d.path())!, 'utf8') };
}

describe('live level-cap check (Chromium fake devices)', () => {
  let browser: Browser;
  let page: Page;
  let watch: Awaited<ReturnType<typeof watchPage>>;

  beforeAll(async () => {
    mkdirSync(resolve(root, 'test-results/browser'), { recursive: true });
    writeStereoToneWav(WAV, [[180, 0.2], [270, 0.05]], 2);
    browser = await launch(fakeMicArgs(WAV));
    page = await browser.newPage({ viewport: { width: 1600, height: 1100 }, acceptDownloads: true });
    watch = await watchPage(page);
    await page.goto(`${inject('baseUrl')}/demo/index.html`);
    await page.locator('input[name=source][value=live]').check();
    await page.locator('#start').click();
    await page.locator('ancb-cautions #ok').click();
    await page.locator('#start', { hasText: 'Stop' }).waitFor({ timeout: 15000 });
  });

  afterAll(async () => {
    await browser?.close();
  });

  it('should ask first, then ramp past the cap with no sample handed to the output above it', async () => {
    const capDbfs = await page.evaluate(() => document.querySelector('ancb-app')!.settings.ceilingDbfs);
    await page.locator('#lc-ramp').fill(String(RAMP_S));
    // from the keyboard: the run button, then the consent step (Escape first: nothing runs)
    expect(await tabTo(page, 'lc-run', 120)).toBe(true);
    await page.keyboard.press('Enter');
    const dialog = page.locator('ancb-level-check #lc-confirm');
    await dialog.waitFor({ state: 'visible' });
    expect(await focusedName(page)).toBe('lc-confirm-ok');
    await page.keyboard.press('Escape');
    await dialog.waitFor({ state: 'hidden' });
    expect(await page.evaluate(() => document.querySelector('ancb-app')!.levelRunning)).toBe(false);
    expect(await tabTo(page, 'lc-run', 120)).toBe(true);
    await page.keyboard.press('Enter');
    await dialog.waitFor({ state: 'visible' });
    await page.keyboard.press('Enter');
    await page.locator('#lc-progress').waitFor({ timeout: 5000 });
    await page.locator('#lc-verdict').waitFor({ timeout: 30000 });

    expect(await page.locator('#lc-verdict').getAttribute('data-passed')).toBe('true');
    const dd = (f: string, a = 'data-value'): Promise<number> => page.locator(`ancb-level-check dd[data-field="${f}"]`).getAttribute(a).then(Number);
    expect(await dd('ceiling')).toBeCloseTo(capDbfs, 3);
    // what the processor handed to the audio output: every sample counted, none above the cap
    const handedPeak = await dd('handed-peak');
    expect(await dd('handed-peak', 'data-over')).toBe(0);
    expect(handedPeak).toBeLessThanOrEqual(capDbfs + 1e-4);
    // the ramp did reach the cap (12 dB past it): the limiter held it there, it was not a quiet run
    expect(handedPeak).toBeGreaterThan(capDbfs - 0.1);
    expect(await dd('gr')).toBeGreaterThan(6);
    // tone and noise at 0.5 s ramp + 0.5 s hold + 0.25 s gap each, at the context's rate
    const rate = await page.evaluate(() => document.querySelector('ancb-app')!.session.sampleRate);
    expect(await dd('handed-peak', 'data-samples')).toBeGreaterThanOrEqual(Math.round(2 * (RAMP_S + 0.5 + 0.25) * rate));
    console.log(`level check at ${rate} Hz: cap ${capDbfs} dBFS, largest sample handed to the output ${handedPeak} dBFS, true peak ${await dd('true-peak')} dBTP, gain reduction up to ${await dd('gr')} dB`);
    await page.locator('ancb-level-check').screenshot({ path: resolve(root, 'test-results/browser/level-check-card.png') });
  });

  it('should save the report as JSON with the fixed keys, and as a readable page', async () => {
    const json = await download(page, 'lc-save-json');
    expect(json.name).toBe('level-check.json');
    // the tool never writes NaN or Infinity into JSON
    expect(json.text).not.toMatch(/\bNaN\b|Infinity/);
    const rep = JSON.parse(json.text) as Record<string, unknown>;
    expect(Object.keys(rep).slice(0, FIXED_KEYS.length)).toEqual(FIXED_KEYS);
    expect(rep.passed).toBe(true);
    expect(rep.limiterMode).toBe('true-peak-filter'); // the default output stage
    expect(rep.maxTruePeakDbtp as number).toBeLessThanOrEqual((rep.ceilingDbfs as number) + 0.5);
    expect(rep.maxSamplePeakDbfs as number).toBeLessThanOrEqual((rep.ceilingDbfs as number) + 1e-4);
    const handed = rep.handedToOutput as { samples: number; samplesOverCeiling: number; nonFinite: number };
    expect(handed.samplesOverCeiling).toBe(0);
    expect(handed.nonFinite).toBe(0);
    // every event in the engine's one shape; the limiter engaged as the ramp passed the cap
    const events = rep.events as { timeS: number; cause: string; action: string; values: Record<string, number> }[];
    expect(events.length).toBeGreaterThan(0);
    for (const e of events) expect(Object.keys(e).sort()).toEqual(['action', 'cause', 'timeS', 'values']);
    expect(events.map((e) => e.cause)).toContain('limiter-engaged');
    // the gain-reduction history reaches the largest gain reduction reported
    const h = rep.history as { timeS: number[]; gainReductionDb: (number | null)[] };
    expect(h.gainReductionDb.length).toBe(h.timeS.length);
    expect(h.timeS.length).toBeGreaterThan(100);
    const grMax = Math.max(...h.gainReductionDb.map((v) => v ?? 0));
    expect(grMax).toBeCloseTo(rep.maxGainReductionDb as number, 6);

    const page2 = await download(page, 'lc-save-html');
    expect(page2.name).toBe('level-check.html');
    expect(page2.text).toContain('Level-cap check');
    expect(page2.text).toContain('PASSED');
    // self-contained: the plotting library is inline, nothing is fetched
    expect(page2.text).not.toMatch(/<script[^>]+src=/);
    expect(page2.text).toContain('uPlot');
    expect(await watch.csp()).toEqual([]);
    expect(watch.errors).toEqual([]);
  });
});
