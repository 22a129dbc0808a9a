import { describe, it, expect } from 'vitest';
import {
  EventRing,
  createEventBatch,
  decodeEventBatch,
  drainEvents,
  EVENT_CAUSES,
  EVENT_ACTIONS,
  EVENT_VALUE_NAMES,
  CAUSE,
  ACTION,
  VALUES_PER_EVENT,
} from '../../src/engine/events.ts';

// The event contract of the output-safety issue: one shape {timeS, cause, values, action}; a
// preallocated ring that overwrites the oldest entry and counts drops; decoding off the audio thread.

describe('event codes', () => {
  it('should map every numeric code to its name and name at most VALUES_PER_EVENT values per cause', () => {
    const causeNames: Record<string, string> = {
      nonFinite: 'non-finite',
      weightsUnbounded: 'weights-unbounded',
      errorRise: 'error-rise',
      outputAtCeiling: 'output-at-ceiling',
      inputClipping: 'input-clipping',
      deadMicrophone: 'dead-microphone',
      limiterEngaged: 'limiter-engaged',
      latencyJump: 'latency-jump',
      modelMismatch: 'model-mismatch',
      resume: 'resume',
    };
    expect(Object.keys(CAUSE).length).toBe(EVENT_CAUSES.length);
    for (const [key, code] of Object.entries(CAUSE)) expect(EVENT_CAUSES[code]).toBe(causeNames[key]);
    expect(EVENT_ACTIONS[ACTION.none]).toBe('none');
    expect(EVENT_ACTIONS[ACTION.freezeAdaptation]).toBe('freeze-adaptation');
    expect(EVENT_ACTIONS[ACTION.resetWeights]).toBe('reset-weights');
    expect(EVENT_ACTIONS[ACTION.mute]).toBe('mute');
    for (const c of EVENT_CAUSES) {
      expect(EVENT_VALUE_NAMES[c].length).toBeGreaterThan(0);
      expect(EVENT_VALUE_NAMES[c].length).toBeLessThanOrEqual(VALUES_PER_EVENT);
    }
  });
});

describe('EventRing', () => {
  it('should decode pushed events in order into plain objects with named values', () => {
    const ring = new EventRing(8);
    ring.push(1.5, CAUSE.errorRise, ACTION.mute, 9.2, 6, 60, 0.01);
    ring.staged[0] = 2.25;
    ring.staged[1] = 1;
    ring.staged[2] = 3;
    ring.commit(CAUSE.inputClipping, ACTION.freezeAdaptation);
    const events = drainEvents(ring);
    expect(events).toEqual([
      { timeS: 1.5, cause: 'error-rise', action: 'mute', values: { riseDb: 9.2, thresholdDb: 6, heldMs: 60, baselinePower: 0.01 } },
      { timeS: 2.25, cause: 'input-clipping', action: 'freeze-adaptation', values: { channel: 1, runLength: 3, level: NaN } },
    ]);
    expect(ring.size).toBe(0);
    // commit resets the staging area, so values left over from one event never leak into the next.
    expect(Array.from(ring.staged).every(Number.isNaN)).toBe(true);
  });

  it('should overwrite the oldest entry when full and count the drops', () => {
    const ring = new EventRing(3);
    for (let i = 0; i < 5; i++) ring.push(i, CAUSE.nonFinite, ACTION.none, 0, i);
    expect(ring.size).toBe(3);
    expect(ring.dropped).toBe(2);
    expect(ring.pushed).toBe(5);
    const batch = createEventBatch(3);
    expect(ring.drainInto(batch)).toBe(3);
    expect(batch.dropped).toBe(2);
    expect(Array.from(batch.timeS)).toEqual([2, 3, 4]);
    expect(ring.dropped).toBe(0);
  });

  it('should drain only as many entries as the batch holds and keep the rest, across the wrap point', () => {
    const ring = new EventRing(4);
    for (let i = 0; i < 3; i++) ring.push(i, CAUSE.deadMicrophone, ACTION.freezeAdaptation, 1, 0, i);
    drainEvents(ring);
    for (let i = 10; i < 14; i++) ring.push(i, CAUSE.deadMicrophone, ACTION.freezeAdaptation, 1, 0, i);
    const small = createEventBatch(3);
    expect(ring.drainInto(small)).toBe(3);
    expect(decodeEventBatch(small).map((e) => e.timeS)).toEqual([10, 11, 12]);
    expect(decodeEventBatch(small).map((e) => e.values.heldMs)).toEqual([10, 11, 12]);
    expect(ring.size).toBe(1);
    expect(drainEvents(ring).map((e) => e.timeS)).toEqual([13]);
  });

  it('should refuse a bad capacity and reject unknown codes when decoding', () => {
    expect(() => new EventRing(0)).toThrow(/capacity.*1 to 65536.*got 0/);
    expect(() => createEventBatch(1.5)).toThrow(/capacity.*got 1.5/);
    const ring = new EventRing(2);
    ring.push(0, 200, ACTION.none);
    expect(() => drainEvents(ring)).toThrow(/cause code must be 0 … 9, got 200/);
  });
});
