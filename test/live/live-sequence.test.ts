/**
 * The live sequence, in Node: the probe → tone → level check → control machine that the live
 * worklet runs, driven block by block against a simulated loop (the error mic hears the output
 * `DELAY` samples later at gain `GAIN`, as a real loudspeaker and microphone with audio I/O latency).
 */
import { describe, expect, it } from 'vitest';
import { LiveSequence, type LiveSequenceHost } from '../../src/live/live-sequence.ts';
import { parseControlMessage, type WorkletMessage } from '../../src/protocol/messages.ts';
import type { Engine } from '../../src/engine/engine.ts';

const FS = 8000;
const Q = 128;
const DELAY = 300;
const GAIN = 0.5;

class LoopHost implements LiveSequenceHost {
  readonly posted: WorkletMessage[] = [];
  readonly events: string[] = [];
  pieces = 0;
  engineBlocks = 0;
  post(message: WorkletMessage): void {
    this.posted.push(message);
  }
  event(_t: number, cause: string): void {
    this.events.push(cause);
  }
  meterPiece(): void {
    this.pieces++;
  }
  meterEngineBlock(_e: Engine): void {
    this.engineBlocks++;
  }
  last<T extends WorkletMessage['type']>(type: T): Extract<WorkletMessage, { type: T }> | undefined {
    return this.posted.filter((m) => m.type === type).at(-1) as Extract<WorkletMessage, { type: T }> | undefined;
  }
}

/** The sequence in a loop: everything handed to the output, and the error mic's signal. */
function rig(ceilingDbfs = -6) {
  const host = new LoopHost();
  const seq = new LiveSequence(FS, {
    controller: { algorithm: 'fxnlms', taps: 16, stepSize: 0.01 },
    secondaryPathModel: Float32Array.from({ length: DELAY + 1 }, (_, i) => (i === DELAY ? GAIN : 0)),
    ceilingDbfs,
    maxQuantum: Q,
  }, host);
  const played: number[] = [];
  const ref = new Float32Array(Q), err = new Float32Array(Q), out = new Float32Array(Q);
  const send = (m: unknown) => {
    const msg = parseControlMessage(m, FS);
    expect(seq.handle(msg)).toBe(true);
  };
  const run = (blocks: number, until?: () => boolean) => {
    for (let b = 0; b < blocks; b++) {
      for (let i = 0; i < Q; i++) {
        const k = played.length + i - DELAY;
        err[i] = k >= 0 ? GAIN * played[k]! : 0;
        ref[i] = 0;
      }
      const checked = seq.runPiece(ref, err, out, Q);
      if (checked) seq.measureHanded(out, 0, Q);
      for (let i = 0; i < Q; i++) played.push(out[i]!);
      seq.endOfQuantum();
      if (until?.()) return b + 1;
    }
    return blocks;
  };
  return { host, seq, played, send, run };
}

describe('LiveSequence', () => {
  describe('with an identification request', () => {
    it('should fade the engine out, play the sweep through the output stage and hand over a recording whose index 0 is the first sweep sample', () => {
      const { host, seq, played, send, run } = rig();
      send({ type: 'identify', probe: { startHz: 50, endHz: 3000, durationS: 0.5, amplitude: 0.25, tailS: 0.1 } });
      expect(seq.state).toBe('fade');
      let startedAt = -1;
      const blocks = run(200, () => {
        if (startedAt < 0 && seq.state === 'probe') startedAt = played.length;
        return host.last('identify-recording') !== undefined;
      });
      expect(blocks).toBeLessThan(200);
      const rec = host.last('identify-recording')!;
      expect(rec.err.length).toBe(Math.round(0.5 * FS) + Math.round(0.1 * FS));
      // the loop: err[k] = GAIN · (what was handed to the output DELAY samples earlier); the recording
      // starts at the first sample the probe state played
      let worst = 0;
      for (let k = DELAY; k < rec.err.length; k++) worst = Math.max(worst, Math.abs(rec.err[k]! - GAIN * played[startedAt + k - DELAY]!));
      expect(worst).toBeLessThan(1e-6);
      // the sweep really played (through the limiter: at most the cap)
      const peak = Math.max(...played.slice(startedAt, startedAt + 4000).map(Math.abs));
      expect(peak).toBeGreaterThan(0.2);
      expect(peak).toBeLessThanOrEqual(Math.pow(10, -6 / 20) + 1e-6);
      expect(seq.state).toBe('run');
      expect(host.events).toContain('probe-done');
    });
  });

  describe('with a calibration tone', () => {
    it('should report the AES17 level of what was handed to the output (a sine of peak A reads 20·log10 A dBFS)', () => {
      const { host, seq, played, send, run } = rig();
      send({ type: 'calibration-tone', hz: 100, dbfs: -20 });
      run(60);
      // the level of the steady part, from the samples handed to the output (independent of the tone's own meter)
      const steady = played.slice(played.length - 3200);
      const steadyDbfs = 10 * Math.log10((2 * steady.reduce((a, v) => a + v * v, 0)) / steady.length);
      expect(seq.state).toBe('tone');
      send({ type: 'stop-tone' });
      run(40, () => host.last('tone-stopped') !== undefined);
      const t = host.last('tone-stopped')!;
      // AES17-2015 §3.12.1 (dBFS: a full-scale sine reads 0 dBFS), from memory
      expect(Math.abs(t.measuredDbfs - steadyDbfs)).toBeLessThan(0.02);
      // at 100 Hz (fs/80) the output stage's true-peak filter takes about 0.01 dB (calculated from its taps)
      expect(t.measuredDbfs).toBeCloseTo(-20, 1);
      expect(t.samples).toBeGreaterThan(FS * 0.3);
      expect(seq.state).toBe('run');
    });

    it('should refuse a tone less than 0.5 dB below the cap, naming the limit', () => {
      const { host, send } = rig(-10);
      send({ type: 'calibration-tone', hz: 500, dbfs: -9.8 });
      expect(host.last('error')!.message).toMatch(/at most -10\.5 dBFS/);
    });
  });

  describe('with a level-cap check', () => {
    it('should run the check, count every sample handed to the output against its cap, and refuse other work meanwhile', () => {
      const { host, seq, played, send, run } = rig(-12);
      send({ type: 'level-check', request: { ceilingDbfs: -12, signal: { rampS: 0.2, holdS: 0.1, gapS: 0.1, kinds: ['tone', 'noise'] } } });
      run(8, () => seq.state === 'check');
      send({ type: 'identify', probe: { startHz: 50, endHz: 3000, durationS: 0.5, amplitude: 0.25, tailS: 0.1 } });
      expect(host.last('error')!.message).toMatch(/busy \(check\)/);
      run(400, () => host.last('level-check-result') !== undefined);
      const r = host.last('level-check-result')!;
      const cap = Math.pow(10, -12 / 20);
      expect(r.output.samples).toBeGreaterThan(0);
      expect(r.output.samplesOverCeiling).toBe(0);
      expect(Math.max(...played.map(Math.abs))).toBeLessThanOrEqual(cap + 1e-6);
      expect(r.output.maxSamplePeakDbfs).toBeGreaterThan(-13);
      expect(seq.state).toBe('run');
      expect(host.events).toContain('level-check');
    });
  });

  describe('with a shutdown during a tone', () => {
    it('should fade the tone out first, then stop', () => {
      const { host, seq, send, run } = rig();
      send({ type: 'calibration-tone', hz: 500, dbfs: -20 });
      run(40);
      send({ type: 'shutdown' });
      run(100, () => seq.state === 'stopped');
      expect(seq.state).toBe('stopped');
      expect(host.last('tone-stopped')).toBeDefined();
    });
  });

  describe('with a configure message', () => {
    it('should build a new engine and keep the clock running', () => {
      const { host, seq, send, run } = rig();
      run(10);
      const before = seq.clockS;
      send({ type: 'configure', controller: { algorithm: 'tonal', harmonics: 1, stepSize: 0.01, frequencySource: 'reference' }, secondaryPathModel: new Float32Array([0, 0.5]) });
      expect(host.last('configured')).toBeDefined();
      expect(seq.engine.controller.kind).toBe('tonal');
      expect(seq.clockS).toBeCloseTo(before, 9);
      // a bad configuration is refused at the message boundary and the running engine stays
      expect(() => send({ type: 'configure', controller: { algorithm: 'fxlms', taps: 0, stepSize: 0.01 }, secondaryPathModel: new Float32Array([0, 0.5]) })).toThrow(/controller\.taps: must be an integer/);
      expect(seq.engine.controller.kind).toBe('tonal');
    });
  });
});
