// Small scenario builders for tests. The numbers are test fixtures, not published data.
import { parseScenario, type Scenario } from '../../src/plant/scenario.ts';

type Json = Record<string, unknown>;

/** A tonal scenario at 8 kHz: tone through pure-delay paths, FxNLMS. Override any field. */
export function toneScenario(over: Json = {}): Scenario {
  return parseScenario(merge({
    schemaVersion: 1,
    sampleRate: 8000,
    blockSize: 32,
    durationS: 6,
    seed: 11,
    sources: [{ kind: 'tone', hz: 100, amplitude: 0.3 }],
    paths: {
      reference: { delayMs: 0, gain: 1 },
      primary: { delayMs: 10, gain: 0.5 },
      secondary: { delayMs: 5, gain: 0.8 },
    },
    sensorNoiseRms: { reference: 0, error: 0.001 },
    controller: { algorithm: 'fxnlms', taps: 32, stepSize: 0.01 },
    outputCeilingDbfs: 0,
  }, over));
}

/** A broadband scenario at 8 kHz with a causal primary path (white noise). */
export function noiseScenario(over: Json = {}): Scenario {
  return parseScenario(merge({
    schemaVersion: 1,
    sampleRate: 8000,
    blockSize: 32,
    durationS: 12,
    seed: 12,
    sources: [{ kind: 'noise', color: 'white', rms: 0.1 }],
    paths: {
      reference: { delayMs: 0, gain: 1 },
      primary: { delayMs: 12, gain: 0.7, fir: [1, 0.5, 0.25] },
      secondary: { delayMs: 5, gain: 0.8, fir: [1, -0.3] },
    },
    sensorNoiseRms: { reference: 0, error: 0.0005 },
    controller: { algorithm: 'fxnlms', taps: 96, stepSize: 0.05 },
    outputCeilingDbfs: 0,
  }, over));
}

/** Deep merge of plain objects; arrays, the `controller` object and room `paths` are replaced whole. */
export function merge(base: Json, over: Json): Json {
  const out: Json = { ...base };
  for (const [k, v] of Object.entries(over)) {
    const b = out[k];
    const replaceWhole = k === 'controller' || (k === 'paths' && v && typeof v === 'object' && 'room' in v);
    if (!replaceWhole && v && typeof v === 'object' && !Array.isArray(v) && b && typeof b === 'object' && !Array.isArray(b)) out[k] = merge(b as Json, v as Json);
    else out[k] = v;
  }
  return out;
}
