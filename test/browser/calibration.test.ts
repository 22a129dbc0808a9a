import { afterAll, beforeAll, describe, expect, inject, it } from 'vitest';
import { mkdirSync } from 'node:fs';
import { resolve } from 'node:path';
import type { Browser, Page } from 'playwright';
import { ceilingDbfsForPeakSpl, createOutputCalibration, dbfsToDbSpl } from '../../src/engine/calibration.ts';
import { fakeMicArgs, launch, watchPage, writeStereoToneWav } from './helpers.ts';

const root = resolve(import.meta.dirname, '../..');
const WAV = resolve(root, 'test-results/browser/fake-mic-calibration.wav');

/** Fake stereo microphone: reference 220 Hz at 0.25 peak, error 330 Hz at 0.1 peak (−20 dBFS by AES17). */
const ERR_HZ = 330;
const ERR_AMPLITUDE = 0.1;

/**
 * Readings a user would enter: tone frequency, nominal level (dBFS) and the meter's reading (dB SPL).
 * Invented numbers, uneven across frequency as a small loudspeaker's are.
 */
const READINGS = [
  { hz: 1000, dbfs: -36, spl: 78.5 },
  { hz: 125, dbfs: -30, spl: 65.2 },
  { hz: 250, dbfs: -30, spl: 72.0 },
];
const SPL_CAP = 90;

/** 20·log10(√2): a sine's peak level over its RMS level (textbook crest factor of a sine). */
const SINE_PEAK_OVER_RMS_DB = 20 * Math.log10(Math.SQRT2);

/** Every text of <ancb-app>, through all shadow roots (what a reader of the panel sees). */
function panelText(page: Page): Promise<string> {
  return page.evaluate(() => {
    const out: string[] = [];
    const walk = (n: Node): void => {
      if (n.nodeType === Node.TEXT_NODE) out.push(n.textContent ?? '');
      const el = n as Element;
      if (el.shadowRoot) walk(el.shadowRoot);
      for (const c of Array.from(n.childNodes)) walk(c);
    };
    walk(document.querySelector('ancb-app')!);
    return out.join(' ');
  });
}

/** A number next to "dB SPL" (e.g. "78.5 dB SPL", "≤ 71.2 dB SPL"). */
const SPL_FIGURE = /\d\s*dB SPL/;

async function openLive(page: Page): Promise<void> {
  await page.locator('input[name=source][value=live]').check();
  await page.locator('#start').click();
  await page.locator('ancb-cautions #ok').click();
  await page.locator('#start', { hasText: 'Stop' }).waitFor({ timeout: 15000 });
}

async function takeReading(page: Page, r: { hz: number; dbfs: number; spl: number }): Promise<void> {
  await page.locator('#tone-hz').fill(String(r.hz));
  await page.locator('#tone-dbfs').fill(String(r.dbfs));
  await page.locator('#tone-play').click();
  // the confirm step names the tone; nothing plays before it
  const dialog = page.locator('ancb-calibration #tone-confirm');
  await dialog.waitFor({ state: 'visible' });
  expect(await dialog.textContent()).toContain(`${r.dbfs}`.replace('-', '−'));
  await page.locator('#tone-confirm-ok').click();
  await page.locator('#spl-reading').waitFor();
  // let the tone reach its steady level (engine fade-out, ramp, 50 ms fade-in)
  await page.waitForTimeout(400);
  await page.locator('#spl-reading').fill(String(r.spl));
  await page.locator('#tone-save').click();
  await page.locator(`#cal-table tr[data-hz="${r.hz}"]`).waitFor({ timeout: 5000 });
}

function cell(page: Page, hz: number, field: string): Promise<number> {
  return page.locator(`#cal-table tr[data-hz="${hz}"] td[data-field="${field}"]`).getAttribute('data-value').then((v) => Number(v));
}

describe('calibration in the panel (Chromium fake devices)', () => {
  let browser: Browser;
  let page: Page;
  let watch: Awaited<ReturnType<typeof watchPage>>;

  beforeAll(async () => {
    mkdirSync(resolve(root, 'test-results/browser'), { recursive: true });
    writeStereoToneWav(WAV, [[220, 0.25], [ERR_HZ, ERR_AMPLITUDE]], 4);
    browser = await launch(fakeMicArgs(WAV));
    page = await browser.newPage({ viewport: { width: 1600, height: 1100 } });
    watch = await watchPage(page);
    await page.goto(`${inject('baseUrl')}/demo/index.html`);
    await openLive(page);
  });

  afterAll(async () => {
    await browser?.close();
  });

  it('should show no dB SPL figure anywhere without a calibration, and say that SPL is unknown', async () => {
    await page.waitForTimeout(800);
    const text = await panelText(page);
    expect(text).not.toMatch(SPL_FIGURE);
    expect(text).toContain('dB SPL: not calibrated');
    expect(await page.locator('#no-output-cal').textContent()).toContain('SPL at the ear position is unknown');
    expect(await page.locator('#no-mic-cal').count()).toBe(1);
    for (const ch of ['ref', 'err', 'out']) expect(await page.locator(`ancb-meter[channel=${ch}]`).getAttribute('data-spl')).toBeNull();
  });

  it('should show the sensitivities, range and SPL cap that src/engine/calibration.ts computes from the readings', async () => {
    for (const r of READINGS) await takeReading(page, r);
    // what was stored: the levels the processor measured at its output, not the nominal ones
    const stored = await page.evaluate(() => document.querySelector('ancb-app')!.outputCal!.points);
    expect(stored.map((p) => p.hz)).toEqual([125, 250, 1000]);
    for (const p of stored) {
      const r = READINGS.find((x) => x.hz === p.hz)!;
      // AES17: a sine of peak 10^(L/20) reads L dBFS; the 20 Hz speaker high-pass changes 125 Hz by < 0.01 dB
      expect(Math.abs(p.dbfs - r.dbfs)).toBeLessThan(0.05);
      expect(p.measuredDbSpl).toBe(r.spl);
    }
    const cal = createOutputCalibration(stored);
    for (const p of cal.points) {
      expect(await cell(page, p.hz, 'sensitivity')).toBeCloseTo(p.sensitivityDbSpl, 3);
      // and the definition itself: sensitivity = SPL read − dBFS handed to the output
      expect(await cell(page, p.hz, 'sensitivity')).toBeCloseTo(p.measuredDbSpl - p.dbfs, 3);
    }
    const range = page.locator('#cal-range');
    expect(Number(await range.getAttribute('data-min'))).toBe(125);
    expect(Number(await range.getAttribute('data-max'))).toBe(1000);

    // SPL cap: the stricter cap applies, using the highest sensitivity, peak-based
    await page.locator('#spl-cap').fill(String(SPL_CAP));
    await page.locator('#spl-cap-apply').click();
    await page.locator('#spl-ceiling-dbfs').waitFor();
    const rule = ceilingDbfsForPeakSpl(cal, SPL_CAP);
    const maxS = Math.max(...cal.points.map((p) => p.sensitivityDbSpl));
    const shown = Number(await page.locator('#spl-ceiling-dbfs').getAttribute('data-value'));
    expect(shown).toBeCloseTo(rule.ceilingDbfs, 3);
    expect(shown).toBeCloseTo(SPL_CAP - maxS - SINE_PEAK_OVER_RMS_DB, 3);
    const dbfsCap = await page.evaluate(() => document.querySelector('ancb-app')!.settings.ceilingDbfs);
    const effective = Math.min(dbfsCap, rule.ceilingDbfs);
    expect(Number(await page.locator('#effective-cap').getAttribute('data-value'))).toBeCloseTo(effective, 3);
    expect(await page.locator('#effective-cap').getAttribute('data-limited-by')).toBe(shown < dbfsCap ? 'spl' : 'dbfs');
    // the engine runs with it: the meter frames carry the limiter's ceiling
    await expect.poll(() => page.evaluate(() => document.querySelector('ancb-app')!.display.ceilingDb), { timeout: 3000 }).toBeCloseTo(effective, 2);
    // peak SPL the applied cap allows at each reading's frequency
    for (const p of cal.points) {
      const expected = dbfsToDbSpl(cal, effective, p.hz).value! + SINE_PEAK_OVER_RMS_DB;
      expect(await cell(page, p.hz, 'cap-spl')).toBeCloseTo(expected, 3);
      expect(expected).toBeLessThanOrEqual(SPL_CAP + 1e-9);
    }
    // the cap line shows the cap in both units, with the range
    const capLine = (await page.locator('#true-peak').textContent()) ?? '';
    expect(capLine).toMatch(/dB SPL peak at the ear \(125 Hz … 1\.00 kHz\)/);
    await page.screenshot({ path: resolve(root, 'test-results/browser/panel-calibration.png'), fullPage: true });
  });

  it('should calibrate the error mic from a known level and show it in dB SPL on that meter only', async () => {
    // the fake error mic plays a steady 330 Hz tone of peak 0.1: call it 94 dB SPL (as a calibrator would be)
    await page.locator('#mic-known').fill('94');
    await page.locator('#mic-hz').fill(String(ERR_HZ));
    await page.locator('#mic-from').fill('100');
    await page.locator('#mic-to').fill('2000');
    await page.locator('#mic-measure').click();
    await page.locator('#mic-sensitivity').waitFor({ timeout: 10000 });
    // AES17: peak 0.1 reads −20 dBFS, so 0 dBFS is 94 + 20 = 114 dB SPL (the fake device's resampling: within 0.3 dB)
    const sens = Number(await page.locator('#mic-sensitivity').getAttribute('data-value'));
    expect(Math.abs(sens - (94 - 20 * Math.log10(ERR_AMPLITUDE)))).toBeLessThan(0.3);
    await expect.poll(async () => Number(await page.locator('ancb-meter[channel=err]').getAttribute('data-spl')), { timeout: 3000 }).toBeGreaterThan(93.5);
    expect(Number(await page.locator('ancb-meter[channel=err]').getAttribute('data-spl'))).toBeLessThan(94.5);
    // the reference mic was not calibrated: still no SPL there
    expect(await page.locator('ancb-meter[channel=ref]').getAttribute('data-spl')).toBeNull();
    expect(await page.locator('ancb-meter[channel=ref] .sub').textContent()).toContain('not calibrated');
  });

  it('should keep the calibration for the device across a reload, and play a tone from the keyboard', async () => {
    await page.reload();
    await page.locator('input[name=source][value=live]').check();
    await page.locator('#cal-table').waitFor();
    expect(await page.locator('#cal-table tbody tr').count()).toBe(READINGS.length);
    expect(Number(await page.locator('#spl-cap').inputValue())).toBe(SPL_CAP);
    await page.locator('#start').click();
    await page.locator('ancb-cautions #ok').click();
    await page.locator('#start', { hasText: 'Stop' }).waitFor({ timeout: 15000 });
    // a fourth reading by keyboard alone: Enter on the button, Enter on the confirm step
    await page.locator('#tone-hz').focus();
    await page.keyboard.press('Control+A');
    await page.keyboard.type('500');
    await page.keyboard.press('Tab');
    await page.keyboard.press('Control+A');
    await page.keyboard.type('-40');
    await page.keyboard.press('Tab');
    await page.keyboard.press('Enter');
    await page.locator('ancb-calibration #tone-confirm').waitFor({ state: 'visible' });
    await page.keyboard.press('Enter');
    await page.locator('#spl-reading').waitFor();
    // while the tone plays the output meter reads it in dB SPL through the calibration (a bound over the range)
    await page.waitForTimeout(600);
    const outDb = await page.evaluate(() => document.querySelector('ancb-app')!.display.outDb);
    expect(Math.abs(outDb - -40)).toBeLessThan(0.5);
    const spl = Number(await page.locator('ancb-meter[channel=out]').getAttribute('data-spl'));
    const cal = createOutputCalibration(await page.evaluate(() => document.querySelector('ancb-app')!.outputCal!.points));
    const maxS = Math.max(...cal.points.map((p) => p.sensitivityDbSpl));
    expect(Math.abs(spl - (outDb + maxS))).toBeLessThan(0.3);
    await page.locator('#spl-reading').focus();
    await page.keyboard.type('69.5');
    await page.keyboard.press('Tab');
    await page.keyboard.press('Enter');
    await page.locator('#cal-table tr[data-hz="500"]').waitFor({ timeout: 5000 });
    expect(await cell(page, 500, 'sensitivity')).toBeCloseTo(69.5 - (await cell(page, 500, 'dbfs')), 3);
    await page.locator('ancb-calibration').screenshot({ path: resolve(root, 'test-results/browser/calibration-card.png') });
    expect(await watch.csp()).toEqual([]);
    expect(watch.errors).toEqual([]);
  });
});
