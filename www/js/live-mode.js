// Live audition: the chain in an AudioWorklet (www/worklet.js via www/live.js, the global `Stairstep`), fed by the
// sound on a loop or by a microphone / line input, into the same monitor gain and safety limiter. Chain edits reach it
// within a block.
import { $, setStatus } from './util.js';
import { state } from './state.js';
import { wasmBytesLive } from './worker-client.js';
import { audio } from './audition.js';

export const live = {
  node: null,
  source: null,
  stream: null,
  mode: 'off',

  async start(mode) {
    this.stop();
    if (mode === 'off') return;
    audio.stop();
    audio.ensure();
    const ctx = audio.ctx;
    await ctx.resume();
    try {
      this.node = await Stairstep.createCrusherNode(ctx, { wasmBytes: wasmBytesLive,
        workletSource: $('worklet-src').textContent, preset: state.preset, channels: 2 });
      if (mode === 'mic') {
        this.stream = await navigator.mediaDevices.getUserMedia({ audio: { echoCancellation: false,
          noiseSuppression: false, autoGainControl: false } });
        this.source = new MediaStreamAudioSourceNode(ctx, { mediaStream: this.stream });
      } else {
        const b = audio.buffer('input');
        this.source = new AudioBufferSourceNode(ctx, { buffer: b, loop: true });
        if (state.loop) { this.source.loopStart = state.loop.start / b.sampleRate; this.source.loopEnd = state.loop.end / b.sampleRate; }
        this.source.start();
      }
      this.source.connect(this.node).connect(audio.monitor);
      this.mode = mode;
      setStatus(`Live: ${mode === 'mic' ? 'input' : 'the sound'} through the chain ` +
        `(latency ${this.node.stairstep.latencyFrames} frames). Keep the monitor low.`);
    } catch (err) {
      this.stop();
      $('live').value = 'off';
      setStatus(`Live audition failed: ${err.message}`, 'error');
    }
  },

  stop() {
    try { this.source?.stop?.(); } catch { /* not started */ }
    this.source?.disconnect();
    this.node?.disconnect();
    if (this.node) Stairstep.dispose(this.node).catch(() => {});
    this.stream?.getTracks().forEach((t) => t.stop());
    this.node = this.source = this.stream = null;
    this.mode = 'off';
  },

  presetChanged() {
    if (this.node) Stairstep.setPreset(this.node, state.preset).catch((err) => setStatus(`Live: ${err.message}`, 'error'));
  },
};
window.stairstepLive = live;
