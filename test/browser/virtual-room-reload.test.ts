import { describe, expect, it } from 'vitest';
import { ROOM_TEST_TIMEOUT_MS, ROOM_DEVICES, ROOM_RATE, Recorder, capDbfs, db, identifyInPanel, openLiveInRoom, panelStatus, peakAbs, roomScenario, setControl, setNumber, useVirtualRoom } from './virtual-room.ts';

/**
 * A device change in the middle of control: the room's loudspeaker is unloaded and loaded again
 * (what unplugging a USB loudspeaker does), while the tone follower runs on a hum. The sound server
 * moves the panel's orphaned output stream to its default sink, here a spare null sink, so the
 * independent recorder hears the panel's output throughout: the loudspeaker's monitor before, the
 * spare sink while the loudspeaker is gone, the new loudspeaker's monitor after. The panel must
 * treat the change as a jump of the loop (devicechange, or the reported latency moving): adaptation
 * frozen and a new identification asked for; and no recorded sample may exceed the cap.
 */
const SPARE = 'ancb_spare';
const FLOAT_EPS = 1e-6;

describe('virtual room: loudspeaker removed and back mid-run', () => {
  const fx = useVirtualRoom({ speakerGain: 0.8 });

  it('should freeze adaptation, ask for a new identification, and keep every output sample at or under the cap', async () => {
    const { page, server, room } = fx;
    server.pactl('load-module', 'module-null-sink', `sink_name=${SPARE}`, 'channels=2', `rate=${ROOM_RATE}`, 'format=float32le', 'sink_properties="device.description=\'ancbench spare output\'"');
    server.pactl('set-default-sink', SPARE);
    await openLiveInRoom(page);
    const r = await identifyInPanel(page);
    expect(r.usable).toBe(true);
    await fx.play(roomScenario([{ kind: 'harmonics', fundamentalHz: 120, amplitudes: [0.03, 0.015, 0.0075] }], { delayMs: 0 }, { delayMs: 20, gain: 1 }));
    await page.locator('#alg').selectOption('tonal');
    await setNumber(page, 'harmonics', 3);
    await setNumber(page, 'mu', Number(Math.sin(Math.PI / (2 * (2 * r.delaySamples + 1))).toPrecision(2)));
    await page.waitForTimeout(500);
    const before = new Recorder(server);
    before.start([`${ROOM_DEVICES.speaker.name}.monitor`, `${SPARE}.monitor`], { [`${SPARE}.monitor`]: 2 });
    await setControl(page, true);
    await page.waitForTimeout(4000);
    room.reloadSpeaker();
    await page.waitForTimeout(3000);
    const after = new Recorder(server);
    after.start([`${ROOM_DEVICES.speaker.name}.monitor`]);
    await page.waitForTimeout(2500);
    const a = await before.stop();
    const b = await after.stop();
    const status = await panelStatus(page);
    await setControl(page, false).catch(() => {});
    const cap = 10 ** ((await capDbfs(page)) / 20);
    const peaks = {
      speakerBefore: peakAbs(a[`${ROOM_DEVICES.speaker.name}.monitor`]!),
      spare: peakAbs(a[`${SPARE}.monitor`]!),
      speakerAfter: peakAbs(b[`${ROOM_DEVICES.speaker.name}.monitor`]!),
    };
    console.log(`virtual room, loudspeaker reloaded: cap ${db(cap).toFixed(2)} dBFS; peaks ${Object.entries(peaks).map(([k, v]) => `${k} ${db(v).toFixed(2)} dBFS`).join(', ')}; panel: ${status.slice(0, 700)}`);
    // the controller was playing before the change (not a silent run)
    expect(db(peaks.speakerBefore)).toBeGreaterThan(-60);
    for (const v of Object.values(peaks)) expect(v).toBeLessThanOrEqual(cap * (1 + FLOAT_EPS));
    // the change was handled as a jump of the loop
    expect(status).toMatch(/Adaptation frozen: the audio (devices|latency) changed/);
    expect(status).toMatch(/identify again/i);
    expect(status).toContain('audio devices changed');
  }, ROOM_TEST_TIMEOUT_MS);
});
