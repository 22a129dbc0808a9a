/**
 * The panel's settings and how they map to and from a scenario, with no audio graph: the panel, the
 * simulated-plant worklet and the command line must run a scenario's controller the same way (the
 * round trip is tested in test/web/panel-settings.test.ts).
 */
import { engineSettings } from '../engine/settings.ts';
import type { ControllerConfig } from '../engine/controller-factory.ts';
import { DEFAULT_CEILING_DBFS } from '../engine/engine.ts';
import { parseScenario, scenarioCeilingDbfs, type Scenario } from '../plant/scenario.ts';
import { engineControllerConfig } from '../plant/simulate.ts';

export interface ControlSettings {
  controller: ControllerConfig;
  ceilingDbfs: number;
  adaptation: boolean;
  /**
   * The other controller family's settings (tone follower beside broadband FxLMS, or the reverse):
   * the engine keeps it on standby, so switching between the two crossfades instead of restarting.
   */
  standby?: ControllerConfig;
}

/** The panel's settings for a scenario: its controller as the engine runs it and its output cap. */
export function panelSettingsFromScenario(sc: Scenario): ControlSettings {
  return { controller: engineControllerConfig(sc), ceilingDbfs: scenarioCeilingDbfs(sc, DEFAULT_CEILING_DBFS), adaptation: true };
}

/**
 * The scenario's controller with the panel's settings in place: the panel's configuration (the
 * engine's shape, which is the scenario's: src/engine/settings.ts) plus the scenario's simulator-only
 * model-imperfection fields. modelFile is left out: the page cannot read files; the model comes from
 * the true path. An "external" frequency source has no meaning in a file and becomes "reference".
 */
export function scenarioController(sc: Scenario, c: ControllerConfig): Scenario['controller'] {
  const o = sc.controller;
  const keep = {
    ...(o.modelTaps !== undefined ? { modelTaps: o.modelTaps } : {}),
    ...(o.modelPhaseErrorDeg !== undefined ? { modelPhaseErrorDeg: o.modelPhaseErrorDeg } : {}),
    ...(o.modelGainErrorDb !== undefined ? { modelGainErrorDb: o.modelGainErrorDb } : {}),
  };
  const own = engineSettings(c) as Scenario['controller'];
  if (own.algorithm === 'tonal' && own.frequencySource === 'external') return { ...own, frequencySource: 'reference', ...keep };
  return { ...own, ...keep };
}

/**
 * The scenario as the panel runs it: its own rate and block size (the worklet splits each render
 * quantum into steps of at most one block; when the block divides the quantum, as 32 … 128 do 128,
 * the run matches the command-line simulator's block for block), with the panel's controller
 * settings and output cap.
 */
export function scenarioForPanel(sc: Scenario, settings: ControlSettings): Scenario {
  // a room scenario goes back as its room (parseScenario turned it into explicit paths and kept the room)
  const { room, limiter, outputCeilingDbfs: _cap, ...rest } = sc;
  const { ceilingDbfs: _c, ...limiterRest } = limiter ?? {};
  return parseScenario({
    ...rest,
    ...(room ? { paths: room } : {}),
    ...(limiter ? { limiter: limiterRest } : {}),
    outputCeilingDbfs: settings.ceilingDbfs,
    controller: scenarioController(sc, settings.controller),
  });
}

