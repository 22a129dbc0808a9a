import type { Engine } from '../src/engine/engine.ts';
import { describeImplementation } from '../src/engine/implementation.ts';
import { LiveSequence, type LiveSequenceHost, type LiveState } from '../src/live/live-sequence.ts';
import {
  LIVE_PARAMETERS,
  M,
  MODE_CODES,
  checkTelemetryOptions,
  type EventAction,
  type EventCause,
  type LiveProcessorOptions,
  type PortLike,
  type WorkletMessage,
} from '../src/protocol/messages.ts';
import { RecordTap } from './record-tap.ts';
import { ChunkSender, InputConditioner, Telemetry, levels } from './adapter.ts';
import { receive, applyEngineMessage, copyWeights, fillEngineExtras, inputNonFinite, relayEngineEvents, EngineEventState } from './engine-events.ts';

/**
 * Live processor: one input (channel 0 = reference mic, channel 1 = error mic; or the error mic alone
 * in 'err-only' layout), one mono output (the anti-noise to the loudspeaker, after the output stage).
 * A thin adapter: it reads the quantum length from the arrays it is given, splits quanta longer than
 * the engine's block, conditions the inputs, and relays meters and events. Everything it plays —
 * the engine's controller, identification probes, calibration tones, the level-cap check — comes
 * from the host-free LiveSequence (src/live/live-sequence.ts), which is tested in Node, and passes an
 * output stage there.
 *
 * Bundle rules (standardized-audio-context wraps this file and evaluates it twice): imports first,
 * no exports, no top-level side effects besides registerProcessor.
 */
/** How long the input may be absent at start before 'input-missing' is reported, s. */
const START_GRACE_S = 0.05;

class LiveProcessor extends AudioWorkletProcessor implements LiveSequenceHost {
  static get parameterDescriptors(): typeof LIVE_PARAMETERS {
    return LIVE_PARAMETERS;
  }

  private readonly seq: LiveSequence;
  /** Last value seen of each AudioParam (stepSize, leakage, ceilingDbfs): only a change is applied. */
  // float32, as AudioParam values arrive: a default of 0.01 must compare equal to itself
  private readonly lastParam = new Float32Array(LIVE_PARAMETERS.length);
  private readonly opts: LiveProcessorOptions;
  private readonly telemetry: Telemetry;
  private readonly chunks: ChunkSender;
  /** Recording of a live run (src/protocol/record-ring.ts): what the engine hears and plays, per block. */
  private readonly tap: RecordTap;
  private readonly cond = new InputConditioner();
  private readonly evState = new EngineEventState();
  private readonly block: number;
  private readonly ref: Float32Array;
  private readonly err: Float32Array;
  private readonly out: Float32Array;
  private readonly lv = new Float64Array(2);
  private lastChannels = -1;
  /** An 'input-missing' was reported and the input has not come back yet. */
  private inputLost = false;
  /** Some input has arrived since the processor started. */
  private inputSeen = false;
  /** Samples without any input before the first arrived. */
  private silentAtStart = 0;
  private warnedChannels = false;

  constructor(options: WorkletNodeOptions) {
    super(options);
    const o = options.processorOptions as LiveProcessorOptions | undefined;
    if (!o || typeof o !== 'object') throw new RangeError('processorOptions must be an object');
    if (o.inputLayout !== 'ref-err' && o.inputLayout !== 'err-only') throw new RangeError(`inputLayout must be "ref-err" or "err-only", got ${String(o.inputLayout)}`);
    const telemetry = checkTelemetryOptions(o.telemetry);
    this.opts = o;
    this.telemetry = new Telemetry(this.port, telemetry, sampleRate);
    this.chunks = new ChunkSender(telemetry.chunkSamples, sampleRate, false);
    this.tap = new RecordTap(this.port);
    this.seq = new LiveSequence(sampleRate, o, this);
    const initial = options.parameterData ?? {};
    for (let i = 0; i < LIVE_PARAMETERS.length; i++) this.lastParam[i] = initial[LIVE_PARAMETERS[i]!.name] ?? LIVE_PARAMETERS[i]!.defaultValue;
    const maxQuantum = o.maxQuantum;
    this.block = maxQuantum;
    this.ref = new Float32Array(maxQuantum);
    this.err = new Float32Array(maxQuantum);
    this.out = new Float32Array(maxQuantum);
    this.port.onmessage = (e) => this.onMessage(e.data);
    const ready: WorkletMessage = {
      type: 'ready',
      sampleRate,
      telemetry: this.telemetry.shared ? 'shared' : 'posted',
      maxBlockSize: maxQuantum,
      modelTaps: o.secondaryPathModel.length,
      implementation: describeImplementation(this.seq.engine.controller),
    };
    this.port.postMessage(ready);
  }

  // LiveSequenceHost
  post(message: WorkletMessage, transfer?: ArrayBuffer[]): void {
    this.port.postMessage(message, transfer ?? []);
  }
  event(timeS: number, cause: EventCause, action: EventAction, v0: number, v1: number, v2: number): void {
    this.telemetry.event(timeS, cause, action, v0, v1, v2, false);
  }
  meterPiece(ref: Float32Array, err: Float32Array, out: Float32Array, m: number): void {
    const lv = this.lv;
    levels(ref, m, lv);
    const rp = lv[0]!, rk = lv[1]!;
    levels(err, m, lv);
    const ep = lv[0]!, ek = lv[1]!;
    levels(out, m, lv);
    const tel = this.telemetry;
    tel.addBlock(m, rp, ep, lv[0]!, rk, ek, lv[1]!);
    tel.addOutput(out, m);
    const chk = this.seq.check;
    if (chk && this.seq.state === 'check') tel.addGainReduction(chk.engine.limiter.gainReductionDb);
    this.chunks.push(err, null, ref, m, false);
  }
  meterEngineBlock(engine: Engine, ref: Float32Array, err: Float32Array, out: Float32Array, m: number, offsetS: number): void {
    this.tap.write(ref, err, out, engine.currentMode, m);
    const em = engine.meters;
    const tel = this.telemetry;
    tel.addBlock(m, em.refPower, em.errPower, em.outPower, em.refPeak, em.errPeak, em.outPeak);
    tel.addOutput(out, m);
    relayEngineEvents(engine, tel, this.evState, offsetS);
    this.chunks.push(err, null, ref, m, engine.currentMode === 'control' && em.rampGain === 1);
  }

  private onMessage(data: unknown): void {
    const msg = receive(this.port, data, sampleRate);
    if (msg === null || this.tap.handle(msg)) return;
    const engine = this.seq.engine;
    if (applyEngineMessage(engine, msg, this.port, this.telemetry)) return;
    if (this.seq.handle(msg)) return;
    switch (msg.type) {
      case 'request-weights':
        this.port.postMessage({ type: 'weights', weights: copyWeights(engine) });
        break;
      case 'attach-analysis':
        this.chunks.attach(msg.port as PortLike);
        break;
      default:
        break; // 'set-monitor': simulated plant only
    }
  }

  /** The node's AudioParams (src/web/node-controller.ts): a changed value goes to the engine at the next block. */
  private applyParameters(parameters: Record<string, Float32Array> | undefined): void {
    if (parameters === undefined) return;
    const engine = this.seq.engine;
    for (let i = 0; i < LIVE_PARAMETERS.length; i++) {
      const values = parameters[LIVE_PARAMETERS[i]!.name];
      if (values === undefined || values.length === 0) continue;
      const v = values[0]!;
      if (v === this.lastParam[i]) continue;
      this.lastParam[i] = v;
      if (i === 0) engine.setStepSize(v);
      else if (i === 1) engine.setLeakage(v);
      else engine.setCeilingDbfs(v);
    }
  }

  process(inputs: Float32Array[][], outputs: Float32Array[][], parameters?: Record<string, Float32Array>): boolean {
    const seq = this.seq;
    if (seq.state === 'stopped') return false;
    this.applyParameters(parameters);
    const input = inputs[0];
    const output = outputs[0];
    const out0 = output !== undefined && output.length > 0 ? output[0] : undefined;
    const n = out0 !== undefined ? out0.length : input !== undefined && input.length > 0 ? input[0]!.length : 0;
    if (n === 0) return true;
    const tel = this.telemetry;
    const cond = this.cond;
    const channels = cond.begin(input);
    const timeS = seq.clockS;
    // the first quanta may arrive before the microphones are connected: that is not a loss of input,
    // so 'input-missing' needs input seen before (or none at all for the first START_GRACE_S), and
    // 'input-restored' follows only a reported loss
    if (channels === 0 && this.lastChannels <= 0 && !this.inputLost && !this.inputSeen) this.silentAtStart += n;
    if (channels > 0) this.inputSeen = true;
    const neverArrived = !this.inputSeen && !this.inputLost && this.silentAtStart >= START_GRACE_S * sampleRate;
    if (channels === 0 && (this.lastChannels > 0 || neverArrived)) {
      tel.event(timeS, 'input-missing', 'none', 0, NaN, NaN, false);
      this.inputLost = true;
    }
    if (channels > 0 && this.inputLost) {
      tel.event(timeS, 'input-restored', 'none', channels, NaN, NaN, false);
      this.inputLost = false;
    }
    if (channels === 1 && this.opts.inputLayout === 'ref-err' && !this.warnedChannels) {
      this.warnedChannels = true;
      tel.event(timeS, 'channel-count', 'none', 2, 1, NaN, false);
    }
    this.lastChannels = channels;

    const B = this.block;
    const errCh = this.opts.inputLayout === 'ref-err' ? 1 : 0;
    for (let off = 0; off < n; off += B) {
      const m = n - off < B ? n - off : B;
      cond.copy(input, errCh, off, this.err, m);
      if (this.opts.inputLayout === 'ref-err') cond.copy(input, 0, off, this.ref, m);
      else for (let i = 0; i < m; i++) this.ref[i] = this.err[i]!;
      seq.recordMics(this.ref, this.err, m);
      const checked = seq.runPiece(this.ref, this.err, this.out, m);
      if (out0 !== undefined) {
        for (let i = 0; i < m; i++) out0[off + i] = this.out[i]!;
        // what this processor hands to the audio output, measured where it leaves
        if (checked) seq.measureHanded(out0, off, m);
      }
    }
    if (output !== undefined) for (let c = 1; c < output.length; c++) output[c]!.set(out0!);
    seq.endOfQuantum();
    // input channel c carries microphone c in the ref-err layout; in err-only channel 0 is the error mic
    for (let c = 0; c < 2; c++) {
      const bad = cond.badLast[c]!;
      if (bad > 0) inputNonFinite(tel, timeS, this.opts.inputLayout === 'ref-err' ? c : 1, bad);
    }

    if (tel.due) this.publish(channels, n);
    if ((seq.state as LiveState) === 'stopped') {
      this.chunks.close();
      this.port.postMessage({ type: 'stopped' });
      return false;
    }
    return true;
  }

  private publish(channels: number, n: number): void {
    const seq = this.seq;
    const engine = seq.engine;
    const tel = this.telemetry;
    tel.fillFromEngine(engine);
    fillEngineExtras(engine, tel.frame, this.evState);
    const f = tel.frame;
    f[M.timeS] = seq.clockS;
    f[M.mode] = MODE_CODES.indexOf(seq.displayMode);
    f[M.inputChannels] = channels;
    f[M.quantum] = n;
    f[M.probeProgress] = seq.progress;
    f[M.nonFiniteIn] = this.cond.badTotal;
    const chk = seq.check;
    if (chk && seq.state === 'check') {
      // the output side of the frame is the check's engine: its cap, ramp and true peak
      const ce = chk.engine;
      f[M.ceilingDbfs] = ce.limiter.ceilingDbfs;
      f[M.checkCeilingDbfs] = chk.ceiling.ceilingDbfs;
      f[M.rampGain] = ce.meters.rampGain;
      f[M.maxTruePeak] = ce.meters.maxOutTruePeak;
      f[M.nonFiniteOut] = ce.meters.nonFiniteOut;
      f[M.guardState] = ce.meters.guardState;
    }
    tel.publish();
  }
}

registerProcessor('ancbench-live', LiveProcessor);
