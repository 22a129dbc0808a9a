import { readFileSync } from 'node:fs';
import { resolve } from 'node:path';
import { describe, expect, it } from 'vitest';
import { FXLMS_SETTINGS, LIMITER_SETTINGS, TONAL_SETTINGS, checkControllerSettings, settingsMarkdown, settingsProblems } from '../../src/engine/settings.ts';
import { parseScenario } from '../../src/plant/scenario.ts';
import { parseControlMessage } from '../../src/protocol/messages.ts';
import { Engine } from '../../src/engine/engine.ts';

const base = {
  schemaVersion: 1, sampleRate: 8000, blockSize: 64, durationS: 1, seed: 1,
  sources: [{ kind: 'tone', hz: 100, amplitude: 0.1 }],
  paths: { reference: { delayMs: 0 }, primary: { delayMs: 10 }, secondary: { delayMs: 10 } },
};

/** The three places that check a controller configuration, each returning its message or null. */
function verdicts(controller: unknown): { file: string | null; message: string | null; engine: string | null } {
  const catchMsg = (f: () => unknown): string | null => {
    try {
      f();
      return null;
    } catch (e) {
      return (e as Error).message;
    }
  };
  return {
    file: catchMsg(() => parseScenario({ ...base, controller })),
    message: catchMsg(() => parseControlMessage({ type: 'configure', controller, secondaryPathModel: new Float32Array([0, 1]) }, 8000)),
    engine: catchMsg(() => new Engine({ sampleRate: 8000, maxBlockSize: 64, controller: controller as never, secondaryPathModel: new Float32Array([0, 1]) })),
  };
}

describe('settings tables', () => {
  describe('with a value at, inside and outside each numeric range', () => {
    const cases: [string, Record<string, unknown>, string, number, boolean][] = [];
    for (const [table, good] of [[FXLMS_SETTINGS, { algorithm: 'fxnlms', taps: 8, stepSize: 0.1 }], [TONAL_SETTINGS, { algorithm: 'tonal', harmonics: 1, stepSize: 0.1 }]] as const) {
      for (const [field, spec] of Object.entries(table)) {
        if (spec.type !== 'number') continue;
        const outside = spec.max * 2 + 1;
        cases.push([`${good.algorithm} ${field} above range`, good, field, outside, false]);
        cases.push([`${good.algorithm} ${field} below range`, good, field, spec.min - 1, false]);
        if (!spec.minExclusive) cases.push([`${good.algorithm} ${field} at its minimum`, good, field, spec.min, true]);
        if (spec.minExclusive) cases.push([`${good.algorithm} ${field} at its excluded minimum`, good, field, spec.min, false]);
      }
    }
    it.each(cases)('should be judged alike by the scenario file, the worklet message and the engine: %s', (_name, good, field, value, ok) => {
      const c = { ...good, [field]: value, ...(field === 'hz' ? { frequencySource: 'fixed' } : {}) };
      const tableOk = settingsProblems(good.algorithm === 'tonal' ? TONAL_SETTINGS : FXLMS_SETTINGS, c).length === 0;
      expect(tableOk).toBe(ok);
      const v = verdicts(c);
      expect(v.message === null).toBe(ok);
      if (!ok) {
        expect(v.file).toMatch(new RegExp(`controller\\.${field}: must be`));
        expect(v.message).toMatch(new RegExp(`controller\\.${field}: must be`));
        expect(v.engine).toMatch(new RegExp(`controller\\.${field}: must be`));
      }
    });
  });

  describe('with an unknown field', () => {
    it('should be refused by the file, the message and the engine alike', () => {
      const v = verdicts({ algorithm: 'fxlms', taps: 8, stepSize: 0.01, stepsize: 0.02 });
      for (const m of [v.file, v.message, v.engine]) expect(m).toMatch(/unknown field\(s\) "stepsize"/);
    });
  });

  describe('with the controller check', () => {
    it('should name an unknown algorithm and a missing required field', () => {
      expect(() => checkControllerSettings({ algorithm: 'rls' })).toThrow(/controller\.algorithm: must be one of "fxlms", "fxnlms", "tonal", "imc", got "rls"/);
      expect(() => checkControllerSettings({ algorithm: 'tonal', stepSize: 0.1 })).toThrow(/controller\.harmonics: required/);
    });
  });

  describe('with the limiter table', () => {
    it('should refuse a ceiling above full scale in a scenario file', () => {
      expect(() => parseScenario({ ...base, controller: { algorithm: 'fxlms', taps: 8, stepSize: 0.01 }, limiter: { ceilingDbfs: 1 } })).toThrow(/limiter\.ceilingDbfs: must be a number ≥ -120 and ≤ 0 \(dBFS\), got 1/);
      expect(LIMITER_SETTINGS.ceilingDbfs.default).toBe(-6);
    });
  });

  describe('with docs/settings.md', () => {
    it('should be the table the code holds (regenerate with npx tsx scripts/write-settings-doc.ts)', () => {
      const doc = readFileSync(resolve(import.meta.dirname, '../../docs/settings.md'), 'utf8');
      expect(doc).toBe(settingsMarkdown());
    });
  });
});
