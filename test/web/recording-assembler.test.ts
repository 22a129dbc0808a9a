import { describe, expect, it } from 'vitest';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { PlantLoop } from '../../src/plant/simulate.ts';
import { createRecordBuffer, RecordRingReader, RecordRingWriter } from '../../src/protocol/record-ring.ts';
import { RecordingAssembler } from '../../src/web/recording-assembler.ts';
import { bundleFiles, parseRecordingBundle, rangeSamples, STATE_CODE } from '../../src/io/recording-bundle.ts';
import { createPathModel } from '../../src/io/path-model-file.ts';
import { writeOutputs } from '../../src/io/files-node.ts';
import { powerToDbfs } from '../../src/dsp/units.ts';
import { main } from '../../src/cli/main.ts';
import { toneScenario } from '../helpers/scenarios.ts';
import { useCliSandbox } from '../helpers/cli.ts';
import { expectClose } from '../helpers/tolerance.ts';

const cli = useCliSandbox('ancbench-rec-');

/**
 * What the simulated-plant panel does on Record, without the browser: the plant loop runs with control
 * off for the control-off stretch, then on; the tap writes each block into the shared ring with the
 * block's state; a "worker" drains the ring into the assembler; the panel's meters (the engine's block
 * powers, as the meter frames carry them) are noted alongside.
 */
function recordSimulated(offS: number, onS: number) {
  const sc = toneScenario({ durationS: offS + onS, sensorNoiseRms: { reference: 0.001, error: 0.001 } });
  const loop = new PlantLoop(sc, { startMode: 'idle' });
  const B = sc.blockSize;
  const sab = createRecordBuffer(sc.sampleRate, 1);
  const tap = new RecordRingWriter(sab);
  const reader = new RecordRingReader(sab);
  const asm = new RecordingAssembler(sc.sampleRate, B);
  const total = Math.round((offS + onS) * sc.sampleRate);
  for (let t = 0, k = 0; t < total; t += B, k++) {
    const on = t >= offS * sc.sampleRate;
    if (on && t - B < offS * sc.sampleRate) loop.engine.setMode('control');
    loop.step(B);
    const state = on ? STATE_CODE.on : STATE_CODE.off;
    tap.write(loop.ref, loop.errOn, loop.out, state, B);
    asm.noteMeters(loop.engine.meters.refPower, loop.engine.meters.errPower, state);
    if (k % 8 === 0) reader.drain(asm.push);
  }
  reader.drain(asm.push);
  const model = createPathModel({ taps: loop.secondaryPathModel, sampleRate: sc.sampleRate, method: 'simulated', quality: { snrDb: null } });
  const contents = asm.finish({
    source: 'simulated',
    devices: { input: 'simulated plant', output: 'simulated plant' },
    settings: { controller: sc.controller, outputCeilingDbfs: 0 },
    model,
    events: [],
    reportHtml: '<!doctype html><html><body>recording</body></html>',
    toolVersion: '0.1.0',
  });
  return { sc, asm, contents, dropped: reader.dropped };
}

describe('RecordingAssembler', () => {
  describe('with a run recorded on the simulated plant (control off 1.5 s, then on 1.5 s)', () => {
    it('should find the control-off and control-on ranges from the state channel', () => {
      const { contents, dropped } = recordSimulated(1.5, 1.5);
      expect(dropped).toBe(0);
      expect(contents.manifest.ranges.controlOff.length).toBe(1);
      expectClose(contents.manifest.ranges.controlOff[0]![1], 1.5, 32 / 8000, 'end of control off');
      expect(contents.manifest.ranges.controlOn.length).toBe(1);
      expect(contents.signals.error!.length).toBe(3 * 8000);
    });

    it('should make a bundle whose control-off levels match the meters within 0.1 dB, and that replay reads', async () => {
      const { contents } = recordSimulated(1.5, 1.5);
      const files = bundleFiles(contents);
      const back = parseRecordingBundle(files);
      const off = back.manifest.ranges.controlOff[0]!;
      const ms = (x: Float32Array): number => x.reduce((a, v) => a + v * v, 0) / x.length;
      const fs = back.manifest.sampleRate;
      expectClose(powerToDbfs(ms(rangeSamples(back.signals.error, off, fs))), back.manifest.meters!.controlOff.errorDbfs!, 0.1, 'error level vs meters');
      expectClose(powerToDbfs(ms(rangeSamples(back.signals.reference, off, fs))), back.manifest.meters!.controlOff.referenceDbfs!, 0.1, 'reference level vs meters');
      const dir = join(cli.dir, 'rec');
      writeOutputs(dir, [...files].map(([name, data]) => ({ name, data })));
      expect(await main(['replay', dir, '--json'])).toBe(0);
      const j = JSON.parse(cli.out.join(''));
      // the replay's control-off figure is the error over the last 25 % of the control-off stretch: a steady tone
      expectClose(j.errorOffDbfs, back.manifest.meters!.controlOff.errorDbfs!, 0.1, 'replay control-off level vs meters');
      expect(j.attenuationDb).toBeGreaterThan(10);
      expect(JSON.parse(readFileSync(join(dir, 'recording.json'), 'utf8')).source).toBe('simulated');
    }, 120_000);
  });
});
