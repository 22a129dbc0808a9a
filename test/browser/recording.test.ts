// Recording bundle round trip: record on the simulated plant in headless Chromium, download the bundle,
// replay it from the command line. The control-off stretch's levels in the bundle must match what the
// panel's meters showed (the manifest's `meters`) within 0.1 dB: the recording path loses nothing.
import { describe, expect, it, vi } from 'vitest';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { useDemoPage, watchPage } from './helpers.ts';
import { parseRecordingBundle, rangeSamples, unzipBundle } from '../../src/io/recording-bundle.ts';
import { powerToDbfs } from '../../src/dsp/units.ts';
import { main } from '../../src/cli/main.ts';

describe('recording in the panel', () => {
  const demo = useDemoPage();

  it('should record the simulated plant, offer a bundle that replay reads, with the meters\' control-off levels', async () => {
    const page = demo.page;
    const watch = await watchPage(page);
    await page.locator('#start').click();
    await page.locator('#start', { hasText: 'Stop' }).waitFor({ timeout: 15000 });
    await page.locator('ancb-recording input[type="number"]').fill('2');
    await page.locator('ancb-recording input[type="number"]').dispatchEvent('change');
    await page.locator('#record').click();
    // Start runs with control on; a recording begins with its control-off stretch, then turns control on
    await page.locator('#control', { hasText: 'Turn control on' }).waitFor({ timeout: 10000 });
    await page.locator('#control', { hasText: 'Turn control off' }).waitFor({ timeout: 10000 });
    await page.waitForTimeout(2500);
    await page.locator('#record-stop').click();
    const link = page.locator('#record-download');
    await link.waitFor({ timeout: 20000 });
    const [download] = await Promise.all([page.waitForEvent('download'), link.click()]);
    const dir = mkdtempSync(join(tmpdir(), 'ancbench-rec-browser-'));
    try {
      const zipPath = join(dir, 'rec.zip');
      await download.saveAs(zipPath);
      const b = parseRecordingBundle(unzipBundle(new Uint8Array(readFileSync(zipPath))));
      expect(b.manifest.source).toBe('simulated');
      expect(b.manifest.ranges.controlOff.length).toBeGreaterThanOrEqual(1);
      expect(b.manifest.ranges.controlOn.length).toBeGreaterThanOrEqual(1);
      const off = b.manifest.ranges.controlOff[0]!;
      expect(off[1] - off[0]).toBeGreaterThan(1.5);
      const ms = (x: Float32Array): number => x.reduce((a, v) => a + v * v, 0) / x.length;
      const fs = b.manifest.sampleRate;
      const meters = b.manifest.meters!.controlOff;
      expect(Math.abs(powerToDbfs(ms(rangeSamples(b.signals.error, off, fs))) - meters.errorDbfs!)).toBeLessThan(0.1);
      expect(Math.abs(powerToDbfs(ms(rangeSamples(b.signals.reference, off, fs))) - meters.referenceDbfs!)).toBeLessThan(0.1);
      const out: string[] = [];
      const spy = vi.spyOn(process.stdout, 'write').mockImplementation((s: string | Uint8Array) => (out.push(String(s)), true));
      try {
        expect(await main(['replay', zipPath, '--json'])).toBe(0);
      } finally {
        spy.mockRestore();
      }
      const j = JSON.parse(out.join(''));
      expect(j.attenuationDb).toBeGreaterThan(10);
      expect(watch.errors).toEqual([]);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  }, 240_000);
});
