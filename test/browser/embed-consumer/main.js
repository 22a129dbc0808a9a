// A consumer's page, bundled by Vite from the installed package: runs the controller node on a
// simulated plant in a native context and in a standardized-audio-context context, and tries the
// kinds of bad use the node must refuse clearly. The test calls window.consumer.* and reads results.
import { createControllerNode, ControllerNodeOptionsError } from 'ancbench/web';
import * as sac from 'standardized-audio-context';

const controller = { algorithm: 'fxnlms', taps: 256, stepSize: 0.005 };
const sleep = (ms) => new Promise((r) => setTimeout(r, ms));
const kits = {
  native: { Context: AudioContext, Osc: OscillatorNode, Gain: GainNode, Delay: DelayNode },
  wrapped: { Context: sac.AudioContext, Osc: sac.OscillatorNode, Gain: sac.GainNode, Delay: sac.DelayNode },
};

/** Tones at the reference mic, a plant of delays and gains, identify, control: the node's own meters. */
async function plant(kind) {
  const { Context, Osc, Gain, Delay } = kits[kind];
  const ctx = new Context();
  await ctx.resume();
  const node = await createControllerNode(ctx, { controller });
  const frames = [];
  const states = [];
  const events = [];
  node.on('meters', (m) => frames.push(m));
  node.on('state', (s) => states.push(s));
  node.on('event', (e) => events.push(e.cause));
  const delay = (n) => new Delay(ctx, { delayTime: n / ctx.sampleRate, maxDelayTime: 1 });
  const reference = new Gain(ctx, { gain: 0 });
  for (const [hz, a] of [[100, 0.3], [200, 0.15], [300, 0.08]]) {
    const o = new Osc(ctx, { frequency: hz });
    o.connect(new Gain(ctx, { gain: a })).connect(reference);
    o.start();
  }
  const error = new Gain(ctx);
  reference.connect(delay(512)).connect(new Gain(ctx, { gain: 0.4 })).connect(error);
  node.connect(delay(256)).connect(new Gain(ctx, { gain: 0.8 })).connect(error);
  node.connectInputs(reference, error);
  // the graph is pulled from the destination: listen to the error mic, quietly
  error.connect(new Gain(ctx, { gain: 0.1 })).connect(ctx.destination);
  const model = await node.identify();
  reference.gain.value = 1;
  await sleep(2000);
  node.start();
  await sleep(6000);
  // an AudioParam reaches the engine: the cap in the meters follows it
  node.ceilingDbfs.setValueAtTime(-9, ctx.currentTime);
  await sleep(500);
  const last = frames[frames.length - 1];
  const result = {
    sampleRate: ctx.sampleRate,
    modelDelaySamples: model.delaySamples,
    modelUsable: model.usable,
    attenuationSlowDb: last.attenuationSlowDb,
    ceilingDbfs: last.ceilingDbfs,
    paramIsAudioParam: kind === 'native' ? node.stepSize instanceof AudioParam : typeof node.stepSize.setValueAtTime === 'function',
    stepSize: node.stepSize.value,
    states,
    events,
    implementation: node.implementation,
  };
  node.dispose();
  await sleep(300);
  await ctx.close();
  return result;
}

/** Each bad use, caught: the message the user reads. */
async function badUse() {
  const out = {};
  const catchIt = async (f) => {
    try {
      await f();
      return 'no error';
    } catch (e) {
      return `${e.name}: ${e.message}`;
    }
  };
  const low = new AudioContext({ sampleRate: 3000 });
  out.sampleRate = await catchIt(() => createControllerNode(low, { controller }));
  await low.close();
  out.options = await catchIt(() => createControllerNode(new AudioContext(), { controller: { algorithm: 'fxnlms', taps: 0, stepSize: -1 }, limiter: { ceilingDbfs: 3 }, rampMs: 'slow' }));
  out.optionsProblems = await createControllerNode(new AudioContext(), { controller: { algorithm: 'fxnlms', taps: 0, stepSize: -1 }, limiter: { ceilingDbfs: 3 } }).catch((e) => (e instanceof ControllerNodeOptionsError ? e.problems.length : -1));
  const missing = new AudioContext();
  out.worklet = await catchIt(() => createControllerNode(missing, { controller, workletUrl: new URL('/nowhere/ancbench-live-processor.js', location.href) }));
  // the same context loads the real worklet afterwards (a failed load is not remembered)
  const ctx = missing;
  await ctx.resume();
  const node = await createControllerNode(ctx, { controller, secondaryPathModel: [0, 0, 0.5] });
  // a new controller rebuilds the engine on the audio thread; a bad one is refused on the page
  await node.setController({ algorithm: 'tonal', harmonics: 2, stepSize: 0.1 });
  out.implementation = node.implementation;
  out.badController = await catchIt(() => node.setController({ algorithm: 'tonal', harmonics: 9, stepSize: 0.1 }));
  const errors = [];
  node.on('error', (e) => errors.push(e.message));
  const mono = new OscillatorNode(ctx);
  mono.connect(node);
  mono.start();
  await sleep(1000);
  out.channels = errors[0] ?? 'no error';
  node.dispose();
  out.afterDispose = await catchIt(() => node.start());
  out.afterDisposeAsync = await catchIt(() => node.loadModel([1]));
  await ctx.close();
  return out;
}

window.consumer = { plant, badUse };
