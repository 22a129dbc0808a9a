#!/usr/bin/env node
// Entry point. In the repository: runs the TypeScript CLI through tsx's loader (Node 20 has no type
// stripping). In an installed package (no src/): runs the built lib/cli.js.
import { existsSync } from 'node:fs';

const source = new URL('../src/cli/main.ts', import.meta.url);
let main;
if (existsSync(source)) {
  const { register } = await import('tsx/esm/api');
  register();
  ({ main } = await import(source.href));
} else {
  ({ main } = await import('../lib/cli.js'));
}
process.exitCode = await main(process.argv.slice(2));
