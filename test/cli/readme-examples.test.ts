// The README's command-line examples must keep working: every `npx ancbench …` line in its sh blocks is
// run here, in order (later examples read what earlier ones wrote), with `out/` redirected to a temporary
// folder, and must exit 0 and print something.
import { describe, expect, it } from 'vitest';
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { main } from '../../src/cli/main.ts';
import { useCliSandbox } from '../helpers/cli.ts';

const readme = readFileSync(fileURLToPath(new URL('../../README.md', import.meta.url)), 'utf8');

function readmeCommands(): string[][] {
  const commands: string[][] = [];
  for (const block of readme.matchAll(/```sh\n([\s\S]*?)```/g)) {
    const joined = block[1]!.replace(/\\\n\s*/g, ' ');
    for (const line of joined.split('\n')) {
      const m = /^npx ancbench (.*?)(?:\s+#.*)?$/.exec(line.trim());
      if (m) commands.push(m[1]!.trim().split(/\s+/));
    }
  }
  return commands;
}

describe('README examples', () => {
  const cli = useCliSandbox('ancbench-readme-');

  it('should list the commands it documents', () => {
    const verbs = new Set(readmeCommands().map((c) => c[0]));
    for (const v of ['simulate', 'identify', 'analyze', 'check-limits', 'replay', 'sweep']) expect(verbs).toContain(v);
  });

  it('should run every documented command successfully, in order', async () => {
    for (const args of readmeCommands()) {
      const real = args.map((a) => a.replace(/^out\//, `${cli.dir}/out/`).replace(/^model\.json$/, `${cli.dir}/model.json`));
      cli.out = [];
      cli.err = [];
      const code = await main(real);
      expect(code, `ancbench ${args.join(' ')}\n${cli.err.join('')}`).toBe(0);
      expect(cli.out.join('').length).toBeGreaterThan(0);
    }
  }, 900_000);
});
