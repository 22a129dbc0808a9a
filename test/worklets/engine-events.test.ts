import { describe, expect, it } from 'vitest';
import { applyEngineMessage } from '../../worklets/engine-events.ts';
import { Telemetry } from '../../worklets/adapter.ts';
import { Engine } from '../../src/engine/engine.ts';
import type { ControllerConfig } from '../../src/engine/controller-factory.ts';
import type { PortLike, WorkletMessage } from '../../src/protocol/messages.ts';

class FakePort implements PortLike {
  readonly posted: unknown[] = [];
  postMessage(message: unknown): void {
    this.posted.push(message);
  }
  close(): void {}
}

const FS = 48000;
const BLOCK = 64;

function engineWith(controller: ControllerConfig, standbyController: ControllerConfig): Engine {
  const model = new Float32Array(16);
  model[3] = 0.5;
  return new Engine({ sampleRate: FS, maxBlockSize: BLOCK, controller, standbyController, secondaryPathModel: model });
}

function switchAndRead(engine: Engine): Extract<WorkletMessage, { type: 'switched' }> {
  const port = new FakePort();
  const tel = new Telemetry(port, { displayRateHz: 30, chunkSamples: 0 }, FS);
  expect(applyEngineMessage(engine, { type: 'switch-controller', crossfadeMs: 50 }, port, tel)).toBe(true);
  const m = port.posted.find((p) => (p as { type: string }).type === 'switched');
  expect(m).toBeDefined();
  return m as Extract<WorkletMessage, { type: 'switched' }>;
}

describe('applyEngineMessage', () => {
  describe('with a switch to the standby controller', () => {
    it('should name the incoming controller, not the outgoing one', () => {
      const engine = engineWith({ algorithm: 'fxnlms', taps: 32, stepSize: 0.01, implementation: 'js' }, { algorithm: 'tonal', harmonics: 1, stepSize: 0.01, frequencySource: 'reference' });
      const m = switchAndRead(engine);
      expect(m.toTonal).toBe(true);
      expect(m.implementation).toBe('tonal');
    });

    it('should describe a forced frequency-domain standby with its constraint and partition', () => {
      const engine = engineWith(
        { algorithm: 'tonal', harmonics: 1, stepSize: 0.01, frequencySource: 'reference' },
        { algorithm: 'fxnlms', taps: 32, stepSize: 0.01, update: 'block', implementation: 'fd', fdConstraint: 'alternating' },
      );
      const m = switchAndRead(engine);
      expect(m.toTonal).toBe(false);
      // partition = the engine's block size
      expect(m.implementation).toMatch(/^frequency domain \(.* spectral loops, alternating constraint, partition 64\)$/);
    });

    it('should describe a TypeScript time-domain standby with its update', () => {
      const engine = engineWith({ algorithm: 'tonal', harmonics: 1, stepSize: 0.01, frequencySource: 'reference' }, { algorithm: 'fxlms', taps: 32, stepSize: 0.01, implementation: 'js' });
      expect(switchAndRead(engine).implementation).toBe('time domain (TypeScript, sample update)');
    });
  });
});
