import { describe, expect, it } from 'vitest';
import { realSpectrum } from '../../src/dsp/fft.ts';
import { ROOM_TEST_TIMEOUT_MS, ROOM_DEVICES, ROOM_RATE, Recorder, bestLag, db, identifyInPanel, openLiveInRoom, rms, roomScenario, useVirtualRoom } from './virtual-room.ts';

/**
 * Device choice and identification through the virtual room: the panel picks the room's reference
 * mic, error mic and loudspeaker by their labels, plays its probe through the real audio loop and
 * measures the round trip and the secondary-path model. The checks come from an independent
 * recorder on the sound server (parec on the loudspeaker's monitor and the error mic):
 *  - the loudspeaker's gain into the room, as the recorder sees it (error mic / loudspeaker monitor,
 *    RMS over the probe, with the room quiet), against the model's gain;
 *  - the round trip: where the probe the loudspeaker actually played (recorded on its monitor) lies
 *    in the panel's raw error-mic recording, by cross-correlation (the matched-filter delay estimate,
 *    Knapp & Carter, "The generalized correlation method for estimation of time delay", IEEE Trans.
 *    ASSP 24(4), 1976), against the panel's measured round trip and the model's delay.
 * The recorder cannot see inside the browser: the share of the round trip spent in the browser's
 * own buffers shows only in the panel's recording, which is why that recording is the one the
 * played probe is located in.
 */
const SPEAKER_GAIN = 0.5; // −6.02 dB from the loudspeaker into the error mic
const QUANTUM = 128;

describe('virtual room: device choice and identification', () => {
  const fx = useVirtualRoom({ speakerGain: SPEAKER_GAIN });

  it('should find the room devices, measure the round trip within one render quantum of the recorder, and model the loop gain within 1 dB', async () => {
    const { page, server } = fx;
    // distinct levels on the two mics: 200 Hz at −20 dBFS on the reference, −40 dBFS on the error mic
    await fx.play(roomScenario([{ kind: 'tone', hz: 200, amplitude: 0.1 }], { delayMs: 0 }, { delayMs: 1, gain: 0.1 }));
    await openLiveInRoom(page, 'two-devices');
    await page.waitForTimeout(1500);
    const levels = await page.evaluate(() => {
      const d = document.querySelector('ancb-app')!.display;
      return { ref: d.refDb, err: d.errDb };
    });
    // the reference picker got the left channel, the error picker the right one (20 dB apart)
    expect(levels.ref - levels.err).toBeGreaterThan(15);

    // identification in a quiet room, recorded independently
    await fx.play(null);
    await page.waitForTimeout(300);
    const rec = new Recorder(server);
    rec.start([`${ROOM_DEVICES.speaker.name}.monitor`, ROOM_DEVICES.err.name]);
    await page.waitForTimeout(300);
    const r = await identifyInPanel(page);
    await page.waitForTimeout(800);
    const got = await rec.stop();
    const spk = got[`${ROOM_DEVICES.speaker.name}.monitor`]!;
    const err = got[ROOM_DEVICES.err.name]!;

    // the loop's gain by the recorder: the whole probe is in both recordings, the room is quiet
    const loopGainDb = db(rms(err) / rms(spk));
    // the probe as the loudspeaker played it, from its first sample
    let onset = 0;
    while (onset < spk.length && spk[onset] === 0) onset++; // idle output is exact zeros; the probe fades in
    const played = spk.subarray(onset, Math.min(spk.length, onset + Math.round(1.5 * ROOM_RATE)));
    const located = bestLag(played, r.rawErr, Math.round(0.5 * ROOM_RATE));

    // the model's gain: mean level of its response over 300 Hz … 8 kHz (flat loop: a delay and a gain)
    const n = 1 << Math.ceil(Math.log2(r.model.length));
    const spec = realSpectrum(r.model, n);
    let sum = 0;
    let count = 0;
    for (let k = Math.ceil((300 * n) / ROOM_RATE); k <= Math.floor((8000 * n) / ROOM_RATE); k++) {
      sum += 10 * Math.log10(spec[2 * k]! ** 2 + spec[2 * k + 1]! ** 2);
      count++;
    }
    const modelGainDb = sum / count;
    let peakTap = 0;
    for (let i = 1; i < r.model.length; i++) if (Math.abs(r.model[i]!) > Math.abs(r.model[peakTap]!)) peakTap = i;
    const streams = server.pactl('list', 'sink-inputs') + server.pactl('list', 'source-outputs');
    console.log(
      `virtual room: panel round trip ${r.delayMs.toFixed(2)} ms (${r.delaySamples} samples), played probe found at ${located.lag} samples (${((1000 * located.lag) / ROOM_RATE).toFixed(2)} ms, corr ${located.corr.toFixed(3)}); ` +
        `model peak at ${peakTap}; loop gain by recorder ${loopGainDb.toFixed(2)} dB, model gain ${modelGainDb.toFixed(2)} dB; SNR ${r.snrDb} dB, feedback ${r.feedbackRatioDb} dB`,
    );
    console.log(`server-side latencies:\n${streams.split('\n').filter((l) => /Latency|application.name|Sink Input|Source Output/.test(l)).join('\n')}`);

    expect(r.rawErr.length).toBeGreaterThan(ROOM_RATE);
    expect(r.usable).toBe(true);
    // the recorder heard the loudspeaker at the gain the room was built with (a null sink mixes exactly)
    expect(Math.abs(loopGainDb - db(SPEAKER_GAIN))).toBeLessThan(0.2);
    // the played probe is clearly in the panel's recording, one round trip after it was sent
    expect(located.corr).toBeGreaterThan(0.9);
    expect(Math.abs(r.delaySamples - located.lag)).toBeLessThanOrEqual(QUANTUM);
    expect(Math.abs(peakTap - located.lag)).toBeLessThanOrEqual(QUANTUM);
    expect(Math.abs(modelGainDb - loopGainDb)).toBeLessThan(1);
    // the reference mic does not hear the loudspeaker in this room (no feedback path)
    expect(r.feedbackRatioDb).toBeLessThan(-30);
  }, ROOM_TEST_TIMEOUT_MS);
});
