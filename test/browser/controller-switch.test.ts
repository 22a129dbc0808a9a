import { beforeAll, describe, expect, it } from 'vitest';
import type { Page } from 'playwright';
import { panelValue, useDemoPage, watchPage } from './helpers.ts';

/**
 * Switching between broadband FxNLMS and the tone follower on the running simulated plant: the engine
 * crossfades to its standby controller (Engine.switchController) instead of restarting, so the
 * loudspeaker signal has no step. Measured by the worklet's click meter (outMaxStep: the largest
 * |y[i] − y[i−1]| of the output over each display frame, block edges included).
 *
 * Threshold: during and after the switch the largest sample-to-sample step may be at most
 * STEP_RATIO times the largest step of the converged control signal in the second before. For a
 * sine of peak A at f the step is at most A·2π·f/fs (the derivative bound of a sinusoid, common
 * practice); a crossfade between two such signals cannot exceed the larger of their steps by more
 * than |y₁ − y₂|·max|Δgain| (≈ A·π/(2·9600) for 200 ms at 48 kHz), while an abrupt hand-over from
 * the anti-noise to a controller that starts from zero steps by up to A: about 25 times the
 * slope of the 120 Hz hum (2π·120/48000 = 0.0157).
 */
const STEP_RATIO = 2;
/** No burst: the output peak after the switch may exceed the one before by at most this, dB. */
const BURST_DB = 1;

interface Frames {
  t: number[];
  step: number[];
  peak: number[];
}

function frames(page: Page): Promise<Frames> {
  return page.evaluate(() => {
    const d = document.querySelector('ancb-app')!.display;
    return { t: [...d.histT], step: [...d.histStep], peak: [...d.histOutPeak] };
  });
}

function maxIn(f: Frames, key: 'step' | 'peak', from: number, to: number): number {
  let m = 0;
  for (let i = 0; i < f.t.length; i++) if (f.t[i]! > from && f.t[i]! <= to && f[key][i]! > m) m = f[key][i]!;
  return m;
}

function audioTime(page: Page): Promise<number> {
  return page.evaluate(() => document.querySelector('ancb-app')!.display.timeS);
}

describe('controller switch on the simulated plant', () => {
  const demo = useDemoPage();
  let page: Page;
  beforeAll(() => {
    page = demo.page;
  });

  it('should crossfade between FxNLMS and the tone follower without restarting the plant or stepping the output', async () => {
    const watch = await watchPage(page);
    await page.locator('#start').click();
    await page.locator('#start', { hasText: 'Stop' }).waitFor({ timeout: 15000 });
    // Start runs the plant with control on
    await page.locator('#control-state[data-state="on"]').waitFor({ timeout: 5000 });
    await expect.poll(() => panelValue(page, '#att-now'), { timeout: 30000, interval: 200 }).toBeGreaterThan(20);
    await page.waitForTimeout(1200);

    // broadband → tone follower
    const t0 = await audioTime(page);
    await page.locator('#alg').selectOption('tonal');
    await page.locator('.status', { hasText: 'crossfade' }).waitFor({ timeout: 5000 });
    await page.waitForTimeout(1500);
    const t1 = await audioTime(page);
    let f = await frames(page);
    const base = maxIn(f, 'step', t0 - 1, t0);
    const basePeak = maxIn(f, 'peak', t0 - 1, t0);
    const toTonal = maxIn(f, 'step', t0, t1);
    const toTonalPeak = maxIn(f, 'peak', t0, t1);
    // the plant kept running: audio time went on from where it was (a restart begins again at 0)
    expect(f.t.filter((t) => t > t0).every((t, i, a) => i === 0 || t >= a[i - 1]!)).toBe(true);
    expect(t1).toBeGreaterThan(t0 + 1);
    // the tone follower is in charge and tracks the 120 Hz hum
    await expect.poll(() => page.evaluate(() => document.querySelector('ancb-app')!.display.toneHz), { timeout: 5000 }).toBeGreaterThan(115);
    expect(await page.evaluate(() => document.querySelector('ancb-app')!.display.toneHz)).toBeLessThan(125);

    // tone follower → broadband, once it has settled
    await page.waitForTimeout(1000);
    const t2 = await audioTime(page);
    await page.locator('#alg').selectOption('fxnlms');
    await page.locator('.status', { hasText: 'to broadband' }).waitFor({ timeout: 5000 });
    await page.waitForTimeout(1500);
    const t3 = await audioTime(page);
    f = await frames(page);
    const base2 = maxIn(f, 'step', t2 - 1, t2);
    const toBroadband = maxIn(f, 'step', t2, t3);
    const toBroadbandPeak = maxIn(f, 'peak', t2, t3);
    expect(await page.evaluate(() => document.querySelector('ancb-app')!.session.running)).toBe(true);

    // the click meter does see a step: Reset weights drops the control signal at a block edge
    // (twice, a second apart: one drop could by chance fall near a zero crossing)
    const t4 = await audioTime(page);
    await page.locator('#reset').click();
    await page.waitForTimeout(1000);
    await page.locator('#reset').click();
    await page.waitForTimeout(600);
    f = await frames(page);
    const reset = maxIn(f, 'step', t4, await audioTime(page));

    console.log(
      `controller switch: converged step ${base.toExponential(3)}, to tone follower ${toTonal.toExponential(3)} (×${(toTonal / base).toFixed(2)}), ` +
        `back ${toBroadband.toExponential(3)} (×${(toBroadband / base2).toFixed(2)} of ${base2.toExponential(3)}); ` +
        `peaks ${(20 * Math.log10(basePeak)).toFixed(2)} → ${(20 * Math.log10(toTonalPeak)).toFixed(2)} / ${(20 * Math.log10(toBroadbandPeak)).toFixed(2)} dBFS; reset-weights step ${reset.toExponential(3)} (×${(reset / base).toFixed(1)})`,
    );
    expect(base).toBeGreaterThan(0);
    expect(toTonal).toBeLessThanOrEqual(STEP_RATIO * base);
    expect(toBroadband).toBeLessThanOrEqual(STEP_RATIO * Math.max(base, base2));
    expect(20 * Math.log10(toTonalPeak / basePeak)).toBeLessThanOrEqual(BURST_DB);
    expect(20 * Math.log10(toBroadbandPeak / basePeak)).toBeLessThanOrEqual(BURST_DB);
    expect(reset).toBeGreaterThan(STEP_RATIO * base);
    // both switches are in the event log
    expect(await page.locator('ancb-events li[data-cause="controller-switch"]').count()).toBe(2);
    expect(watch.errors).toEqual([]);
  });
});
