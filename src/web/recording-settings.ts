/**
 * The panel's settings in the scenario's vocabulary (what a recording's manifest holds and a replay
 * runs with), and a sweep's best settings taken back into the panel's: the sweep's JSON (best first)
 * gives dotted paths; they are applied to the panel's current settings and checked by the same schema
 * as a recording's settings (the settings tables), so nothing the engine would refuse reaches it.
 */
import type { ControlSettings } from './panel-settings.ts';
import { engineSettings } from '../engine/settings.ts';
import type { ControllerConfig } from '../engine/controller-factory.ts';
import { parseReplaySettings, ReplayError, type ReplaySettings } from '../plant/replay.ts';
import { applySettings, GridError, type GridValue } from '../plant/settings-grid.ts';

/** The panel's controller and output cap as recording settings. */
export function recordingSettings(s: ControlSettings, highPassHz?: number): ReplaySettings {
  const c = engineSettings(s.controller) as ReplaySettings['controller'];
  const controller = c.algorithm === 'tonal' && c.frequencySource === 'external' ? { ...c, frequencySource: 'reference' as const } : c;
  return { controller, limiter: { ceilingDbfs: s.ceilingDbfs }, ...(highPassHz !== undefined ? { highPassHz } : {}) };
}

/**
 * The best entry of a sweep's JSON (`ancbench sweep --json` or `sweep.json`) applied to the panel's
 * settings. Throws an Error with one message naming what is wrong.
 */
export function settingsFromSweep(sweep: unknown, current: ControlSettings): { settings: ControlSettings; applied: Record<string, GridValue> } {
  if (!Array.isArray(sweep) || sweep.length === 0) throw new Error('not a sweep result: expected the JSON array ancbench sweep prints (best first)');
  const best = sweep[0] as { settings?: unknown; diverged?: unknown; rank?: unknown };
  if (typeof best !== 'object' || best === null || typeof best.settings !== 'object' || best.settings === null) throw new Error('not a sweep result: its first entry has no "settings"');
  if (best.diverged === true) throw new Error('the best run of this sweep diverged: no settings worth loading');
  const applied = best.settings as Record<string, GridValue>;
  const outside = Object.keys(applied).filter((k) => !/^(controller\.|limiter\.ceilingDbfs$|outputCeilingDbfs$)/.test(k));
  if (outside.length) throw new Error(`the panel cannot take ${outside.map((k) => `"${k}"`).join(', ')} (it takes controller settings and the output cap)`);
  let merged: ReplaySettings;
  try {
    merged = parseReplaySettings(applySettings(recordingSettings(current), applied));
  } catch (e) {
    if (e instanceof ReplayError || e instanceof GridError) throw new Error(`the sweep's best settings do not fit: ${e.message}`);
    throw e;
  }
  const ceiling = applied.outputCeilingDbfs ?? merged.limiter?.ceilingDbfs ?? current.ceilingDbfs;
  return { settings: { ...current, controller: engineSettings(merged.controller) as ControllerConfig, ceilingDbfs: ceiling as number }, applied };
}
