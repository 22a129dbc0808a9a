import { Engine } from '../src/engine/engine.ts';
import { ExponentialSweep } from '../src/dsp/sweep.ts';
import { M, MODE_CODES, checkTelemetryOptions, type LiveProcessorOptions, type ProbeSpec, type PortLike } from '../src/engine/messages.ts';
import { ChunkSender, InputConditioner, Telemetry, levels } from './adapter.ts';
import { receive, applyEngineMessage, copyWeights, fillEngineExtras, inputNonFinite, relayEngineEvents, EngineEventState, probeOutputStage } from './engine-events.ts';

/**
 * Live processor: one input (channel 0 = reference mic, channel 1 = error mic; or the error mic alone
 * in 'err-only' layout), one mono output (the control signal to the loudspeaker, after the output
 * stage). A thin adapter over Engine.process: it reads the quantum length from the arrays it is
 * given, splits quanta longer than the engine's block, and relays meters and events.
 *
 * Identification: on an 'identify' message the engine fades out, then an exponential sweep (Farina
 * 2000) plays through the output stage while both microphones are recorded from the first sweep
 * sample on; the recording goes to the page, which deconvolves it in the analysis worker and sends
 * back a model with 'configure'. Recording index 0 is the instant the first sweep sample was handed
 * to the output, so the deconvolved response includes the whole round trip.
 *
 * Bundle rules (standardized-audio-context wraps this file and evaluates it twice): imports first,
 * no exports, no top-level side effects besides registerProcessor.
 */
class LiveProcessor extends AudioWorkletProcessor {
  private engine: Engine;
  private readonly opts: LiveProcessorOptions;
  private readonly telemetry: Telemetry;
  private readonly chunks: ChunkSender;
  private readonly cond = new InputConditioner();
  private readonly evState = new EngineEventState();
  private readonly block: number;
  private readonly ref: Float32Array;
  private readonly err: Float32Array;
  private readonly out: Float32Array;
  private readonly probeBuf: Float32Array;
  private readonly lv = new Float64Array(2);
  private lastChannels = -1;
  private warnedChannels = false;
  private state: 'run' | 'probe-wait' | 'probe' | 'stopping' | 'stopped' = 'run';
  private sweep: ExponentialSweep | null = null;
  private probe: ProbeSpec | null = null;
  private recErr: Float32Array<ArrayBuffer> | null = null;
  private recRef: Float32Array<ArrayBuffer> | null = null;
  private recPos = 0;
  private probePeak = 0;

  constructor(options: WorkletNodeOptions) {
    super(options);
    const o = options.processorOptions as LiveProcessorOptions | undefined;
    if (!o || typeof o !== 'object') throw new RangeError('processorOptions must be an object');
    if (o.inputLayout !== 'ref-err' && o.inputLayout !== 'err-only') throw new RangeError(`inputLayout must be "ref-err" or "err-only", got ${String(o.inputLayout)}`);
    const maxQuantum = o.maxQuantum;
    if (!Number.isInteger(maxQuantum) || maxQuantum < 1 || maxQuantum > 16384) throw new RangeError(`maxQuantum must be an integer from 1 to 16384, got ${String(maxQuantum)}`);
    const telemetry = checkTelemetryOptions(o.telemetry);
    this.opts = o;
    this.block = maxQuantum;
    this.engine = this.buildEngine(o.secondaryPathModel, o.controller, o.startMode ?? 'idle');
    this.ref = new Float32Array(maxQuantum);
    this.err = new Float32Array(maxQuantum);
    this.out = new Float32Array(maxQuantum);
    this.probeBuf = new Float32Array(maxQuantum);
    this.telemetry = new Telemetry(this.port, telemetry, sampleRate);
    this.chunks = new ChunkSender(telemetry.chunkSamples, sampleRate, false);
    this.port.onmessage = (e) => this.onMessage(e.data);
    this.port.postMessage({ type: 'ready', sampleRate, telemetry: this.telemetry.shared ? 'shared' : 'posted', maxBlockSize: maxQuantum, modelTaps: o.secondaryPathModel.length });
  }

  private buildEngine(model: Float32Array, controller: LiveProcessorOptions['controller'], startMode: 'idle' | 'control' | 'muted'): Engine {
    return new Engine({
      sampleRate,
      maxBlockSize: this.opts.maxQuantum,
      controller,
      secondaryPathModel: model,
      ceilingDbfs: this.engine ? this.engine.limiter.ceilingDbfs : this.opts.ceilingDbfs,
      ...(this.opts.rampMs !== undefined ? { rampMs: this.opts.rampMs } : {}),
      startMode,
    });
  }

  private onMessage(data: unknown): void {
    const msg = receive(this.port, data, sampleRate);
    if (msg === null) return;
    const engine = this.engine;
    if (applyEngineMessage(engine, msg, this.port)) return;
    switch (msg.type) {
      case 'set-mode':
        if (this.state === 'run') engine.setMode(msg.mode);
        break;
      case 'configure':
        try {
          // a new engine starts from its own (ramped) mode; the old one is dropped between quanta
          this.engine = this.buildEngine(msg.secondaryPathModel, msg.controller, msg.startMode ?? 'idle');
          this.port.postMessage({ type: 'configured', modelTaps: msg.secondaryPathModel.length });
        } catch (e) {
          this.port.postMessage({ type: 'error', message: (e as Error).message });
        }
        break;
      case 'identify': {
        const p = msg.probe;
        try {
          this.sweep = new ExponentialSweep({ sampleRate, startHz: p.startHz, endHz: p.endHz, durationS: p.durationS, amplitude: p.amplitude });
        } catch (e) {
          this.port.postMessage({ type: 'error', message: (e as Error).message });
          break;
        }
        const len = this.sweep.lengthSamples + Math.round(p.tailS * sampleRate);
        this.probe = p;
        this.recErr = new Float32Array(len);
        this.recRef = new Float32Array(len);
        this.recPos = 0;
        this.probePeak = 0;
        engine.setMode('idle');
        this.state = 'probe-wait';
        break;
      }
      case 'cancel-identify':
        if (this.state === 'probe' || this.state === 'probe-wait') this.endProbe(false);
        break;
      case 'request-weights':
        this.port.postMessage({ type: 'weights', weights: copyWeights(engine) });
        break;
      case 'attach-analysis':
        this.chunks.attach(msg.port as PortLike);
        break;
      case 'set-monitor':
        break; // simulated plant only
      case 'shutdown':
        engine.setMode('muted');
        this.state = 'stopping';
        break;
    }
  }

  private endProbe(deliver: boolean): void {
    if (deliver && this.recErr && this.recRef && this.probe) {
      const err = this.recErr;
      const ref = this.recRef;
      this.port.postMessage({ type: 'identify-recording', err, ref, probe: this.probe, sampleRate }, [err.buffer, ref.buffer]);
      this.telemetry.event(this.engine.meters.timeS, 'probe-done', 'none', this.recPos, 20 * Math.log10(this.probePeak), NaN, false);
    }
    this.sweep = null;
    this.recErr = null;
    this.recRef = null;
    this.probe = null;
    this.state = 'run';
  }

  process(inputs: Float32Array[][], outputs: Float32Array[][]): boolean {
    if (this.state === 'stopped') return false;
    const input = inputs[0];
    const output = outputs[0];
    const out0 = output !== undefined && output.length > 0 ? output[0] : undefined;
    const n = out0 !== undefined ? out0.length : input !== undefined && input.length > 0 ? input[0]!.length : 0;
    if (n === 0) return true;
    const tel = this.telemetry;
    const cond = this.cond;
    const channels = cond.begin(input);
    const timeS = this.engine.meters.timeS;
    if (channels === 0 && this.lastChannels !== 0) tel.event(timeS, 'input-missing', 'none', 0, NaN, NaN, false);
    if (channels > 0 && this.lastChannels === 0) tel.event(timeS, 'input-restored', 'none', channels, NaN, NaN, false);
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
      this.runPiece(m);
      if (out0 !== undefined) for (let i = 0; i < m; i++) out0[off + i] = this.out[i]!;
    }
    if (output !== undefined) for (let c = 1; c < output.length; c++) output[c]!.set(out0!);
    // input channel c carries microphone c in the ref-err layout; in err-only channel 0 is the error mic
    for (let c = 0; c < 2; c++) {
      const bad = cond.badLast[c]!;
      if (bad > 0) inputNonFinite(tel, timeS, this.opts.inputLayout === 'ref-err' ? c : 1, bad);
    }

    if (tel.due) {
      tel.fillFromEngine(this.engine);
      fillEngineExtras(this.engine, tel.frame, this.evState);
      const f = tel.frame;
      f[M.mode] = this.state === 'probe' || this.state === 'probe-wait' ? 3 : MODE_CODES.indexOf(this.engine.currentMode);
      f[M.inputChannels] = channels;
      f[M.quantum] = n;
      f[M.probeProgress] = this.state === 'probe' && this.recErr ? this.recPos / this.recErr.length : NaN;
      f[M.nonFiniteIn] = cond.badTotal;
      tel.publish();
    }
    if (this.state === 'stopping' && this.engine.meters.rampGain === 0) {
      this.state = 'stopped';
      this.chunks.close();
      this.port.postMessage({ type: 'stopped' });
      return false;
    }
    return true;
  }

  /** One piece of m ≤ block samples already in this.ref / this.err; leaves the output in this.out. */
  private runPiece(m: number): void {
    const engine = this.engine;
    const tel = this.telemetry;
    if (this.state === 'probe' && this.sweep && this.recErr && this.recRef) {
      this.sweep.process(this.probeBuf, m);
      const pk = probeOutputStage(engine, this.probeBuf, this.out, m);
      if (pk > this.probePeak) this.probePeak = pk;
      const room = this.recErr.length - this.recPos;
      const k = m < room ? m : room;
      for (let i = 0; i < k; i++) {
        this.recErr[this.recPos + i] = this.err[i]!;
        this.recRef[this.recPos + i] = this.ref[i]!;
      }
      this.recPos += k;
      const lv = this.lv;
      levels(this.ref, m, lv);
      const rp = lv[0]!, rk = lv[1]!;
      levels(this.err, m, lv);
      const ep = lv[0]!, ek = lv[1]!;
      levels(this.out, m, lv);
      tel.addBlock(m, rp, ep, lv[0]!, rk, ek, lv[1]!);
      this.chunks.push(this.err, null, this.ref, m, false);
      if (this.recPos >= this.recErr.length) this.endProbe(true);
      return;
    }
    engine.process(this.ref, this.err, this.out, m);
    const em = engine.meters;
    tel.addBlock(m, em.refPower, em.errPower, em.outPower, em.refPeak, em.errPeak, em.outPeak);
    relayEngineEvents(engine, tel, this.evState);
    this.chunks.push(this.err, null, this.ref, m, engine.currentMode === 'control' && em.rampGain === 1);
    if (this.state === 'probe-wait' && em.rampGain === 0) this.state = 'probe';
  }
}

registerProcessor('ancbench-live', LiveProcessor);
