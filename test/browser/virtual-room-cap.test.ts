import { describe, expect, it } from 'vitest';
import { BS1770_INTERPOLATOR, TRUE_PEAK_MAX_GAIN } from '../../src/dsp/true-peak.ts';
import { ROOM_TEST_TIMEOUT_MS, ROOM_DEVICES, Recorder, capDbfs, db, identifyInPanel, openLiveInRoom, panelStatus, peakAbs, roomScenario, setControl, setNumber, truePeak4x, useVirtualRoom } from './virtual-room.ts';

/**
 * The output cap, checked where the loudspeaker is: the independent recorder (parec on the room
 * loudspeaker's monitor, float32, no resampling) records every sample the loudspeaker received
 * while the panel (1) runs its level-cap check (a ramp 12 dB past the cap) and (2) runs a controller
 * with the wrong model sign, which diverges. Its sample peak must never exceed the cap (the limiter's
 * exact promise), and its 4× true peak (ITU-R BS.1770-4 Annex 2) must stay within what the
 * limiter's sample-peak mode promises: at most the interpolator's gain bound times the cap (the
 * largest sum of |taps| over the four phases; src/dsp/true-peak.ts), since the mode limits samples.
 */
const SPEAKER_GAIN = 0.8;
/** Float32 end to end; Chromium's mono → stereo → the loudspeaker's mono mix may round in the last place. */
const FLOAT_EPS = 1e-6;

describe('virtual room: the output cap at the loudspeaker', () => {
  const fx = useVirtualRoom({ speakerGain: SPEAKER_GAIN });
  const speaker = `${ROOM_DEVICES.speaker.name}.monitor`;

  it('should keep every loudspeaker sample of the level-cap check at or under the cap', async () => {
    const { page, server } = fx;
    await openLiveInRoom(page);
    const cap = 10 ** ((await capDbfs(page)) / 20);
    const rec = new Recorder(server);
    rec.start([speaker]);
    await page.waitForTimeout(300);
    await page.locator('#lc-ramp').fill('0.5');
    await page.locator('#lc-run').click();
    await page.locator('ancb-level-check #lc-confirm-ok').click();
    await page.locator('#lc-verdict').waitFor({ timeout: 60000 });
    await page.waitForTimeout(800);
    const spk = (await rec.stop())[speaker]!;
    const peak = peakAbs(spk);
    const tp = truePeak4x(spk, BS1770_INTERPOLATOR);
    console.log(`virtual room, level-cap check: cap ${db(cap).toFixed(2)} dBFS; at the loudspeaker: sample peak ${db(peak).toFixed(3)} dBFS, true peak ${db(tp).toFixed(3)} dBTP (${spk.length} samples); panel verdict passed=${await page.locator('#lc-verdict').getAttribute('data-passed')}`);
    expect(await page.locator('#lc-verdict').getAttribute('data-passed')).toBe('true');
    expect(peak).toBeLessThanOrEqual(cap * (1 + FLOAT_EPS));
    // the check did drive the loudspeaker up to the cap (it ramps past it)
    expect(db(peak)).toBeGreaterThan(db(cap) - 0.5);
    expect(tp).toBeLessThanOrEqual(cap * TRUE_PEAK_MAX_GAIN * (1 + FLOAT_EPS));
  }, ROOM_TEST_TIMEOUT_MS);

  it('should keep a diverging controller (model of the wrong sign) at or under the cap at the loudspeaker', async () => {
    const { page, server } = fx;
    await fx.play(null);
    const r = await identifyInPanel(page);
    expect(r.usable).toBe(true);
    // the model the panel measured, with its sign flipped: what a miswired loudspeaker would leave
    await page.evaluate(async () => {
      const app = document.querySelector('ancb-app')!;
      const m = (app as unknown as { measured: { model: Float32Array } }).measured;
      await app.session.loadModel({ ...(m as never as object), model: m.model.map((v) => -v) } as never);
    });
    // a loud hum and noise: the wrong-signed controller amplifies instead of cancelling
    await fx.play(roomScenario([{ kind: 'harmonics', fundamentalHz: 150, amplitudes: [0.08, 0.04] }, { kind: 'noise', color: 'pink', rms: 0.02, bandHz: [100, 2000] }], { delayMs: 0 }, { delayMs: 5, gain: 1 }));
    await page.locator('#alg').selectOption('fxnlms');
    // a large step: the wrong-signed update grows the output within a fraction of a second
    await setNumber(page, 'mu', 0.5);
    await page.waitForTimeout(1000);
    const rec = new Recorder(server);
    rec.start([speaker]);
    await setControl(page, true);
    await page.waitForTimeout(8000);
    const spk = (await rec.stop())[speaker]!;
    const status = await panelStatus(page);
    await setControl(page, false);
    const cap = 10 ** ((await capDbfs(page)) / 20);
    const peak = peakAbs(spk);
    const tp = truePeak4x(spk, BS1770_INTERPOLATOR);
    console.log(`virtual room, wrong-sign controller: cap ${db(cap).toFixed(2)} dBFS; at the loudspeaker: sample peak ${db(peak).toFixed(3)} dBFS, true peak ${db(tp).toFixed(3)} dBTP; panel: ${status.slice(0, 600)}`);
    expect(spk.length).toBeGreaterThan(48000 * 5);
    expect(peak).toBeLessThanOrEqual(cap * (1 + FLOAT_EPS));
    expect(tp).toBeLessThanOrEqual(cap * TRUE_PEAK_MAX_GAIN * (1 + FLOAT_EPS));
    // it did diverge: the output grew to within 6 dB of the cap before the limiter or the guard held it
    expect(db(peak)).toBeGreaterThan(db(cap) - 6);
  }, ROOM_TEST_TIMEOUT_MS);
});
