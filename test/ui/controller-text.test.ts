import { describe, expect, it } from 'vitest';
import { rebuildReason, switchNote } from '../../src/ui/controller-text.ts';
import { inPlaceReachable } from '../../src/web/session.ts';
import type { ControllerConfig } from '../../src/engine/controller-factory.ts';

const fxnlms: ControllerConfig = { algorithm: 'fxnlms', taps: 64, stepSize: 0.002 };
const fxlms: ControllerConfig = { algorithm: 'fxlms', taps: 64, stepSize: 0.002 };
const tonal: ControllerConfig = { algorithm: 'tonal', harmonics: 1, stepSize: 0.005, frequencySource: 'reference' };

describe('controller-text', () => {
  describe('switchNote', () => {
    it('should name exactly the controller a switch crossfades to, and say every other change rebuilds', () => {
      const t = switchNote(tonal, fxnlms);
      expect(t).toContain('A switch to FxNLMS, 64 taps crossfades in 200 ms');
      expect(t).toContain('FxLMS ↔ FxNLMS included');
      expect(switchNote(fxnlms, tonal)).toContain('A switch to the tone follower crossfades');
      // the note matches what the session does: FxLMS is not reachable from an FxNLMS standby
      expect(inPlaceReachable(fxnlms, fxlms)).toBe(false);
      expect(inPlaceReachable(fxnlms, { ...fxnlms, stepSize: 0.01 })).toBe(true);
    });
  });

  describe('rebuildReason', () => {
    it('should say why each kind of change built a new controller', () => {
      expect(rebuildReason(tonal, fxlms, fxnlms)).toBe('FxLMS was not the controller kept ready for a crossfade (that is FxNLMS, 64 taps)');
      expect(rebuildReason(fxnlms, fxlms, tonal)).toContain('FxNLMS → FxLMS is a different algorithm');
      expect(rebuildReason(fxnlms, { ...fxnlms, taps: 128 }, tonal)).toBe('filter length 64 → 128 taps');
      expect(rebuildReason(fxnlms, { ...fxnlms, implementation: 'js' }, tonal)).toBe('implementation changed');
      expect(rebuildReason(tonal, { ...fxnlms, taps: 256 }, fxnlms)).toContain('has other settings (FxNLMS, 64 taps)');
    });
  });
});
