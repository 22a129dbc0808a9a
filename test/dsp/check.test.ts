import { describe, expect, it } from 'vitest';
import { checkInteger, checkNumber, fieldPath, rangeMessage, showValue } from '../../src/dsp/check.ts';

describe('check', () => {
  describe('with values of every kind', () => {
    it('should show them briefly, to a fixed depth, without overflowing the stack on deep nesting', () => {
      expect(showValue(undefined)).toBe('nothing');
      expect(showValue(3)).toBe('3');
      expect(showValue(Number.NaN)).toBe('NaN');
      expect(showValue('x'.repeat(200)).length).toBeLessThanOrEqual(60);
      let deep: unknown = 1;
      for (let i = 0; i < 100_000; i++) deep = [deep];
      expect(showValue(deep)).toBe('[[[[[…]]]]]');
    });
  });

  describe('with a value out of range', () => {
    it('should name the field, what is allowed and the value received', () => {
      expect(rangeMessage('limiter.ceilingDbfs', 'a number from −120 to 0', 3)).toBe('limiter.ceilingDbfs: must be a number from −120 to 0, got 3');
      expect(() => checkNumber('rampMs', 6000, 0, 5000, 'ms')).toThrow('rampMs: must be a number from 0 to 5000 ms, got 6000');
      expect(() => checkInteger('taps', 1.5, 1, 8)).toThrow('taps: must be an integer from 1 to 8, got 1.5');
      expect(checkNumber('x', 2, 0, 5)).toBe(2);
      expect(fieldPath(['sources', 2, 'hz'], '(top level)')).toBe('sources[2].hz');
      expect(fieldPath([], '(top level)')).toBe('(top level)');
    });
  });
});
