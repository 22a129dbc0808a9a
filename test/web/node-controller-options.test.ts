import { readFileSync } from 'node:fs';
import { resolve } from 'node:path';
import { describe, expect, it } from 'vitest';
import { ControllerNodeOptionsError, NODE_SETTINGS, checkNodeOptions, modelTaps } from '../../src/web/node-controller-options.ts';
import { withNodeOptions } from '../../scripts/write-node-options-doc.ts';

const problems = (o: unknown): readonly string[] => {
  try {
    checkNodeOptions(o);
  } catch (e) {
    expect(e).toBeInstanceOf(ControllerNodeOptionsError);
    return (e as ControllerNodeOptionsError).problems;
  }
  return [];
};

describe('checkNodeOptions', () => {
  describe('with good options', () => {
    it('should write out the defaults from the tables', () => {
      const o = checkNodeOptions({ controller: { algorithm: 'fxnlms', taps: 64, stepSize: 0.05 } });
      expect(o.ceilingDbfs).toBe(-6);
      expect(o.rampMs).toBe(50);
      expect(o.maxQuantum).toBe(NODE_SETTINGS.maxQuantum.default);
      expect(o.inputLayout).toBe('ref-err');
      expect(o.secondaryPathModel).toBeNull();
      expect(o.workletUrl).toBeNull();
    });

    it('should give the tone follower the frequency source a scenario would get', () => {
      expect(checkNodeOptions({ controller: { algorithm: 'tonal', harmonics: 2, stepSize: 0.1 } }).controller).toMatchObject({ frequencySource: 'reference' });
      expect(checkNodeOptions({ controller: { algorithm: 'tonal', harmonics: 2, stepSize: 0.1, hz: 50 } }).controller).toMatchObject({ frequencySource: 'fixed', hz: 50 });
    });

    it('should take a URL object as the worklet address and a plain array as the model', () => {
      const o = checkNodeOptions({ controller: { algorithm: 'tonal', harmonics: 2, stepSize: 0.1 }, workletUrl: new URL('https://example.org/w.js'), secondaryPathModel: [0, 0.5] });
      expect(o.workletUrl).toBe('https://example.org/w.js');
      expect(Array.from(o.secondaryPathModel!)).toEqual([0, 0.5]);
    });
  });

  describe('with bad options', () => {
    it('should name each bad field once, with its range and the value received', () => {
      const p = problems({ controller: { algorithm: 'fxnlms', taps: 0, stepSize: -1 }, limiter: { ceilingDbfs: 3 }, maxQuantum: 100.5, inputLayout: 'stereo' });
      expect(p).toHaveLength(5);
      expect(p).toContain('controller.taps: must be an integer ≥ 1 and ≤ 65536 (taps), got 0');
      expect(p.find((m) => m.startsWith('limiter.ceilingDbfs'))).toMatch(/≤ 0 \(dBFS\), got 3$/);
      expect(p.find((m) => m.startsWith('maxQuantum'))).toMatch(/integer.*got 100\.5/);
      expect(p.find((m) => m.startsWith('inputLayout'))).toMatch(/"ref-err", "err-only", got "stereo"/);
    });

    it('should refuse unknown fields, a missing controller and a model with a NaN tap', () => {
      const p = problems({ stepsize: 0.1, secondaryPathModel: [0, NaN] });
      expect(p.some((m) => m.startsWith('controller: required'))).toBe(true);
      expect(p.some((m) => m.includes('unknown field(s) "stepsize"'))).toBe(true);
      expect(p).toContain('secondaryPathModel[1]: must be a finite number, got NaN');
    });

    it('should refuse an algorithm the tables do not know', () => {
      expect(problems({ controller: { algorithm: 'rls', taps: 8, stepSize: 0.1 } })[0]).toMatch(/controller\.algorithm.*"fxlms", "fxnlms", "tonal".*rls/);
    });
  });
});

describe('modelTaps', () => {
  it('should refuse an empty model', () => {
    expect(modelTaps('taps', [])).toMatch(/^taps: must be a list of 1 …/);
  });
});

describe('README "Use it in your own page"', () => {
  it('should hold the options tables as generated from the settings tables', () => {
    // run `npx tsx scripts/write-node-options-doc.ts` after changing a table
    const readme = readFileSync(resolve(import.meta.dirname, '../../README.md'), 'utf8');
    expect(readme).toBe(withNodeOptions(readme));
    expect(readme).toContain('| `controller.stepSize` |');
  });
});
