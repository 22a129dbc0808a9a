import type { Controller } from '../dsp/controller.ts';
import { checkControllerSettings } from './settings.ts';
import type { FxlmsConfig } from '../dsp/fxlms.ts';
import { buildFxlmsController, type FxlmsImplementationSettings } from './implementation.ts';
import { TonalController, type TonalControllerConfig } from '../dsp/tonal-controller.ts';
import { PlantTrackingController, type OnlineModelSettings } from '../dsp/plant-tracking.ts';

/**
 * The narrowband controller's settings as a configuration names them (the engine supplies the rest).
 * Every configuration may carry `outputConstraint` and `outputMarginDb` (src/dsp/output-constraint.ts);
 * the engine passes the cap itself.
 */
export type TonalSettings = { algorithm: 'tonal' } & Omit<TonalControllerConfig, 'sampleRate' | 'maxBlockSize' | 'secondaryPathModel'>;

/** Options of a broadband controller for a changing plant (issue 14; src/dsp/plant-tracking.ts). */
export interface PlantTrackingSettings {
  onlineModel?: OnlineModelSettings | undefined;
  /** true: the feedback-path model the engine was given; a string: a path-model file the host loaded into it. */
  feedbackNeutralisation?: boolean | string | undefined;
}
type BroadbandSettings = FxlmsConfig & FxlmsImplementationSettings & PlantTrackingSettings;
/** One-microphone broadband control: FxNLMS on the reference regenerated from the error mic. */
export type ImcSettings = Omit<BroadbandSettings, 'algorithm' | 'feedbackNeutralisation'> & { algorithm: 'imc'; feedbackNeutralisation?: boolean | string | undefined };

/** The broadband configurations (FxLMS, FxNLMS, IMC), which share their fields. */
export type BroadbandControllerConfig = BroadbandSettings | ImcSettings;

/** Every controller configuration the engine can run: a union discriminated by `algorithm`. */
export type ControllerConfig = BroadbandSettings | TonalSettings | ImcSettings;

/** What a controller may need beside its configuration and the secondary-path model. */
export interface ControllerExtras {
  /** Loudspeaker → reference-mic model (taps at the engine's rate), for feedbackNeutralisation. */
  feedbackPathModel?: Float32Array | undefined;
}

/** Build the controller a configuration names. Validates; allocates everything once. */
export function createController(
  config: ControllerConfig,
  secondaryPathModel: Float32Array,
  maxBlockSize: number,
  sampleRate: number,
  extras: ControllerExtras = {},
): Controller {
  // the same table the scenario schema and the worklet messages use (src/engine/settings.ts)
  checkControllerSettings(config);
  switch (config.algorithm) {
    case 'fxlms':
    case 'fxnlms':
    case 'imc': {
      const { onlineModel, feedbackNeutralisation, ...rest } = config;
      const inner = { ...rest, sampleRate, algorithm: config.algorithm === 'imc' ? 'fxnlms' : config.algorithm } as FxlmsConfig & FxlmsImplementationSettings;
      const neutralise = config.algorithm !== 'imc' && feedbackNeutralisation !== undefined && feedbackNeutralisation !== false;
      if (neutralise && !extras.feedbackPathModel) {
        throw new RangeError('controller.feedbackNeutralisation: needs a loudspeaker → reference-mic model (identify the paths first, or name a path-model file), got none');
      }
      if (config.algorithm === 'imc' && feedbackNeutralisation) throw new RangeError(`controller.feedbackNeutralisation: must be false or absent with "imc" (it has no reference microphone), got ${JSON.stringify(feedbackNeutralisation)}`);
      if (config.algorithm !== 'imc' && !onlineModel && !neutralise) return buildFxlmsController(inner, secondaryPathModel, maxBlockSize);
      // time domain in TypeScript or wasm SIMD, or partitioned frequency domain: see implementation.ts
      const modelTaps = onlineModel?.taps ?? secondaryPathModel.length;
      const model = new Float32Array(modelTaps);
      model.set(secondaryPathModel.subarray(0, modelTaps));
      return new PlantTrackingController(buildFxlmsController(inner, model, maxBlockSize), secondaryPathModel, {
        sampleRate, maxBlockSize, imc: config.algorithm === 'imc', online: onlineModel ?? null,
        feedbackPathModel: neutralise ? extras.feedbackPathModel! : null,
      });
    }
    case 'tonal': {
      const { algorithm: _a, ...rest } = config;
      return new TonalController({ ...rest, sampleRate, maxBlockSize, secondaryPathModel });
    }
    default: {
      const unknown: never = config;
      throw new RangeError(`controller.algorithm "${String((unknown as { algorithm: string }).algorithm)}" is not known`);
    }
  }
}
