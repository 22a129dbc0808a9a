import { describe, expect, it, vi } from 'vitest';
import { existsSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { main } from '../../src/cli/main.ts';
import { applySettings, combination, parseGridShape, rankRuns } from '../../src/plant/settings-grid.ts';
import { useCliSandbox } from '../helpers/cli.ts';
import { expectClose } from '../helpers/tolerance.ts';

// Counts how often the worker pool starts, so a test can show that a bad grid fails before any run.
const pool = vi.hoisted(() => ({ calls: 0 }));
vi.mock('../../src/cli/sweep-pool.ts', async (importOriginal) => {
  const m = await importOriginal<typeof import('../../src/cli/sweep-pool.ts')>();
  return { ...m, runPool: (...a: Parameters<typeof m.runPool>) => (pool.calls++, m.runPool(...a)) };
});

const cli = useCliSandbox('ancbench-sweep-');

const scenario = {
  schemaVersion: 1,
  sampleRate: 8000,
  blockSize: 32,
  durationS: 1.5,
  seed: 9,
  sources: [{ kind: 'noise', color: 'white', rms: 0.1 }],
  paths: { reference: { delayMs: 0 }, primary: { delayMs: 12, gain: 0.7, fir: [1, 0.5] }, secondary: { delayMs: 5, gain: 0.8 } },
  sensorNoiseRms: 0.0005,
  controller: { algorithm: 'fxnlms', taps: 64, stepSize: 0.05 },
};
const grid = { 'controller.stepSize': [0.01, 0.1, 3], 'controller.taps': [8, 64] };

async function sweepJson(args: string[]): Promise<Array<Record<string, unknown> & { settings: Record<string, number>; attenuationDb: number | null; diverged: boolean }>> {
  cli.out = [];
  expect(await main(['sweep', ...args, '--json']), cli.err.join('')).toBe(0);
  return JSON.parse(cli.out.join(''));
}

describe('ancbench sweep', () => {
  describe('with a scenario and a two-setting grid', () => {
    it('should rank the runs, diverged last, and give the same figures with 1 and 2 workers', async () => {
      const s = cli.file(scenario, 'scenario.json');
      const g = cli.file(grid, 'grid.json');
      const one = await sweepJson([s, '--grid', g, '--workers', '1']);
      const two = await sweepJson([s, '--grid', g, '--workers', '2']);
      expect(one.length).toBe(6);
      for (const k of ['settings', 'attenuationDb', 'convergenceS', 'peakOutputDbfs', 'diverged', 'wienerBoundDb', 'errorOffDbfs', 'events']) expect(one[0]).toHaveProperty(k);
      expect(two.map((e) => [e.settings, e.attenuationDb])).toEqual(one.map((e) => [e.settings, e.attenuationDb]));
      // μ = 3 is beyond FxNLMS's stability limit μ < 2 (DEVELOPERS.md convention; e.g. Haykin, "Adaptive Filter
      // Theory", 4th ed., 2002, §6.3, from memory): those runs diverge and must rank last
      const last = one.slice(-2);
      expect(last.every((e) => e.settings['controller.stepSize'] === 3 && e.diverged)).toBe(true);
      for (let i = 1; i < 4; i++) expect(one[i - 1]!.attenuationDb!).toBeGreaterThanOrEqual(one[i]!.attenuationDb!);
    }, 300_000);

    it('should give the best entry\'s figures again when simulate runs its settings alone (0.01 dB)', async () => {
      const s = cli.file(scenario, 'scenario.json');
      const [best] = await sweepJson([s, '--grid', cli.file(grid, 'grid.json'), '--workers', '2']);
      const alone = cli.file(applySettings(scenario, best!.settings), 'best.json');
      cli.out = [];
      expect(await main(['simulate', alone, '--json'])).toBe(0);
      const sim = JSON.parse(cli.out.join(''));
      expectClose(sim.attenuationDb, best!.attenuationDb!, 0.01, 'best run alone');
      expectClose(sim.peakOutputDbfs, best!.peakOutputDbfs as number, 0.01, 'peak output alone');
    }, 300_000);

    it('should write the CSV, the JSON and a report with a heat map', async () => {
      const o = join(cli.dir, 'out');
      expect(await main(['sweep', cli.file(scenario, 'scenario.json'), '--grid', cli.file({ 'controller.stepSize': [0.01, 0.1], 'controller.taps': [8, 64] }, 'grid.json'), '--workers', '2', '--out', o])).toBe(0);
      const csv = readFileSync(join(o, 'sweep.csv'), 'utf8').trim().split('\n');
      expect(csv[0]).toBe('rank,controller.stepSize,controller.taps,attenuation_db,convergence_s,peak_output_dbfs,diverged,error_off_dbfs,error_on_dbfs');
      expect(csv.length).toBe(5);
      const html = readFileSync(join(o, 'report.html'), 'utf8');
      expect(html).toContain('class="heat"');
      expect(html).toContain('Best run over time');
      expect(JSON.parse(readFileSync(join(o, 'sweep.json'), 'utf8'))[0].rank).toBe(1);
    }, 300_000);
  });

  describe('with a recording bundle', () => {
    it('should replay every point and agree with replay run alone (0.01 dB)', async () => {
      expect(await main(['simulate', cli.file(scenario, 'scenario.json'), '--out', join(cli.dir, 'sim')])).toBe(0);
      const model = new Array(41).fill(0);
      model[40] = 0.8; // the scenario's secondary path: 5 ms at 8 kHz, gain 0.8
      writeFileSync(join(cli.dir, 'model.json'), JSON.stringify({ format: 'ancbench-path-model', version: 1, sampleRate: 8000, taps: model, delayMs: 5, method: 'simulated', createdAt: '2026-01-01T00:00:00Z', quality: { snrDb: null } }));
      const wav = join(cli.dir, 'sim', 'signals.wav');
      const rec = join(cli.dir, 'rec');
      expect(await main(['replay', '--ref', wav, '--ref-channel', '4', '--err', wav, '--err-channel', '3', '--model', join(cli.dir, 'model.json'), '--controller', cli.file(scenario.controller, 'c.json'), '--block-size', '32', '--bundle', rec])).toBe(0);
      const entries = await sweepJson([rec, '--grid', cli.file({ 'controller.taps': [16, 64], 'limiter.ceilingDbfs': [-20, -6] }, 'g.json'), '--workers', '2']);
      expect(entries.length).toBe(4);
      const best = entries[0]!;
      expect(best.settings['controller.taps']).toBe(64);
      cli.out = [];
      const c = cli.file({ ...scenario.controller, taps: best.settings['controller.taps'] }, 'best-c.json');
      const st = cli.file({ limiter: { ceilingDbfs: best.settings['limiter.ceilingDbfs'] } }, 'best-s.json');
      expect(await main(['replay', rec, '--controller', c, '--output-stage', st, '--json'])).toBe(0);
      expectClose(JSON.parse(cli.out.join('')).attenuationDb, best.attenuationDb!, 0.01, 'best replay alone');
    }, 300_000);
  });

  describe('with a bad grid', () => {
    const cases: [string, unknown, RegExp][] = [
      ['an unknown path', { 'controller.stepsize': [0.1] }, /"controller\.stepsize"\[0\] = 0\.1: unknown setting \(controller: unknown field\(s\) "stepsize"\)/],
      ['a value of the wrong type', { 'controller.taps': [64, 'long'] }, /"controller\.taps"\[1\] = "long": controller\.taps: .*got "long"/],
      ['a value the schema refuses', { 'limiter.ceilingDbfs': [-6, 3] }, /"limiter\.ceilingDbfs"\[1\] = 3: limiter\.ceilingDbfs: must be a number ≥ -120 and ≤ 0 \(dBFS\), got 3/],
      ['an empty list', { 'controller.taps': [] }, /"controller\.taps": the list of values is empty/],
      ['a product over the limit', { 'controller.taps': Array.from({ length: 11 }, (_, i) => i + 1), 'controller.stepSize': Array.from({ length: 10 }, (_, i) => 0.01 * (i + 1)), 'controller.leakage': Array.from({ length: 10 }, (_, i) => i) }, /the grid makes 1100 runs \(11 × 10 × 10\), more than the limit of 1000/],
      ['not an object', [1, 2], /must be a JSON object mapping dotted setting paths/],
    ];
    for (const [what, g, message] of cases) {
      it(`should refuse ${what} before any run and write nothing`, async () => {
        pool.calls = 0;
        const o = join(cli.dir, 'out');
        expect(await main(['sweep', cli.file(scenario, 's.json'), '--grid', cli.file(g, 'grid.json'), '--out', o])).toBe(1);
        expect(cli.err.join('')).toMatch(message);
        expect(pool.calls).toBe(0);
        expect(existsSync(o)).toBe(false);
      });
    }
  });
});

describe('settings grid', () => {
  it('should enumerate the full product with the last path fastest', () => {
    const g = parseGridShape({ a: [1, 2], 'b.c': ['x', 'y', 'z'] });
    expect([0, 1, 2, 3, 5].map((i) => combination(g, i))).toEqual([
      { a: 1, 'b.c': 'x' }, { a: 1, 'b.c': 'y' }, { a: 1, 'b.c': 'z' }, { a: 2, 'b.c': 'x' }, { a: 2, 'b.c': 'z' },
    ]);
  });

  it('should rank controlled runs by attenuation, then amplified or empty ones, then diverged ones, ties in grid order', () => {
    const runs = [
      { attenuationDb: 5, diverged: true },
      { attenuationDb: -1, diverged: false },
      { attenuationDb: 12, diverged: false },
      { attenuationDb: null, diverged: false },
      { attenuationDb: 12, diverged: false },
    ];
    expect(rankRuns(runs)).toEqual([2, 4, 1, 3, 0]);
  });
});
