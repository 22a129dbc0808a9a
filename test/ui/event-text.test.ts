import { describe, expect, it } from 'vitest';
import { EVENT_TEXT, eventDetails, orderEvents } from '../../src/ui/event-text.ts';
import { EVENT_CAUSE_CODES, eventValueNames, type PanelEvent } from '../../src/protocol/messages.ts';

const ev = (timeS: number, cause: PanelEvent['cause'], values: Record<string, number> = {}, action: PanelEvent['action'] = 'none'): PanelEvent => ({ timeS, cause, values, action });

describe('event-text', () => {
  describe('orderEvents', () => {
    it('should list events newest first by time, whatever order they arrived in', () => {
      const list = [ev(3, 'limiter-engaged'), ev(1, 'resume'), ev(7.5, 'error-rise'), ev(2, 'underrun')];
      expect(orderEvents(list).map((e) => e.timeS)).toEqual([7.5, 3, 2, 1]);
      // the input is left alone
      expect(list.map((e) => e.timeS)).toEqual([3, 1, 7.5, 2]);
    });
    it('should keep events of the same time in arrival order, the later one first', () => {
      const a = ev(5, 'error-rise');
      const b = ev(5, 'resume');
      expect(orderEvents([a, b])).toEqual([b, a]);
    });
  });

  describe('eventDetails', () => {
    it('should say a guard rise in words with units, not raw keys', () => {
      // baselinePower 0.005 (mean square) is 10·log10(2·0.005) = −20.0 dBFS on the AES17 scale (calculated)
      const text = eventDetails(ev(1, 'error-rise', { riseDb: 12.94, thresholdDb: 6, heldMs: 60, baselinePower: 0.005 }, 'mute'));
      expect(text).toBe('12.9 dB above the control-off level, threshold 6.0 dB, for 60 ms, control-off level −20.0 dBFS');
      expect(text).not.toMatch(/riseDb|baselinePower|heldMs/);
    });
    it('should name channels and sources instead of their codes', () => {
      expect(eventDetails(ev(0, 'non-finite', { source: 2, count: 12 }))).toBe('in the anti-noise output, 12 samples');
      expect(eventDetails(ev(0, 'input-clipping', { channel: 1, runLength: 3, level: 1 }))).toBe('error mic, 3 samples in a row, at 0.00 dBFS sample peak');
      expect(eventDetails(ev(0, 'controller-switch', { crossfadeMs: 200, toTonal: 1 }))).toBe('to the tone follower, 200 ms crossfade');
    });
    it('should leave out values that are not available and use minus signs', () => {
      expect(eventDetails(ev(0, 'latency-jump', { previousMs: NaN, currentMs: 12 }))).toBe('');
      expect(eventDetails(ev(0, 'probe-done', { samples: 96000, peakDbfs: -30.04 }))).toBe('96000 samples recorded, probe peak −30.0 dBFS');
    });
    it('should have a sentence for every cause the protocol carries, and handle each cause\'s values', () => {
      for (const cause of EVENT_CAUSE_CODES) {
        expect(EVENT_TEXT[cause]).toBeTruthy();
        const values = Object.fromEntries(eventValueNames(cause).map((n) => [n, 1]));
        const text = eventDetails(ev(0, cause, values));
        expect(text).not.toMatch(/NaN|undefined|-\d/);
        // no raw value names (the camel-case keys) reach the page
        for (const name of eventValueNames(cause)) if (/[A-Z]/.test(name)) expect(text).not.toContain(name);
      }
    });
  });
});
