import { afterAll, beforeAll, describe, expect, inject, it } from 'vitest';
import { mkdirSync } from 'node:fs';
import { resolve } from 'node:path';
import type { Browser, Page } from 'playwright';
import { fakeMicArgs, launch, panelValue, watchPage, writeStereoToneWav } from './helpers.ts';

const root = resolve(import.meta.dirname, '../..');
const WAV = resolve(root, 'test-results/browser/fake-mic-stereo.wav');

/** The two channels of the fake stereo microphone: tone frequency and peak amplitude. */
const CHANNELS = [
  { hz: 220, amplitude: 0.25 }, // reference mic
  { hz: 330, amplitude: 0.1 }, // error mic
];
/** AES17: a sine of peak amplitude A reads 20·log10(A) dBFS RMS (full-scale sine = 0 dBFS). */
const expectedDbfs = (a: number): number => 20 * Math.log10(a);

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)]!;
}

async function openLive(page: Page): Promise<void> {
  await page.locator('input[name=source][value=live]').check();
  await page.locator('#start').click();
  // the hearing-safety cautions come first
  const ok = page.locator('ancb-cautions #ok');
  await ok.waitFor({ timeout: 5000 });
  await ok.click();
  await page.locator('#start', { hasText: 'Stop' }).waitFor({ timeout: 15000 });
}

describe('live microphones (Chromium fake capture device)', () => {
  let browser: Browser;
  let page: Page;
  let watch: Awaited<ReturnType<typeof watchPage>>;

  beforeAll(async () => {
    mkdirSync(resolve(root, 'test-results/browser'), { recursive: true });
    // 4 s of two steady tones, a whole number of periods of each
    writeStereoToneWav(WAV, [[CHANNELS[0]!.hz, CHANNELS[0]!.amplitude], [CHANNELS[1]!.hz, CHANNELS[1]!.amplitude]], 4);
    browser = await launch(fakeMicArgs(WAV));
    page = await browser.newPage({ viewport: { width: 1500, height: 1000 } });
    watch = await watchPage(page);
    await page.goto(`${inject('baseUrl')}/demo/index.html`);
    await openLive(page);
  });

  afterAll(async () => {
    await browser?.close();
  });

  it('should show the two channels at their known levels, within 1 dB', async () => {
    await page.waitForTimeout(1500);
    const ref: number[] = [];
    const err: number[] = [];
    for (let i = 0; i < 8; i++) {
      ref.push(await panelValue(page, 'ancb-meter[channel=ref]'));
      err.push(await panelValue(page, 'ancb-meter[channel=err]'));
      await page.waitForTimeout(150);
    }
    const rate = await page.evaluate(() => document.querySelector('ancb-app')!.session.sampleRate);
    console.log(`fake mic at ${rate} Hz: reference ${median(ref)} dBFS (expected ${expectedDbfs(0.25).toFixed(2)}), error ${median(err)} dBFS (expected ${expectedDbfs(0.1).toFixed(2)})`);
    expect(Math.abs(median(ref) - expectedDbfs(CHANNELS[0]!.amplitude))).toBeLessThanOrEqual(1);
    expect(Math.abs(median(err) - expectedDbfs(CHANNELS[1]!.amplitude))).toBeLessThanOrEqual(1);
    // two distinct channels arrived (the stereo check raised no warning)
    expect(await page.locator('.banner').count()).toBe(0);
    // control has not run: the spectrum legend says the control-on curve has no data rather than listing it
    const legend = () =>
      page.evaluate(() => {
        const plot = document.querySelector('ancb-app')!.shadowRoot!.querySelector('#plot-spectrum');
        return Array.from(plot?.shadowRoot?.querySelectorAll('.u-legend .u-label') ?? [], (e) => e.textContent ?? '');
      });
    await expect.poll(legend, { timeout: 10_000 }).toContain('control on (none recorded yet)');
    expect(await legend()).toContain('control off');
  });

  it('should run the probe, refuse a model the error mic did not hear, and load it only when asked', async () => {
    // probe level from −30 down to −40 dBFS peak, by keyboard
    await page.locator('#probe').focus();
    for (let i = 0; i < 10; i++) await page.keyboard.press('ArrowLeft');
    expect(await page.locator('#probe').inputValue()).toBe('-40');
    await page.locator('#identify').click();
    // the probe lasts 2 s (sweep + tail); the result lists the measured round trip
    await page.locator('[data-field=delay]').waitFor({ timeout: 20000 });
    // the fake device cannot hear the loudspeaker: no response, so no model and no control
    expect(await page.locator('.status').textContent()).toContain('too poor');
    // one diagnosis: no response, and no feedback figure measured against the missing response
    const diagnosis = [await page.locator('#diagnosis').textContent(), ...(await page.locator('#diagnosis-more li').allTextContents())].join(' ');
    expect(diagnosis).toContain('No response to the probe');
    expect(diagnosis).not.toContain('reaches the reference mic strongly');
    expect(await page.locator('[data-field=delay]').textContent()).toContain('not found');
    const control = page.locator('#control');
    expect(await control.isDisabled()).toBe(true);
    // the devices are listed now that access was granted
    expect(await page.locator('ancb-live-setup #dev option').count()).toBeGreaterThan(1);
    // "Load it anyway" first says what will happen; cancelling loads nothing
    await page.locator('#accept-model').click();
    const dialog = page.locator('ancb-live-setup #load-anyway');
    await dialog.waitFor({ state: 'visible', timeout: 5000 });
    expect(await dialog.textContent()).toContain('unverified');
    await page.locator('#cancel-load').click();
    expect(await control.isDisabled()).toBe(true);
    await page.locator('#accept-model').click();
    await page.locator('#confirm-load').click();
    await page.locator('.status', { hasText: 'Model loaded UNVERIFIED' }).waitFor({ timeout: 5000 });
    expect(await page.locator('#model-trust').getAttribute('data-trust')).toBe('unverified');
    expect(await control.isDisabled()).toBe(false);
    await control.click();
    // the control run is labelled: the state chip and the status say the model is unverified
    await page.locator('#control-state:not([data-state="off"])').waitFor({ timeout: 5000 });
    expect(await page.locator('#control-state').textContent()).toContain('model unverified');
    expect(await page.locator('.status').textContent()).toContain('UNVERIFIED');
    await page.waitForTimeout(4000);
    // no acoustic loop: no attenuation figure is shown as measured, and the panel says why
    for (const id of ['#att-now', '#att-avg']) {
      expect(await panelValue(page, id)).toBeNaN();
      expect(await page.locator(id).getAttribute('data-kind')).toBe('none');
    }
    expect(await page.locator('[data-kind="measured"]').count()).toBe(0);
    expect(await page.locator('#att-basis').textContent()).toContain('unverified');
    expect(await page.locator('#model-trust').getAttribute('data-trust')).toBe('unverified');
    // the output never exceeds the cap whatever the model
    const { outPeak, capDb } = await page.evaluate(() => {
      const d = document.querySelector('ancb-app')!.display;
      return { outPeak: d.outPeakDb, capDb: d.ceilingDb };
    });
    expect(capDb).toBeLessThanOrEqual(0);
    expect(Number.isNaN(outPeak) || outPeak <= capDb + 1e-6).toBe(true);
    await page.screenshot({ path: resolve(root, 'test-results/browser/panel-live-fake-mic.png'), fullPage: true });
    await control.click();
    await page.locator('#control-state[data-state="off"]').waitFor({ timeout: 5000 });
    // no "input connected again" at the start of a session: the input was never lost
    expect(await page.locator('ancb-events li[data-cause="input-restored"]').count()).toBe(0);
    expect(await watch.csp()).toEqual([]);
    expect(watch.errors).toEqual([]);
  });
});
