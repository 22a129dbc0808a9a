/**
 * The package as a stranger gets it: `npm pack` (which runs the library build), the tarball
 * installed into a fresh temporary project outside the repository (dependencies from npm's cache,
 * --prefer-offline), then
 *  - a page bundled by Vite from that project: the controller node on a simulated plant in a native
 *    AudioContext and in a standardized-audio-context one, and the bad uses it must refuse clearly;
 *  - demo/embed unchanged but for its import map, as plain static files (no bundler);
 *  - the public types in a strict consumer project (tsc --noEmit);
 *  - the installed `ancbench` binary.
 *
 * Attenuation is the node's own measure (engine meters: error power held with control off against
 * the slow average with control on). The plant is two delays and two gains, so a controller that
 * works must take the tones down by far more than the 10 dB asked here.
 */
import { execFileSync } from 'node:child_process';
import { copyFileSync, mkdirSync, mkdtempSync, readFileSync, readdirSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { build } from 'vite';
import type { Browser } from 'playwright';
import { launch, serveStatic } from './helpers.ts';

const repo = resolve(import.meta.dirname, '../..');
const fixtures = resolve(import.meta.dirname, 'embed-consumer');
let dir = '';
let app = '';
let tarball = '';
let browser: Browser;
let server: { url: string; close(): Promise<void> };

const npm = (args: string[], cwd: string): string => execFileSync('npm', args, { cwd, encoding: 'utf8', stdio: ['ignore', 'pipe', 'pipe'] });

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'ancbench-consumer-'));
  // prepack (the library build) prints to stdout before npm's JSON
  const out = npm(['pack', '--json', '--pack-destination', dir], repo);
  const packed = JSON.parse(out.slice(out.search(/^\[/m))) as { filename: string; size: number }[];
  tarball = join(dir, packed[0]!.filename);
  app = join(dir, 'app');
  mkdirSync(app);
  writeFileSync(join(app, 'package.json'), JSON.stringify({ name: 'consumer', private: true, type: 'module' }));
  npm(['install', '--prefer-offline', '--no-audit', '--no-fund', '--ignore-scripts', tarball], app);
  // the bundled page
  mkdirSync(join(app, 'bundled'));
  for (const f of ['index.html', 'main.js']) copyFileSync(join(fixtures, f), join(app, 'bundled', f));
  await build({ configFile: false, root: join(app, 'bundled'), logLevel: 'warn', base: './', build: { outDir: join(app, 'public/bundled'), target: 'es2022' } });
  // the static page: demo/embed with the import map pointing into node_modules
  mkdirSync(join(app, 'public/static'), { recursive: true });
  const html = readFileSync(join(repo, 'demo/embed/index.html'), 'utf8').replace('../../lib/web/index.js', '../node_modules/ancbench/lib/web/index.js');
  writeFileSync(join(app, 'public/static/index.html'), html);
  copyFileSync(join(repo, 'demo/embed/main.js'), join(app, 'public/static/main.js'));
  // node_modules beside the pages, as a static host would have them
  execFileSync('ln', ['-s', join(app, 'node_modules'), join(app, 'public/node_modules')]);
  server = await serveStatic(join(app, 'public'));
  browser = await launch(['--use-fake-ui-for-media-stream', '--use-fake-device-for-media-stream']);
}, 400_000);

afterAll(async () => {
  await browser?.close();
  await server?.close();
  if (dir) rmSync(dir, { recursive: true, force: true });
});

async function openPage(path: string): Promise<import('playwright').Page> {
  const page = await browser.newPage();
  page.on('pageerror', (e) => console.error(`page error: ${e.message}`));
  await page.goto(`${server.url}${path}`);
  return page;
}

describe('the packed package', () => {
  it('should ship the built entries, the worklet, the types and no sources', () => {
    const listed = execFileSync('tar', ['-tzf', tarball], { encoding: 'utf8' }).split('\n');
    for (const f of ['lib/index.js', 'lib/cli.js', 'lib/web/index.js', 'lib/web/ancbench-live-processor.js', 'lib/types/web/index.d.ts', 'lib/types/index.d.ts', 'lib/types/cli/main.d.ts', 'bin/ancbench.mjs']) {
      expect(listed).toContain(`package/${f}`);
    }
    expect(listed.filter((f) => f.startsWith('package/src/') || f.startsWith('package/test/'))).toEqual([]);
    // the web entry leaves the worklet's address for bundlers and browsers to resolve beside it
    const web = readFileSync(join(app, 'node_modules/ancbench/lib/web/index.js'), 'utf8');
    expect(web).toContain(`new URL("./ancbench-live-processor.js", import.meta.url)`);
    console.log(`package: ${(statSync(tarball).size / 1024).toFixed(0)} KiB packed, ${listed.filter(Boolean).length} entries`);
  });

  describe('with a page bundled by Vite', () => {
    it('should control a simulated plant in a native AudioContext and report the attenuation', async () => {
      const page = await openPage('/bundled/index.html');
      const r = await page.evaluate(() => (window as unknown as { consumer: { plant(k: string): Promise<Record<string, unknown>> } }).consumer.plant('native'));
      await page.close();
      expect(r.modelUsable).toBe(true);
      // the secondary path is the 256-sample delay plus the render quantum a Web Audio cycle adds
      expect(r.modelDelaySamples as number).toBeGreaterThanOrEqual(256);
      expect(r.modelDelaySamples as number).toBeLessThanOrEqual(256 + 128 + 8);
      expect(r.attenuationSlowDb as number).toBeGreaterThan(10);
      expect(r.paramIsAudioParam).toBe(true);
      expect(r.ceilingDbfs).toBeCloseTo(-9, 6);
      expect(r.states).toContain('identify');
      expect(r.states).toContain('control');
      expect(r.events).toContain('probe-done');
    });

    it('should do the same in a standardized-audio-context context', async () => {
      const page = await openPage('/bundled/index.html');
      const r = await page.evaluate(() => (window as unknown as { consumer: { plant(k: string): Promise<Record<string, unknown>> } }).consumer.plant('wrapped'));
      await page.close();
      expect(r.modelUsable).toBe(true);
      expect(r.attenuationSlowDb as number).toBeGreaterThan(10);
      expect(r.paramIsAudioParam).toBe(true);
      expect(r.ceilingDbfs).toBeCloseTo(-9, 6);
    });

    it('should refuse each bad use with an error that says what to do', async () => {
      const page = await openPage('/bundled/index.html');
      const r = await page.evaluate(() => (window as unknown as { consumer: { badUse(): Promise<Record<string, string | number>> } }).consumer.badUse());
      await page.close();
      expect(r.sampleRate).toMatch(/3000 Hz, which the engine refuses.*sampleRate: 48000/);
      expect(r.options).toMatch(/ControllerNodeOptionsError/);
      for (const field of ['controller.taps', 'controller.stepSize', 'limiter.ceilingDbfs', 'rampMs']) expect(r.options).toContain(field);
      expect(r.optionsProblems).toBe(3);
      expect(r.worklet).toMatch(/could not load the controller worklet from .*\/nowhere\/ancbench-live-processor\.js.*options\.workletUrl/);
      expect(r.implementation).toBe('tonal');
      expect(r.badController).toMatch(/controller\.harmonics: must be an integer ≥ 1 and ≤ 8, got 9/);
      expect(r.channels).toMatch(/carries 1 channel; it needs 2.*connectInputs/);
      expect(r.afterDispose).toMatch(/start\(\) after dispose\(\); create a new node/);
      expect(r.afterDisposeAsync).toMatch(/loadModel\(\) after dispose\(\)/);
    });
  });

  describe('with a plain static page and an import map', () => {
    it('should run demo/embed unchanged and show the attenuation from the node', async () => {
      const page = await openPage('/static/index.html');
      await page.click('#start');
      const reached = await page
        .waitForFunction(() => Number(document.getElementById('att')?.textContent) > 10, undefined, { timeout: 45_000 })
        .then(() => true, () => false);
      const status = await page.textContent('#status');
      const shown = await page.textContent('#att');
      await page.click('#stop');
      await page.close();
      expect({ reached, status, shown }).toMatchObject({ reached: true, status: 'control' });
    });
  });

  describe('with a strict TypeScript consumer', () => {
    it('should compile against the public types', () => {
      const types = join(app, 'types');
      mkdirSync(types);
      for (const f of ['consumer.ts', 'tsconfig.json']) copyFileSync(join(fixtures, f), join(types, f));
      let out = '';
      try {
        execFileSync(process.execPath, [join(repo, 'node_modules/typescript/bin/tsc'), '-p', join(types, 'tsconfig.json')], { encoding: 'utf8' });
      } catch (e) {
        out = String((e as { stdout?: string }).stdout ?? e);
      }
      expect(out).toBe('');
    });
  });

  describe('with the installed binary', () => {
    it('should run the command line without the repository', () => {
      const out = execFileSync(join(app, 'node_modules/.bin/ancbench'), ['--help'], { cwd: app, encoding: 'utf8' });
      const version = (JSON.parse(readFileSync(join(repo, 'package.json'), 'utf8')) as { version: string }).version;
      expect(out).toContain(`ancbench ${version}`);
      expect(readdirSync(join(app, 'node_modules/ancbench'))).not.toContain('src');
    });
  });
});
