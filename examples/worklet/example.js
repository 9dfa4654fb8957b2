// Stairstep crusher in a plain Web Audio app: loads the standalone AudioWorklet module (one file, the wasm inside),
// plays an oscillator through it in real time, and renders a generated buffer through it offline.
// No other file and no library: the node is used through the standard AudioWorkletNode API and its port.
'use strict';

// In your own app: wherever you put stairstep-worklet.js (same origin; module scripts cannot load from file://).
const WORKLET_URL = '../../dist/stairstep-worklet.js';
const $ = (id) => document.getElementById(id);
const example = { ready: false, error: null, running: false };
window.example = example;

// The processor's port protocol: requests carry an id; replies are {id, ok: true, ...} or {id, ok: false, message}.
// It also sends {type: 'ready'} once its chain is built, or {type: 'error', fatal: true, message}.
function wire(node) {
  const pending = new Map();
  let nextId = 1;
  node.ready = new Promise((resolve, reject) => {
    node.port.onmessage = (e) => {
      const msg = e.data;
      if (msg.id !== undefined) {
        const p = pending.get(msg.id);
        pending.delete(msg.id);
        if (msg.ok) p?.resolve(msg); else p?.reject(new Error(msg.message));
      } else if (msg.type === 'ready') {
        resolve(msg);
      } else if (msg.type === 'error') {
        if (msg.fatal) reject(new Error(msg.message)); else console.warn('stairstep:', msg.message);
      }
    };
  });
  node.request = (msg) => new Promise((resolve, reject) => {
    const id = nextId++;
    pending.set(id, { resolve, reject });
    node.port.postMessage({ ...msg, id });
  });
  return node;
}

const loaded = new WeakMap();
// A crusher node for `ctx`: the module is added once per context, then each node builds its own chain.
async function createCrusher(ctx, { preset = 'handheld', params = {}, channels = 1 } = {}) {
  if (!loaded.has(ctx)) loaded.set(ctx, ctx.audioWorklet.addModule(WORKLET_URL));
  await loaded.get(ctx);
  const node = wire(new AudioWorkletNode(ctx, 'stairstep-crusher', {
    numberOfInputs: 1,
    numberOfOutputs: 1,
    channelCount: channels,
    channelCountMode: 'explicit',
    outputChannelCount: [channels],
    parameterData: params,
    processorOptions: { preset, realtime: ctx instanceof AudioContext },
  }));
  await node.ready; // rejects with the core's message on a bad preset
  return node;
}

// Renders `seconds` of a sine through a crusher in an OfflineAudioContext; returns the output samples.
async function renderOffline({ preset = 'handheld', seconds = 0.05, frequency = 330, amplitude = 0.9, params = {} } = {}) {
  const rate = 48000;
  const n = Math.round(seconds * rate);
  const ctx = new OfflineAudioContext({ numberOfChannels: 1, length: n, sampleRate: rate });
  const node = await createCrusher(ctx, { preset, params });
  const buffer = ctx.createBuffer(1, n, rate);
  const x = buffer.getChannelData(0);
  for (let i = 0; i < n; i++) x[i] = amplitude * Math.sin((2 * Math.PI * frequency * i) / rate);
  const src = new AudioBufferSourceNode(ctx, { buffer });
  src.connect(node).connect(ctx.destination);
  src.start(0);
  const y = (await ctx.startRendering()).getChannelData(0);
  draw(x, y);
  return y;
}
example.renderOffline = renderOffline;

function draw(x, y) {
  const c = $('wave');
  const g = c.getContext('2d');
  g.clearRect(0, 0, c.width, c.height);
  const n = Math.min(y.length, 2400);
  const line = (v, color) => {
    g.strokeStyle = color;
    g.beginPath();
    for (let i = 0; i < n; i++) g.lineTo((i / n) * c.width, (0.5 - v[i] / 2.2) * c.height);
    g.stroke();
  };
  line(x, '#999');
  line(y, '#c40');
}

// Real time: oscillator -> crusher -> monitor -> speakers.
let live = null;
async function start() {
  // Suspended while the module loads: it compiles its wasm on the audio thread, which would cost a running context a
  // few blocks of output.
  const ctx = new AudioContext();
  await ctx.suspend();
  const node = await createCrusher(ctx, {
    preset: $('preset').value,
    params: { resolution: +$('resolution').value, rate: +$('rate').value, mix: +$('mix').value },
  });
  const osc = new OscillatorNode(ctx, { type: 'sawtooth', frequency: 220 });
  const level = new GainNode(ctx, { gain: 0.5 });
  const monitor = new GainNode(ctx, { gain: 0.1 }); // −20 dB
  osc.connect(level).connect(node).connect(monitor).connect(ctx.destination);
  osc.start();
  await ctx.resume();
  live = { ctx, node, osc };
  example.running = true;
  $('start').textContent = '■ Stop';
}

async function stop() {
  await live.ctx.close();
  live = null;
  example.running = false;
  $('start').textContent = '▶ Start oscillator';
  $('stats').textContent = 'Not running.';
}

// The processor's counters (processedBlocks, droppedBlocks, lateBlocks, core.latencyFrames, …).
example.stats = async () => (live ? (await live.node.request({ type: 'stats' })).stats : null);

$('start').onclick = () => (live ? stop() : start()).catch((e) => { $('stats').textContent = String(e); });

// Sliders drive AudioParams (resolution and rate rebuild the chain with a 5 ms crossfade; mix is ramped).
for (const [id, fmt] of [['resolution', (v) => `${v.toFixed(1)} bits`], ['rate', (v) => `${v} Hz`],
  ['mix', (v) => v.toFixed(2)]]) {
  $(id).oninput = () => {
    const v = +$(id).value;
    $(`${id}-out`).textContent = fmt(v);
    if (live) live.node.parameters.get(id).setValueAtTime(v, live.ctx.currentTime);
  };
}
// Discrete choices go over the port.
$('preset').onchange = () => {
  if (live) live.node.request({ type: 'preset', preset: $('preset').value }).catch((e) => { $('stats').textContent = String(e); });
};

$('render').onclick = async () => {
  const preset = { format: 'stairstep-preset', version: 1, stages: [{ kind: 'quantize', bits: 4 }] };
  const y = await renderOffline({ preset });
  $('render-info').textContent = `${new Set(y).size} distinct levels (4 bits: at most 16)`;
};

setInterval(async () => {
  const s = await example.stats();
  if (s) {
    $('stats').textContent = `${s.processedBlocks} blocks, ${s.droppedBlocks} dropped, ${s.lateBlocks ?? 0} late; ` +
      `latency ${s.core.latencyFrames} frames; load ${((s.load ?? 0) * 100).toFixed(1)} %`;
  }
}, 500);

// Check at start-up that the module loads (in an offline context, which needs no user gesture).
createCrusher(new OfflineAudioContext(1, 128, 48000))
  .then(() => { example.ready = true; })
  .catch((e) => { example.error = String(e?.message ?? e); $('stats').textContent = `Could not load: ${example.error}`; });
