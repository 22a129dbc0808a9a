#!/usr/bin/env node
// Makes sure what the browser tests need exists before `npm test` runs them:
//  - a Chromium: ANCBENCH_CHROMIUM (a path) if set, else /usr/bin/chromium;
//  - the PulseAudio sound server and its tools (pulseaudio, pactl, pacat, parec), for the
//    end-to-end tests through the virtual room (scripts/virtual-room-server.ts).
// When something is missing and this process runs as root on a Debian-like system with apt-get,
// Debian's packages are installed (`chromium`; `pulseaudio` and `pulseaudio-utils`); otherwise the
// script fails with a message saying how to get them. Playwright never downloads a browser here:
// the tests launch this executable.
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

const isRoot = typeof process.getuid === 'function' && process.getuid() === 0;
const canInstall = isRoot && which('apt-get');
let updated = false;

/** apt-get install the packages; exits with a message on failure. */
function aptInstall(packages, what) {
  console.log(`ensure-browser: ${what} missing; installing Debian's ${packages.join(', ')} with apt-get`);
  const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
  const steps = [...(updated ? [] : [['apt-get', ['update']]]), ['apt-get', ['install', '-y', '--no-install-recommends', ...packages]]];
  for (const [cmd, args] of steps) {
    const r = spawnSync(cmd, args, { stdio: 'inherit', env });
    if (r.status !== 0) {
      console.error(`ensure-browser: "${cmd} ${args.join(' ')}" failed (exit ${r.status}); install ${packages.join(', ')} by hand and run npm test again`);
      process.exit(1);
    }
  }
  updated = true;
}

if (!usable(path)) {
  if (!process.env.ANCBENCH_CHROMIUM && canInstall) {
    aptInstall(['chromium'], path);
    if (!usable(path)) {
      console.error(`ensure-browser: the chromium package installed, but ${path} is still missing`);
      process.exit(1);
    }
  } else {
    console.error(
      [
        `ensure-browser: the browser tests need Chromium at ${path}, and it is not there.`,
        '  On Debian or Ubuntu: sudo apt-get install chromium   (Ubuntu may call the package chromium-browser)',
        '  Elsewhere: install Chromium and point ANCBENCH_CHROMIUM at its executable.',
        '  To run only the Node tests meanwhile: npm run test:unit',
      ].join('\n'),
    );
    process.exit(1);
  }
}

const soundTools = ['pulseaudio', 'pactl', 'pacat', 'parec'];
const missingSound = () => soundTools.filter((c) => !which(c));
if (missingSound().length) {
  if (canInstall) aptInstall(['pulseaudio', 'pulseaudio-utils'], missingSound().join(', '));
  if (missingSound().length) {
    console.error(
      [
        `ensure-browser: the end-to-end tests through the virtual room need ${missingSound().join(', ')}, and they are not there.`,
        '  On Debian or Ubuntu: sudo apt-get install pulseaudio pulseaudio-utils',
        '  To run only the Node tests meanwhile: npm run test:unit',
      ].join('\n'),
    );
    process.exit(1);
  }
}
