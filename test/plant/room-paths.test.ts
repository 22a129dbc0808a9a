import { describe, expect, it } from 'vitest';
import { roomPathResponses, roomPathsSchema, roomPathsToExplicit, type RoomPathsSpec } from '../../src/plant/room-paths.ts';
import { analyzeRecordings } from '../../src/analysis/recording-analysis.ts';
import { onsetDelaySamples } from '../../src/analysis/path-model.ts';
import { denseResponse } from '../../src/plant/fractional-delay.ts';
import { parseScenario } from '../../src/plant/scenario.ts';
import { simulate } from '../../src/plant/simulate.ts';
import { expectClose } from '../helpers/tolerance.ts';

type V = [number, number, number];
const fs = 8000;
const c = 343;
const spec: RoomPathsSpec = {
  room: {
    dimensionsM: [5, 4, 3],
    absorption: 0.4,
    source: [0.6, 2.0, 1.5],
    referenceMic: [1.25, 2.1, 1.4],
    errorMic: [4.0, 1.9, 1.6],
    speaker: [3.3, 2.6, 1.5],
    highPassHz: 30,
  },
  ioLatencyMs: 4,
};
const dist = (a: V, b: V) => Math.hypot(a[0] - b[0], a[1] - b[1], a[2] - b[2]);

/** Shortest first-order reflection from a to b: the six mirror images of a in the walls (Allen & Berkley 1979). */
function firstReflectionM(a: V, b: V, dims: V): number {
  let best = Infinity;
  for (let axis = 0; axis < 3; axis++) {
    for (const wall of [0, dims[axis]!]) {
      const image: V = [...a];
      image[axis] = 2 * wall - a[axis]!;
      best = Math.min(best, dist(image, b));
    }
  }
  return best;
}

describe('roomPathResponses', () => {
  it('should place each direct sound at distance/c (plus the I/O latency on the loudspeaker paths) with amplitude 1/d', () => {
    // Free-field spherical spreading 1/(4πd) at delay d/c (Allen & Berkley, JASA 65(4), 1979), scaled here by 4π·1 m.
    // maxOrder 0 keeps the direct sound alone: its fractional-delay kernel (Peterson, JASA 80(5), 1986) is
    // symmetric about the delay and sums to the amplitude, so its centroid is the delay.
    const direct = roomPathResponses({ ...spec, room: { ...spec.room, maxOrder: 0, highPassHz: undefined } }, fs);
    const r = spec.room;
    const cases = [
      ['reference', r.source, r.referenceMic, 0],
      ['primary', r.source, r.errorMic, 0],
      ['secondary', r.speaker, r.errorMic, spec.ioLatencyMs],
      ['feedback', r.speaker, r.referenceMic, spec.ioLatencyMs],
    ] as const;
    for (const [name, from, to, latencyMs] of cases) {
      const d = dist(from, to);
      const expectedSamples = (d / c) * fs + (latencyMs / 1000) * fs;
      const resp = direct[name];
      let sum = 0;
      let moment = 0;
      resp.taps.forEach((v, i) => {
        sum += v;
        moment += v * (resp.offset + i);
      });
      expectClose(sum, 1 / d, 1e-9, `${name} direct amplitude`);
      expectClose(moment / sum, expectedSamples, 1, `${name} direct delay (samples)`);
      expectClose(moment / sum, expectedSamples, 0.01, `${name} direct delay, sub-sample (samples)`);
      expectClose(direct.directDelayMs[name], (1000 * expectedSamples) / fs, 1e-9, `${name} reported delay (ms)`);
    }
    expectClose(direct.referenceToErrorMs, (1000 * (dist(r.source, r.errorMic) - dist(r.source, r.referenceMic))) / c, 1e-9, 'reference → error (ms)');
  });

  it('should start with the direct sound alone until the first reflection arrives', () => {
    // The image sum in a full room equals the direct-only response up to the first reflection's kernel.
    const room = { ...spec.room, highPassHz: undefined };
    const full = roomPathResponses({ ...spec, room }, fs);
    const direct = roomPathResponses({ ...spec, room: { ...room, maxOrder: 0 } }, fs);
    const halfWidth = 16;
    for (const [name, from, to] of [['primary', room.source, room.errorMic], ['reference', room.source, room.referenceMic]] as const) {
      const reflection = (firstReflectionM(from, to, room.dimensionsM) / c) * fs;
      const a = denseResponse(full[name]);
      const b = denseResponse(direct[name]);
      const until = Math.floor(reflection) - halfWidth;
      expect(until).toBeGreaterThan(b.length - 1 - 2 * halfWidth); // the geometry leaves the direct kernel clear
      expect(full[name].offset).toBe(direct[name].offset);
      for (let i = 0; i < until; i++) expectClose(a[i]!, b[i] ?? 0, 1e-12, `${name} tap ${i}`);
    }
  });

  it('should delay the loudspeaker paths by exactly the I/O latency', () => {
    // 4 ms at 8 kHz is 32 whole samples: the secondary path is the acoustic one moved by 32 samples.
    const none = roomPathResponses({ ...spec, ioLatencyMs: 0 }, fs);
    const withLatency = roomPathResponses(spec, fs);
    expect(withLatency.secondary.offset).toBe(none.secondary.offset + 32);
    expect(Array.from(withLatency.secondary.taps)).toEqual(Array.from(none.secondary.taps));
    expect(withLatency.feedback.offset).toBe(none.feedback.offset + 32);
  });

  it('should refuse positions outside the room and microphones on top of a source, naming the field', () => {
    const outside = roomPathsSchema.safeParse({ ...spec, room: { ...spec.room, errorMic: [5.2, 1, 1] } });
    expect(outside.success).toBe(false);
    expect(outside.error!.issues[0]!.path).toEqual(['room', 'errorMic', 0]);
    expect(outside.error!.issues[0]!.message).toBe('x must lie strictly inside the room, in (0, 5) m, got 5.2');
    const touching = roomPathsSchema.safeParse({ ...spec, room: { ...spec.room, errorMic: spec.room.speaker } });
    expect(touching.error!.issues[0]!.message).toMatch(/must be at least 0\.01 m from speaker/);
    expect(() => roomPathResponses({ ...spec, room: { ...spec.room, absorption: 1.5 } }, fs)).toThrow(/room paths: room\.absorption/);
  });
});

describe('roomPathsToExplicit', () => {
  it('should give paths the simulator runs on, with the reference → error delay the analysis finds', () => {
    const paths = roomPathsToExplicit(spec, fs);
    const sc = parseScenario({
      schemaVersion: 1,
      sampleRate: fs,
      blockSize: 32,
      durationS: 4,
      seed: 21,
      sources: [{ kind: 'noise', color: 'white', rms: 0.05 }, { kind: 'tone', hz: 120, amplitude: 0.2 }],
      paths,
      sensorNoiseRms: { reference: 0.0002, error: 0.0002 },
      controller: { algorithm: 'fxnlms', taps: 64, stepSize: 0.01 },
      outputCeilingDbfs: 0,
    });
    const r = simulate(sc, { record: true });
    expect(r.diverged).toBe(false);
    // The 120 Hz tone dominates the error mic and is predictable: control removes most of it.
    expect(r.attenuationDb!).toBeGreaterThan(6);
    // GCC-PHAT (Knapp & Carter 1976) on the recordings finds the direct-path difference (d_err − d_ref)/c.
    const a = analyzeRecordings({ sampleRate: fs, reference: r.signals!.reference, errorOff: r.signals!.errorOff });
    const expectedMs = roomPathResponses(spec, fs).referenceToErrorMs;
    expectClose(a.causality.primaryDelayMs!, expectedMs, 1000 / fs, 'reference → error delay (ms)');
    // The model the simulator built is the room's secondary path: its onset lies within the direct kernel.
    const onset = onsetDelaySamples(r.secondaryPathModel);
    const directSecondary = ((dist(spec.room.speaker, spec.room.errorMic) / c) + spec.ioLatencyMs / 1000) * fs;
    expect(Math.abs(onset - directSecondary)).toBeLessThanOrEqual(2);
  });
});
