#!/usr/bin/env node
// Entry point: runs the TypeScript CLI through tsx's loader (Node 20 has no type stripping).
import { register } from 'tsx/esm/api';
register();
const { main } = await import('../src/cli/main.ts');
const { abortPendingOutputs } = await import('../src/io/files-node.ts');
// Ctrl-C or a kill: remove the outputs a run had prepared but not finished, then stop.
for (const signal of ['SIGINT', 'SIGTERM', 'SIGHUP']) {
  process.on(signal, () => {
    abortPendingOutputs();
    process.stderr.write(`\nancbench: stopped (${signal}); no output was written\n`);
    process.exit(130);
  });
}
process.exitCode = await main(process.argv.slice(2));
