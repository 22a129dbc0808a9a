import type { OutputConstraint } from './output-constraint.ts';

/**
 * The contract every adaptive controller in ancbench fulfils, so the engine can run any of them.
 *
 * Sign convention (fixed project-wide): the error microphone hears e = d + (s * y), where d is the
 * disturbance, s the true secondary path and y the controller output. Controllers therefore drive
 * y towards −d.
 *
 * Timing: `process` receives a block of reference and error samples taken at the same instants,
 * and writes the control output for those same instants. The error samples of this block already
 * contain the effect of earlier outputs only (the secondary path, which includes the audio I/O
 * latency, is at least one block long), so no block of latency is added.
 */
export interface Controller {
  /** Which algorithm this is (`fxlms`, `fxnlms`, `tonal`, ...). */
  readonly kind: string;
  /** When false the weights are frozen: the controller still produces output from its weights. */
  adapt: boolean;
  /** Clear the weights and every delay line. */
  reset(): void;
  /**
   * Process one block of n samples (n ≤ the maximum block size given at construction).
   * Never allocates, never throws; non-finite inputs are the guard's business.
   */
  process(ref: Float32Array, err: Float32Array, out: Float32Array, n: number): void;
  /** Squared Euclidean norm of the control weights (the guard watches it). */
  weightNormSquared(): number;
  /** Copy the current control weights into `out` (allocated by the caller); returns the count written. */
  copyWeights(out: Float32Array): number;
  /** Change the step size μ (applied by the engine at a block boundary). */
  setStepSize(mu: number): void;
  /** Change the leakage γ ≥ 0. */
  setLeakage(gamma: number): void;
  /**
   * Replace the secondary-path model in place (same length, or shorter: the rest is zero). For a new
   * identification during a session, or for fault injection in the simulator. Not per block.
   */
  setSecondaryPathModel?(taps: ArrayLike<number>): void;
  /**
   * The output cap (linear sample peak, 0 < cap ≤ 1) the controller must keep its output under
   * (src/dsp/output-constraint.ts). The engine calls it at construction and on every cap change.
   * Optional for test-signal sources that are not adaptive.
   */
  setOutputCap?(cap: number): void;
  /** The controller's output constraint (method, level, whether it acts now). */
  readonly outputConstraint?: OutputConstraint | undefined;
}
