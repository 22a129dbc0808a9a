/**
 * Plays a scenario's noise into the virtual room, for ever (until stopped): its sources through its
 * reference path into the room's left channel (what the reference mic hears) and through its primary
 * path into the right channel (the disturbance at the error mic), with the scenario's sensor noise.
 * The sources and paths are the simulator's own (src/plant): the same generators and path filters
 * the command-line simulator runs, block by block, so the room hears what `ancbench simulate` would
 * feed its microphones. The loop paths (secondary, feedback) are the sound server's: the room gives
 * them real audio I/O.
 *
 * One pacat stream carries both channels, so the delay between them is exactly the scenario's;
 * pacat's pipe paces the rendering at the server's clock. The stream keeps 0.4 s buffered (the noise's
 * own latency does not matter), so a busy machine can pause this process without the room going quiet.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { createSource, type SourceGenerator, type WavTable } from '../src/plant/sources.ts';
import { PathFilter } from '../src/plant/path-filter.ts';
import { pathResponse, type Scenario } from '../src/plant/scenario.ts';
import { Random } from '../src/dsp/random.ts';
import { ROOM_DEVICES, ROOM_RATE, SoundServerError, type SoundServer } from './virtual-room-server.ts';

/** Samples per rendered block (≈ 21 ms at 48 kHz). */
const BLOCK = 1024;

export interface RenderStats {
  /** Samples per channel played so far. */
  samples: number;
  /** Samples that reached ±1 and were clipped, per channel. */
  clippedRef: number;
  clippedErr: number;
}

export class RoomRenderer {
  readonly stats: RenderStats = { samples: 0, clippedRef: 0, clippedErr: 0 };
  private proc: ChildProcess | null = null;
  private stopping = false;
  private readonly sources: SourceGenerator[];
  private readonly refF: PathFilter;
  private readonly priF: PathFilter;
  private readonly refNoise: { rms: number; rng: Random };
  private readonly errNoise: { rms: number; rng: Random };
  private readonly src = new Float64Array(BLOCK);
  private readonly refAc = new Float64Array(BLOCK);
  private readonly dAc = new Float64Array(BLOCK);

  constructor(
    private readonly server: SoundServer,
    scenario: Scenario,
    wavs: WavTable = new Map(),
  ) {
    if (scenario.sampleRate !== ROOM_RATE) throw new SoundServerError(`sampleRate: the virtual room runs at ${ROOM_RATE} Hz, got ${scenario.sampleRate}; set the scenario's sampleRate to ${ROOM_RATE}`);
    this.sources = scenario.sources.map((s, i) => {
      // file sources loop in the room whatever the scenario says: the room plays until stopped
      const spec = s.kind === 'wav' ? { ...s, loop: true } : s;
      return createSource(spec, i, ROOM_RATE, scenario.seed, wavs, BLOCK);
    });
    const dense = (r: { offset: number; taps: Float64Array }): { offset: number; taps: Float64Array } => (r.taps.length ? r : { offset: 0, taps: new Float64Array(1) });
    const refR = dense(pathResponse(scenario.paths.reference, ROOM_RATE));
    const priR = dense(pathResponse(scenario.paths.primary, ROOM_RATE));
    this.refF = new PathFilter(refR.offset, refR.taps, BLOCK);
    this.priF = new PathFilter(priR.offset, priR.taps, BLOCK);
    const sn = scenario.sensorNoiseRms;
    this.refNoise = { rms: typeof sn === 'number' ? sn : (sn?.reference ?? 0), rng: new Random((scenario.seed ^ 0x52454631) >>> 0) };
    this.errNoise = { rms: typeof sn === 'number' ? sn : (sn?.error ?? 0), rng: new Random((scenario.seed ^ 0x45525231) >>> 0) };
  }

  /** One block, interleaved [ref, err] float32 little-endian. */
  private renderBlock(): Buffer {
    const { src, refAc, dAc } = this;
    src.fill(0);
    for (const s of this.sources) s.addTo(src, BLOCK);
    const t = this.stats.samples;
    this.refF.push(src, BLOCK);
    this.refF.render(t, refAc, BLOCK);
    this.priF.push(src, BLOCK);
    this.priF.render(t, dAc, BLOCK);
    const out = new Float32Array(2 * BLOCK);
    for (let i = 0; i < BLOCK; i++) {
      let r = refAc[i]! + this.refNoise.rms * this.refNoise.rng.gaussian();
      let e = dAc[i]! + this.errNoise.rms * this.errNoise.rng.gaussian();
      if (r > 1 || r < -1) (r = Math.sign(r)), this.stats.clippedRef++;
      if (e > 1 || e < -1) (e = Math.sign(e)), this.stats.clippedErr++;
      out[2 * i] = r;
      out[2 * i + 1] = e;
    }
    this.stats.samples += BLOCK;
    return Buffer.from(out.buffer);
  }

  /** Start playing into the room (resolves once the stream runs). */
  async start(): Promise<void> {
    if (this.proc) return;
    const proc = spawn('pacat', ['--playback', `--device=${ROOM_DEVICES.room.name}`, '--raw', '--format=float32le', `--rate=${ROOM_RATE}`, '--channels=2', '--channel-map=front-left,front-right', '--latency-msec=400', '--no-remix', '--client-name=ancbench virtual room', '--stream-name=scenario'], {
      env: this.server.clientEnv,
      stdio: ['pipe', 'ignore', 'pipe'],
    });
    this.proc = proc;
    let errText = '';
    proc.stderr!.on('data', (b: Buffer) => (errText += b.toString()));
    proc.stdin!.on('error', () => {}); // the pipe closes when pacat stops
    proc.once('exit', (code) => {
      if (!this.stopping) console.error(`virtual room: the playback stream ended (pacat exit ${code}) ${errText.trim()}`);
      this.proc = null;
    });
    const pump = (): void => {
      while (this.proc === proc && !this.stopping) {
        if (!proc.stdin!.write(this.renderBlock())) {
          proc.stdin!.once('drain', pump);
          return;
        }
      }
    };
    pump();
    // wait until the server lists the stream
    for (let i = 0; i < 50; i++) {
      if (!this.proc) throw new SoundServerError(`pacat could not play into the room: ${errText.trim()}`);
      if (this.server.pactl('list', 'short', 'sink-inputs').includes('protocol-native')) return;
      await new Promise((r) => setTimeout(r, 50));
    }
  }

  async stop(): Promise<void> {
    this.stopping = true;
    const p = this.proc;
    if (!p) return;
    const exited = new Promise<void>((r) => p.once('exit', () => r()));
    p.stdin!.destroy();
    p.kill('SIGTERM');
    await Promise.race([exited, new Promise((r) => setTimeout(r, 2000))]);
    this.proc = null;
  }
}
