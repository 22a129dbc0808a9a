/**
 * One source of truth for controller settings: every demo scenario's controller, taken the way the
 * panel takes it, sent to a worklet as a configure message and turned back into a scenario the way the
 * simulated-plant worklet runs it, must be the configuration the command line builds, field for field.
 */
import { readdirSync, readFileSync } from 'node:fs';
import { resolve } from 'node:path';
import { describe, expect, it } from 'vitest';
import { parseScenario } from '../../src/plant/scenario.ts';
import { engineControllerConfig } from '../../src/plant/simulate.ts';
import { panelSettingsFromScenario, scenarioForPanel } from '../../src/web/panel-settings.ts';
import { parseControlMessage } from '../../src/protocol/messages.ts';
import { FXLMS_SETTINGS, TONAL_SETTINGS } from '../../src/engine/settings.ts';

const dir = resolve(import.meta.dirname, '../../demo/scenarios');
const demos = readdirSync(dir).filter((f) => f.endsWith('.json'));

describe('panel settings', () => {
  describe('with every demo scenario', () => {
    it.each(demos)('should carry every controller field of %s unchanged from the file to the engine', (file) => {
      const raw = JSON.parse(readFileSync(resolve(dir, file), 'utf8'));
      if (raw.controller?.modelFile) delete raw.controller.modelFile; // the page cannot read model files
      const sc = parseScenario(raw);
      const cli = engineControllerConfig(sc);
      const panel = panelSettingsFromScenario(sc);
      expect(panel.controller).toEqual(cli);
      expect(panel.ceilingDbfs).toBe(sc.limiter?.ceilingDbfs ?? sc.outputCeilingDbfs ?? -6);
      // live: the configure message the page posts, as the worklet validates it
      const msg = parseControlMessage({ type: 'configure', controller: panel.controller, secondaryPathModel: new Float32Array([0, 1]) }, sc.sampleRate);
      expect(msg.type === 'configure' && msg.controller).toEqual(cli);
      // simulated plant: the scenario the panel hands its worklet, parsed again there
      const back = scenarioForPanel(sc, panel);
      expect(engineControllerConfig(back)).toEqual(cli);
      // every field the file set reached the engine (none dropped on the way)
      const table = cli.algorithm === 'tonal' ? TONAL_SETTINGS : FXLMS_SETTINGS;
      for (const k of Object.keys(raw.controller)) if (k in table) expect(cli, `${file}: controller.${k}`).toHaveProperty(k, raw.controller[k]);
    });
  });

  describe('with a tone follower that sets every field', () => {
    it('should keep regularization and harmonicsCheck on the way to the simulated-plant worklet', () => {
      const sc = parseScenario({
        schemaVersion: 1, sampleRate: 8000, blockSize: 64, durationS: 1, seed: 1,
        sources: [{ kind: 'tone', hz: 100, amplitude: 0.1 }],
        paths: { reference: { delayMs: 0 }, primary: { delayMs: 10 }, secondary: { delayMs: 10 } },
        controller: { algorithm: 'tonal', harmonics: 2, stepSize: 0.01, frequencySource: 'reference', minHz: 40, maxHz: 400, harmonicsCheck: true, leakage: 1e-4, regularization: 0.02 },
      });
      const back = engineControllerConfig(scenarioForPanel(sc, panelSettingsFromScenario(sc)));
      expect(back).toEqual(engineControllerConfig(sc));
      expect(back).toMatchObject({ harmonicsCheck: true, regularization: 0.02 });
    });
  });
});
