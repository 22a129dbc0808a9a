/**
 * A private PulseAudio sound server wired as a small acoustic plant ("virtual room"), for trying the
 * live mode and testing it end to end without microphones. Nothing system-wide is touched: the
 * daemon runs from its own folder (runtime, state, config) with one UNIX socket, no autospawn, no
 * D-Bus, no shared memory, and is stopped (then its folder removed) by `stop()`.
 *
 * The room, built from the server's virtual modules:
 *
 *   room          two-channel null sink (left: what the reference mic hears, right: the error mic)
 *   loudspeaker   one-channel remap sink on the room's right channel (the controller plays here)
 *   reference mic one-channel remap source on the room monitor's left channel
 *   error mic     one-channel remap source on the room monitor's right channel
 *   both mics     two-channel remap source on the room monitor (left = reference, right = error)
 *
 * Browsers do not offer monitor sources as microphones, hence the remap sources. The loudspeaker's
 * gain into the room is the volume of its stream into the room (its own monitor stays before that
 * gain, so a recording of it is what the controller played). An idle null-sink monitor runs with a
 * long (2 s) latency until a client asks for less: recordings here ask for a few milliseconds.
 */
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

/** The sample rate of the room and of every device on the server. */
export const ROOM_RATE = 48000;

/** Device names on the private server (labels are what a browser lists). */
export const ROOM_DEVICES = {
  room: { name: 'ancb_room', label: 'ancbench virtual room (2 ch)' },
  speaker: { name: 'ancb_speaker', label: 'ancbench virtual loudspeaker' },
  ref: { name: 'ancb_ref_mic', label: 'ancbench virtual reference mic' },
  err: { name: 'ancb_err_mic', label: 'ancbench virtual error mic' },
  both: { name: 'ancb_both_mics', label: 'ancbench virtual mics (L ref, R err)' },
  feedback: { name: 'ancb_feedback_in', label: 'ancbench virtual feedback into the reference mic' },
} as const;

export class SoundServerError extends Error {
  override name = 'SoundServerError';
}

export interface SoundServer {
  /** The folder the daemon lives in (removed on stop). */
  readonly dir: string;
  /** Value for PULSE_SERVER (clients: browsers, pacat, pactl). */
  readonly address: string;
  /** Environment for a client of this server (PULSE_SERVER, no autospawn). */
  readonly clientEnv: NodeJS.ProcessEnv;
  /** Run pactl against this server; throws with its message on failure. */
  pactl(...args: string[]): string;
  /** The daemon's log so far. */
  log(): string;
  stop(): Promise<void>;
}

function which(cmd: string): boolean {
  return spawnSync('sh', ['-c', `command -v ${cmd}`]).status === 0;
}

/** Why the sound server cannot run here, or null when pulseaudio, pactl, pacat and parec are present. */
export function missingTools(): string | null {
  const missing = ['pulseaudio', 'pactl', 'pacat', 'parec'].filter((c) => !which(c));
  if (!missing.length) return null;
  return `the virtual room needs ${missing.join(', ')} (Debian packages "pulseaudio" and "pulseaudio-utils"): sudo apt-get install pulseaudio pulseaudio-utils`;
}

const sleep = (ms: number): Promise<void> => new Promise((r) => setTimeout(r, ms));

/**
 * Start a private PulseAudio daemon. As root it runs in per-user mode (the daemon warns and goes on;
 * system mode is never used). Rejects with a SoundServerError (with the daemon's log) when it does
 * not answer within `timeoutMs`.
 */
export async function startSoundServer(options: { timeoutMs?: number } = {}): Promise<SoundServer> {
  const why = missingTools();
  if (why) throw new SoundServerError(why);
  const dir = mkdtempSync(join(tmpdir(), 'ancb-room-'));
  const run = join(dir, 'run');
  const config = join(dir, 'config');
  for (const d of [run, join(config, 'pulse'), join(dir, 'state')]) mkdirSync(d, { recursive: true, mode: 0o700 });
  const socket = join(run, 'native');
  const clientConf = join(dir, 'client.conf');
  writeFileSync(clientConf, 'autospawn = no\n');
  // every device at one rate and in float: no resampling or requantisation between panel and room
  const daemonConf = join(config, 'pulse', 'daemon.conf');
  writeFileSync(daemonConf, [`default-sample-rate = ${ROOM_RATE}`, 'alternate-sample-rate = 48000', 'default-sample-format = float32le', 'default-sample-channels = 2', 'avoid-resampling = yes', 'flat-volumes = no', ''].join('\n'));
  const daemonEnv: NodeJS.ProcessEnv = {
    ...process.env,
    HOME: dir,
    XDG_CONFIG_HOME: config,
    PULSE_CONFIG: daemonConf,
    XDG_RUNTIME_DIR: run,
    PULSE_RUNTIME_PATH: run,
    PULSE_STATE_PATH: join(dir, 'state'),
    PULSE_CLIENTCONFIG: clientConf,
    DBUS_SESSION_BUS_ADDRESS: 'disabled:',
  };
  delete daemonEnv.PULSE_SERVER;
  const args = [
    '-n', // no default.pa: only the modules below
    '--daemonize=no',
    '--system=no',
    '--exit-idle-time=-1',
    '--use-pid-file=no',
    '--disable-shm=yes',
    '--high-priority=yes',
    '--realtime=yes',
    '--log-target=stderr',
    '--log-level=notice',
    '-L',
    `module-native-protocol-unix socket=${socket} auth-anonymous=1`,
  ];
  let logText = '';
  const daemon: ChildProcess = spawn('pulseaudio', args, { env: daemonEnv, stdio: ['ignore', 'pipe', 'pipe'] });
  daemon.stdout!.on('data', (b: Buffer) => (logText += b.toString()));
  daemon.stderr!.on('data', (b: Buffer) => (logText += b.toString()));
  let exited: number | null = null;
  const exitPromise = new Promise<void>((r) => daemon.once('exit', (code) => ((exited = code ?? -1), r())));
  daemon.once('error', (e) => (logText += `\n${e.message}`));
  const address = `unix:${socket}`;
  const clientEnv: NodeJS.ProcessEnv = { ...process.env, PULSE_SERVER: address, PULSE_CLIENTCONFIG: clientConf };
  const pactl = (...a: string[]): string => {
    const r = spawnSync('pactl', a, { env: clientEnv, encoding: 'utf8', timeout: 10000 });
    if (r.status !== 0) throw new SoundServerError(`pactl ${a.join(' ')} failed: ${(r.stderr || r.stdout || r.error?.message || '').trim()}`);
    return r.stdout;
  };
  const stop = async (): Promise<void> => {
    if (exited === null) {
      daemon.kill('SIGTERM');
      await Promise.race([exitPromise, sleep(3000)]);
      if (exited === null) {
        daemon.kill('SIGKILL');
        await exitPromise;
      }
    }
    rmSync(dir, { recursive: true, force: true });
  };
  const deadline = Date.now() + (options.timeoutMs ?? 10000);
  for (;;) {
    if (exited !== null) {
      await stop();
      throw new SoundServerError(`the PulseAudio daemon exited (code ${exited}) before it answered:\n${logText.trim()}`);
    }
    if (existsSync(socket) && spawnSync('pactl', ['info'], { env: clientEnv, timeout: 3000 }).status === 0) break;
    if (Date.now() > deadline) {
      await stop();
      throw new SoundServerError(`the PulseAudio daemon did not answer on ${socket} within ${(options.timeoutMs ?? 10000) / 1000} s:\n${logText.trim()}`);
    }
    await sleep(100);
  }
  return { dir, address, clientEnv, pactl, log: () => logText, stop };
}

export interface RoomOptions {
  /** Linear gain from the loudspeaker into the room (the error mic), default 1. */
  speakerGain?: number;
  /** Acoustic feedback: the loudspeaker also reaching the reference mic (approximate delay, see below). */
  feedback?: { gain: number; delayMs: number };
}

export interface Room {
  server: SoundServer;
  /** pactl index of the loudspeaker's stream into the room (its volume is the loudspeaker gain). */
  speakerStream(): number;
  /** Set the loudspeaker gain into the room (linear). */
  setSpeakerGain(gain: number): void;
  /** Remove and re-create the loudspeaker (a device change as the browser sees it). */
  reloadSpeaker(): void;
  /** Which modules were loaded, by device key. */
  modules: Record<string, number>;
}

/** Volume argument for pactl from a linear gain (pactl takes a plain decimal as linear). */
function linearVolume(g: number): string {
  if (!(g >= 0) || !Number.isFinite(g)) throw new SoundServerError(`loudspeaker gain must be a finite number ≥ 0, got ${g}`);
  return g.toFixed(6);
}

function props(label: string): string {
  // pactl/module arguments: the description in single quotes inside the property list
  return `device.description='${label}'`;
}

function loadSpeaker(server: SoundServer): number {
  const d = ROOM_DEVICES;
  return Number(
    server.pactl('load-module', 'module-remap-sink', `sink_name=${d.speaker.name}`, `master=${d.room.name}`, 'channels=1', 'channel_map=mono', 'master_channel_map=front-right', 'remix=no', `rate=${ROOM_RATE}`, 'format=float32le', `sink_properties="${props(d.speaker.label)}"`).trim(),
  );
}

/** Create the room's devices on a running server (see the file header). */
export function buildRoom(server: SoundServer, options: RoomOptions = {}): Room {
  const d = ROOM_DEVICES;
  const modules: Record<string, number> = {};
  const load = (key: string, ...a: string[]): void => {
    modules[key] = Number(server.pactl('load-module', ...a).trim());
  };
  load('room', 'module-null-sink', `sink_name=${d.room.name}`, 'channels=2', 'channel_map=front-left,front-right', `rate=${ROOM_RATE}`, 'format=float32le', `sink_properties="${props(d.room.label)}"`);
  modules.speaker = loadSpeaker(server);
  const monitor = `${d.room.name}.monitor`;
  const remapSource = (key: 'ref' | 'err' | 'both', channels: string, master: string): void =>
    load(key, 'module-remap-source', `source_name=${d[key].name}`, `master=${monitor}`, `channels=${channels.split(',').length}`, `channel_map=${channels.includes(',') ? 'front-left,front-right' : 'mono'}`, `master_channel_map=${master}`, 'remix=no', `rate=${ROOM_RATE}`, 'format=float32le', `source_properties="${props(d[key].label)}"`);
  remapSource('ref', 'mono', 'front-left');
  remapSource('err', 'mono', 'front-right');
  remapSource('both', 'front-left,front-right', 'front-left,front-right');
  if (options.feedback && options.feedback.gain !== 0) {
    // a second way into the reference channel, fed from the loudspeaker's monitor by a loopback
    // stream: its delay is the loopback's latency target (the server adapts it; approximate)
    load('feedback', 'module-remap-sink', `sink_name=${d.feedback.name}`, `master=${d.room.name}`, 'channels=1', 'channel_map=mono', 'master_channel_map=front-left', 'remix=no', `rate=${ROOM_RATE}`, 'format=float32le', `sink_properties="${props(d.feedback.label)}"`);
    load('feedbackLoop', 'module-loopback', `source=${d.speaker.name}.monitor`, `sink=${d.feedback.name}`, `latency_msec=${Math.max(1, Math.round(options.feedback.delayMs))}`, 'source_dont_move=true', 'sink_dont_move=true', 'remix=no');
    server.pactl('set-sink-volume', d.feedback.name, linearVolume(Math.abs(options.feedback.gain)));
  }
  // the browser's defaults point at nothing useful on purpose: the panel must choose its devices
  server.pactl('set-default-sink', d.room.name);
  server.pactl('set-default-source', d.both.name);
  const speakerStream = (): number => {
    const list = JSON.parse(server.pactl('--format=json', 'list', 'sink-inputs')) as { index: number; owner_module: string | number }[];
    const own = list.find((i) => Number(i.owner_module) === modules.speaker);
    if (!own) throw new SoundServerError('the loudspeaker has no stream into the room');
    return own.index;
  };
  let gain = options.speakerGain ?? 1;
  const setSpeakerGain = (g: number): void => {
    server.pactl('set-sink-input-volume', String(speakerStream()), linearVolume(g));
    gain = g;
  };
  if (gain !== 1) setSpeakerGain(gain);
  return {
    server,
    modules,
    speakerStream,
    setSpeakerGain,
    reloadSpeaker(): void {
      server.pactl('unload-module', String(modules.speaker));
      modules.speaker = loadSpeaker(server);
      if (gain !== 1) setSpeakerGain(gain);
    },
  };
}

/** Read a raw float32 little-endian file as samples. */
export function readFloat32(path: string): Float32Array {
  const b = readFileSync(path);
  return new Float32Array(b.buffer.slice(b.byteOffset, b.byteOffset + (b.byteLength & ~3)));
}

/**
 * An independent recorder: parec on several devices at once, each to its own raw float32 file.
 * Monitors of null sinks idle at a long latency; `--latency-msec` asks for a short one. Start it,
 * do something, then `stop()` returns the samples per device (mono devices: one channel;
 * multi-channel devices: interleaved).
 */
export class Recorder {
  private readonly procs: { device: string; file: string; proc: ChildProcess; exited: Promise<void> }[] = [];
  constructor(private readonly server: SoundServer) {}

  start(devices: string[], channels: Record<string, number> = {}): void {
    for (const device of devices) {
      const file = join(this.server.dir, `rec-${device}-${Date.now()}.f32`);
      const ch = channels[device] ?? 1;
      const proc = spawn('parec', [`--device=${device}`, '--raw', '--format=float32le', `--rate=${ROOM_RATE}`, `--channels=${ch}`, '--latency-msec=5', '--process-time-msec=2', '--no-remix', '--no-remap', file], { env: this.server.clientEnv, stdio: 'ignore' });
      const exited = new Promise<void>((r) => proc.once('exit', () => r()));
      this.procs.push({ device, file, proc, exited });
    }
  }

  /** Stop every recording and return the samples by device. */
  async stop(): Promise<Record<string, Float32Array>> {
    const out: Record<string, Float32Array> = {};
    for (const p of this.procs) p.proc.kill('SIGINT');
    await Promise.all(this.procs.map((p) => Promise.race([p.exited, sleep(3000)])));
    for (const p of this.procs) {
      out[p.device] = existsSync(p.file) ? readFloat32(p.file) : new Float32Array(0);
      rmSync(p.file, { force: true });
    }
    this.procs.length = 0;
    return out;
  }
}
