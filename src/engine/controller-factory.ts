import type { Controller } from '../dsp/controller.ts';
import { FxlmsController, type FxlmsConfig } from '../dsp/fxlms.ts';

/** Every controller configuration the engine can run: a union discriminated by `algorithm`. */
export type ControllerConfig = FxlmsConfig;

/** Build the controller a configuration names. Validates; allocates everything once. */
export function createController(
  config: ControllerConfig,
  secondaryPathModel: Float32Array,
  maxBlockSize: number,
  _sampleRate: number,
): Controller {
  switch (config.algorithm) {
    case 'fxlms':
    case 'fxnlms':
      return new FxlmsController(config, secondaryPathModel, maxBlockSize);
    default: {
      const unknown: never = config.algorithm;
      throw new RangeError(`controller.algorithm "${String(unknown)}" is not known`);
    }
  }
}
