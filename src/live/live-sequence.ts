/**
 * The live sequence, host-free: what the live AudioWorklet does besides running the engine —
 * identification probe, calibration tone, level-cap check, microphone recording, shutdown — as a
 * state machine driven one block at a time. The worklet (worklets/live-processor.ts) only copies
 * render quanta in and out, meters and relays messages; this class is tested in Node
 * (test/live/live-sequence.test.ts) with a simulated loop.
 *
 * States: run (the engine's controller plays) → fade (the engine fades out) → open (silence through
 * the output stage until the ramp is fully open) → probe | tone, or fade → check; then back to run,
 * or stopping → stopped after a shutdown. Everything played goes through an output stage:
 *  - identification: an exponential sweep (Farina 2000) through Engine.processProbe (high-pass,
 *    ramp, limiter) while both microphones are recorded from the first sweep sample on, so recording
 *    index 0 is the instant that sample was handed to the output and the deconvolved response spans
 *    the whole round trip, output stage included;
 *  - calibration tones: a sine of peak 10^(dBFS/20) (AES17: it reads that many dBFS) with raised-
 *    cosine ends, at least TONE_CAP_MARGIN_DB below the cap; on stop the AES17 level of what was
 *    handed to the output over the steady part is reported;
 *  - level-cap check: src/engine/level-cap-check.ts's streaming check, whose own engine has this
 *    engine's output stage, with a test-signal source in the controller's place; every sample handed
 *    to the output is also counted against the check's ceiling (`measureHanded`).
 *
 * Per block (`runPiece`, `recordMics`, `measureHanded`) nothing allocates; recordings are allocated
 * when a message starts them and handed over (transferred) when they end.
 */
import { Engine } from '../engine/engine.ts';
import { describeImplementation } from '../engine/implementation.ts';
import type { ControllerConfig } from '../engine/controller-factory.ts';
import { ExponentialSweep } from '../dsp/sweep.ts';
import { CalibrationTone } from '../dsp/calibration-tone.ts';
import { createOutputCalibration } from '../engine/calibration.ts';
import { LevelCapCheck, type LevelCapCheckConfig } from '../engine/level-cap-check.ts';
import { TONE_MAX_S, type ControlMessage, type EventAction, type EventCause, type HandedToOutput, type LevelCheckRequest, type LiveProcessorOptions, type ProbeSpec, type WorkletMessage } from '../protocol/messages.ts';

/** Raised-cosine fade of a calibration tone at its start and end, s. */
export const TONE_FADE_S = 0.05;
/** A calibration tone must sit at least this far below the output cap, dB (else the limiter would shape it). */
export const TONE_CAP_MARGIN_DB = 0.5;
/** Longest wait for the output ramp to open before a probe or tone, beyond the ramp time itself, s. */
export const OPEN_SLACK_S = 0.2;

export type LiveState = 'run' | 'fade' | 'open' | 'probe' | 'tone' | 'check' | 'stopping' | 'stopped';

/** What the sequence needs of its host (the worklet, or a test). */
export interface LiveSequenceHost {
  /** A message to the page; `transfer` lists buffers handed over with it. */
  post(message: WorkletMessage, transfer?: ArrayBuffer[]): void;
  /** A sequence event (probe done, tone, level check), not throttled. */
  event(timeS: number, cause: EventCause, action: EventAction, v0: number, v1: number, v2: number): void;
  /** Meter a piece the sequence played itself (probe, tone, check): ref, err, out hold m samples. */
  meterPiece(ref: Float32Array, err: Float32Array, out: Float32Array, m: number): void;
  /** Meter a block the engine's controller played (and relay its events; `offsetS` maps engine time to the clock). */
  meterEngineBlock(engine: Engine, ref: Float32Array, err: Float32Array, out: Float32Array, m: number, offsetS: number): void;
}

/** The options of the sequence: the live processor's, minus the parts the worklet keeps (telemetry, input layout). */
export type LiveSequenceOptions = Pick<LiveProcessorOptions, 'controller' | 'standbyController' | 'secondaryPathModel' | 'ceilingDbfs' | 'rampMs' | 'startMode' | 'maxQuantum'>;

export class LiveSequence {
  engine: Engine;
  state: LiveState = 'run';
  /** What plays once the engine has faded out (state 'fade') and the ramp has opened ('open'). */
  pending: 'probe' | 'tone' | 'check' | null = null;
  private openSamples = 0;
  private readonly probeBuf: Float32Array;
  // identification
  private sweep: ExponentialSweep | null = null;
  private probe: ProbeSpec | null = null;
  private recErr: Float32Array<ArrayBuffer> | null = null;
  private recRef: Float32Array<ArrayBuffer> | null = null;
  private recPos = 0;
  private probePeak = 0;
  private readonly tone: CalibrationTone;
  /** A shutdown arrived while a tone or a check played: stop once it has faded out. */
  private shutdownAfter = false;
  // level-cap check
  check: LevelCapCheck | null = null;
  private handedMax = 0;
  private handedOver = 0;
  private handedBad = 0;
  private handedN = 0;
  private checkCeilingLin = 0;
  // microphone recording
  private micErr: Float32Array<ArrayBuffer> | null = null;
  private micRef: Float32Array<ArrayBuffer> | null = null;
  private micPos = 0;
  /** Seconds played without the engine (probes, tones, checks) or by earlier engines: the clock is engine time + this. */
  offsetS = 0;

  constructor(
    readonly sampleRate: number,
    private readonly opts: LiveSequenceOptions,
    private readonly host: LiveSequenceHost,
  ) {
    const q = opts.maxQuantum;
    if (!Number.isInteger(q) || q < 1 || q > 16384) throw new RangeError(`maxQuantum: must be an integer from 1 to 16384, got ${String(q)}`);
    this.engine = this.buildEngine(opts.secondaryPathModel, opts.controller, opts.startMode ?? 'idle', opts.standbyController, opts.ceilingDbfs);
    this.probeBuf = new Float32Array(q);
    this.tone = new CalibrationTone(sampleRate, TONE_FADE_S, TONE_MAX_S);
  }

  private buildEngine(model: Float32Array, controller: ControllerConfig, startMode: 'idle' | 'control' | 'muted', standby: ControllerConfig | undefined, ceilingDbfs: number): Engine {
    return new Engine({
      sampleRate: this.sampleRate,
      maxBlockSize: this.opts.maxQuantum,
      controller,
      secondaryPathModel: model,
      ceilingDbfs,
      ...(this.opts.rampMs !== undefined ? { rampMs: this.opts.rampMs } : {}),
      ...(standby ? { standbyController: standby } : {}),
      startMode,
    });
  }

  /** The sequence's clock, s: engine time plus the time played without the engine. */
  get clockS(): number {
    return this.engine.meters.timeS + this.offsetS;
  }

  /** Progress of the probe or check, 0 … 1, NaN when neither runs. */
  get progress(): number {
    const chk = this.check;
    return this.state === 'probe' && this.recErr ? this.recPos / this.recErr.length : chk && this.state === 'check' ? chk.samplesDone / chk.totalSamples : NaN;
  }

  /** What the panel shows as the mode: identify, tone, level-check, or the engine's mode. */
  get displayMode(): 'identify' | 'tone' | 'level-check' | 'idle' | 'control' | 'muted' {
    const s = this.state;
    return s === 'probe' || this.pending === 'probe' ? 'identify' : s === 'tone' || this.pending === 'tone' ? 'tone' : this.check ? 'level-check' : this.engine.currentMode;
  }

  private error(message: string): void {
    this.host.post({ type: 'error', message });
  }

  /** Fade the engine out, then play `what`. */
  private begin(what: 'probe' | 'tone' | 'check'): void {
    this.pending = what;
    this.engine.setMode('idle');
    this.state = 'fade';
  }

  /**
   * A validated message the engine itself did not take (worklets/engine-events.ts applies those).
   * Returns false for messages that are not the sequence's (the host handles them).
   */
  handle(msg: ControlMessage): boolean {
    const engine = this.engine;
    const busy = this.state !== 'run';
    switch (msg.type) {
      case 'set-mode':
        if (this.state === 'run') engine.setMode(msg.mode);
        return true;
      case 'configure':
        if (busy) {
          this.error(`the processor is busy (${this.state}): configure again when it has finished`);
          return true;
        }
        try {
          // a new engine starts from its own (ramped) mode; the old one is dropped between quanta.
          // Its time starts at 0: the clock carries on from where the old one was.
          const t = this.clockS;
          this.engine = this.buildEngine(msg.secondaryPathModel, msg.controller, msg.startMode ?? 'idle', msg.standbyController, engine.limiter.ceilingDbfs);
          this.offsetS = t;
          this.host.post({ type: 'configured', modelTaps: msg.secondaryPathModel.length, implementation: describeImplementation(this.engine.controller) });
        } catch (e) {
          this.error((e as Error).message);
        }
        return true;
      case 'identify': {
        if (busy) {
          this.error(`the processor is busy (${this.state}): identify when it has finished`);
          return true;
        }
        const p = msg.probe;
        try {
          this.sweep = new ExponentialSweep({ sampleRate: this.sampleRate, startHz: p.startHz, endHz: p.endHz, durationS: p.durationS, amplitude: p.amplitude });
        } catch (e) {
          this.error((e as Error).message);
          return true;
        }
        const len = this.sweep.lengthSamples + Math.round(p.tailS * this.sampleRate);
        this.probe = p;
        this.recErr = new Float32Array(len);
        this.recRef = new Float32Array(len);
        this.recPos = 0;
        this.probePeak = 0;
        this.begin('probe');
        return true;
      }
      case 'cancel-identify':
        if (this.pending === 'probe' || this.state === 'probe') this.endProbe(false);
        return true;
      case 'calibration-tone': {
        if (busy) {
          this.error(`the processor is busy (${this.state}): play the tone when it has finished`);
          return true;
        }
        const cap = engine.limiter.ceilingDbfs;
        if (msg.dbfs > cap - TONE_CAP_MARGIN_DB) {
          this.error(`dbfs of the calibration tone must be at most ${(cap - TONE_CAP_MARGIN_DB).toFixed(1)} dBFS (${TONE_CAP_MARGIN_DB} dB below the ${cap.toFixed(1)} dBFS output cap, so the limiter leaves it alone), got ${msg.dbfs}`);
          return true;
        }
        this.tone.start(msg.hz, msg.dbfs);
        this.begin('tone');
        return true;
      }
      case 'stop-tone':
        if (this.pending === 'tone' && this.state !== 'tone') {
          // not started yet: nothing was played
          this.pending = null;
          this.state = 'run';
          this.host.post({ type: 'tone-stopped', hz: this.tone.hz, dbfs: this.tone.dbfs, measuredDbfs: NaN, samples: 0 });
        } else if (this.state === 'tone') this.tone.stop();
        return true;
      case 'level-check': {
        if (busy) {
          this.error(`the processor is busy (${this.state}): run the check when it has finished`);
          return true;
        }
        try {
          this.check = new LevelCapCheck(this.checkConfig(msg.request));
        } catch (e) {
          this.error((e as Error).message);
          return true;
        }
        this.checkCeilingLin = Math.pow(10, this.check.ceiling.ceilingDbfs / 20);
        this.handedMax = 0;
        this.handedOver = 0;
        this.handedBad = 0;
        this.handedN = 0;
        this.begin('check');
        return true;
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
        return true;
      case 'record': {
        const len = Math.round(msg.seconds * this.sampleRate);
        this.micErr = new Float32Array(len);
        this.micRef = new Float32Array(len);
        this.micPos = 0;
        return true;
      }
      case 'shutdown':
        if (this.state === 'tone') {
          // fade the tone out first, then stop
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
        return true;
      default:
        return false;
    }
  }

  /** The check's configuration: this engine's output stage and the request's cap and calibrations. */
  private checkConfig(r: LevelCheckRequest): LevelCapCheckConfig {
    return {
      sampleRate: this.sampleRate,
      blockSize: this.opts.maxQuantum,
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
      this.host.post({ type: 'identify-recording', err, ref, probe: this.probe, sampleRate: this.sampleRate }, [err.buffer, ref.buffer]);
      this.host.event(this.clockS, 'probe-done', 'none', this.recPos, 20 * Math.log10(this.probePeak), NaN);
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
    this.host.post({ type: 'tone-stopped', hz: t.hz, dbfs: t.dbfs, measuredDbfs: measured, samples: t.measuredSamples });
    this.host.event(this.clockS, 'calibration-tone', 'none', t.hz, measured, NaN);
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

  /** After each render quantum: a finished check reports (allocates once, at the end). */
  endOfQuantum(): void {
    if (this.state === 'check' && this.check!.done) this.endCheck();
    if (this.state === 'stopping' && this.engine.meters.rampGain === 0) this.state = 'stopped';
  }

  private endCheck(): void {
    const chk = this.check!;
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
    this.host.post({ type: 'level-check-result', result, output });
    this.host.event(this.clockS, 'level-check', 'none', passed ? 1 : 0, result.maxSamplePeakDbfs, c);
    this.check = null;
    this.pending = null;
    this.afterActivity();
  }

  /** Every sample handed to the audio output during a check, against the check's ceiling. */
  measureHanded(out: Float32Array, off: number, n: number): void {
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
  recordMics(ref: Float32Array, err: Float32Array, m: number): void {
    const e = this.micErr;
    const r = this.micRef;
    if (!e || !r) return;
    const k = Math.min(m, e.length - this.micPos);
    for (let i = 0; i < k; i++) {
      e[this.micPos + i] = err[i]!;
      r[this.micPos + i] = ref[i]!;
    }
    this.micPos += k;
    if (this.micPos >= e.length) {
      this.host.post({ type: 'recording', err: e, ref: r, sampleRate: this.sampleRate }, [e.buffer, r.buffer]);
      this.micErr = null;
      this.micRef = null;
    }
  }

  private meterPiece(ref: Float32Array, err: Float32Array, out: Float32Array, m: number): void {
    this.host.meterPiece(ref, err, out, m);
    this.offsetS += m / this.sampleRate;
  }

  /**
   * One piece of m ≤ maxQuantum samples of the microphones; leaves the output in `out`.
   * Returns true when the piece was level-cap check output.
   */
  runPiece(ref: Float32Array, err: Float32Array, out: Float32Array, m: number): boolean {
    const engine = this.engine;
    switch (this.state) {
      case 'open': {
        // silence through the output stage until its ramp is fully open, so the probe starts at full gain
        for (let i = 0; i < m; i++) this.probeBuf[i] = 0;
        engine.processProbe(this.probeBuf, out, m);
        this.openSamples += m;
        this.meterPiece(ref, err, out, m);
        const limit = ((this.opts.rampMs ?? 50) / 1000 + OPEN_SLACK_S) * this.sampleRate;
        if (engine.meters.rampGain >= 1 || this.openSamples > limit) this.state = this.pending === 'tone' ? 'tone' : 'probe';
        return false;
      }
      case 'probe': {
        if (!this.sweep || !this.recErr || !this.recRef) {
          this.endProbe(false);
          break;
        }
        this.sweep.process(this.probeBuf, m);
        engine.processProbe(this.probeBuf, out, m);
        const pk = engine.meters.outPeak;
        if (pk > this.probePeak) this.probePeak = pk;
        const room = this.recErr.length - this.recPos;
        const k = m < room ? m : room;
        for (let i = 0; i < k; i++) {
          this.recErr[this.recPos + i] = err[i]!;
          this.recRef[this.recPos + i] = ref[i]!;
        }
        this.recPos += k;
        this.meterPiece(ref, err, out, m);
        if (this.recPos >= this.recErr.length) this.endProbe(true);
        return false;
      }
      case 'tone': {
        const t = this.tone;
        // the piece counts towards the steady level only when the envelope was open all through it
        const wasOpen = t.open;
        t.process(this.probeBuf, m);
        engine.processProbe(this.probeBuf, out, m);
        if (wasOpen && t.open && engine.meters.rampGain >= 1) t.measure(out, m);
        this.meterPiece(ref, err, out, m);
        if (t.done) this.endTone();
        return false;
      }
      case 'check': {
        this.check!.process(out, m, err);
        this.meterPiece(ref, err, out, m);
        return true;
      }
      case 'stopped':
        for (let i = 0; i < m; i++) out[i] = 0;
        return false;
      default:
        break;
    }
    engine.process(ref, err, out, m);
    this.host.meterEngineBlock(engine, ref, err, out, m, this.offsetS);
    if (this.state === 'fade' && engine.meters.rampGain === 0) {
      this.openSamples = 0;
      this.state = this.pending === 'check' ? 'check' : 'open';
    }
    return false;
  }
}
