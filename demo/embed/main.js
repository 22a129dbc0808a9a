// The controller node in a page of your own: a media element is the noise, a simulated plant (or two
// microphones) closes the loop, and the node's meters show the attenuation it measures.
import { createControllerNode } from 'ancbench/web';

const $ = (id) => document.getElementById(id);
const noise = $('noise');

// invented demo noise: a 100 Hz hum with two harmonics and a little hiss, 4 s, as a WAV blob
function humWav(rate = 48000, seconds = 4) {
  const n = rate * seconds;
  const bytes = new DataView(new ArrayBuffer(44 + 2 * n));
  const text = (o, s) => [...s].forEach((c, i) => bytes.setUint8(o + i, c.charCodeAt(0)));
  text(0, 'RIFF'); bytes.setUint32(4, 36 + 2 * n, true); text(8, 'WAVEfmt ');
  bytes.setUint32(16, 16, true); bytes.setUint16(20, 1, true); bytes.setUint16(22, 1, true);
  bytes.setUint32(24, rate, true); bytes.setUint32(28, 2 * rate, true); bytes.setUint16(32, 2, true); bytes.setUint16(34, 16, true);
  text(36, 'data'); bytes.setUint32(40, 2 * n, true);
  for (let i = 0; i < n; i++) {
    const t = i / rate;
    const v = 0.3 * Math.sin(2 * Math.PI * 100 * t) + 0.15 * Math.sin(2 * Math.PI * 200 * t) + 0.08 * Math.sin(2 * Math.PI * 300 * t) + 0.01 * (Math.random() * 2 - 1);
    bytes.setInt16(44 + 2 * i, Math.round(v * 32767), true);
  }
  return URL.createObjectURL(new Blob([bytes.buffer], { type: 'audio/wav' }));
}
noise.src = humWav();
$('file').onchange = (e) => { if (e.target.files[0]) noise.src = URL.createObjectURL(e.target.files[0]); };

let session = null;

async function start() {
  const ctx = new AudioContext();
  await ctx.resume();
  const sim = document.querySelector('input[name=plant]:checked').value === 'sim';
  const node = await createControllerNode(ctx, {
    controller: { algorithm: 'fxnlms', taps: 256, stepSize: 0.005 },
    limiter: { ceilingDbfs: -6 },
  });
  node.on('meters', (m) => { $('att').value = Number.isFinite(m.attenuationSlowDb) ? m.attenuationSlowDb.toFixed(1) : '–'; });
  node.on('state', (s) => { $('status').textContent = s; });
  node.on('error', (e) => { $('status').textContent = e.message; });
  const delay = (samples) => new DelayNode(ctx, { delayTime: samples / ctx.sampleRate, maxDelayTime: 1 });
  if (sim) {
    // simulated plant: the noise reaches the error mic after 512 samples at gain 0.4, the control
    // signal after 256 at 0.8 (plus the render quantum a Web Audio cycle adds)
    const source = ctx.createMediaElementSource(noise);
    const error = new GainNode(ctx);
    source.connect(delay(512)).connect(new GainNode(ctx, { gain: 0.4 })).connect(error);
    node.connect(delay(256)).connect(new GainNode(ctx, { gain: 0.8 })).connect(error);
    node.connectInputs(source, error);
    error.connect(new GainNode(ctx, { gain: 0.5 })).connect(ctx.destination); // listen to the error mic
  } else {
    const stream = await navigator.mediaDevices.getUserMedia({ audio: { channelCount: 2, echoCancellation: false, noiseSuppression: false, autoGainControl: false } });
    ctx.createMediaStreamSource(stream).connect(node);
    node.connect(ctx.destination);
  }
  $('status').textContent = 'measuring the secondary path (a quiet sweep)…';
  await node.identify();
  if (sim) await noise.play();
  // the node measures the noise with control off first (its attenuation is against that level):
  // wait until the noise reaches the error mic (at most 5 s), then for its ~1 s average to settle
  $('status').textContent = 'measuring the noise with control off…';
  await new Promise((r) => { const off = node.on('meters', (m) => m.errPower > 1e-6 && (off(), r())); setTimeout(r, 5000); });
  await new Promise((r) => setTimeout(r, 2500));
  node.start();
  session = { ctx, node };
  $('start').disabled = true;
  $('stop').disabled = false;
}

$('start').onclick = () => start().catch((e) => { $('status').textContent = e.message; });
$('stop').onclick = async () => {
  session.node.dispose();
  noise.pause();
  await session.ctx.close();
  session = null;
  $('start').disabled = false;
  $('stop').disabled = true;
};
