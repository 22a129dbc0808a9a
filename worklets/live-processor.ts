import { Engine } from '../src/engine/engine.ts';
import { describeImplementation } from '../src/engine/implementation.ts';
import type { ControllerConfig } from '../src/engine/controller-factory.ts';
import { ExponentialSweep } from '../src/dsp/sweep.ts';
import { createOutputCalibration } from '../src/analysis/calibration.ts';
import { LevelCapCheck, type LevelCapCheckConfig } from '../src/plant/level-cap-check.ts';
import {
  M,
  MODE_CODES,
  checkTelemetryOptions,
  TONE_MAX_S,
  type HandedToOutput,
  type LevelCheckRequest,
  type LiveProcessorOptions,
  type ProbeSpec,
  type PortLike,
  type WorkletMessage,
} from '../src/protocol/messages.ts';
import { ChunkSender, InputConditioner, Telemetry, levels } from './adapter.ts';
import { CalibrationTone } from './calibration-tone.ts';
import { receive, applyEngineMessage, copyWeights, fillEngineExtras, inputNonFinite, playProbe, relayEngineEvents, EngineEventState } from './engine-events.ts';

/** Raised-cosine fade of a calibration tone at its start and end, s. */
const TONE_FADE_S = 0.05;
/** A calibration tone must sit at least this far below the output cap, dB (else the limiter would shape it). */
const TONE_CAP_MARGIN_DB = 0.5;
/** Longest wait for the output ramp to open before a probe or tone, beyond the ramp time itself, s. */
const OPEN_SLACK_S = 0.2;

/**
 * Live processor: one input (channel 0 = reference mic, channel 1 = error mic; or the error mic alone
 * in 'err-only' layout), one mono output (the control signal to the loudspeaker, after the output
 * stage). A thin adapter over Engine.process: it reads the quantum length from the arrays it is
 * given, splits quanta longer than the engine's block, and relays meters and events.
 *
 * Everything else it plays goes through an output stage too, never around it:
 *  - identification: on 'identify' the engine fades out, then the output ramp is opened on silence
 *    (Engine.processProbe), then an exponential sweep (Farina 2000) plays through processProbe
 *    (high-pass, ramp, limiter) while both microphones are recorded from the first sweep sample on.
 *    Recording index 0 is the instant that sample was handed to the output, so the deconvolved
 *    response spans the whole round trip, output stage included. The page deconvolves in the
 *    analysis worker and sends back a model with 'configure';
 *  - calibration tones ('calibration-tone', 'stop-tone'): a sine of peak 10^(dBFS/20) (AES17: it
 *    reads that many dBFS) with 50 ms raised-cosine ends, through processProbe, at least 0.5 dB below
 *    the cap; on stop the AES17 level of what was handed to the output over the steady part is
 *    reported (the calibration stores that, not the nominal level);
 *  - level-cap check ('level-check'): src/plant/level-cap-check.ts's streaming LevelCapCheck, whose
 *    own engine has this engine's output stage (same ceiling rule, high-pass, DC blocker, ramp,
 *    limiter mode, guard) with a test-signal source in the controller's place; this processor also
 *    counts every sample it hands to the output against the check's ceiling.
 * 'record' captures both microphones for a few seconds (microphone calibration) whatever else runs.
 *
 * Controller switch: with a standby controller (options or 'configure'), 'switch-controller'
 * crossfades to it (Engine.switchController) without rebuilding anything.
 *
 * Bundle rules (standardized-audio-context wraps this file and evaluates it twice): imports first,
 * no exports, no top-level side effects besides registerProcessor.
 */
type State = 'run' | 'fade' | 'open' | 'probe' | 'tone' | 'check' | 'stopping' | 'stopped';

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
  /** An 'input-missing' was reported and the input has not come back yet. */
  private inputLost = false;
  private warnedChannels = false;
  private state: State = 'run';
  /** What plays once the engine has faded out (state 'fade') and the ramp has opened ('open'). */
  private pending: 'probe' | 'tone' | 'check' | null = null;
  private openSamples = 0;
  // identification
  private sweep: ExponentialSweep | null = null;
  private probe: ProbeSpec | null = null;
  private recErr: Float32Array<ArrayBuffer> | null = null;
  private recRef: Float32Array<ArrayBuffer> | null = null;
  private recPos = 0;
  private probePeak = 0;
  private readonly tone = new CalibrationTone(sampleRate, TONE_FADE_S, TONE_MAX_S);
  /** A shutdown arrived while a tone or a check played: stop once it has faded out. */
  private shutdownAfter = false;
  // level-cap check
  private check: LevelCapCheck | null = null;
  private handedMax = 0;
  private handedOver = 0;
  private handedBad = 0;
  private handedN = 0;
  private checkCeilingLin = 0;
  // microphone recording
  private micErr: Float32Array<ArrayBuffer> | null = null;
  private micRef: Float32Array<ArrayBuffer> | null = null;
  private micPos = 0;
  /** Seconds this processor played without the engine (probes, tones, checks): the panel's clock is engine time + this. */
  private offsetS = 0;

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
    this.engine = this.buildEngine(o.secondaryPathModel, o.controller, o.startMode ?? 'idle', o.standbyController);
    this.ref = new Float32Array(maxQuantum);
    this.err = new Float32Array(maxQuantum);
    this.out = new Float32Array(maxQuantum);
    this.probeBuf = new Float32Array(maxQuantum);
    this.telemetry = new Telemetry(this.port, telemetry, sampleRate);
    this.chunks = new ChunkSender(telemetry.chunkSamples, sampleRate, false);
    this.port.onmessage = (e) => this.onMessage(e.data);
    const ready: WorkletMessage = {
      type: 'ready',
      sampleRate,
      telemetry: this.telemetry.shared ? 'shared' : 'posted',
      maxBlockSize: maxQuantum,
      modelTaps: o.secondaryPathModel.length,
      implementation: describeImplementation(this.engine.controller),
    };
    this.port.postMessage(ready);
  }

  private buildEngine(model: Float32Array, controller: ControllerConfig, startMode: 'idle' | 'control' | 'muted', standby: ControllerConfig | undefined): Engine {
    return new Engine({
      sampleRate,
      maxBlockSize: this.opts.maxQuantum,
      controller,
      secondaryPathModel: model,
      ceilingDbfs: this.engine ? this.engine.limiter.ceilingDbfs : this.opts.ceilingDbfs,
      ...(this.opts.rampMs !== undefined ? { rampMs: this.opts.rampMs } : {}),
      ...(standby ? { standbyController: standby } : {}),
      startMode,
    });
  }

  private error(message: string): void {
    this.port.postMessage({ type: 'error', message });
  }

  /** The processor's clock, s: engine time plus the time played without the engine. */
  private get clockS(): number {
    return this.engine.meters.timeS + this.offsetS;
  }

  /** Fade the engine out, then play `what`. */
  private begin(what: 'probe' | 'tone' | 'check'): void {
    this.pending = what;
    this.engine.setMode('idle');
    this.state = 'fade';
  }

  private onMessage(data: unknown): void {
    const msg = receive(this.port, data, sampleRate);
    if (msg === null) return;
    const engine = this.engine;
    if (applyEngineMessage(engine, msg, this.port, this.telemetry)) return;
    const busy = this.state !== 'run';
    switch (msg.type) {
      case 'set-mode':
        if (this.state === 'run') engine.setMode(msg.mode);
        break;
      case 'configure':
        if (busy) {
          this.error(`the processor is busy (${this.state}): configure again when it has finished`);
          break;
        }
        try {
          // a new engine starts from its own (ramped) mode; the old one is dropped between quanta.
          // Its time starts at 0: the clock carries on from where the old one was.
          const t = this.clockS;
          this.engine = this.buildEngine(msg.secondaryPathModel, msg.controller, msg.startMode ?? 'idle', msg.standbyController);
          this.offsetS = t;
          const configured: WorkletMessage = { type: 'configured', modelTaps: msg.secondaryPathModel.length, implementation: describeImplementation(this.engine.controller) };
          this.port.postMessage(configured);
        } catch (e) {
          this.error((e as Error).message);
        }
        break;
      case 'identify': {
        if (busy) {
          this.error(`the processor is busy (${this.state}): identify when it has finished`);
          break;
        }
        const p = msg.probe;
        try {
          this.sweep = new ExponentialSweep({ sampleRate, startHz: p.startHz, endHz: p.endHz, durationS: p.durationS, amplitude: p.amplitude });
        } catch (e) {
          this.error((e as Error).message);
          break;
        }
        const len = this.sweep.lengthSamples + Math.round(p.tailS * sampleRate);
        this.probe = p;
        this.recErr = new Float32Array(len);
        this.recRef = new Float32Array(len);
        this.recPos = 0;
        this.probePeak = 0;
        this.begin('probe');
        break;
      }
      case 'cancel-identify':
        if (this.pending === 'probe' || this.state === 'probe') this.endProbe(false);
        break;
      case 'calibration-tone': {
        if (busy) {
          this.error(`the processor is busy (${this.state}): play the tone when it has finished`);
          break;
        }
        const cap = engine.limiter.ceilingDbfs;
        if (msg.dbfs > cap - TONE_CAP_MARGIN_DB) {
          this.error(`dbfs of the calibration tone must be at most ${(cap - TONE_CAP_MARGIN_DB).toFixed(1)} dBFS (${TONE_CAP_MARGIN_DB} dB below the ${cap.toFixed(1)} dBFS output cap, so the limiter leaves it alone), got ${msg.dbfs}`);
          break;
        }
        this.tone.start(msg.hz, msg.dbfs);
        this.begin('tone');
        break;
      }
      case 'stop-tone':
        if (this.pending === 'tone' && this.state !== 'tone') {
          // not started yet: nothing was played
          this.pending = null;
          this.state = 'run';
          this.port.postMessage({ type: 'tone-stopped', hz: this.tone.hz, dbfs: this.tone.dbfs, measuredDbfs: NaN, samples: 0 });
        } else if (this.state === 'tone') this.tone.stop();
        break;
      case 'level-check': {
        if (busy) {
          this.error(`the processor is busy (${this.state}): run the check when it has finished`);
          break;
        }
        try {
          this.check = new LevelCapCheck(this.checkConfig(msg.request));
        } catch (e) {
          this.error((e as Error).message);
          break;
        }
        this.checkCeilingLin = Math.pow(10, this.check.ceiling.ceilingDbfs / 20);
        this.handedMax = 0;
        this.handedOver = 0;
        this.handedBad = 0;
        this.handedN = 0;
        this.begin('check');
        break;
      }
      case 'cancel-level-check':
        if (this.check) {
          if (this.state === 'check') this.check.abort();
          else {
            // still fading the engine out: nothing of the check was played
            this.check = null;
            this.pending = null;
            this.state = 'run';
            this.error('level-cap check cancelled before it started');
          }
        }
        break;
      case 'record': {
        const len = Math.round(msg.seconds * sampleRate);
        this.micErr = new Float32Array(len);
        this.micRef = new Float32Array(len);
        this.micPos = 0;
        break;
      }
      case 'request-weights':
        this.port.postMessage({ type: 'weights', weights: copyWeights(engine) });
        break;
      case 'attach-analysis':
        this.chunks.attach(msg.port as PortLike);
        break;
      case 'set-monitor':
        break; // simulated plant only
      case 'shutdown':
        if (this.state === 'tone') {
          // fade the tone out first (50 ms), then stop
          this.tone.stop();
          this.shutdownAfter = true;
        } else if (this.state === 'check' && this.check) {
          // the check's own engine fades its output out
          this.check.abort();
          this.shutdownAfter = true;
        } else {
          this.check = null;
          this.sweep = null;
          this.pending = null;
          engine.setMode('muted');
          this.state = 'stopping';
        }
        break;
    }
  }

  /** The check's configuration: this engine's output stage and the request's cap and calibrations. */
  private checkConfig(r: LevelCheckRequest): LevelCapCheckConfig {
    return {
      sampleRate,
      blockSize: this.block,
      ceilingDbfs: r.ceilingDbfs,
      ...(this.opts.rampMs !== undefined ? { rampMs: this.opts.rampMs } : {}),
      ...(r.outputCalibration && r.peakCeilingDbSpl !== undefined
        ? { outputCalibration: createOutputCalibration(r.outputCalibration), peakCeilingDbSpl: r.peakCeilingDbSpl }
        : {}),
      ...(r.micCalibration ? { micCalibration: r.micCalibration } : {}),
      signal: r.signal,
    };
  }

  private endProbe(deliver: boolean): void {
    if (deliver && this.recErr && this.recRef && this.probe) {
      const err = this.recErr;
      const ref = this.recRef;
      this.port.postMessage({ type: 'identify-recording', err, ref, probe: this.probe, sampleRate }, [err.buffer, ref.buffer]);
      this.telemetry.event(this.clockS, 'probe-done', 'none', this.recPos, 20 * Math.log10(this.probePeak), NaN, false);
    }
    this.sweep = null;
    this.recErr = null;
    this.recRef = null;
    this.probe = null;
    this.pending = null;
    this.state = 'run';
  }

  private endTone(): void {
    const t = this.tone;
    const measured = t.measuredDbfs;
    this.port.postMessage({ type: 'tone-stopped', hz: t.hz, dbfs: t.dbfs, measuredDbfs: measured, samples: t.measuredSamples });
    this.telemetry.event(this.clockS, 'calibration-tone', 'none', t.hz, measured, NaN, false);
    this.pending = null;
    this.afterActivity();
  }

  /** Back to the engine, or on to stopping when a shutdown waited for the tone or check to fade. */
  private afterActivity(): void {
    if (this.shutdownAfter) {
      this.shutdownAfter = false;
      this.engine.setMode('muted');
      this.state = 'stopping';
    } else this.state = 'run';
  }

  private endCheck(): void {
    const chk = this.check!;
    // allocates once, at the end (the result and its history copies)
    const result = chk.result();
    const c = chk.ceiling.ceilingDbfs;
    const output: HandedToOutput = {
      samples: this.handedN,
      ceilingDbfs: c,
      maxSamplePeakDbfs: 20 * Math.log10(this.handedMax),
      samplesOverCeiling: this.handedOver,
      nonFinite: this.handedBad,
    };
    const passed = result.passed && this.handedOver === 0 && this.handedBad === 0;
    this.port.postMessage({ type: 'level-check-result', result, output });
    this.telemetry.event(this.clockS, 'level-check', 'none', passed ? 1 : 0, result.maxSamplePeakDbfs, c, false);
    this.check = null;
    this.pending = null;
    this.afterActivity();
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
    const timeS = this.clockS;
    // the first quanta may arrive before the microphones are connected: that is not a loss of input,
    // so 'input-missing' needs input seen before, and 'input-restored' follows only a reported loss
    if (channels === 0 && this.lastChannels > 0) {
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
      this.recordMics(m);
      const checked = this.runPiece(m);
      if (out0 !== undefined) {
        for (let i = 0; i < m; i++) out0[off + i] = this.out[i]!;
        // what this processor hands to the audio output, measured where it leaves
        if (checked) this.measureHanded(out0, off, m);
      }
    }
    if (output !== undefined) for (let c = 1; c < output.length; c++) output[c]!.set(out0!);
    if (this.state === 'check' && this.check!.done) this.endCheck();
    // input channel c carries microphone c in the ref-err layout; in err-only channel 0 is the error mic
    for (let c = 0; c < 2; c++) {
      const bad = cond.badLast[c]!;
      if (bad > 0) inputNonFinite(tel, timeS, this.opts.inputLayout === 'ref-err' ? c : 1, bad);
    }

    if (tel.due) this.publish(channels, n);
    if (this.state === 'stopping' && this.engine.meters.rampGain === 0) {
      this.state = 'stopped';
      this.chunks.close();
      this.port.postMessage({ type: 'stopped' });
      return false;
    }
    return true;
  }

  private publish(channels: number, n: number): void {
    const tel = this.telemetry;
    tel.fillFromEngine(this.engine);
    fillEngineExtras(this.engine, tel.frame, this.evState);
    const f = tel.frame;
    f[M.timeS] = this.clockS;
    const s = this.state;
    const chk = this.check;
    const mode = s === 'probe' || this.pending === 'probe' ? 'identify' : s === 'tone' || this.pending === 'tone' ? 'tone' : chk ? 'level-check' : this.engine.currentMode;
    f[M.mode] = MODE_CODES.indexOf(mode);
    f[M.inputChannels] = channels;
    f[M.quantum] = n;
    f[M.probeProgress] = s === 'probe' && this.recErr ? this.recPos / this.recErr.length : chk && s === 'check' ? chk.samplesDone / chk.totalSamples : NaN;
    f[M.nonFiniteIn] = this.cond.badTotal;
    if (chk && s === 'check') {
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

  /** Every sample handed to the audio output during a check, against the check's ceiling. */
  private measureHanded(out: Float32Array, off: number, n: number): void {
    const c = this.checkCeilingLin;
    let mx = this.handedMax;
    for (let i = off; i < off + n; i++) {
      const v = out[i]!;
      if (!(v - v === 0)) this.handedBad++;
      const a = v < 0 ? -v : v;
      if (a > c) this.handedOver++;
      if (a > mx) mx = a;
    }
    this.handedMax = mx;
    this.handedN += n;
  }

  /** Microphone recording for a calibration ('record'), whatever else runs. */
  private recordMics(m: number): void {
    const e = this.micErr;
    const r = this.micRef;
    if (!e || !r) return;
    const k = Math.min(m, e.length - this.micPos);
    for (let i = 0; i < k; i++) {
      e[this.micPos + i] = this.err[i]!;
      r[this.micPos + i] = this.ref[i]!;
    }
    this.micPos += k;
    if (this.micPos >= e.length) {
      this.port.postMessage({ type: 'recording', err: e, ref: r, sampleRate }, [e.buffer, r.buffer]);
      this.micErr = null;
      this.micRef = null;
    }
  }

  /** Input and output levels of a piece played by this processor rather than the engine's controller. */
  private meterPiece(m: number): void {
    const lv = this.lv;
    levels(this.ref, m, lv);
    const rp = lv[0]!, rk = lv[1]!;
    levels(this.err, m, lv);
    const ep = lv[0]!, ek = lv[1]!;
    levels(this.out, m, lv);
    this.telemetry.addBlock(m, rp, ep, lv[0]!, rk, ek, lv[1]!);
    this.telemetry.addOutput(this.out, m);
    this.chunks.push(this.err, null, this.ref, m, false);
    this.offsetS += m / sampleRate;
  }

  /**
   * One piece of m ≤ block samples already in this.ref / this.err; leaves the output in this.out.
   * Returns true when the piece was level-cap check output.
   */
  private runPiece(m: number): boolean {
    const engine = this.engine;
    const tel = this.telemetry;
    switch (this.state) {
      case 'open': {
        // silence through the output stage until its ramp is fully open, so the probe starts at full gain
        for (let i = 0; i < m; i++) this.probeBuf[i] = 0;
        playProbe(engine, this.probeBuf, this.out, m);
        this.openSamples += m;
        this.meterPiece(m);
        const limit = ((this.opts.rampMs ?? 50) / 1000 + OPEN_SLACK_S) * sampleRate;
        if (engine.meters.rampGain >= 1 || this.openSamples > limit) this.state = this.pending === 'tone' ? 'tone' : 'probe';
        return false;
      }
      case 'probe': {
        if (!this.sweep || !this.recErr || !this.recRef) {
          this.endProbe(false);
          break;
        }
        this.sweep.process(this.probeBuf, m);
        const pk = playProbe(engine, this.probeBuf, this.out, m);
        if (pk > this.probePeak) this.probePeak = pk;
        const room = this.recErr.length - this.recPos;
        const k = m < room ? m : room;
        for (let i = 0; i < k; i++) {
          this.recErr[this.recPos + i] = this.err[i]!;
          this.recRef[this.recPos + i] = this.ref[i]!;
        }
        this.recPos += k;
        this.meterPiece(m);
        if (this.recPos >= this.recErr.length) this.endProbe(true);
        return false;
      }
      case 'tone': {
        const t = this.tone;
        // the piece counts towards the steady level only when the envelope was open all through it
        const wasOpen = t.open;
        t.process(this.probeBuf, m);
        playProbe(engine, this.probeBuf, this.out, m);
        if (wasOpen && t.open && engine.meters.rampGain >= 1) t.measure(this.out, m);
        this.meterPiece(m);
        if (t.done) this.endTone();
        return false;
      }
      case 'check': {
        const chk = this.check!;
        chk.process(this.out, m, this.err);
        tel.addGainReduction(chk.engine.limiter.gainReductionDb);
        this.meterPiece(m);
        return true;
      }
      default:
        break;
    }
    engine.process(this.ref, this.err, this.out, m);
    const em = engine.meters;
    tel.addBlock(m, em.refPower, em.errPower, em.outPower, em.refPeak, em.errPeak, em.outPeak);
    tel.addOutput(this.out, m);
    relayEngineEvents(engine, tel, this.evState, this.offsetS);
    this.chunks.push(this.err, null, this.ref, m, engine.currentMode === 'control' && em.rampGain === 1);
    if (this.state === 'fade' && em.rampGain === 0) {
      this.openSamples = 0;
      this.state = this.pending === 'check' ? 'check' : 'open';
    }
    return false;
  }
}

registerProcessor('ancbench-live', LiveProcessor);
