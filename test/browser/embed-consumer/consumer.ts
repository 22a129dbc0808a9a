// Type test: the package's public types in a strict consumer project (tsc --noEmit). Each
// expect-error line below fails the compile if the types were too loose to catch the mistake.
import { createControllerNode, type ControllerMeters, type ControllerNode, type ControllerNodeOptions } from 'ancbench/web';
import { parseScenario, simulate, FXLMS_SETTINGS, type SimulationResult } from 'ancbench';
import { main } from 'ancbench/cli';
import { AudioContext as WrappedContext, type IAudioParam } from 'standardized-audio-context';

export async function native(ctx: AudioContext): Promise<number> {
  const options: ControllerNodeOptions = { controller: { algorithm: 'fxnlms', taps: 64, stepSize: 0.05 }, limiter: { ceilingDbfs: -12 } };
  const node: ControllerNode = await createControllerNode(ctx, options);
  const step: AudioParam = node.stepSize;
  step.linearRampToValueAtTime(0.01, ctx.currentTime + 1);
  node.connect(ctx.destination);
  const off = node.on('meters', (m: ControllerMeters) => console.log(m.attenuationDb.toFixed(1), m.modeName));
  node.on('event', (e) => console.log(e.cause, e.text, e.values));
  node.on('state', (s) => console.log(s === 'disposed'));
  // @ts-expect-error: no such listener type
  node.on('meter', () => undefined);
  off();
  await node.setController({ algorithm: 'tonal', harmonics: 3, stepSize: 0.1 });
  const r = await node.identify({ firTaps: 128 });
  node.start();
  node.dispose();
  return r.delayMs;
}

export async function wrapped(): Promise<void> {
  const ctx = new WrappedContext();
  const node = await createControllerNode(ctx, { controller: { algorithm: 'fxlms', taps: 32, stepSize: 0.001 } });
  const p: IAudioParam = node.leakage;
  p.setValueAtTime(0.001, ctx.currentTime);
  node.connect(ctx.destination);
}

// @ts-expect-error: the controller needs an algorithm the tables know
export const bad: ControllerNodeOptions = { controller: { algorithm: 'rls', taps: 8, stepSize: 0.1 } };

export function offline(text: string): SimulationResult {
  const maxTaps: number = FXLMS_SETTINGS.taps.max;
  console.log(maxTaps);
  return simulate(parseScenario(JSON.parse(text)));
}

export const exitCode: Promise<number> = main(['--help']);
