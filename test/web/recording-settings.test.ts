import { describe, expect, it } from 'vitest';
import { recordingSettings, settingsFromSweep } from '../../src/web/recording-settings.ts';
import type { ControlSettings } from '../../src/web/panel-settings.ts';

const current: ControlSettings = { controller: { algorithm: 'fxnlms', taps: 128, stepSize: 0.01 }, ceilingDbfs: -6, adaptation: true };

describe('recording settings', () => {
  it('should put the panel\'s controller and cap in the scenario\'s vocabulary', () => {
    expect(recordingSettings(current, 20)).toEqual({ controller: { algorithm: 'fxnlms', taps: 128, stepSize: 0.01 }, limiter: { ceilingDbfs: -6 }, highPassHz: 20 });
  });

  describe('with a sweep\'s JSON', () => {
    it('should load the best entry\'s settings into the panel\'s', () => {
      const sweep = [{ rank: 1, settings: { 'controller.stepSize': 0.05, 'controller.taps': 256, 'limiter.ceilingDbfs': -12 }, diverged: false }, { rank: 2, settings: {} }];
      const { settings } = settingsFromSweep(sweep, current);
      expect(settings.controller).toEqual({ algorithm: 'fxnlms', taps: 256, stepSize: 0.05 });
      expect(settings.ceilingDbfs).toBe(-12);
      expect(settings.adaptation).toBe(true);
    });

    it('should refuse settings the tables refuse, a diverged best run and fields the panel cannot take', () => {
      expect(() => settingsFromSweep([{ settings: { 'controller.taps': 0 } }], current)).toThrow(/controller\.taps: must be an integer ≥ 1/);
      expect(() => settingsFromSweep([{ settings: { 'controller.taps': 64 }, diverged: true }], current)).toThrow(/diverged/);
      expect(() => settingsFromSweep([{ settings: { seed: 3 } }], current)).toThrow(/cannot take "seed"/);
      expect(() => settingsFromSweep({ settings: {} }, current)).toThrow(/not a sweep result/);
    });
  });
});
