import type { Controller } from '../dsp/controller.ts';
import { checkControllerSettings } from './settings.ts';
import type { FxlmsConfig } from '../dsp/fxlms.ts';
import { buildFxlmsController, type FxlmsImplementationSettings } from './implementation.ts';
import { TonalController, type TonalControllerConfig } from '../dsp/tonal-controller.ts';

/**
 * The narrowband controller's settings as a configuration names them (the engine supplies the rest).
 * Every configuration may carry `outputConstraint` and `outputMarginDb` (src/dsp/output-constraint.ts);
 * the engine passes the cap itself.
 */
export type TonalSettings = { algorithm: 'tonal' } & Omit<TonalControllerConfig, 'sampleRate' | 'maxBlockSize' | 'secondaryPathModel'>;

/** Every controller configuration the engine can run: a union discriminated by `algorithm`. */
export type ControllerConfig = (FxlmsConfig & FxlmsImplementationSettings) | TonalSettings;

/** Build the controller a configuration names. Validates; allocates everything once. */
export function createController(
  config: ControllerConfig,
  secondaryPathModel: Float32Array,
  maxBlockSize: number,
  sampleRate: number,
): Controller {
  // the same table the scenario schema and the worklet messages use (src/engine/settings.ts)
  checkControllerSettings(config);
  switch (config.algorithm) {
    case 'fxlms':
    case 'fxnlms':
      // time domain in TypeScript or wasm SIMD, or partitioned frequency domain: see implementation.ts
      return buildFxlmsController({ ...config, sampleRate }, secondaryPathModel, maxBlockSize);
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
