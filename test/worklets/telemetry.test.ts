import { describe, expect, it } from 'vitest';
import {
  EVENT_RECORD_LENGTH,
  METER_FRAME_LENGTH,
  METER_SLOTS,
  M,
  TelemetryReader,
  TelemetryWriter,
  createTelemetryBuffer,
  decodeEvent,
  encodeEvent,
  parseControlMessage,
  type PanelEvent,
} from '../../src/protocol/messages.ts';

function frame(t: number): Float64Array {
  const f = new Float64Array(METER_FRAME_LENGTH);
  f[M.timeS] = t;
  f[M.refPower] = t * 2;
  f[METER_FRAME_LENGTH - 1] = -t;
  return f;
}

function readAll(r: TelemetryReader): { times: number[]; events: PanelEvent[] } {
  const times: number[] = [];
  const events: PanelEvent[] = [];
  r.poll(
    (f) => {
      // every field of the frame arrives, not only the first
      expect(f[M.refPower]).toBe(f[M.timeS]! * 2);
      expect(f[METER_FRAME_LENGTH - 1]).toBe(-f[M.timeS]!);
      times.push(f[M.timeS]!);
    },
    (e) => events.push(decodeEvent(e)),
  );
  return { times, events };
}

describe('telemetry ring', () => {
  describe('with a reader that keeps up', () => {
    it('should deliver every frame in order across the wrap point', () => {
      const sab = createTelemetryBuffer();
      const w = new TelemetryWriter(sab);
      const r = new TelemetryReader(sab);
      const got: number[] = [];
      // 5 polls of 20 frames: 100 frames, crossing the 64-slot ring's end
      for (let p = 0; p < 5; p++) {
        for (let i = 0; i < 20; i++) w.writeMeters(frame(p * 20 + i));
        got.push(...readAll(r).times);
      }
      expect(got).toEqual(Array.from({ length: 100 }, (_, i) => i));
      expect(r.lostFrames).toBe(0);
    });
  });

  describe('with a reader that falls more than a ring behind', () => {
    it('should deliver the newest frames and count the lost ones', () => {
      const sab = createTelemetryBuffer();
      const w = new TelemetryWriter(sab);
      const r = new TelemetryReader(sab);
      for (let i = 0; i < 150; i++) w.writeMeters(frame(i));
      const { times } = readAll(r);
      expect(times).toEqual(Array.from({ length: METER_SLOTS - 1 }, (_, i) => 150 - (METER_SLOTS - 1) + i));
      expect(r.lostFrames).toBe(150 - (METER_SLOTS - 1));
    });
  });

  describe('events', () => {
    it('should carry engine and host causes with their named values', () => {
      const sab = createTelemetryBuffer();
      const w = new TelemetryWriter(sab);
      const r = new TelemetryReader(sab);
      const sent: PanelEvent[] = [
        { timeS: 1.5, cause: 'error-rise', action: 'freeze-adaptation', values: { riseDb: 7, thresholdDb: 6, heldMs: 500, baselinePower: 0.01 } },
        { timeS: 2, cause: 'input-missing', action: 'none', values: { channels: 0 } },
        { timeS: 2.5, cause: 'non-finite', action: 'none', values: { source: 1, count: 12 } },
      ];
      for (const e of sent) w.writeEvent(encodeEvent(e));
      expect(readAll(r).events).toEqual(sent);
      expect(encodeEvent(sent[0]!).length).toBe(EVENT_RECORD_LENGTH);
    });
  });

  describe('with a buffer of another layout', () => {
    it('should refuse it', () => {
      const sab = createTelemetryBuffer();
      new Int32Array(sab, 0, 4)[3] = METER_FRAME_LENGTH + 1;
      expect(() => new TelemetryWriter(sab)).toThrow(/layout/);
      expect(() => new TelemetryWriter(new SharedArrayBuffer(64))).toThrow(/at least/);
    });
  });
});

describe('parseControlMessage', () => {
  it('should accept valid messages and name field, range and value in a refusal', () => {
    expect(parseControlMessage({ type: 'set-ceiling', dbfs: -12 }, 48000)).toEqual({ type: 'set-ceiling', dbfs: -12 });
    expect(() => parseControlMessage({ type: 'set-ceiling', dbfs: 3 }, 48000)).toThrow('dbfs must be a number from -120 to 0, got 3');
    expect(() => parseControlMessage({ type: 'identify', probe: { startHz: 40, endHz: 30000, durationS: 1, amplitude: 0.1, tailS: 0.5 } }, 48000)).toThrow(
      'probe.endHz must be a number from 1 to 24000, got 30000',
    );
    expect(() => parseControlMessage({ type: 'set-mode', mode: 'loud' }, 48000)).toThrow('mode must be one of idle, control, muted, got loud');
    expect(() => parseControlMessage({ type: 'warp' }, 48000)).toThrow('unknown message type "warp"');
    expect(() => parseControlMessage({ type: 'set-harmonics', harmonics: 2.5 }, 48000)).toThrow(/whole number/);
  });

  describe('with the calibration, level-check and controller-switch messages', () => {
    it('should accept them within range and refuse them outside, naming the field', () => {
      expect(parseControlMessage({ type: 'switch-controller', crossfadeMs: 200 }, 48000)).toEqual({ type: 'switch-controller', crossfadeMs: 200 });
      expect(() => parseControlMessage({ type: 'switch-controller', crossfadeMs: 20000 }, 48000)).toThrow('crossfadeMs must be a number from 0 to 10000, got 20000');
      expect(parseControlMessage({ type: 'calibration-tone', hz: 1000, dbfs: -30 }, 48000)).toEqual({ type: 'calibration-tone', hz: 1000, dbfs: -30 });
      // the tone frequency stays below 0.45·fs (21.6 kHz at 48 kHz), its level at most −6 dBFS
      expect(() => parseControlMessage({ type: 'calibration-tone', hz: 22000, dbfs: -30 }, 48000)).toThrow('hz must be a number from 20 to 21600, got 22000');
      expect(() => parseControlMessage({ type: 'calibration-tone', hz: 1000, dbfs: 0 }, 48000)).toThrow('dbfs must be a number from -80 to -6, got 0');
      expect(() => parseControlMessage({ type: 'record', seconds: 60 }, 48000)).toThrow('seconds must be a number from 0.1 to 10, got 60');
      expect(parseControlMessage({ type: 'stop-tone' }, 48000)).toEqual({ type: 'stop-tone' });
      const ok = parseControlMessage({ type: 'level-check', request: { ceilingDbfs: -20, signal: { rampS: 1 } } }, 48000);
      expect(ok).toEqual({ type: 'level-check', request: { ceilingDbfs: -20, signal: { rampS: 1 } } });
      expect(() => parseControlMessage({ type: 'level-check', request: { ceilingDbfs: -20 } }, 48000)).toThrow('request.signal must be an object, got undefined');
      expect(() => parseControlMessage({ type: 'level-check', request: { ceilingDbfs: 2, signal: {} } }, 48000)).toThrow('request.ceilingDbfs must be a number from -120 to 0, got 2');
      // an SPL cap without the calibration it needs (or the reverse) is refused
      const points = [{ hz: 1000, dbfs: -30, measuredDbSpl: 76 }];
      expect(() => parseControlMessage({ type: 'level-check', request: { ceilingDbfs: -20, signal: {}, outputCalibration: points } }, 48000)).toThrow(/go together/);
      expect(() => parseControlMessage({ type: 'level-check', request: { ceilingDbfs: -20, signal: {}, peakCeilingDbSpl: 85 } }, 48000)).toThrow(/go together/);
      expect(() =>
        parseControlMessage({ type: 'level-check', request: { ceilingDbfs: -20, signal: {}, micCalibration: { hz: 1000, sensitivityDbSpl: 'x', validFromHz: 1000, validToHz: 1000 } } }, 48000),
      ).toThrow('request.micCalibration.sensitivityDbSpl must be a number from -100 to 300, got x');
      expect(() => parseControlMessage({ type: 'configure', controller: { algorithm: 'fxnlms', taps: 8, stepSize: 0.1 }, secondaryPathModel: Float32Array.of(1), standbyController: 5 }, 48000)).toThrow(
        'standbyController: must be an object of controller settings, got 5',
      );
    });
  });
});
