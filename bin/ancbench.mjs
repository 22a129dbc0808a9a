#!/usr/bin/env node
// Entry point: runs the TypeScript CLI through tsx's loader (Node 20 has no type stripping).
import { register } from 'tsx/esm/api';
register();
const { main } = await import('../src/cli/main.ts');
process.exitCode = await main(process.argv.slice(2));
