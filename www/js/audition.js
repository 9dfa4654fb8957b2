// Audition: source → monitor gain → safety limiter → destination. The limiter is on this path only: exports are never
// limited. The monitor starts low (see the Monitor control in index.html).
import { $, dbToGain } from './util.js';
import { state } from './state.js';
import { call } from './worker-client.js';

export const audio = {
  ctx: null,
  node: null,
  playing: false,
  startedAt: 0,
  offset: 0,
  buffers: {},
  onstart: () => {}, // set by main.js: the waveform follows the playhead

  ensure() {
    if (this.ctx) return;
    const ctx = new AudioContext();
    this.ctx = ctx;
    this.monitor = new GainNode(ctx, { gain: dbToGain(this.monitorDb()) });
    // Safety limiter: a fast, hard-kneed compressor, then a static clipper at −3 dBFS for anything it lets through.
    this.limiter = new DynamicsCompressorNode(ctx, { threshold: -12, knee: 0, ratio: 20, attack: 0.001, release: 0.1 });
    const curve = new Float32Array(1025);
    const ceiling = dbToGain(-3);
    for (let i = 0; i < curve.length; i++) curve[i] = Math.max(-ceiling, Math.min(ceiling, (i / 512 - 1) * 1.0));
    this.clipper = new WaveShaperNode(ctx, { curve });
    this.monitor.connect(this.limiter).connect(this.clipper).connect(ctx.destination);
    window.stairstepAudio = this;
  },

  newSource() { this.stop(); this.buffers = {}; },

  // Loudness matching: the processed render is played at the loudness of the chain's input (ITU-R BS.1770, measured
  // by the core), so that snapshots compare at equal loudness. Boosts are capped at +12 dB (a near-silent render is
  // not brought up to full loudness; the safety limiter stays on the path). 0 when off, when listening to the
  // original or the error, or when a loudness cannot be measured (silence, under 400 ms).
  matchDb() {
    const l = state.loudness;
    if (!state.matchLoudness || this.listen() !== 'output' || !l || l.input === null || l.output === null) return 0;
    return Math.max(-40, Math.min(12, l.input - l.output));
  },
  monitorDb() { return +$('monitor').value + this.matchDb(); },
  appliedDb: null, // the monitor gain last applied, dB

  // Sets the monitor gain: the Monitor control plus the loudness match.
  applyMonitor() {
    const db = this.monitorDb();
    this.appliedDb = db;
    const m = this.matchDb();
    $('match-out').textContent = !state.matchLoudness ? ''
      : state.loudness && state.loudness.output === null ? '(cannot measure)'
        : `${m <= -0.05 ? '−' : m >= 0.05 ? '+' : '±'}${Math.abs(m).toFixed(1)} dB`;
    if (this.monitor) this.monitor.gain.setTargetAtTime(dbToGain(db), this.ctx.currentTime, 0.02);
  },

  buffer(which) {
    if (this.buffers[which]) return this.buffers[which];
    const data = which === 'input' ? state.input : which === 'output' ? state.output : errorSignal();
    if (!data || !this.ctx) return null;
    const b = new AudioBuffer({ numberOfChannels: data.length, length: Math.max(1, data[0].length),
      sampleRate: state.info.sampleRate });
    data.forEach((ch, i) => b.copyToChannel(ch, i));
    this.buffers[which] = b;
    return b;
  },

  listen() { return document.querySelector('input[name=listen]:checked').value; },

  position() {
    if (!this.playing) return this.offset;
    const b = this.node.buffer;
    let t = (this.ctx.currentTime - this.startedAt) * b.sampleRate + this.offset;
    const ls = this.node.loop ? this.node.loopStart * b.sampleRate : 0;
    const le = this.node.loop ? (this.node.loopEnd || b.duration) * b.sampleRate : b.length;
    if (this.node.loop && t >= le) t = ls + ((t - ls) % (le - ls));
    return Math.min(t, b.length);
  },

  start(atFrame) {
    this.ensure();
    if (this.listen() === 'error' && !state.errorSignal && state.output) {
      fetchError().then(() => { if (state.errorSignal) this.start(atFrame); });
      return;
    }
    const b = this.buffer(this.listen());
    if (!b) return;
    const node = new AudioBufferSourceNode(this.ctx, { buffer: b });
    const sr = b.sampleRate;
    node.loop = $('loop').checked;
    if (state.loop) { node.loopStart = state.loop.start / sr; node.loopEnd = state.loop.end / sr; }
    const fade = new GainNode(this.ctx, { gain: 0 });
    node.connect(fade).connect(this.monitor);
    const t = this.ctx.currentTime;
    fade.gain.setTargetAtTime(1, t, 0.005);
    let from = atFrame ?? (state.loop ? state.loop.start : 0);
    if (state.loop && (from < state.loop.start || from >= state.loop.end)) from = state.loop.start;
    node.start(t, from / sr);
    node.onended = () => { if (this.node === node) { this.playing = false; updatePlayButton(); } };
    this.retire();
    this.node = node;
    this.fade = fade;
    this.startedAt = t;
    this.offset = from;
    this.playing = true;
    updatePlayButton();
    this.ctx.resume();
    this.onstart();
  },

  retire() {
    if (!this.node) return;
    const { node, fade } = this;
    fade.gain.setTargetAtTime(0, this.ctx.currentTime, 0.005);
    node.onended = null;
    node.stop(this.ctx.currentTime + 0.05);
  },

  stop() {
    if (!this.playing) return;
    this.offset = this.position();
    this.retire();
    this.node = null;
    this.playing = false;
    updatePlayButton();
  },

  toggle() { if (this.playing) { this.stop(); this.offset = 0; } else this.start(); },

  // New render while playing: swap buffers in place, from the same position, with a short crossfade.
  refresh() {
    delete this.buffers.output;
    delete this.buffers.error;
    if (this.playing && this.listen() !== 'input') this.start(this.position());
  },

  loopChanged() { if (this.playing) this.start(this.position()); },
};

// The error signal (processed − chain input) comes from the core, which sanitizes the input exactly as the chain
// does (NaN → 0, ±Inf → ±1); it is asked for only when someone listens to it, once per render.
let errorFetch = null;
function errorSignal() { return state.errorSignal; }
function fetchError() {
  if (!errorFetch) {
    const asked = state.output;
    errorFetch = call('error')
      .then((msg) => { if (state.output === asked) state.errorSignal = msg.channels; })
      // Nothing rendered in the worker yet (a new sound is loading): the next render brings it.
      .catch(() => {})
      .finally(() => { errorFetch = null; });
  }
  return errorFetch;
}

export function updatePlayButton() { $('play').textContent = audio.playing ? '■ Stop' : '▶ Play'; }
