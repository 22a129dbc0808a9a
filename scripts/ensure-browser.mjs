#!/usr/bin/env node
// Makes sure a Chromium for the browser tests exists before `npm test` runs them.
// Order: ANCBENCH_CHROMIUM (a path) if set, else /usr/bin/chromium. When it is missing and this
// process runs as root on a Debian-like system with apt-get, Debian's `chromium` package is
// installed; otherwise the script fails with a message saying how to get one. Playwright never
// downloads a browser here: the tests launch this executable.
import { accessSync, constants } from 'node:fs';
import { spawnSync } from 'node:child_process';

const path = process.env.ANCBENCH_CHROMIUM || '/usr/bin/chromium';

function usable(p) {
  try {
    accessSync(p, constants.X_OK);
    return true;
  } catch {
    return false;
  }
}

function which(cmd) {
  return spawnSync('sh', ['-c', `command -v ${cmd}`], { encoding: 'utf8' }).status === 0;
}

if (usable(path)) process.exit(0);

const isRoot = typeof process.getuid === 'function' && process.getuid() === 0;
if (!process.env.ANCBENCH_CHROMIUM && isRoot && which('apt-get')) {
  console.log(`ensure-browser: ${path} not found; installing Debian's chromium package with apt-get`);
  const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
  const steps = [
    ['apt-get', ['update']],
    ['apt-get', ['install', '-y', '--no-install-recommends', 'chromium']],
  ];
  for (const [cmd, args] of steps) {
    const r = spawnSync(cmd, args, { stdio: 'inherit', env });
    if (r.status !== 0) {
      console.error(`ensure-browser: "${cmd} ${args.join(' ')}" failed (exit ${r.status}); install Chromium by hand and run npm test again`);
      process.exit(1);
    }
  }
  if (usable(path)) process.exit(0);
  console.error(`ensure-browser: the chromium package installed, but ${path} is still missing`);
  process.exit(1);
}

console.error(
  [
    `ensure-browser: the browser tests need Chromium at ${path}, and it is not there.`,
    '  On Debian or Ubuntu: sudo apt-get install chromium   (Ubuntu may call the package chromium-browser)',
    '  Elsewhere: install Chromium and point ANCBENCH_CHROMIUM at its executable.',
    '  To run only the Node tests meanwhile: npm run test:unit',
  ].join('\n'),
);
process.exit(1);
