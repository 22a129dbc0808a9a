import { describe, it, expect } from 'vitest';
import { OutputConstraint, PENALTY, WEIGHT_SCALE } from '../../src/dsp/output-constraint.ts';
import { Engine } from '../../src/engine/engine.ts';
import { FxlmsController } from '../../src/dsp/fxlms.ts';

function block(amplitude: number, n = 64): Float32Array {
  return Float32Array.from({ length: n }, (_, i) => amplitude * Math.sin((2 * Math.PI * i) / 32));
}

function peak(x: Float32Array): number {
  return x.reduce((p, v) => Math.max(p, Math.abs(v)), 0);
}

describe('OutputConstraint', () => {
  describe('with the rescale method', () => {
    it('should hold a block to the cap minus the margin and ask the weights to shrink, and leave a block under it alone', () => {
      const oc = new OutputConstraint({ outputConstraint: 'rescale', outputMarginDb: 1 });
      oc.setCap(0.5);
      const A = 0.5 * Math.pow(10, -1 / 20); // the cap minus 1 dB
      expect(oc.level).toBeCloseTo(A, 12);
      const over = block(0.8);
      oc.afterBlock(over, over.length);
      expect(peak(over)).toBeCloseTo(A, 6);
      expect(oc.state[WEIGHT_SCALE]!).toBeLessThan(1);
      expect(oc.state[WEIGHT_SCALE]!).toBeCloseTo(Math.pow(A / 0.8, 0.1), 6);
      expect(oc.active).toBe(1);
      const under = block(0.3);
      oc.afterBlock(under, under.length);
      expect(peak(under)).toBeCloseTo(0.3, 6);
      expect(oc.state[WEIGHT_SCALE]).toBe(1);
    });

    it('should do nothing before a cap is set', () => {
      const oc = new OutputConstraint();
      const x = block(2);
      oc.afterBlock(x, x.length);
      expect(peak(x)).toBeCloseTo(2, 6);
      expect(oc.state[WEIGHT_SCALE]).toBe(1);
    });
  });

  describe('with the effort method', () => {
    it('should raise the penalty while the output exceeds the constraint and relax it to zero once it is well under', () => {
      const oc = new OutputConstraint({ outputConstraint: 'effort' }, 8000);
      oc.setCap(0.5);
      const loud = block(0.8);
      for (let i = 0; i < 10; i++) oc.afterBlock(loud, loud.length);
      const raised = oc.state[PENALTY]!;
      expect(raised).toBeGreaterThan(0);
      expect(peak(loud)).toBeCloseTo(0.8, 6); // effort never edits the output itself
      oc.afterBlock(loud, loud.length);
      expect(oc.state[PENALTY]!).toBeGreaterThan(raised);
      const quiet = block(0.1);
      for (let i = 0; i < 2000; i++) oc.afterBlock(quiet, quiet.length);
      expect(oc.state[PENALTY]).toBe(0);
      expect(oc.active).toBe(0);
    });
  });

  it('should refuse an unknown method or margin, naming the field, the allowed values and the value', () => {
    expect(() => new OutputConstraint({ outputConstraint: 'clip' as never })).toThrow(/controller\.outputConstraint must be one of "rescale", "effort", "none", got clip/);
    expect(() => new OutputConstraint({ outputMarginDb: 30 })).toThrow(/controller\.outputMarginDb must be a number from 0 to 20 dB, got 30/);
  });
});

describe('Engine and the output constraint', () => {
  it('should hand the controller its ceiling at construction and on every cap change', () => {
    const model = new Float32Array([0, 0, 0.5]);
    const engine = new Engine({ sampleRate: 8000, maxBlockSize: 32, controller: { algorithm: 'fxnlms', taps: 8, stepSize: 0.01 }, secondaryPathModel: model, ceilingDbfs: -12 });
    const c = engine.controller as FxlmsController;
    expect(c.outputConstraint.cap).toBeCloseTo(Math.pow(10, -12 / 20), 12);
    engine.setCeilingDbfs(-20);
    const z = new Float32Array(32);
    engine.process(z, z, new Float32Array(32), 32);
    expect(c.outputConstraint.cap).toBeCloseTo(Math.pow(10, -20 / 20), 12);
    expect(c.outputConstraint.level).toBeCloseTo(Math.pow(10, -21 / 20), 12);
  });
});
