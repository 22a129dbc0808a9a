// The README's command-line examples must keep working: every `npx ancbench …` line in its sh blocks is
// run here, in order (later examples read what earlier ones wrote), with `out/` (the README's scratch
// folder) redirected to a temporary folder, and must exit 0 and print something. A plain code block that
// follows an sh block in the same section is the sample output of that block's first command: every line
// it shows must appear, in order and exactly, in what the command prints (the runs are deterministic:
// fixed seeds).
import { describe, expect, it } from 'vitest';
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { main } from '../../src/cli/main.ts';
import { useCliSandbox } from '../helpers/cli.ts';

const readme = readFileSync(fileURLToPath(new URL('../../README.md', import.meta.url)), 'utf8');

function readmeCommands(): string[][] {
  const commands: string[][] = [];
  for (const block of readme.matchAll(/```sh\n([\s\S]*?)```/g)) commands.push(...commandsOf(block[1]!));
  return commands;
}

function commandsOf(block: string): string[][] {
  const commands: string[][] = [];
  const joined = block.replace(/\\\n\s*/g, ' ');
  for (const line of joined.split('\n')) {
    const m = /^npx ancbench (.*?)(?:\s+#.*)?$/.exec(line.trim());
    if (m) commands.push(m[1]!.trim().split(/\s+/));
  }
  return commands;
}

/** Sample outputs: a plain block after an sh block, with no heading or other block between, keyed by the sh block's first command. */
function readmeSamples(): Map<string, string[]> {
  const samples = new Map<string, string[]>();
  let lastCommand: string | null = null;
  let lastEnd = 0;
  for (const block of readme.matchAll(/```(\w*)\n([\s\S]*?)```/g)) {
    const between = readme.slice(lastEnd, block.index);
    if (/^#/m.test(between)) lastCommand = null;
    if (block[1] === 'sh') lastCommand = commandsOf(block[2]!)[0]?.join(' ') ?? null;
    else if (block[1] === '' && lastCommand) {
      samples.set(lastCommand, block[2]!.split('\n').map((l) => l.trimEnd()).filter(Boolean));
      lastCommand = null;
    } else lastCommand = null;
    lastEnd = block.index + block[0].length;
  }
  return samples;
}

describe('README examples', () => {
  const cli = useCliSandbox('ancbench-readme-');

  it('should list the commands it documents', () => {
    const verbs = new Set(readmeCommands().map((c) => c[0]));
    for (const v of ['simulate', 'identify', 'analyze', 'check-limits', 'replay', 'sweep']) expect(verbs).toContain(v);
  });

  it('should find the sample outputs it compares', () => {
    const samples = readmeSamples();
    expect([...samples.keys()]).toEqual(['simulate demo/scenarios/workshop-extractor-hum.json', 'check-limits demo/scenarios/pump-harmonics.json --out out/limits']);
  });

  it('should run every documented command successfully, in order, printing the sample outputs shown', async () => {
    const samples = readmeSamples();
    const compared: string[] = [];
    for (const args of readmeCommands()) {
      // Examples write only into out/, the scratch folder, never into the repository itself.
      for (let i = 0; i < args.length - 1; i++) if (args[i] === '--out') expect(args[i + 1], args.join(' ')).toMatch(/^out\//);
      const real = args.map((a) => a.replace(/^out\//, `${cli.dir}/out/`));
      cli.out = [];
      cli.err = [];
      const code = await main(real);
      expect(code, `ancbench ${args.join(' ')}\n${cli.err.join('')}`).toBe(0);
      const printed = cli.out.join('').split('\n').map((l) => l.trimEnd());
      expect(printed.join('').length).toBeGreaterThan(0);
      const sample = samples.get(args.join(' '));
      if (!sample) continue;
      let at = 0;
      for (const line of sample) {
        const found = printed.indexOf(line, at);
        expect(found, `README sample line of "ancbench ${args.join(' ')}" not printed (in this order):\n${line}\n--- printed:\n${printed.join('\n')}`).toBeGreaterThanOrEqual(0);
        at = found + 1;
      }
      compared.push(args.join(' '));
    }
    expect([...new Set(compared)]).toEqual([...samples.keys()]);
  }, 900_000);
});
