import { PlantLoop } from '../src/plant/simulate.ts';
import { OutputLimiter } from '../src/dsp/limiter.ts';
import type { Scenario } from '../src/plant/scenario.ts';
import { describeImplementation } from '../src/engine/implementation.ts';
import { M, MODE_CODES, checkTelemetryOptions, type SimProcessorOptions, type PortLike, type WorkletMessage } from '../src/protocol/messages.ts';
import { RecordTap } from './record-tap.ts';
import { ChunkSender, Telemetry, levels } from './adapter.ts';
import { receive, applyEngineMessage, attachStandby, copyWeights, fillEngineExtras, relayEngineEvents, EngineEventState } from './engine-events.ts';

/**
 * Simulated-plant processor: no input; runs the scenario's closed loop (sources, paths, microphones,
 * engine, loudspeaker) in real time with PlantLoop and plays what a listener at the error mic would
 * hear, so colleagues hear the noise fade when control starts.
 *
 * Block size: the scenario's own (the context runs at the scenario's rate). A render quantum longer
 * than a block is processed in several steps; a shorter one is one step of its own length, which
 * PlantLoop allows (n ≤ blockSize). The secondary path is then still at least one block long, as the
 * scenario validator demands, so the loop stays exact.
 *
 * Listening path: error-mic signal (control on, or the control-off twin for comparison) × monitor
 * gain, then its own output limiter (zero-latency mode: smooth gain reduction, then a hard ceiling at
 * the monitor cap; non-finite samples become silence). Like every output path, it ends in a limiter.
 *
 * Controller switch: with `standbyController`, the engine keeps a second controller on the scenario's
 * model and `switch-controller` crossfades to it (the plant keeps running).
 *
 * Bundle rules: imports first, no exports, no top-level side effects besides registerProcessor.
 */
class SimProcessor extends AudioWorkletProcessor {
  private readonly loop: PlantLoop;
  private readonly telemetry: Telemetry;
  private readonly chunks: ChunkSender;
  private readonly tap: RecordTap;
  private readonly evState = new EngineEventState();
  private readonly mon: Float32Array;
  private readonly monOut: Float32Array;
  private readonly monitorLimiter: OutputLimiter;
  private readonly lv = new Float64Array(2);
  private monitorGain: number;
  private monitorSource: 'on' | 'off' = 'on';
  private state: 'run' | 'stopping' | 'stopped' = 'run';

  constructor(options: WorkletNodeOptions) {
    super(options);
    const o = options.processorOptions as SimProcessorOptions | undefined;
    if (!o || typeof o !== 'object') throw new RangeError('processorOptions must be an object');
    const sc = o.scenario as Scenario;
    if (!sc || typeof sc !== 'object' || sc.sampleRate !== sampleRate) {
      throw new RangeError(`scenario.sampleRate must equal the context's ${sampleRate} Hz, got ${String(sc?.sampleRate)}`);
    }
    if (!(o.monitorGainDb >= -60 && o.monitorGainDb <= 0)) throw new RangeError(`monitorGainDb must be from −60 to 0 dB, got ${String(o.monitorGainDb)}`);
    if (!(o.monitorCeilingDbfs >= -60 && o.monitorCeilingDbfs <= 0)) throw new RangeError(`monitorCeilingDbfs must be from −60 to 0 dBFS, got ${String(o.monitorCeilingDbfs)}`);
    const telemetry = checkTelemetryOptions(o.telemetry);
    this.loop = new PlantLoop(sc, { startMode: o.startMode ?? 'idle' });
    let standbyProblem = '';
    if (o.standbyController) {
      try {
        attachStandby(this.loop.engine, o.standbyController, this.loop.secondaryPathModel, this.loop.trueFeedbackPath ? Float32Array.from(this.loop.trueFeedbackPath) : undefined);
      } catch (e) {
        standbyProblem = `standby controller: ${(e as Error).message}`;
      }
    }
    this.mon = new Float32Array(sc.blockSize);
    this.monOut = new Float32Array(sc.blockSize);
    this.monitorLimiter = new OutputLimiter({ sampleRate, maxBlockSize: sc.blockSize, ceilingDbfs: o.monitorCeilingDbfs });
    this.monitorGain = Math.pow(10, o.monitorGainDb / 20);
    this.telemetry = new Telemetry(this.port, telemetry, sampleRate);
    this.chunks = new ChunkSender(telemetry.chunkSamples, sampleRate, true);
    this.tap = new RecordTap(this.port);
    this.port.onmessage = (e) => this.onMessage(e.data);
    const ready: WorkletMessage = {
      type: 'ready',
      sampleRate,
      telemetry: this.telemetry.shared ? 'shared' : 'posted',
      maxBlockSize: sc.blockSize,
      modelTaps: this.loop.secondaryPathModel.length,
      implementation: describeImplementation(this.loop.engine.controller),
    };
    this.port.postMessage(ready);
    this.port.postMessage({
      type: 'model',
      taps: Float32Array.from(this.loop.secondaryPathModel),
      truePath: Float32Array.from(this.loop.trueSecondaryPath),
      sampleRate,
      source: 'scenario',
    });
    // after 'ready', so the page is listening: the plant runs, switching rebuilds instead
    if (standbyProblem) this.port.postMessage({ type: 'error', message: standbyProblem });
  }

  private onMessage(data: unknown): void {
    const msg = receive(this.port, data, sampleRate);
    if (msg === null || this.tap.handle(msg)) return;
    const engine = this.loop.engine;
    if (applyEngineMessage(engine, msg, this.port, this.telemetry)) return;
    switch (msg.type) {
      case 'set-mode':
        if (this.state === 'run') engine.setMode(msg.mode);
        break;
      case 'set-monitor':
        this.monitorGain = Math.pow(10, msg.gainDb / 20);
        this.monitorSource = msg.source;
        break;
      case 'attach-analysis':
        this.chunks.attach(msg.port as PortLike);
        break;
      case 'request-weights':
        this.port.postMessage({ type: 'weights', weights: copyWeights(engine) });
        break;
      case 'configure':
      case 'identify':
      case 'cancel-identify':
        this.port.postMessage({ type: 'error', message: `"${msg.type}" is for the live processor; the simulated plant takes its model from the scenario` });
        break;
      case 'calibration-tone':
      case 'stop-tone':
      case 'record':
      case 'level-check':
      case 'cancel-level-check':
        this.port.postMessage({ type: 'error', message: `"${msg.type}" needs live microphones and a loudspeaker: switch to live mode` });
        break;
      case 'shutdown':
        engine.setMode('muted');
        this.state = 'stopping';
        break;
    }
  }

  process(_inputs: Float32Array[][], outputs: Float32Array[][]): boolean {
    if (this.state === 'stopped') return false;
    const output = outputs[0];
    const out0 = output !== undefined && output.length > 0 ? output[0] : undefined;
    if (out0 === undefined) return true;
    const n = out0.length;
    const loop = this.loop;
    const engine = loop.engine;
    const tel = this.telemetry;
    const B = loop.blockSize;
    const lv = this.lv;
    for (let off = 0; off < n; off += B) {
      const m = n - off < B ? n - off : B;
      loop.step(m);
      this.tap.write(loop.ref, loop.errOn, loop.out, engine.currentMode, m);
      const src = this.monitorSource === 'on' ? loop.errOn : loop.errOff;
      const g = this.monitorGain;
      for (let i = 0; i < m; i++) this.mon[i] = src[i]! * g;
      this.monitorLimiter.process(this.mon, this.monOut, m);
      const monPk = this.monitorLimiter.blockSamplePeak;
      for (let i = 0; i < m; i++) out0[off + i] = this.monOut[i]!;
      const em = engine.meters;
      tel.addBlock(m, em.refPower, em.errPower, em.outPower, em.refPeak, em.errPeak, em.outPeak);
      tel.addOutput(loop.out, m);
      levels(loop.errOff, m, lv);
      tel.addSimBlock(m, lv[0]!, monPk);
      relayEngineEvents(engine, tel, this.evState);
      this.chunks.push(loop.errOn, loop.errOff, loop.ref, m, engine.currentMode === 'control' && em.rampGain === 1);
    }
    for (let c = 1; c < output!.length; c++) output![c]!.set(out0);
    if (tel.due) {
      tel.fillFromEngine(engine);
      fillEngineExtras(engine, tel.frame, this.evState);
      const f = tel.frame;
      f[M.mode] = MODE_CODES.indexOf(engine.currentMode);
      f[M.inputChannels] = 2;
      f[M.quantum] = n;
      f[M.probeProgress] = NaN;
      f[M.nonFiniteIn] = loop.nonFiniteErr;
      tel.publish();
    }
    if (this.state === 'stopping' && engine.meters.rampGain === 0) {
      this.state = 'stopped';
      this.chunks.close();
      this.port.postMessage({ type: 'stopped' });
      return false;
    }
    return true;
  }
}

registerProcessor('ancbench-sim', SimProcessor);
