/**
 * `npm run virtual-room -- <scenario.json> [--speaker-gain G] [--no-feedback]`
 *
 * A real audio loop without microphones: starts a private PulseAudio server (see
 * virtual-room-server.ts), builds the room (loudspeaker, reference and error mics), plays the
 * scenario's noise into it (virtual-room-render.ts) and prints how to open the panel against it.
 * Ctrl-C stops the noise and the server and removes its folder; nothing keeps running.
 *
 * The secondary path is the real one: the browser's output, the server's buffers and its input,
 * with the scenario's secondary-path gain (default) or --speaker-gain as the loudspeaker's gain into
 * the room. The scenario's feedback path, when it has one, adds the loudspeaker into the reference
 * mic at its gain, after roughly its delay (the server's loopback keeps that delay only
 * approximately: it adapts its buffer); --no-feedback leaves it out.
 */
import { resolve } from 'node:path';
import { loadScenarioFile } from '../src/io/scenario-file-node.ts';
import { buildRoom, ROOM_DEVICES, ROOM_RATE, startSoundServer, type SoundServer } from './virtual-room-server.ts';
import { RoomRenderer } from './virtual-room-render.ts';

const USAGE = 'usage: npm run virtual-room -- <scenario.json> [--speaker-gain G] [--no-feedback]';

function fail(msg: string): never {
  console.error(`virtual-room: ${msg}\n${USAGE}`);
  process.exit(2);
}

function parseArgs(argv: string[]): { file: string; speakerGain: number | null; feedback: boolean } {
  let file = '';
  let speakerGain: number | null = null;
  let feedback = true;
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i]!;
    if (a === '--help' || a === '-h') {
      console.log(USAGE);
      process.exit(0);
    } else if (a === '--no-feedback') feedback = false;
    else if (a === '--speaker-gain') {
      const v = Number(argv[++i]);
      if (!(v >= 0 && v <= 4)) fail(`--speaker-gain: must be a linear gain from 0 to 4, got ${argv[i] ?? 'nothing'}`);
      speakerGain = v;
    } else if (a.startsWith('-')) fail(`unknown flag ${a}`);
    else if (file) fail(`one scenario file only, got "${file}" and "${a}"`);
    else file = a;
  }
  if (!file) fail('a scenario file is required');
  return { file: resolve(file), speakerGain, feedback };
}

async function main(): Promise<void> {
  const args = parseArgs(process.argv.slice(2));
  let loaded;
  try {
    loaded = loadScenarioFile(args.file, { skipModelFile: true });
  } catch (e) {
    fail((e as Error).message);
  }
  const sc = loaded.scenario;
  if (sc.sampleRate !== ROOM_RATE) fail(`sampleRate: the virtual room runs at ${ROOM_RATE} Hz, got ${sc.sampleRate}`);
  const speakerGain = args.speakerGain ?? Math.abs(sc.paths.secondary.gain ?? 1);
  const fb = args.feedback && sc.paths.feedback ? { gain: sc.paths.feedback.gain ?? 1, delayMs: sc.paths.feedback.delayMs } : undefined;

  let server: SoundServer | null = null;
  let renderer: RoomRenderer | null = null;
  let stopping = false;
  const stop = async (code: number): Promise<void> => {
    if (stopping) return;
    stopping = true;
    await renderer?.stop();
    await server?.stop();
    console.log('virtual-room: stopped; the sound server and its folder are gone.');
    process.exit(code);
  };
  process.on('SIGINT', () => void stop(0));
  process.on('SIGTERM', () => void stop(0));
  process.on('SIGHUP', () => void stop(0));
  try {
    server = await startSoundServer();
    buildRoom(server, { speakerGain, ...(fb ? { feedback: fb } : {}) });
    renderer = new RoomRenderer(server, sc, loaded.wavs);
    await renderer.start();
  } catch (e) {
    console.error(`virtual-room: ${(e as Error).message}`);
    await stop(1);
    return;
  }
  const d = ROOM_DEVICES;
  console.log(
    [
      `virtual-room: "${sc.name ?? args.file}" plays into a private sound server at ${ROOM_RATE} Hz.`,
      `  devices: output "${d.speaker.label}"; inputs "${d.ref.label}", "${d.err.label}",`,
      `           or both on one stereo input "${d.both.label}"`,
      `  loudspeaker → error mic gain ${speakerGain}; delay: the real audio I/O round trip (the panel measures it)`,
      fb ? `  feedback: loudspeaker → reference mic, gain ${fb.gain}, about ${fb.delayMs} ms (approximate)` : '  feedback: none',
      '',
      'Open the panel against it (in another terminal):',
      '  npm start                       # prints the panel URL, e.g. http://localhost:5173/',
      `  PULSE_SERVER=${server.address} chromium --user-data-dir=$(mktemp -d) http://localhost:5173/`,
      'Then: Live microphones → Start → allow access → choose the inputs (two devices: the reference and',
      'error mics, or the stereo one) and the loudspeaker as output → Identify → Control.',
      `Record what the mics hear:  PULSE_SERVER=${server.address} parec --device=${d.room.name}.monitor --latency-msec=5 --file-format=wav room.wav`,
      '',
      'Ctrl-C stops the noise and the sound server.',
    ].join('\n'),
  );
}

void main();
