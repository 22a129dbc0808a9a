/**
 * The package's main entry (`ancbench`): the engine, the simulator and the analysis, for Node and
 * for pages alike (nothing here touches files, the DOM or Web Audio; read files yourself and hand the
 * parsed JSON or decoded samples in; WAV files: the command line, or any decoder). The browser's
 * controller node is `ancbench/web`; the command line is `ancbench/cli` (its `main(argv)`) and the
 * `ancbench` binary.
 *
 *   import { parseScenario, simulate } from 'ancbench';
 *   const result = simulate(parseScenario(JSON.parse(text)));
 */
// scenarios and the simulator
export { parseScenario, ScenarioError, scenarioCeilingDbfs, SCENARIO_SCHEMA_VERSION, type Scenario, type SourceSpec, type PathSpec, type ControllerSpec } from './plant/scenario.ts';
export { simulate, PlantLoop, trueSecondaryPath, engineControllerConfig, type SimulateOptions, type SimulationResult, type SimulationSignals, type ToneResult } from './plant/simulate.ts';
export { identifySimulated, type IdentifySimOptions, type IdentifySimResult } from './plant/identify-sim.ts';
export {
  LevelCapCheck,
  runLevelCapCheck,
  effectiveCeiling,
  levelCapConfigFromScenario,
  DEFAULT_GAP_S,
  DEFAULT_HOLD_S,
  DEFAULT_OVER_DB,
  DEFAULT_START_DBFS,
  type EffectiveCeiling,
  type LevelCapCheckConfig,
  type LevelCapResult,
  limitsTruePeak,
  TRUE_PEAK_TOLERANCE_DB,
} from './engine/level-cap-check.ts';
// the engine and its settings tables
export { Engine, DEFAULT_CEILING_DBFS, DEFAULT_RAMP_MS, type EngineConfig, type EngineMeters, type EngineMode } from './engine/engine.ts';
export { createController, type BroadbandControllerConfig, type ControllerConfig, type TonalSettings } from './engine/controller-factory.ts';
export { describeImplementation, type FxlmsImplementationSettings } from './engine/implementation.ts';
export type { FxlmsConfig } from './dsp/fxlms.ts';
export {
  ALGORITHMS,
  FXLMS_SETTINGS,
  TONAL_SETTINGS,
  SIMULATION_ONLY_FIELDS,
  LIMITER_SETTINGS,
  OUTPUT_STAGE_SETTINGS,
  checkControllerSettings,
  settingsProblems,
  settingsMarkdown,
  tableMarkdown,
  type SettingSpec,
  type SettingsTable,
} from './engine/settings.ts';
export { powerToDbfs, dbfsToPower, amplitudeToDb, dbToAmplitude, powerRatioDb } from './dsp/units.ts';
// analysis
export { welchPsd, welchCsd, welchCoherence, hannWindow, type PsdResult, type WelchOptions } from './analysis/welch.ts';
export { fractionalOctaveBands, bandPowers, type FrequencyBand } from './analysis/bands.ts';
export { weightingDb, weightingCurveDb, applyWeightingToPsd } from './analysis/weighting.ts';
export { bandAttenuation, bandAttenuationFromSignals, type BandAttenuationResult, type BandAttenuationRow } from './analysis/band-attenuation.ts';
export { wienerBound, type WienerResult } from './analysis/wiener.ts';
export { analyzeRecordings, type RecordingAnalysis, type RecordingAnalysisInput, type RecordingAnalysisOptions } from './analysis/recording-analysis.ts';
export { deconvolveSweep } from './analysis/sweep-deconvolve.ts';
export { LiveAnalysis, type GeometryResult, type IdentificationResult } from './analysis/live-analysis.ts';
export { causalityVerdict, type CausalityVerdict } from './analysis/bounds.ts';
export {
  SINE_CREST_DB,
  createOutputCalibration,
  ceilingDbfsForPeakSpl,
  dbfsToDbSpl,
  dbSplToDbfs,
  micCalibrationFromLevel,
  micCalibrationFromRecording,
  micDbfsToDbSpl,
  micDbSplToDbfs,
  type MicCalibration,
  type OutputCalibration,
  type OutputCalibrationPoint,
} from './engine/calibration.ts';
// file formats (parsing and writing; reading the bytes is the caller's)
export { parsePathModel, serializePathModel, createPathModel, resamplePathModel, PathModelError, type PathModel } from './io/path-model-file.ts';
export { safeJson } from './io/json.ts';
export { browserCalibrationStore, deviceKey, type CalibrationStore, type StoredMicCalibration, type StoredOutputCalibration } from './io/calibration-store.ts';
