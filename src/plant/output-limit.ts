/**
 * What the output cap costs a run, measured the same way for `simulate` and `replay`: time at the
 * cap, time the controller's constraint acted, and the verdict `limited` with the attenuation to
 * expect within the constraint (see OutputLimit in src/plant/simulate.ts).
 */
import type { Engine } from '../engine/engine.ts';
import { DEFAULT_OUTPUT_CONSTRAINT, DEFAULT_OUTPUT_MARGIN_DB } from '../dsp/output-constraint.ts';
import { amplitudeToDb } from '../dsp/units.ts';
import type { OutputLimit } from './simulate.ts';

export class OutputLimitMeter {
  private onSamples = 0;
  private atCapSamples = 0;
  private constrainedSamples = 0;
  private lateSamples = 0;
  private lateLimitedSamples = 0;
  private readonly capNearLin: number;

  /** `steadyStart`: first sample of the stretch whose limiting decides `limited` when no required peak is known. */
  constructor(readonly capDbfs: number, private readonly steadyStart: number) {
    this.capNearLin = Math.pow(10, (capDbfs - 0.1) / 20);
  }

  /** One control-on block of n output samples starting at sample t. */
  block(engine: Engine, out: Float32Array, n: number, t: number): void {
    this.onSamples += n;
    let blockPeak = 0;
    for (let i = 0; i < n; i++) {
      const a = Math.abs(out[i]!);
      if (a > blockPeak) blockPeak = a;
    }
    const atCap = blockPeak >= this.capNearLin || engine.limiter.readout.blockMaxGainReductionDb > 0.1;
    const constrained = engine.controller.outputConstraint?.active === 1;
    if (atCap) this.atCapSamples += n;
    if (constrained) this.constrainedSamples += n;
    if (t >= this.steadyStart) {
      this.lateSamples += n;
      if (atCap || constrained) this.lateLimitedSamples += n;
    }
  }

  /**
   * The summary. `requiredPeak`: peak output of the unconstrained optimum (linear), or null when it is
   * unknown (then `notes.requiredPeakDbfs` should say why).
   */
  summary(
    controller: { outputConstraint?: string | undefined; outputMarginDb?: number | undefined },
    requiredPeak: number | null,
    wienerBoundDb: number | null,
    notes: Record<string, string>,
  ): OutputLimit {
    const constraintDbfs = this.capDbfs - (controller.outputMarginDb ?? DEFAULT_OUTPUT_MARGIN_DB);
    const requiredPeakDbfs = requiredPeak !== null && requiredPeak > 0 && Number.isFinite(requiredPeak) ? amplitudeToDb(requiredPeak) : null;
    if (requiredPeakDbfs === null && requiredPeak !== null) notes.requiredPeakDbfs = 'the optimal filter has no output';
    const limited = requiredPeakDbfs !== null ? requiredPeakDbfs > constraintDbfs : this.lateSamples > 0 && this.lateLimitedSamples > 0.5 * this.lateSamples;
    let expectedDb: number | null = null;
    if (limited && requiredPeakDbfs !== null) {
      expectedDb = -20 * Math.log10(1 - Math.pow(10, (constraintDbfs - requiredPeakDbfs) / 20));
      if (wienerBoundDb !== null && wienerBoundDb < expectedDb) expectedDb = wienerBoundDb;
    }
    return {
      capDbfs: this.capDbfs,
      constraintDbfs,
      method: controller.outputConstraint ?? DEFAULT_OUTPUT_CONSTRAINT,
      requiredPeakDbfs,
      limited,
      timeAtCapFraction: this.onSamples > 0 ? this.atCapSamples / this.onSamples : 0,
      constraintActiveFraction: this.onSamples > 0 ? this.constrainedSamples / this.onSamples : 0,
      expectedDb,
    };
  }
}

/** Control on is more than 1 dB louder than control off, overall or at a reported tone. */
export function isAmplified(attenuationDb: number | null, tones: readonly { attenuationDb: number | null }[]): boolean {
  return (attenuationDb !== null && attenuationDb < -1) || tones.some((t) => t.attenuationDb !== null && t.attenuationDb < -1);
}
