// Hostile and careless inputs, generated: mutated scenarios, corrupted WAV headers, mutated model files and
// random flags, fed to the commands in process. Whatever the input, a command must either fail with exit
// status 1 or 2 and exactly one line on stderr (no stack trace) and leave no files behind, or succeed with
// finite figures (and, with --out, every output file in place). Seeded (fast-check), and bounded in time:
// each property stops after its time budget whatever the number of runs done.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { existsSync, readdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { main } from '../../src/cli/main.ts';
import { encodeWavInt16 } from '../../src/io/wav.ts';
import { createPathModel, serializePathModel } from '../../src/io/path-model-file.ts';
import { useCliSandbox } from '../helpers/cli.ts';

const SEED = 20261204;
/** Time budget per property (ms); four properties keep the file well under a minute. */
const BUDGET_MS = 9000;

const baseScenario = {
  schemaVersion: 1,
  name: 'fuzz base',
  sampleRate: 8000,
  blockSize: 32,
  durationS: 0.25,
  seed: 1,
  sources: [{ kind: 'noise', color: 'white', rms: 0.1 }, { kind: 'tone', hz: 100, amplitude: 0.1, phaseDeg: 10 }],
  paths: { reference: { delayMs: 0 }, primary: { delayMs: 10, gain: 0.8, fir: [1, 0.2] }, secondary: { delayMs: 5, gain: 0.5 } },
  sensorNoiseRms: 0.001,
  controller: { algorithm: 'fxnlms', taps: 16, stepSize: 0.01 },
  limiter: { ceilingDbfs: -6 },
  guard: { errorRise: { riseDb: 6, holdMs: 60 }, resume: { mode: 'user' } },
};

/** Values a careless or hostile file might hold where another was expected; DEEP becomes a 20000-deep array in the text. */
const DEEP = '__deeply_nested__';
const HOSTILE = [-1, 0, 0.5, 3, 1e308, -1e308, 5e-324, 2 ** 53, 'x', '', 'a'.repeat(5000), null, true, [], {}, { unknownKey: 1 }, [1, 2, 3], DEEP];

/** JSON text of a mutated document, with DEEP written out as deeply nested arrays. */
function jsonText(doc: unknown): string {
  return JSON.stringify(doc).replaceAll(JSON.stringify(DEEP), `${'['.repeat(20000)}0${']'.repeat(20000)}`);
}

/** Every key path in a JSON value (objects and arrays), for choosing what to mutate. */
function keyPaths(v: unknown, prefix: (string | number)[] = [], out: (string | number)[][] = []): (string | number)[][] {
  if (v && typeof v === 'object') {
    for (const [k, x] of Object.entries(v)) {
      const p = [...prefix, Array.isArray(v) ? Number(k) : k];
      out.push(p);
      keyPaths(x, p, out);
    }
  }
  return out;
}

interface Mutation {
  at: number;
  op: 'set' | 'delete' | 'add';
  value: number;
}
const mutations = fc.array(fc.record({ at: fc.nat(), op: fc.constantFrom('set', 'delete', 'add') as fc.Arbitrary<Mutation['op']>, value: fc.nat(HOSTILE.length - 1) }), { minLength: 1, maxLength: 3 });

function mutate(base: unknown, ms: Mutation[]): unknown {
  const doc = structuredClone(base) as Record<string, unknown>;
  for (const m of ms) {
    const paths = keyPaths(doc);
    if (!paths.length) break;
    const path = paths[m.at % paths.length]!;
    let parent = doc as Record<string | number, unknown>;
    for (const k of path.slice(0, -1)) parent = parent[k] as Record<string | number, unknown>;
    const key = path[path.length - 1]!;
    if (m.op === 'set') parent[key] = HOSTILE[m.value];
    else if (m.op === 'delete') {
      if (Array.isArray(parent)) parent.splice(Number(key), 1);
      else delete parent[key];
    } else if (!Array.isArray(parent)) parent[`${String(key)}x`] = HOSTILE[m.value];
  }
  return doc;
}

describe('hostile inputs (seeded fuzz)', () => {
  const cli = useCliSandbox('ancbench-fuzz-');

  /** Run a command and check the outcome; `outDir` is an --out target that must exist only on success. */
  async function runChecked(argv: string[], inputs: string[], outDir?: string, outFiles?: string[]): Promise<number> {
    cli.out = [];
    cli.err = [];
    const code = await main(argv);
    const err = cli.err.join('');
    const out = cli.out.join('');
    const what = `ancbench ${argv.map((a) => (a.length > 80 ? a.slice(0, 80) + '…' : a)).join(' ')}\n${err.slice(0, 500)}`;
    expect(err, what).not.toMatch(/\n\s+at /); // no stack trace
    if (code !== 0) {
      expect([1, 2, 3], what).toContain(code);
      if (code !== 3) {
        expect(err, what).toMatch(/^ancbench[^\n]*: [^\n]+\n$/); // exactly one line
        // nothing written: only the inputs remain in the sandbox
        expect(readdirSync(cli.dir).sort(), what).toEqual([...inputs].sort());
      }
    } else {
      expect(out.length, what).toBeGreaterThan(0);
      expect(out, what).not.toMatch(/\bNaN\b|Infinity/);
      if (outDir && outFiles) for (const f of outFiles) expect(existsSync(join(outDir, f)), `${what}\n${f}`).toBe(true);
    }
    return code;
  }

  it('should refuse mutated scenarios in one line, or run them to finite figures, for simulate --out', async () => {
    await fc.assert(
      fc.asyncProperty(mutations, fc.boolean(), async (ms, withOut) => {
        const path = cli.file(jsonText(mutate(baseScenario, ms)), 's.json');
        const outDir = join(cli.dir, 'out');
        if (withOut) await runChecked(['simulate', path, '--out', outDir, '--json'], ['s.json'], outDir, ['summary.json', 'attenuation.csv', 'signals.wav', 'report.html']);
        else await runChecked(['simulate', path, '--json'], ['s.json']);
        if (existsSync(outDir)) (await import('node:fs')).rmSync(outDir, { recursive: true });
      }),
      { seed: SEED, numRuns: 200, interruptAfterTimeLimit: BUDGET_MS },
    );
  }, 60_000);

  it('should refuse corrupted WAV headers in one line, naming the file', async () => {
    const frames = 4096;
    const a = Float32Array.from({ length: frames }, (_, i) => 0.3 * Math.sin(i * 0.37) + 0.1 * Math.sin(i * 1.9));
    const b = Float32Array.from({ length: frames }, (_, i) => (i >= 8 ? 0.5 * a[i - 8]! : 0));
    const good = encodeWavInt16([a, b], 8000);
    await fc.assert(
      fc.asyncProperty(
        fc.array(fc.record({ at: fc.nat(63), byte: fc.nat(255) }), { maxLength: 6 }),
        fc.option(fc.nat(good.length), { nil: undefined }),
        fc.option(fc.record({ field: fc.constantFrom(4, 16, 24, 40), value: fc.nat() }), { nil: undefined }),
        async (bytes, cut, size) => {
          const w = Uint8Array.from(cut === undefined ? good : good.subarray(0, cut));
          for (const { at, byte } of bytes) if (at < w.length) w[at] = byte;
          if (size && size.field + 4 <= w.length) new DataView(w.buffer).setUint32(size.field, size.value, true);
          const path = cli.file(w, 'r.wav');
          const code = await runChecked(['analyze', '--ref', path, '--ref-channel', '0', '--err', path, '--err-channel', '1', '--json'], ['r.wav']);
          if (code !== 0) expect(cli.err.join('')).toMatch(/r\.wav/);
        },
      ),
      { seed: SEED, numRuns: 300, interruptAfterTimeLimit: BUDGET_MS },
    );
  }, 60_000);

  it('should refuse mutated model files in one line, or use them with a warning where the delay disagrees', async () => {
    const frames = 8192;
    const a = Float32Array.from({ length: frames }, (_, i) => 0.3 * Math.sin(i * 0.37) + 0.2 * Math.sin(i * 2.1 + 1));
    const b = Float32Array.from({ length: frames }, (_, i) => (i >= 8 ? 0.5 * a[i - 8]! : 0));
    const model = JSON.parse(serializePathModel(createPathModel({ taps: [0, 0, 0, 1, 0.5, 0.1], sampleRate: 8000, method: 'imported', quality: { snrDb: null } })));
    await fc.assert(
      fc.asyncProperty(mutations, fc.constantFrom(8000, 16000), async (ms, rate) => {
        const wav = cli.file(encodeWavInt16([a, b], rate), 'r.wav');
        const path = cli.file(jsonText(mutate(model, ms)), 'm.json');
        await runChecked(['analyze', '--ref', wav, '--ref-channel', '0', '--err', wav, '--err-channel', '1', '--model', path], ['r.wav', 'm.json']);
      }),
      { seed: SEED, numRuns: 200, interruptAfterTimeLimit: BUDGET_MS },
    );
  }, 60_000);

  it('should refuse random flags in one line, naming the flag, for every command', async () => {
    const tokens = ['--out', '', '--json', '--jsn', '--from', '-1', '1e308', 'NaN', '--ref', '--err', '--weighting', 'Q', '--bands', 'octave', '--taps', '65537', '--level',
      '-0', '--method', 'sweep', '--duration', '0.2', '--ramp-s', '--over-db', '--x', '-z', '--help', '--', 'extra', '--model', '--out=', '--json=1', '--ref-channel', '99'];
    await fc.assert(
      fc.asyncProperty(fc.constantFrom('simulate', 'identify', 'analyze', 'check-limits', 'simulat'), fc.array(fc.constantFrom(...tokens), { maxLength: 5 }), async (cmd, flags) => {
        const path = cli.file(baseScenario, 's.json');
        const wav = cli.file(encodeWavInt16([new Float32Array(2048).map((_, i) => Math.sin(i))], 8000), 'r.wav');
        const fixed = cmd === 'analyze' ? ['--ref', wav, '--err', wav] : cmd === 'check-limits' ? [path, '--no-closed-loop', '--ramp-s', '0.1'] : cmd === 'identify' ? [path, '--duration', '0.3'] : [path];
        // Flags first, the fixed arguments last, so that the fixed ones win where a flag repeats.
        const code = await runChecked([cmd, ...flags, ...fixed], ['s.json', 'r.wav']);
        if (code === 2) expect(cli.err.join('')).toMatch(/^ancbench( [a-z-]+)?: /);
      }),
      { seed: SEED, numRuns: 150, interruptAfterTimeLimit: BUDGET_MS },
    );
  }, 60_000);

  it('should print one line for a deeply nested free-text field (no stack overflow)', async () => {
    const text = `{"schemaVersion":1,"description":${'['.repeat(100000)}${']'.repeat(100000)}}`;
    writeFileSync(join(cli.dir, 'deep.json'), text);
    expect(await runChecked(['simulate', join(cli.dir, 'deep.json')], ['deep.json'])).toBe(1);
    expect(cli.err.join('')).toMatch(/description: .*got \[\[\[\[/);
  });
});
