/**
 * Where the engine's own protection meets the panel's event list. Today the engine reports ceiling
 * clamps and silenced non-finite outputs as cumulative counters in its meters; this module turns
 * their increments into events. When the engine's guard and limiter publish events of their own
 * (issue 5: src/engine/events.ts, src/dsp/limiter.ts), drain them here, and let `outputStage`
 * route the probe through the engine's limiter, so the worklets need no other change.
 */
import type { Engine } from '../src/engine/engine.ts';
import { parseControlMessage, type ControlMessage } from '../src/engine/messages.ts';
import type { Telemetry } from './adapter.ts';

/** Validate a message from the page; an invalid one is answered with an 'error' message and dropped. */
export function receive(port: WorkletPort, data: unknown, rate: number): ControlMessage | null {
  try {
    return parseControlMessage(data, rate);
  } catch (e) {
    port.postMessage({ type: 'error', message: (e as Error).message });
    return null;
  }
}

/**
 * Apply a message that only changes the running engine (queued by the engine to the next block
 * boundary). Returns false for messages the processor handles itself.
 */
export function applyEngineMessage(engine: Engine, msg: ControlMessage): boolean {
  switch (msg.type) {
    case 'set-step-size':
      engine.setStepSize(msg.value);
      return true;
    case 'set-leakage':
      engine.setLeakage(msg.value);
      return true;
    case 'set-ceiling':
      engine.setCeilingDbfs(msg.dbfs);
      return true;
    case 'set-adaptation':
      engine.setAdaptation(msg.on);
      return true;
    case 'reset-weights':
      engine.resetWeights();
      return true;
    default:
      return false;
  }
}

/** The control weights as a new array (for the 'weights' reply; not for the audio path). */
export function copyWeights(engine: Engine): Float32Array {
  const w = new Float32Array((engine.controller as { taps?: number }).taps ?? 65536);
  const count = engine.controller.copyWeights(w);
  return w.slice(0, count);
}

/** Counter totals already turned into events. */
export class EngineEventState {
  hits = 0;
  bad = 0;
  reset(): void {
    this.hits = 0;
    this.bad = 0;
  }
}

/** Turn counter increments of the last block into (throttled) events. */
export function relayEngineEvents(engine: Engine, tel: Telemetry, state: EngineEventState): void {
  const m = engine.meters;
  const hits = m.ceilingHits - state.hits;
  const bad = m.nonFiniteOut - state.bad;
  state.hits = m.ceilingHits;
  state.bad = m.nonFiniteOut;
  if (bad > 0) tel.event(m.timeS, 'output-non-finite', 'silenced', bad);
  if (hits > 0) tel.event(m.timeS, 'ceiling-hit', 'clamped', hits, 20 * Math.log10(m.outPeak));
}

/**
 * The output stage for signals that do not come from the engine (the identification probe):
 * non-finite → 0, then a hard clamp at the ceiling. Returns the block's peak.
 */
export function outputStage(x: Float32Array, n: number, ceiling: number): number {
  let pk = 0;
  for (let i = 0; i < n; i++) {
    let v = x[i]!;
    if (!(v - v === 0)) v = 0;
    else if (v > ceiling) v = ceiling;
    else if (v < -ceiling) v = -ceiling;
    x[i] = v;
    const a = v < 0 ? -v : v;
    if (a > pk) pk = a;
  }
  return pk;
}
