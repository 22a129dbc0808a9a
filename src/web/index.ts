/**
 * The package's browser entry (`ancbench/web`): the controller node for any Web Audio graph, its
 * options and types, and the vocabulary of its meters and events. No side effects at import.
 *
 *   import { createControllerNode } from 'ancbench/web';
 *   const node = await createControllerNode(context, { controller: { algorithm: 'fxnlms', taps: 64, stepSize: 0.05 }, secondaryPathModel });
 */
export {
  createControllerNode,
  loadControllerWorklet,
  defaultNodeProbe,
  CONTROLLER_PROCESSOR,
  LIVE_WORKLET_FILE,
  type ControllerNode,
  type WrappedControllerNode,
  type ControllerNodeApi,
  type ControllerNodeEventMap,
  type ControllerNodeListener,
  type ControllerNodeState,
  type ControllerMeters,
  type ControllerEvent,
  type ConnectableNode,
  type IdentifyRequest,
} from './node-controller.ts';
export {
  checkNodeOptions,
  nodeOptionsMarkdown,
  ControllerNodeOptionsError,
  NODE_SETTINGS,
  NODE_LIMITER_SETTINGS,
  engineController,
  type ControllerNodeOptions,
  type ControllerSettings,
} from './node-controller-options.ts';
export {
  EVENT_CAUSE_CODES,
  EVENT_ACTIONS,
  HARMONIC_FIELDS,
  LIVE_PARAMETERS,
  M,
  MAX_PANEL_HARMONICS,
  METER_FIELDS,
  MODE_CODES,
  RECORD_MAX_S,
  TONE_DBFS_RANGE,
  TONE_MAX_S,
  TONE_MIN_HZ,
  eventValueNames,
  harmonicIndex,
  meterFrameToObject,
  type EventAction,
  type EventCause,
  type InputLayout,
  type LevelCheckRequest,
  type MeterField,
  type PanelEvent,
  type PanelMode,
  type ProbeSpec,
} from '../protocol/messages.ts';
export type { IdentificationResult, GeometryResult } from '../analysis/live-analysis.ts';
export { causalityVerdict, type CausalityVerdict } from '../analysis/bounds.ts';
export type { BroadbandControllerConfig, ControllerConfig, TonalSettings } from '../engine/controller-factory.ts';
export type { FxlmsConfig } from '../dsp/fxlms.ts';
export type { FxlmsImplementationSettings } from '../engine/implementation.ts';
export {
  ALGORITHMS,
  FXLMS_SETTINGS,
  TONAL_SETTINGS,
  LIMITER_SETTINGS,
  OUTPUT_STAGE_SETTINGS,
  checkControllerSettings,
  settingsProblems,
  tableMarkdown,
  type SettingSpec,
  type SettingsTable,
} from '../engine/settings.ts';

export { DEFAULT_OUTPUT_CONSTRAINT, DEFAULT_OUTPUT_MARGIN_DB, OUTPUT_CONSTRAINT_METHODS, type OutputConstraintMethod } from '../dsp/output-constraint.ts';

export { EVENT_TEXT } from './event-words.ts';
export { SPECTRUM_UNIT } from '../analysis/welch.ts';
export { DEFAULT_CROSSFADE_MS } from '../engine/engine.ts';
export { NON_FINITE_SOURCES } from '../engine/events.ts';
export { powerToDbfs } from '../dsp/units.ts';
export { MIN_USABLE_SNR_DB } from '../analysis/live-analysis.ts';
export { THEMES, type ThemeName } from '../palette.ts';
