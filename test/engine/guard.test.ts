import { describe, it, expect } from 'vitest';
import { DivergenceGuard, GuardBlockInfo, type GuardConfig } from '../../src/engine/guard.ts';
import { EventRing, drainEvents, ACTION, type EngineEvent } from '../../src/engine/events.ts';
import { Random } from '../../src/dsp/random.ts';

// Detectors on synthetic block streams. The source of every timing check is the output-safety
// requirement: each detector fires within 100 ms of its symptom crossing the threshold, and none
// fires on clean signals. (Closed-loop fault injection comes later with the simulator.)

const FS = 48000;
const LIMIT_S = 0.1;

interface Scenario {
  durationS: number;
  block?: number;
  /** Per-sample generators; t in seconds. */
  ref?: (t: number) => number;
  err?: (t: number) => number;
  out?: (t: number) => number;
  /** Per-block values at the block start time. */
  weightNormSq?: (t: number) => number;
  limiterGainReductionDb?: (t: number) => number;
  baselineErrorPower?: number;
  /** Called after each block (to acknowledge, inspect arrays ...). */
  after?: (t: number, info: GuardBlockInfo, action: number) => void;
}

interface Run {
  events: EngineEvent[];
  /** End time of each block whose check returned something other than none, with the action. */
  actions: { endS: number; action: number }[];
  guard: DivergenceGuard;
}

function drive(config: Partial<GuardConfig>, sc: Scenario, guard?: DivergenceGuard, ring?: EventRing): Run {
  const block = sc.block ?? 128;
  const events = ring ?? new EventRing(1024);
  const g = guard ?? new DivergenceGuard({ sampleRate: FS, maxBlockSize: block, ...config }, events);
  const rng = new Random(42);
  const noise = (): number => 0.1 * rng.gaussian();
  const refGen = sc.ref ?? noise;
  const errGen = sc.err ?? noise;
  const outGen = sc.out ?? noise;
  const info = new GuardBlockInfo();
  info.ref = new Float32Array(block);
  info.err = new Float32Array(block);
  info.out = new Float32Array(block);
  const actions: Run['actions'] = [];
  const blocks = Math.round((sc.durationS * FS) / block);
  for (let b = 0; b < blocks; b++) {
    const t0 = (b * block) / FS;
    for (let i = 0; i < block; i++) {
      const t = t0 + i / FS;
      info.ref[i] = refGen(t);
      info.err[i] = errGen(t);
      info.out[i] = outGen(t);
    }
    info.timeS = t0;
    info.n = block;
    info.outN = block;
    info.weightNormSq = sc.weightNormSq ? sc.weightNormSq(t0) : 1;
    info.baselineErrorPower = sc.baselineErrorPower ?? 0.01;
    info.limiterGainReductionDb = sc.limiterGainReductionDb ? sc.limiterGainReductionDb(t0) : 0;
    const action = g.check(info);
    if (action !== ACTION.none) actions.push({ endS: t0 + block / FS, action });
    sc.after?.(t0, info, action);
  }
  return { events: drainEvents(events), actions, guard: g };
}

function only(events: EngineEvent[], cause: string): EngineEvent[] {
  return events.filter((e) => e.cause === cause);
}

describe('DivergenceGuard', () => {
  describe('on clean signals', () => {
    it('should stay running and report nothing for 5 s of noise at the baseline level', () => {
      const run = drive({}, { durationS: 5 });
      expect(run.events).toEqual([]);
      expect(run.actions).toEqual([]);
      expect(run.guard.state).toBe('running');
      expect(run.guard.adaptationAllowed).toBe(true);
      expect(run.guard.outputAllowed).toBe(true);
    });
  });

  describe('error rise', () => {
    for (const block of [128, 1024]) {
      it(`should mute within 100 ms of the error power rising 10 dB above the baseline (block ${block})`, () => {
        const rng = new Random(7);
        const onset = 1.0;
        const run = drive({}, { durationS: 1.5, block, err: (t) => (t < onset ? 0.1 : 0.316) * rng.gaussian() });
        const rise = only(run.events, 'error-rise');
        expect(rise).toHaveLength(1);
        expect(rise[0]!.action).toBe('mute');
        expect(rise[0]!.timeS).toBeGreaterThanOrEqual(onset);
        expect(rise[0]!.timeS - onset).toBeLessThanOrEqual(LIMIT_S);
        expect(rise[0]!.values.riseDb).toBeGreaterThan(8);
        expect(rise[0]!.values.thresholdDb).toBe(6);
        expect(run.actions[0]!.action).toBe(ACTION.mute);
        expect(run.actions[0]!.endS - onset).toBeLessThanOrEqual(LIMIT_S);
        expect(run.guard.state).toBe('muted');
        expect(run.guard.outputAllowed).toBe(false);
      });
    }

    it('should not fire for a 3 dB rise, nor without a baseline', () => {
      const rng = new Random(8);
      const run = drive({}, { durationS: 2, err: (t) => (t < 1 ? 0.1 : 0.141) * rng.gaussian() });
      expect(only(run.events, 'error-rise')).toEqual([]);
      const rng2 = new Random(9);
      const none = drive({}, { durationS: 2, baselineErrorPower: NaN, err: (t) => (t < 1 ? 0.1 : 1) * rng2.gaussian() });
      expect(only(none.events, 'error-rise')).toEqual([]);
    });
  });

  describe('output at the ceiling', () => {
    it('should report the output-limited state within 100 ms of the limiter holding more than 1 dB of gain reduction, and keep adapting', () => {
      // Not a fault by default (issue 10): freezing here would hold the weights that drive the output
      // into the limiter. The controller's output constraint brings it back under the cap.
      const onset = 0.5;
      const run = drive({}, { durationS: 1, limiterGainReductionDb: (t) => (t < onset ? 0 : 6) });
      const ceil = only(run.events, 'output-at-ceiling');
      expect(ceil).toHaveLength(1);
      expect(ceil[0]!.action).toBe('none');
      expect(ceil[0]!.timeS - onset).toBeLessThanOrEqual(LIMIT_S);
      expect(ceil[0]!.values.heldMs).toBeGreaterThanOrEqual(60);
      expect(run.guard.outputLimited).toBe(true);
      expect(run.guard.state).toBe('running');
      expect(run.guard.adaptationAllowed).toBe(true);
      expect(run.guard.outputAllowed).toBe(true);
      const frozen = drive({ outputAtCeiling: { action: 'freeze-adaptation' } }, { durationS: 1, limiterGainReductionDb: (t) => (t < onset ? 0 : 6) });
      expect(frozen.guard.state).toBe('frozen');
      // The limiter's first engagement is reported too, for information only.
      const engaged = only(run.events, 'limiter-engaged');
      expect(engaged).toHaveLength(1);
      expect(engaged[0]!.action).toBe('none');
      expect(engaged[0]!.timeS).toBeCloseTo(onset, 2);
    });

    it('should only note the limiter engaging when the gain reduction stays below the threshold', () => {
      const run = drive({}, { durationS: 2, limiterGainReductionDb: (t) => (t < 0.5 ? 0 : 0.8) });
      expect(run.events.map((e) => e.cause)).toEqual(['limiter-engaged']);
      expect(run.guard.state).toBe('running');
    });
  });

  describe('input clipping', () => {
    it('should fire at the third clipped sample in a row, not at the second', () => {
      const at = 0.3;
      const s0 = Math.round(at * FS);
      const rng = new Random(3);
      const clipped = (n: number) => (t: number) => {
        const i = Math.round(t * FS);
        return i >= s0 && i < s0 + n ? 0.9995 : 0.1 * rng.gaussian();
      };
      const three = drive({}, { durationS: 0.5, ref: clipped(3) });
      const ev = only(three.events, 'input-clipping');
      expect(ev).toHaveLength(1);
      expect(ev[0]!.values).toMatchObject({ channel: 0, runLength: 3 });
      expect(ev[0]!.timeS).toBeCloseTo((s0 + 2) / FS, 6);
      expect(ev[0]!.action).toBe('freeze-adaptation');
      const two = drive({}, { durationS: 0.5, err: clipped(2) });
      expect(only(two.events, 'input-clipping')).toEqual([]);
    });
  });

  describe('dead microphone', () => {
    it('should fire within 100 ms of digital silence or a stuck value, once per fault', () => {
      const onset = 0.4;
      const rng = new Random(4);
      const run = drive(
        {},
        {
          durationS: 1.5,
          err: (t) => (t < onset ? 0.1 * rng.gaussian() : 0),
          ref: (t) => (t < onset ? 0.1 * rng.gaussian() : 0.25),
        },
      );
      const dead = only(run.events, 'dead-microphone');
      expect(dead).toHaveLength(2);
      const byChannel = new Map(dead.map((e) => [e.values.channel, e]));
      expect(byChannel.get(0)!.values.value).toBe(0.25);
      expect(byChannel.get(1)!.values.value).toBe(0);
      for (const e of dead) {
        expect(e.timeS).toBeGreaterThan(onset);
        expect(e.timeS - onset).toBeLessThanOrEqual(LIMIT_S);
      }
    });
  });

  describe('non-finite values', () => {
    it('should freeze on NaN input, replace it by 0 in place, and reset weights on non-finite output or weights', () => {
      const bad = Math.round(0.2 * FS);
      let sanitized = false;
      const run = drive(
        {},
        {
          durationS: 0.3,
          err: (t) => (Math.round(t * FS) === bad ? NaN : 0.05 * Math.sin(2 * Math.PI * 300 * t)),
          after: (t, info) => {
            const i = bad - Math.round(t * FS);
            if (i >= 0 && i < info.n) sanitized = info.err[i] === 0;
          },
        },
      );
      const nf = only(run.events, 'non-finite');
      expect(nf).toHaveLength(1);
      expect(nf[0]!.values).toEqual({ source: 1, count: 1 });
      expect(nf[0]!.timeS).toBeCloseTo(bad / FS, 6);
      expect(nf[0]!.action).toBe('freeze-adaptation');
      expect(sanitized).toBe(true);

      const out = drive({}, { durationS: 0.3, out: (t) => (Math.round(t * FS) === 4801 ? Infinity : 0.1) });
      expect(only(out.events, 'non-finite')[0]!.values.source).toBe(2);
      expect(out.actions[0]!.action).toBe(ACTION.resetWeights);

      const w = drive({}, { durationS: 0.3, weightNormSq: (t) => (t > 0.15 ? NaN : 1) });
      const wev = only(w.events, 'non-finite');
      expect(wev).toHaveLength(1);
      expect(wev[0]!.values.source).toBe(3);
      expect(wev[0]!.action).toBe('reset-weights');
      expect(w.guard.state).toBe('frozen');
    });
  });

  describe('weights', () => {
    it('should reset the weights as soon as ‖w‖² exceeds maxNormSq', () => {
      const run = drive({ weights: { maxNormSq: 100 } }, { durationS: 1, weightNormSq: (t) => (t < 0.5 ? 50 : 150) });
      const ev = only(run.events, 'weights-unbounded');
      expect(ev).toHaveLength(1);
      expect(ev[0]!.values).toMatchObject({ weightNormSq: 150, maxNormSq: 100 });
      expect(ev[0]!.timeS - 0.5).toBeLessThanOrEqual(LIMIT_S);
      expect(run.actions[0]!.action).toBe(ACTION.resetWeights);
    });

    it('should catch ‖w‖ growing by the growth factor within the growth window, and not normal convergence', () => {
      // ‖w‖ grows as e^{a(t − 1)} from t = 1 s with a = 4·ln 2 /s: ‖w(t)‖ / ‖w(t − 0.5)‖ = e^{a(t − 1)}
      // crosses the factor 2 at t* = 1 + ln 2 / a = 1.25 s (calc).
      const a = 4 * Math.LN2;
      const cfg = { weights: { growthFactor: 2, growthWindowMs: 500, growthFloorNormSq: 0.5 } };
      const run = drive(cfg, { durationS: 1.6, weightNormSq: (t) => (t < 1 ? 1 : Math.exp(2 * a * (t - 1))) });
      const ev = only(run.events, 'weights-unbounded');
      expect(ev).toHaveLength(1);
      expect(ev[0]!.timeS).toBeGreaterThanOrEqual(1.25 - 0.03);
      expect(ev[0]!.timeS - 1.25).toBeLessThanOrEqual(LIMIT_S);
      expect(ev[0]!.values.growth).toBeGreaterThan(2);
      // Convergence from 0 to ‖w‖² = 1 with a 0.3 s time constant: measured from the floor, no event.
      const calm = drive(cfg, { durationS: 3, weightNormSq: (t) => (1 - Math.exp(-t / 0.3)) ** 2 });
      expect(only(calm.events, 'weights-unbounded')).toEqual([]);
    });
  });

  describe('resume policy', () => {
    it('should resume automatically once no symptom has been seen for the hold-off', () => {
      const rng = new Random(5);
      const run = drive({ resume: { holdOffMs: 2000 } }, { durationS: 5, err: (t) => (t >= 1 && t < 1.5 ? 0.3 : 0.1) * rng.gaussian() });
      const resume = only(run.events, 'resume');
      expect(resume).toHaveLength(1);
      expect(resume[0]!.values.byUser).toBe(0);
      // The last loud window ends at 1.5 s (+ one 20 ms window); resume 2 s later.
      expect(resume[0]!.timeS).toBeGreaterThanOrEqual(3.5);
      expect(resume[0]!.timeS).toBeLessThanOrEqual(3.6);
      expect(resume[0]!.values.heldMs).toBeGreaterThan(2400);
      expect(run.guard.state).toBe('running');
      expect(run.guard.autoResumeCount).toBe(1);
    });

    it('should wait for acknowledge() in user mode, and stop resuming by itself after maxAutoResumes', () => {
      const rng = new Random(6);
      const loud = (t: number) => (t >= 1 && t < 1.3 ? 0.3 : 0.1) * rng.gaussian();
      const ring = new EventRing(256);
      const guard = new DivergenceGuard({ sampleRate: FS, maxBlockSize: 128, resume: { mode: 'user' } }, ring);
      drive({}, { durationS: 5, err: loud }, guard, ring);
      expect(guard.state).toBe('muted');
      guard.acknowledge();
      expect(guard.state).toBe('running');
      expect(guard.stateChanged).toBe(true);
      const ev = drainEvents(ring);
      expect(ev.map((e) => e.cause)).toEqual(['resume']);
      expect(ev[0]!.values.byUser).toBe(1);

      const rng2 = new Random(7);
      const twoFaults = (t: number) => ((t >= 0.5 && t < 0.7) || (t >= 1.5 && t < 1.7) ? 0.3 : 0.1) * rng2.gaussian();
      const limited = drive({ resume: { holdOffMs: 300, maxAutoResumes: 1 } }, { durationS: 3, err: twoFaults });
      expect(only(limited.events, 'resume')).toHaveLength(1);
      expect(only(limited.events, 'error-rise')).toHaveLength(2);
      expect(limited.guard.state).toBe('muted');
    });

    it('should escalate from frozen to muted and never back down on a weaker detection', () => {
      const rng = new Random(8);
      const s0 = Math.round(0.2 * FS);
      const run = drive(
        { resume: { mode: 'user' } },
        {
          durationS: 1.5,
          ref: (t) => {
            const i = Math.round(t * FS);
            return (i >= s0 && i < s0 + 5) || (i >= s0 + FS && i < s0 + FS + 5) ? 1 : 0.1 * rng.gaussian();
          },
          err: (t) => (t >= 0.6 && t < 0.8 ? 0.3 : 0.1) * rng.gaussian(),
        },
      );
      expect(run.events.map((e) => [e.cause, e.action])).toEqual([
        ['input-clipping', 'freeze-adaptation'],
        ['error-rise', 'mute'],
        ['input-clipping', 'freeze-adaptation'],
      ]);
      expect(run.guard.state).toBe('muted');
    });
  });

  describe('configuration', () => {
    it('should refuse invalid settings with the field, range and value', () => {
      // ancbench rule: validation messages name the field, the allowed range and the value received.
      const ring = new EventRing(4);
      const make = (c: Partial<GuardConfig>) => () => new DivergenceGuard({ sampleRate: FS, maxBlockSize: 128, ...c }, ring);
      expect(make({ sampleRate: 100 })).toThrow(/sampleRate.*8000.*384000 Hz, got 100/);
      expect(() => new DivergenceGuard({ maxBlockSize: 128 } as GuardConfig, ring)).toThrow(/sampleRate.*got undefined/);
      expect(make({ maxBlockSize: 0 })).toThrow(/maxBlockSize.*integer from 1 to 65536, got 0/);
      expect(make({ windowMs: 1 })).toThrow(/windowMs.*5 to 100 ms, got 1/);
      expect(make({ errorRise: { riseDb: 0 } })).toThrow(/errorRise\.riseDb.*0\.5 to 60 dB, got 0/);
      expect(make({ errorRise: { holdMs: 10 } })).toThrow(/errorRise\.holdMs.*20 to 60000 ms, got 10/);
      expect(make({ errorRise: { action: 'explode' as 'mute' } })).toThrow(/errorRise\.action.*none, freeze-adaptation, reset-weights, mute, got explode/);
      expect(make({ weights: { growthFactor: 0.5 } })).toThrow(/weights\.growthFactor.*0 \(off\) or a number above 1.*got 0.5/);
      expect(make({ inputClipping: { consecutive: 2.5 } })).toThrow(/inputClipping\.consecutive.*integer from 1 to 1000, got 2.5/);
      expect(make({ resume: { mode: 'never' as 'user' } })).toThrow(/resume\.mode.*'auto' or 'user', got never/);
      expect(make({ sanitizeInputs: 1 as unknown as boolean })).toThrow(/sanitizeInputs must be true or false, got 1/);
      expect(() => new DivergenceGuard({ sampleRate: FS, maxBlockSize: 128 }, null as unknown as EventRing)).toThrow(/EventRing/);
    });
  });
});
