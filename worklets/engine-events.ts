/**
 * Where the engine meets the panel: messages that only touch the engine, the engine's events
 * (guard, limiter and non-finite output, drained from its ring and forwarded unchanged), the
 * controller-specific meters (tone follower), and the output stage of the identification probe.
 */
import type { Engine } from '../src/engine/engine.ts';
import { createController, type ControllerConfig } from '../src/engine/controller-factory.ts';
import { createEventBatch, VALUES_PER_EVENT, type EventBatch } from '../src/engine/events.ts';
import { describeImplementation } from '../src/engine/implementation.ts';
import { parseControlMessage, harmonicIndex, M, MAX_PANEL_HARMONICS, type ControlMessage, type PortLike, type WorkletMessage } from '../src/protocol/messages.ts';
import { createHarmonicReadout, type TonalController } from '../src/dsp/tonal-controller.ts';
import type { Telemetry } from './adapter.ts';

/** Validate a message from the page; an invalid one is answered with an 'error' message and dropped. */
export function receive(port: PortLike, data: unknown, rate: number): ControlMessage | null {
  try {
    return parseControlMessage(data, rate);
  } catch (e) {
    port.postMessage({ type: 'error', message: (e as Error).message });
    return null;
  }
}

function tonal(engine: Engine): TonalController | null {
  return engine.controller.kind === 'tonal' ? (engine.controller as unknown as TonalController) : null;
}

/**
 * Apply a message that only changes the running engine (the engine queues it to the next block
 * boundary; tone-follower settings are applied by the controller at its next block). Runs between
 * render quanta, on the audio thread. Returns false for messages the processor handles itself.
 */
export function applyEngineMessage(engine: Engine, msg: ControlMessage, port: PortLike, tel: Telemetry): boolean {
  switch (msg.type) {
    case 'switch-controller': {
      const incoming = engine.standby;
      if (!incoming) {
        port.postMessage({ type: 'error', message: '"switch-controller" needs a standby controller (none was configured)' });
        return true;
      }
      if (engine.switching) {
        port.postMessage({ type: 'error', message: 'a controller crossfade is still under way: switch again when it has ended' });
        return true;
      }
      // queued: the engine swaps at the next block boundary and crossfades over crossfadeMs
      engine.switchController(msg.crossfadeMs);
      const toTonal = incoming.kind === 'tonal';
      tel.event(engine.meters.timeS, 'controller-switch', 'none', msg.crossfadeMs, toTonal ? 1 : 0, NaN, false);
      // the incoming controller is the one that runs from the next block on: the panel shows what runs it
      const switched: WorkletMessage = { type: 'switched', toTonal, crossfadeMs: msg.crossfadeMs, implementation: describeImplementation(incoming) };
      port.postMessage(switched);
      return true;
    }
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
    case 'acknowledge':
      engine.acknowledge();
      return true;
    case 'set-harmonics':
    case 'set-frequency-source': {
      const t = tonal(engine);
      if (!t) {
        port.postMessage({ type: 'error', message: `"${msg.type}" needs the tonal controller` });
        return true;
      }
      try {
        if (msg.type === 'set-harmonics') t.setHarmonics(msg.harmonics);
        else t.setFrequencySource(msg.source, msg.hz);
      } catch (e) {
        port.postMessage({ type: 'error', message: (e as Error).message });
      }
      return true;
    }
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

/** The batch the engine's event ring drains into, and a readout for the tone follower. */
export class EngineEventState {
  readonly batch: EventBatch = createEventBatch(32);
  readonly harmonic = createHarmonicReadout();
}

/**
 * Forward the engine's own events (guard, limiter, non-finite output) and note the block's gain
 * reduction. `offsetS` moves the engine's times onto the processor's clock (time the processor
 * played probes or tests without the engine).
 */
export function relayEngineEvents(engine: Engine, tel: Telemetry, state: EngineEventState, offsetS = 0): void {
  tel.addGainReduction(engine.meters.gainReductionDb);
  const ring = engine.events;
  while (ring.size > 0) {
    const b = state.batch;
    const n = ring.drainInto(b);
    for (let i = 0; i < n; i++) tel.forward(b.timeS[i]! + offsetS, b.cause[i]!, b.action[i]!, b.values, i * VALUES_PER_EVENT, VALUES_PER_EVENT);
  }
}

/** Non-finite input samples, as the engine's 'non-finite' cause (source 0 ref, 1 err). */
export function inputNonFinite(tel: Telemetry, timeS: number, channel: number, count: number): void {
  tel.event(timeS, 'non-finite', 'none', channel, count, NaN, true, channel + 1);
}

/** Tone-follower fields of a meter frame (NaN when the narrowband controller is not in charge). */
export function fillEngineExtras(engine: Engine, frame: Float64Array, state: EngineEventState): void {
  const t = tonal(engine);
  const h = t ? t.harmonics : 0;
  frame[M.toneHz] = t && t.frequencyKnown ? t.frequencyHz : NaN;
  frame[M.toneLocked] = t ? (t.trackerLocked ? 1 : 0) : NaN;
  frame[M.toneHarmonics] = t ? h : NaN;
  const r = state.harmonic;
  for (let k = 1; k <= MAX_PANEL_HARMONICS; k++) {
    const ok = t !== null && k <= h && t.readHarmonic(k, r);
    frame[harmonicIndex(k, 0)] = ok ? r.frequencyHz : NaN;
    frame[harmonicIndex(k, 1)] = ok ? r.disturbanceAmplitude : NaN;
    frame[harmonicIndex(k, 2)] = ok ? r.residualAmplitude : NaN;
    frame[harmonicIndex(k, 3)] = ok ? r.counterPhaseDeg : NaN;
    frame[harmonicIndex(k, 4)] = ok ? r.attenuationDb : NaN;
  }
}

/**
 * Play a probe or test signal (identification sweep, calibration tone) through the engine's output
 * stage (Engine.processProbe: high-pass, ramp, limiter), so the identified path includes the
 * high-pass and the limiter's latency and no probe sample can pass the ceiling. Returns the block's
 * output sample peak.
 */
export function playProbe(engine: Engine, x: Float32Array, out: Float32Array, n: number): number {
  engine.processProbe(x, out, n);
  return engine.meters.outPeak;
}

/**
 * Give an engine a standby controller after construction (the simulated plant's engine is built by
 * PlantLoop, which takes no standby): built on the same model, frozen while on standby, as the
 * engine's own constructor does for `standbyController`.
 */
export function attachStandby(engine: Engine, config: ControllerConfig, model: Float32Array, feedbackPathModel?: Float32Array): void {
  const c = createController(config, model, engine.maxBlockSize, engine.sampleRate, { feedbackPathModel });
  c.adapt = false;
  engine.standby = c;
}
