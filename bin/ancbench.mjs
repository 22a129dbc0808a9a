#!/usr/bin/env node
// Entry point. In the repository: runs the TypeScript CLI through tsx's loader (Node 20 has no type
// stripping). In an installed package (no src/): runs the built lib/cli.js.
import { existsSync } from 'node:fs';

const source = new URL('../src/cli/main.ts', import.meta.url);
let cli;
if (existsSync(source)) {
  const { register } = await import('tsx/esm/api');
  register();
  cli = await import(source.href);
} else {
  cli = await import('../lib/cli.js');
}
// Ctrl-C or a kill: remove the outputs a run had prepared but not finished, then stop.
for (const signal of ['SIGINT', 'SIGTERM', 'SIGHUP']) {
  process.on(signal, () => {
    cli.abortPendingOutputs();
    process.stderr.write(`\nancbench: stopped (${signal}); no output was written\n`);
    process.exit(130);
  });
}
process.exitCode = await cli.main(process.argv.slice(2));
