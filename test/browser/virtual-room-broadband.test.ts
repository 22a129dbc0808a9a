import { describe, expect, it } from 'vitest';
import { ROOM_TEST_TIMEOUT_MS, SKIP_CONTROL, ROOM_DEVICES, ROOM_RATE, Recorder, db, identifyInPanel, openLiveInRoom, panelStatus, rms, roomScenario, setControl, setNumber, useVirtualRoom } from './virtual-room.ts';

/**
 * Broadband FxNLMS through the virtual room: band-limited noise (250 … 1000 Hz) reaches the error mic
 * 20 ms later than the loop's round trip after the reference mic (the room is set up once the panel
 * has measured the round trip), so a causal controller exists: the optimal filter is the primary
 * path's lag left after the loop, a delay of 20 ms (960 samples) and a gain, within 2048 taps. The
 * independent recorder (parec on the error mic) compares the error level with control off (the 2 s
 * before) and after 25 s of control: at least 10 dB lower.
 *
 * The round trip through a browser is long (a few hundred ms here), so the filter runs in the
 * frequency domain (block update; cost grows with the logarithm of the lengths) at a step well
 * under the delayed-update bound, which shrinks roughly as L/(L + Δ) for a loop delay of Δ samples
 * (Elliott, Signal Processing for Active Control, 2001, §3.4).
 */
const TAPS = 2048;
const MARGIN_MS = 20;

describe.skipIf(SKIP_CONTROL)('virtual room: broadband FxNLMS on band-limited noise', () => {
  const fx = useVirtualRoom({ speakerGain: 0.8 });

  it('should lower the noise at the error mic by at least 10 dB', async () => {
    const { page, server } = fx;
    await openLiveInRoom(page);
    const r = await identifyInPanel(page);
    expect(r.usable).toBe(true);
    const lagMs = r.delayMs + MARGIN_MS;
    await fx.play(roomScenario([{ kind: 'noise', color: 'white', rms: 0.015, bandHz: [250, 1000] }], { delayMs: 0 }, { delayMs: lagMs, gain: 1 }));
    await page.locator('#alg').selectOption('fxnlms');
    await page.locator('#impl').selectOption('fd-full');
    await setNumber(page, 'taps', TAPS);
    const mu = Number((0.5 * (TAPS / (TAPS + r.delaySamples))).toPrecision(2)) / 4;
    await setNumber(page, 'mu', mu);
    await page.waitForTimeout(1000);
    const rec = new Recorder(server);
    rec.start([ROOM_DEVICES.err.name]);
    const t0 = Date.now();
    await page.waitForTimeout(2500);
    const tOn = (Date.now() - t0) / 1000;
    await setControl(page, true);
    await page.waitForTimeout(25000);
    const tEnd = (Date.now() - t0) / 1000;
    const err = (await rec.stop())[ROOM_DEVICES.err.name]!;
    const status = await panelStatus(page);
    await setControl(page, false);
    const off = rms(err, Math.round((tOn - 2) * ROOM_RATE), Math.round((tOn - 0.2) * ROOM_RATE));
    const on = rms(err, Math.round((tEnd - 3) * ROOM_RATE), Math.round((tEnd - 0.2) * ROOM_RATE));
    console.log(`virtual room, FxNLMS: round trip ${r.delayMs.toFixed(1)} ms, primary lag ${lagMs.toFixed(1)} ms, μ ${mu}, ${TAPS} taps; error mic by the recorder: off ${db(off * Math.SQRT2).toFixed(1)} dBFS, on ${db(on * Math.SQRT2).toFixed(1)} dBFS, attenuation ${db(off / on).toFixed(1)} dB; panel: ${status.slice(0, 600)}`);
    expect(db(off / on)).toBeGreaterThanOrEqual(10);
  }, ROOM_TEST_TIMEOUT_MS);
});
