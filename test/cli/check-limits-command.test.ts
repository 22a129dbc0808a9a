import { describe, expect, it, vi } from 'vitest';
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { main } from '../../src/cli/main.ts';
import { OutputLimiter } from '../../src/dsp/limiter.ts';
import { useCliSandbox } from '../helpers/cli.ts';

const cli = useCliSandbox('ancbench-limits-');

// A scenario fixture: 100 Hz tone at 8 kHz, FxNLMS, −6 dBFS ceiling.
const good = {
  schemaVersion: 1,
  name: 'bench tone',
  sampleRate: 8000,
  blockSize: 32,
  durationS: 1,
  seed: 4,
  sources: [{ kind: 'tone', hz: 100, amplitude: 0.3 }],
  paths: { reference: { delayMs: 0 }, primary: { delayMs: 10, gain: 0.5 }, secondary: { delayMs: 5, gain: 0.8 } },
  sensorNoiseRms: 0.001,
  controller: { algorithm: 'fxnlms', taps: 16, stepSize: 0.01 },
  outputCeilingDbfs: -6,
};

const QUICK = ['--ramp-s', '0.5'];

describe('ancbench check-limits', () => {
  it('should print one JSON object with the documented fields and exit 0 when the cap held', async () => {
    const code = await main(['check-limits', cli.file(good), '--json', ...QUICK]);
    expect(code).toBe(0);
    expect(cli.out.length).toBe(1);
    const j = JSON.parse(cli.out[0]!);
    expect(j.ceilingDbfs).toBe(-6);
    expect(j.limiterMode).toBe('true-peak-filter'); // the default output stage
    expect(j.passed).toBe(true);
    expect(j.maxSamplePeakDbfs).toBeLessThanOrEqual(-6);
    expect(j.maxSamplePeakDbfs).toBeGreaterThan(-6.25);
    expect(j.maxTruePeakDbtp).toBeLessThanOrEqual(-6 + 0.5);
    expect(Array.isArray(j.events)).toBe(true);
    expect(j.events.map((e: { cause: string }) => e.cause)).toContain('output-at-ceiling');
    for (const e of j.events) expect(Object.keys(e).sort()).toEqual(['action', 'cause', 'timeS', 'values']);
    expect(j.closedLoop.withinCap).toBe(true);
    expect(j.closedLoop.peakOutputDbfs).toBeLessThanOrEqual(-6);
    expect(j.history).toBeUndefined(); // kept for report.json
    expect(j.stamp).toMatchObject({ tool: 'ancbench', command: 'check-limits', seed: 4 });
  });

  it('should report the true-peak mode of a scenario and hold its true peak within 0.5 dB', async () => {
    const sc = { ...good, outputCeilingDbfs: undefined, limiter: { ceilingDbfs: -10, lookaheadMs: 1, truePeak: true } };
    expect(await main(['check-limits', cli.file(sc), '--json', '--no-closed-loop', ...QUICK])).toBe(0);
    const j = JSON.parse(cli.out.join(''));
    expect(j.limiterMode).toBe('true-peak');
    expect(j.ceilingDbfs).toBe(-10);
    expect(j.maxTruePeakDbtp).toBeLessThanOrEqual(-10 + 0.5);
    expect(j.truePeakToleranceDb).toBe(0.5);
    expect(j.closedLoop).toBeNull();
  });

  it('should write report.json and a self-contained report.html with --out', async () => {
    const o = join(cli.dir, 'out');
    expect(await main(['check-limits', cli.file(good), '--out', o, ...QUICK])).toBe(0);
    expect(readdirSync(o).sort()).toEqual(['report.html', 'report.json']);
    const j = JSON.parse(readFileSync(join(o, 'report.json'), 'utf8'));
    expect(j.history.timeS.length).toBeGreaterThan(100);
    expect(j.history.gainReductionDb.length).toBe(j.history.timeS.length);
    const html = readFileSync(join(o, 'report.html'), 'utf8');
    expect(html).toMatch(/<script>.*uPlot/s); // the plotting library is inlined
    expect(html).not.toMatch(/<script[^>]+src=/); // nothing loaded from elsewhere
    expect(html).toContain('Limiter gain reduction');
    expect(html).toContain('output-at-ceiling');
    expect(html).toContain('-6.00 dBFS');
    expect(cli.out.join('')).toMatch(/verdict +PASSED/);
  });

  it('should exit 3 and say why when the output stage lets samples past the cap', async () => {
    // Test only: a limiter that copies its input, so the ramp goes through unlimited.
    vi.spyOn(OutputLimiter.prototype, 'process').mockImplementation(function (x: Float32Array, y: Float32Array, n: number) {
      for (let i = 0; i < n; i++) y[i] = x[i]!;
    });
    const code = await main(['check-limits', cli.file(good), '--json', ...QUICK]);
    expect(code).toBe(3);
    const j = JSON.parse(cli.out.join(''));
    expect(j.passed).toBe(false);
    expect(j.samplesOverCeiling).toBeGreaterThan(0);
    expect(j.reasons.join(' ')).toMatch(/exceeded the -6\.00 dBFS ceiling/);
    // +∞ went through: the figure is null in JSON, with the reason in the notes
    expect(j.maxSamplePeakDbfs).toBeNull();
    expect(j.notes.join(' ')).toMatch(/maxSamplePeakDbfs is infinite/);
    expect(j.nonFiniteOutputSamples).toBe(3);
  });

  it('should apply the stricter SPL ceiling from a calibration file', async () => {
    const cal = cli.file({ points: [{ hz: 500, dbfs: -20, measuredDbSpl: 75 }, { hz: 1000, dbfs: -20, measuredDbSpl: 80 }], peakCeilingDbSpl: 90 }, 'cal.json');
    expect(await main(['check-limits', cli.file(good), '--json', '--calibration', cal, ...QUICK])).toBe(0);
    const j = JSON.parse(cli.out.join(''));
    // 90 dB SPL peak − (100 dB + 3.01 dB) at 1 kHz = −13.01 dBFS, stricter than −6
    expect(j.ceilingDbfs).toBeCloseTo(90 - 100 - 10 * Math.log10(2), 9);
    expect(j.ceiling.limitedBy).toBe('spl');
    expect(j.maxSamplePeakDbfs).toBeLessThanOrEqual(j.ceilingDbfs);
    expect(j.check.maxPeakDbSplBound).toBeLessThanOrEqual(90 + 1e-9);
    expect(j.closedLoop.ceilingDbfs).toBe(j.ceilingDbfs);
    cli.out.length = 0;
    // --spl-ceiling overrides the file
    expect(await main(['check-limits', cli.file(good), '--json', '--no-closed-loop', '--calibration', cal, '--spl-ceiling', '120', ...QUICK])).toBe(0);
    expect(JSON.parse(cli.out.join('')).ceiling.limitedBy).toBe('dbfs');
  });

  describe('with bad input', () => {
    it('should exit 1 naming the problem for a missing or invalid scenario or calibration file', async () => {
      expect(await main(['check-limits', join(cli.dir, 'nope.json')])).toBe(1);
      expect(cli.err.join('')).toMatch(/does not exist/);
      cli.err.length = 0;
      expect(await main(['check-limits', cli.file({ ...good, outputCeilingDbfs: 3 })])).toBe(1);
      expect(cli.err.join('')).toMatch(/outputCeilingDbfs/);
      cli.err.length = 0;
      expect(await main(['check-limits', cli.file(good), '--calibration', cli.file({ points: [{ hz: 0, dbfs: -20, measuredDbSpl: 80 }], peakCeilingDbSpl: 90 }, 'c.json')])).toBe(1);
      expect(cli.err.join('')).toMatch(/calibration file .*points\[0\]\.hz/);
    });

    it('should exit 2 for bad flags', async () => {
      expect(await main(['check-limits'])).toBe(2);
      expect(await main(['check-limits', cli.file(good), '--over-db', '50'])).toBe(2);
      expect(cli.err.join('')).toMatch(/--over-db must be a number from 0 to 40, got "50"/);
      expect(await main(['check-limits', cli.file(good), '--spl-ceiling', '90'])).toBe(2);
      expect(cli.err.join('')).toMatch(/--spl-ceiling needs --calibration/);
      expect(await main(['check-limits', cli.file(good), '--bogus'])).toBe(2);
    });

    it('should print its usage with --help', async () => {
      expect(await main(['check-limits', '--help'])).toBe(0);
      expect(cli.out.join('')).toMatch(/usage: ancbench check-limits <scenario\.json> \[--json\] \[--out DIR\]/);
    });
  });
});

describe('ancbench check-limits verdicts by limiter mode', () => {
  it('should say "PASSED" for the default stage only with the true peak held within 0.5 dB', async () => {
    expect(await main(['check-limits', cli.file(good), '--json', ...QUICK])).toBe(0);
    const j = JSON.parse(cli.out.join(''));
    expect(j.limiterMode).toBe('true-peak-filter');
    expect(j.guarantee).toBe('sample-and-true-peak');
    expect(j.verdict).toMatch(/^PASSED: the cap held \(sample peak, and 4x true peak within \+0\.5 dB\)$/);
    expect(j.truePeakToleranceDb).toBe(0.5);
    expect(j.maxTruePeakDbtp).toBeLessThanOrEqual(-5.5);
    expect(j.closedLoop.truePeakDbtp).toBeLessThanOrEqual(-5.5);
    expect(j.latencySamples).toBe(1);
  });

  it('should never print plain PASSED in the zero-latency sample-peak mode, and give the true peak it let through', async () => {
    // The adversarial Nyquist pattern of the check reads about +6.1 dB above its sample peak on the
    // ITU-R BS.1770-4 Annex 2 interpolator (the sum of |coefficients| of one phase, 2.0228, calculated).
    const sc = { ...good, limiter: { truePeak: false } };
    const code = await main(['check-limits', cli.file(sc), ...QUICK]);
    expect(code).toBe(0); // 0 = the sample peak held
    const text = cli.out.join('');
    const tp = /true peak not limited: (-?\d+\.\d+) dBTP/.exec(text);
    expect(tp).not.toBeNull();
    expect(Number(tp![1])).toBeGreaterThan(-6 + 5);
    expect(text).toMatch(/verdict +sample peak held; true peak not limited: /);
    expect(text).not.toMatch(/PASSED/);
    cli.out.length = 0;
    expect(await main(['check-limits', cli.file(sc), '--json', '--no-closed-loop', ...QUICK])).toBe(0);
    const j = JSON.parse(cli.out.join(''));
    expect(j.limiterMode).toBe('zero-latency');
    expect(j.guarantee).toBe('sample-peak');
    expect(j.passed).toBe(true);
    expect(j.verdict).toBe(`sample peak held; true peak not limited: ${j.maxTruePeakDbtp.toFixed(2)} dBTP`);
    expect(j.latencySamples).toBe(0);
  });

  it('should write the same verdict into report.html', async () => {
    const sc = { ...good, limiter: { truePeak: false } };
    const dir = `${cli.dir}/out`;
    expect(await main(['check-limits', cli.file(sc), '--out', dir, '--no-closed-loop', ...QUICK])).toBe(0);
    const html = readFileSync(`${dir}/report.html`, 'utf8');
    expect(html).toMatch(/sample peak held; true peak not limited: -?\d+\.\d\d dBTP/);
    expect(html).not.toMatch(/PASSED/);
  });
});
