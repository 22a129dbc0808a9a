// The library build (npm run build:lib, run by prepack; tsx runs this file): vite.lib.config.ts's builds, then the
// declarations with tsc. Import specifiers in the declarations end in .js (the sources use .ts).
import { execFileSync } from 'node:child_process';
import { readdirSync, readFileSync, rmSync, statSync, writeFileSync, mkdirSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { build } from 'vite';
import { libBuilds } from '../vite.lib.config.ts';

const root = resolve(import.meta.dirname, '..');
rmSync(join(root, 'lib'), { recursive: true, force: true });

for (const config of libBuilds) await build(config);

execFileSync(process.execPath, [join(root, 'node_modules/typescript/bin/tsc'), '-p', join(root, 'tsconfig.lib.json')], { stdio: 'inherit' });
function rewrite(dir: string): void {
  for (const name of readdirSync(dir)) {
    const p = join(dir, name);
    if (statSync(p).isDirectory()) rewrite(p);
    else if (name.endsWith('.d.ts')) writeFileSync(p, readFileSync(p, 'utf8').replace(/(from\s+|import\()(['"])(\.{1,2}\/[^'"]*?)\.ts\2/g, '$1$2$3.js$2'));
  }
}
rewrite(join(root, 'lib/types'));
mkdirSync(join(root, 'lib/types/cli'), { recursive: true });
writeFileSync(
  join(root, 'lib/types/cli/main.d.ts'),
  '/** Run the ancbench command line with these arguments (without node and the script); resolves to the exit code. */\nexport declare function main(argv: string[]): Promise<number>;\n',
);
console.log('lib/ built');
