import { describe, expect, it } from 'vitest';
import { LEVEL_FLOOR_DBFS, MINUS, NO_VALUE, belowFloor, fmtDb, fmtDeg, fmtHz, fmtLevel, fmtMs, fmtNumber, fmtSeconds, fmtSignedDb } from '../../src/ui/format.ts';

describe('format', () => {
  describe('with signs', () => {
    it('should write negative figures with a true minus sign (U+2212), never a hyphen', () => {
      expect(fmtDb(-3.25)).toBe(`${MINUS}3.3`);
      expect(MINUS.codePointAt(0)).toBe(0x2212);
      expect(fmtDb(-12.04, 2)).not.toContain('-');
      expect(fmtMs(-1.5)).toBe('−1.5 ms');
    });
    it('should never write −0.0: a value that rounds to zero has no sign', () => {
      expect(fmtDb(-0.04)).toBe('0.0');
      expect(fmtDb(-0)).toBe('0.0');
      expect(fmtNumber(-0.0004, 3)).toBe('0.000');
      expect(fmtNumber(-0.4, 0)).toBe('0');
      expect(fmtSignedDb(-0.01)).toBe('0.0');
      expect(fmtDb(-0.05)).toBe(`${MINUS}0.1`); // rounds away from zero in toFixed: a real −0.1
    });
    it('should put an explicit plus on positive signed figures only', () => {
      expect(fmtSignedDb(3)).toBe('+3.0');
      expect(fmtSignedDb(-2.5)).toBe('−2.5');
      expect(fmtSignedDb(NaN)).toBe(NO_VALUE);
    });
  });

  describe('with level floors', () => {
    it('should read a level below −120 dBFS, silence included, as "below −120"', () => {
      expect(LEVEL_FLOOR_DBFS).toBe(-120);
      expect(fmtLevel(-1064.2)).toBe(`below ${MINUS}120`);
      expect(fmtLevel(-Infinity)).toBe(`below ${MINUS}120`);
      expect(fmtLevel(-120.04)).toBe(`below ${MINUS}120`);
      expect(fmtLevel(-119.96)).toBe(`${MINUS}120.0`);
      expect(fmtLevel(-20)).toBe(`${MINUS}20.0`);
      expect(belowFloor(-Infinity)).toBe(true);
      expect(belowFloor(NaN)).toBe(false);
    });
    it('should take another floor when given one', () => {
      expect(fmtLevel(-30, 1, -20)).toBe(`below ${MINUS}20`);
    });
  });

  describe('with values not known yet', () => {
    it('should show the placeholder for NaN and ±∞ in every figure that is not a level', () => {
      for (const f of [fmtDb, fmtNumber, fmtSignedDb, fmtMs, fmtSeconds, fmtDeg]) {
        expect(f(NaN)).toBe(NO_VALUE);
        expect(f(-Infinity)).toBe(NO_VALUE);
        expect(f(Infinity)).toBe(NO_VALUE);
      }
      expect(fmtLevel(NaN)).toBe(NO_VALUE);
    });
    it('should show the placeholder, not "0.0 Hz", for a frequency not found yet', () => {
      expect(fmtHz(0)).toBe(NO_VALUE);
      expect(fmtHz(NaN)).toBe(NO_VALUE);
      expect(fmtHz(-5)).toBe(NO_VALUE);
      expect(fmtHz(120)).toBe('120 Hz');
      expect(fmtHz(59.94)).toBe('59.9 Hz');
      expect(fmtHz(1500)).toBe('1.50 kHz');
    });
    it('should carry units on times and angles', () => {
      expect(fmtSeconds(12.3)).toBe('12.30 s');
      expect(fmtDeg(-12.4)).toBe(`${MINUS}12°`);
      expect(fmtDeg(-0.3)).toBe('0°');
    });
  });
});
