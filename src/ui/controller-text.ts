/**
 * The panel's words for controller changes: which algorithm switch crossfades (the engine keeps one
 * controller of the other family ready beside the running one, src/web/session.ts) and, for every
 * other change, why it built a new controller. Pure functions, so the wording is tested in Node.
 */
import { DEFAULT_CROSSFADE_MS, type ControllerConfig } from '../web/index.ts';

/** A broadband configuration in words ("FxNLMS, 64 taps"). */
export function broadbandName(c: ControllerConfig): string {
  return c.algorithm === 'tonal' ? 'the tone follower' : `${c.algorithm === 'fxlms' ? 'FxLMS' : 'FxNLMS'}, ${c.taps} taps`;
}

/**
 * Which algorithm change crossfades and which rebuilds, for the settings shown: the engine keeps one
 * controller of the other family ready (the standby), and only a switch to exactly that one crossfades.
 */
export function switchNote(c: ControllerConfig, standby: ControllerConfig | undefined): string {
  const ready = standby && (standby.algorithm === 'tonal') !== (c.algorithm === 'tonal') ? standby : null;
  const target = ready ? (ready.algorithm === 'tonal' ? 'the tone follower' : broadbandName(ready)) : null;
  const crossfade = target ? `A switch to ${target} crossfades in ${DEFAULT_CROSSFADE_MS} ms without a restart (it is kept ready beside this one). ` : '';
  return `${crossfade}Any other change of algorithm (FxLMS ↔ FxNLMS included), filter length or implementation builds a new controller: its weights start from zero, and the simulated plant restarts (control stays on).`;
}

/** Why a settings change built a new controller instead of switching or changing it in place. */
export function rebuildReason(prev: ControllerConfig, next: ControllerConfig, standby: ControllerConfig | undefined): string {
  const name = (c: ControllerConfig): string => (c.algorithm === 'tonal' ? 'the tone follower' : c.algorithm === 'fxlms' ? 'FxLMS' : 'FxNLMS');
  if (prev.algorithm !== next.algorithm) {
    const ready = standby && standby.algorithm !== prev.algorithm && (standby.algorithm === 'tonal') !== (prev.algorithm === 'tonal') ? standby : null;
    if ((prev.algorithm === 'tonal') === (next.algorithm === 'tonal')) return `${name(prev)} → ${name(next)} is a different algorithm; only the tone follower ↔ broadband switch crossfades`;
    if (!ready) return `no ${name(next)} was kept ready for a crossfade`;
    return ready.algorithm === next.algorithm
      ? `the ${name(next)} kept ready for a crossfade has other settings (${broadbandName(ready)})`
      : `${name(next)} was not the controller kept ready for a crossfade (that is ${broadbandName(ready)})`;
  }
  if (prev.algorithm !== 'tonal' && next.algorithm !== 'tonal') {
    if (prev.taps !== next.taps) return `filter length ${prev.taps} → ${next.taps} taps`;
    if ((prev.implementation ?? 'auto') !== (next.implementation ?? 'auto') || (prev.fdConstraint ?? 'full') !== (next.fdConstraint ?? 'full')) return 'implementation changed';
    if ((prev.update ?? 'sample') !== (next.update ?? 'sample')) return 'update changed';
  }
  return 'settings that need a new filter changed';
}

