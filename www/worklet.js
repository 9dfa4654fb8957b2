// Stairstep's crusher as an AudioWorkletProcessor, registered as 'stairstep-crusher'.
//
// The build (scripts/build-page.mjs) replaces the GLUE slot line below with wasm-bindgen's no-modules glue (which
// defines `wasm_bindgen`) and, in the standalone dist/stairstep-worklet.js, with the wasm itself as base64
// (`STAIRSTEP_WASM_BASE64`). The processor instantiates the module synchronously in the worklet's own global scope:
// no threads, no SharedArrayBuffer, no fetch. Each processor owns one `LiveChain` (src/wasm/live.rs over src/live/).
//
// Node options (new AudioWorkletNode(ctx, 'stairstep-crusher', options)):
//   numberOfInputs 1, numberOfOutputs 1; give channelCount = outputChannelCount[0] = the chain's channel count and
//   channelCountMode 'explicit' (www/live.js does).
//   processorOptions.preset    a preset object, its JSON text, or a built-in preset's name; default 'handheld'
//                              (11,025 Hz hold, 8-bit TPDF).
//   processorOptions.channels  channel count; default outputChannelCount[0], else 2.
//   processorOptions.wasm      a WebAssembly.Module (cheapest: compile it once on the main thread with
//                              WebAssembly.compile) or the wasm bytes. Not needed with the standalone file, which
//                              carries its own. Without either, send {type: 'init', wasm} over the port.
//   processorOptions.realtime  false for an OfflineAudioContext (turns off the wall-clock lateness check).
//
// AudioParams:
//   gain        a-rate, dB, −60…+36, default 0     pre-chain gain
//   resolution  k-rate, bits, 0…24, default 0      0 = the preset's; otherwise the first active quantize stage gets
//                                                  levels = round(2^resolution) (1…24 bits, fractions give the
//                                                  level counts between powers of two: 4.5 → 23 levels; a mid-rise
//                                                  grid rounds to an even count). Whole values equal `bits`.
//   rate        k-rate, Hz, 0…768,000, default 0   0 = the preset's; otherwise the first active hold-mode rate stage
//                                                  gets rate_hz = round(rate), clamped to 1…the context's rate.
//                                                  Clean-mode rate stages keep their rate (their latency depends on
//                                                  it): change it with a preset message.
//   dither      k-rate, LSB, −1…16, default −1     < 0 = the preset's; otherwise the first quantize stage's dither
//                                                  peak (rounded to 0.01 LSB), TPDF if the stage had no dither.
//   mix         a-rate, 0…1, default 1             dry/wet; the dry signal is delayed by the chain's latency.
//   output      a-rate, dB, −60…+12, default 0     gain after the mix.
//
// Smoothing, and what can still click:
//   - gain, mix and output are read at each 128-frame block's last frame and ramped linearly (per sample, in the
//     core) from the previous block's value, so automation is followed at block resolution and a jump becomes a
//     2.7 ms ramp at 48 kHz: no zipper noise; only a very large instant jump is still heard as a soft click.
//   - resolution, rate and dither (and every message that changes the chain) rebuild the chain at a block boundary:
//     the new chain runs beside the old one for its latency (0 in hold mode), then a 5 ms linear crossfade hands
//     over. One rebuild runs at a time; changes meanwhile are merged into the next. Sweeping these parameters is
//     therefore smooth but stepped (a new setting at most every 5 ms plus the latency), and the hold phase and the
//     dither sequence restart at each rebuild.
//   - a preset with a different latency (switching to or from a clean-mode rate stage, or changing its rate) jumps
//     in time by the latency difference inside the crossfade: heard as a short smear, not a click.
//   - 'reset' restarts everything at once (filters, FIFOs: silence for the latency) and can click.
//
// Messages to the port (every request may carry an `id`; the reply is {id, ok: true, ...} or
// {id, ok: false, message}):
//   {type: 'init', wasm}                      instantiate from a Module or bytes, if not given in the options
//   {type: 'preset', preset}                  replace the preset (object, JSON or built-in name); crossfaded
//   {type: 'quantizer', stage}                replace the first quantizer-like stage (quantize, compand, g711,
//                                             minifloat, adpcm) with `stage` ({kind: 'compand', law: 'alaw'}, …),
//                                             or append it if there is none
//   {type: 'curve', overflow}                 the overflow curve of the first gain stage: clip, wrap, fold or
//                                             saturate (a 0 dB gain stage is put first if there is none)
//   {type: 'stage', kind, patch}              merge `patch` into the first stage of `kind`
//   {type: 'reset'}                           see above
//   {type: 'stats'}                           reply {stats}: see statsNow()
//   {type: 'dispose'}                         free the chain; the processor then ends
// Replies to the chain-changing messages carry {latencyFrames, preset}: the new chain's latency (the output's, once
// it has taken over) and the preset now in force. Unsolicited messages from the processor:
//   {type: 'ready', latencyFrames, exportRate, channels, sampleRate, preset}, {type: 'latency', latencyFrames}
//   (after a rebuild changed it), {type: 'error', message, fatal}.

// ---------------------------------------------------------------------------------------------------------------------
// Polyfills. Chromium's AudioWorkletGlobalScope has no TextDecoder or TextEncoder (nor atob, performance or self);
// the glue needs the first two for strings (preset JSON in, errors and stats out). UTF-8 only, as the glue uses.
// ---------------------------------------------------------------------------------------------------------------------
(function installTextCodecs(g) {
  if (typeof g.TextDecoder === 'undefined') {
    const cont = (b) => (b & 0xc0) === 0x80;
    g.TextDecoder = class TextDecoder {
      constructor(label = 'utf-8') {
        if (!/^utf-?8$/i.test(label)) throw new RangeError(`TextDecoder polyfill: only utf-8, not ${label}`);
      }
      get encoding() { return 'utf-8'; }
      decode(input) {
        if (input === undefined) return '';
        const b = ArrayBuffer.isView(input)
          ? new Uint8Array(input.buffer, input.byteOffset, input.byteLength) : new Uint8Array(input);
        let out = '';
        const units = [];
        for (let i = 0; i < b.length;) {
          const c = b[i];
          let cp = 0xfffd;
          let len = 1;
          if (c < 0x80) {
            cp = c;
          } else if (c >= 0xc2 && c < 0xe0 && i + 1 < b.length && cont(b[i + 1])) {
            cp = ((c & 0x1f) << 6) | (b[i + 1] & 0x3f);
            len = 2;
          } else if (c >= 0xe0 && c < 0xf0 && i + 2 < b.length && cont(b[i + 1]) && cont(b[i + 2])) {
            const v = ((c & 0x0f) << 12) | ((b[i + 1] & 0x3f) << 6) | (b[i + 2] & 0x3f);
            if (v >= 0x800 && (v < 0xd800 || v > 0xdfff)) { cp = v; len = 3; }
          } else if (c >= 0xf0 && c < 0xf5 && i + 3 < b.length && cont(b[i + 1]) && cont(b[i + 2]) && cont(b[i + 3])) {
            const v = ((c & 0x07) << 18) | ((b[i + 1] & 0x3f) << 12) | ((b[i + 2] & 0x3f) << 6) | (b[i + 3] & 0x3f);
            if (v >= 0x10000 && v <= 0x10ffff) { cp = v; len = 4; }
          }
          i += len;
          if (cp > 0xffff) units.push(0xd800 + ((cp - 0x10000) >> 10), 0xdc00 + ((cp - 0x10000) & 0x3ff));
          else units.push(cp);
          if (units.length >= 8192) { out += String.fromCharCode.apply(null, units); units.length = 0; }
        }
        return out + String.fromCharCode.apply(null, units);
      }
    };
  }
  if (typeof g.TextEncoder === 'undefined') {
    // No encodeInto: the glue falls back to encode() + set() without it.
    g.TextEncoder = class TextEncoder {
      get encoding() { return 'utf-8'; }
      encode(text = '') {
        const s = String(text);
        const out = new Uint8Array(s.length * 3);
        let j = 0;
        for (let i = 0; i < s.length; i++) {
          let c = s.charCodeAt(i);
          if (c >= 0xd800 && c < 0xdc00 && i + 1 < s.length && (s.charCodeAt(i + 1) & 0xfc00) === 0xdc00) {
            c = 0x10000 + ((c - 0xd800) << 10) + (s.charCodeAt(++i) - 0xdc00);
          } else if (c >= 0xd800 && c < 0xe000) {
            c = 0xfffd; // a lone surrogate
          }
          if (c < 0x80) {
            out[j++] = c;
          } else if (c < 0x800) {
            out[j++] = 0xc0 | (c >> 6); out[j++] = 0x80 | (c & 0x3f);
          } else if (c < 0x10000) {
            out[j++] = 0xe0 | (c >> 12); out[j++] = 0x80 | ((c >> 6) & 0x3f); out[j++] = 0x80 | (c & 0x3f);
          } else {
            out[j++] = 0xf0 | (c >> 18); out[j++] = 0x80 | ((c >> 12) & 0x3f);
            out[j++] = 0x80 | ((c >> 6) & 0x3f); out[j++] = 0x80 | (c & 0x3f);
          }
        }
        return out.slice(0, j);
      }
    };
  }
})(globalThis);

// @@STAIRSTEP_GLUE@@

// ---------------------------------------------------------------------------------------------------------------------
// The processor
// ---------------------------------------------------------------------------------------------------------------------
const PROCESSOR_NAME = 'stairstep-crusher';
const LATE_MS = 20; // a block this far behind the rendering's usual pace is late (see clock())
const DEFAULT_PRESET = 'handheld';
const QUANTIZER_KINDS = ['quantize', 'compand', 'g711', 'minifloat', 'adpcm'];

// Base64 without atob (absent here).
function decodeBase64(text) {
  const abc = 'ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/';
  const value = new Uint8Array(128);
  for (let i = 0; i < abc.length; i++) value[abc.charCodeAt(i)] = i;
  const s = text.replace(/[^A-Za-z0-9+/]/g, '');
  const out = new Uint8Array(Math.floor((s.length * 3) / 4));
  let j = 0;
  for (let i = 0; i < s.length; i += 4) {
    const n = (value[s.charCodeAt(i)] << 18) | (value[s.charCodeAt(i + 1)] << 12)
      | ((i + 2 < s.length ? value[s.charCodeAt(i + 2)] : 0) << 6) | (i + 3 < s.length ? value[s.charCodeAt(i + 3)] : 0);
    out[j++] = n >> 16;
    if (i + 2 < s.length) out[j++] = (n >> 8) & 0xff;
    if (i + 3 < s.length) out[j++] = n & 0xff;
  }
  return out;
}

// One wasm instance per AudioWorkletGlobalScope (per audio context), shared by every processor in it.
let wasmReady = false;
function ensureWasm(source) {
  if (wasmReady) return;
  let module = source ?? embeddedModule;
  if (module == null) throw new Error(embeddedError ?? 'no wasm: pass processorOptions.wasm or send {type: "init", wasm}');
  if (!(module instanceof WebAssembly.Module)) module = new WebAssembly.Module(module);
  wasm_bindgen.initSync({ module });
  wasmReady = true;
}

// The standalone module compiles its embedded wasm as soon as it is added (addModule), not when the first node is
// made: all of this runs on the audio rendering thread, so it is best done before playback starts (a running context
// would miss a few blocks while the ~0.5 MB module compiles).
let embeddedModule = null;
let embeddedError = null;
if (typeof STAIRSTEP_WASM_BASE64 === 'string') {
  try { embeddedModule = new WebAssembly.Module(decodeBase64(STAIRSTEP_WASM_BASE64)); } catch (err) {
    embeddedError = `the embedded wasm does not compile: ${err?.message ?? err}`;
  }
}

// A preset given as an object, its JSON text or a built-in name, as an object.
function presetObject(preset) {
  if (preset == null) preset = DEFAULT_PRESET;
  if (typeof preset === 'object') return JSON.parse(JSON.stringify(preset));
  const text = String(preset).trim();
  if (text.startsWith('{')) return JSON.parse(text);
  const found = JSON.parse(wasm_bindgen.Session.builtinPresets()).find((p) => p.name === text);
  if (!found) throw new Error(`unknown built-in preset ${JSON.stringify(text)}`);
  return found;
}

const last = (values) => values[values.length - 1];

class StairstepCrusher extends AudioWorkletProcessor {
  static get parameterDescriptors() {
    return [
      { name: 'gain', defaultValue: 0, minValue: -60, maxValue: 36, automationRate: 'a-rate' },
      { name: 'resolution', defaultValue: 0, minValue: 0, maxValue: 24, automationRate: 'k-rate' },
      { name: 'rate', defaultValue: 0, minValue: 0, maxValue: 768000, automationRate: 'k-rate' },
      { name: 'dither', defaultValue: -1, minValue: -1, maxValue: 16, automationRate: 'k-rate' },
      { name: 'mix', defaultValue: 1, minValue: 0, maxValue: 1, automationRate: 'a-rate' },
      { name: 'output', defaultValue: 0, minValue: -60, maxValue: 12, automationRate: 'a-rate' },
    ];
  }

  constructor(options = {}) {
    super();
    const po = options.processorOptions ?? {};
    this.channels = Math.max(1, Math.floor(po.channels ?? options.outputChannelCount?.[0] ?? 2));
    this.realtime = po.realtime !== false;
    this.presetSource = po.preset;
    this.lc = null; // the LiveChain
    this.preset = null; // the preset object as given (before the live parameters)
    this.sent = {}; // parameter values last handed to the core
    this.views = null;
    this.latency = 0;
    this.alive = true;
    this.resetCounters();
    this.port.onmessage = (e) => this.onMessage(e.data ?? {});
    if (po.wasm != null || wasmReady || typeof STAIRSTEP_WASM_BASE64 === 'string') this.start(po.wasm);
  }

  resetCounters() {
    this.blocks = 0; // process() calls
    this.processedBlocks = 0; // blocks that went through the chain
    this.droppedBlocks = 0; // gaps in currentFrame between calls
    this.busyMs = 0; // Date.now() around the work, summed: ms resolution, unbiased over many blocks
    this.lastFrame = -1;
    this.frame0 = -1;
    this.wall0 = 0;
    // Wall-clock time minus audio time in ms (see clock()): its range, the lowest value in this 1 s window and in
    // the one before, the late blocks and the worst excess over the floor.
    this.lagMin = Infinity;
    this.lagMax = -Infinity;
    this.windowEnd = 0;
    this.windowMin = Infinity;
    this.prevWindowMin = Infinity;
    this.lateBlocks = 0;
    this.worstLateMs = 0;
  }

  start(wasm) {
    try {
      ensureWasm(wasm);
      const preset = presetObject(this.presetSource);
      this.lc = new wasm_bindgen.LiveChain(JSON.stringify(preset), this.channels, sampleRate);
      this.memory = wasm_bindgen.LiveChain.memory(); // the same WebAssembly.Memory for good; its buffer may change
      this.preset = preset;
      this.latency = this.lc.latencyFrames;
      this.port.postMessage({ type: 'ready', channels: this.channels, sampleRate, ...this.info() });
    } catch (err) {
      this.lc = null;
      this.port.postMessage({ type: 'error', fatal: true, message: String(err?.message ?? err) });
    }
  }

  info() {
    return { latencyFrames: this.lc.latencyFrames, exportRate: this.lc.exportRate, preset: this.preset };
  }

  // Hands a new preset object to the core (validated there); keeps it on success. Returns the new chain's latency.
  applyPreset(preset) {
    const latency = this.lc.setPreset(JSON.stringify(preset));
    this.preset = preset;
    return latency;
  }

  onMessage(msg) {
    const reply = (payload) => { if (msg.id !== undefined) this.port.postMessage({ id: msg.id, ok: true, ...payload }); };
    try {
      if (msg.type === 'init') {
        if (!this.lc) this.start(msg.wasm);
        if (!this.lc) throw new Error('the chain could not be built (see the error message)');
        return reply(this.info());
      }
      if (msg.type === 'stats') return reply({ stats: this.statsNow() });
      if (!this.lc) throw new Error('not initialised');
      const p = JSON.parse(JSON.stringify(this.preset));
      p.stages = p.stages ?? [];
      let latencyFrames = this.lc.latencyFrames;
      switch (msg.type) {
        case 'preset':
          latencyFrames = this.applyPreset(presetObject(msg.preset));
          break;
        case 'quantizer': {
          if (!msg.stage || typeof msg.stage.kind !== 'string') throw new Error('quantizer: give stage = {kind, ...}');
          const i = p.stages.findIndex((s) => !s.bypass && QUANTIZER_KINDS.includes(s.kind));
          if (i >= 0) p.stages[i] = msg.stage; else p.stages.push(msg.stage);
          latencyFrames = this.applyPreset(p);
          break;
        }
        case 'curve': {
          const g = p.stages.find((s) => !s.bypass && s.kind === 'gain');
          if (g) g.overflow = msg.overflow; else p.stages.unshift({ kind: 'gain', gain_db: 0, overflow: msg.overflow });
          latencyFrames = this.applyPreset(p);
          break;
        }
        case 'stage': {
          const s = p.stages.find((t) => !t.bypass && t.kind === msg.kind);
          if (!s) throw new Error(`the chain has no active ${JSON.stringify(msg.kind)} stage`);
          Object.assign(s, msg.patch ?? {});
          latencyFrames = this.applyPreset(p);
          break;
        }
        case 'reset':
          this.lc.reset();
          break;
        case 'dispose':
          this.lc.free();
          this.lc = null;
          this.alive = false;
          return reply({});
        default:
          throw new Error(`unknown message type ${JSON.stringify(msg.type)}`);
      }
      reply({ latencyFrames, preset: this.preset });
    } catch (err) {
      const message = String(err?.message ?? err);
      if (msg.id !== undefined) this.port.postMessage({ id: msg.id, ok: false, message });
      else this.port.postMessage({ type: 'error', fatal: false, message });
    }
  }

  // Views onto the chain's buffers in wasm memory, re-made after memory grew (which detaches the old buffer: a
  // rebuild inside process() may grow it) or for another block length. No allocation otherwise.
  refreshViews(n) {
    const buffer = this.memory.buffer;
    if (this.views && this.views.buffer === buffer && this.views.n === n) return this.views;
    const make = (ptr) => new Float32Array(buffer, ptr, n);
    const input = [];
    const output = [];
    for (let c = 0; c < this.channels; c++) {
      input.push(make(this.lc.inputPtr(c)));
      output.push(make(this.lc.outputPtr(c)));
    }
    this.views = { buffer, n, input, output };
    return this.views;
  }

  // Live parameters: each is handed to the core only when it changed.
  sendParams(parameters) {
    const lc = this.lc;
    const s = this.sent;
    const v = {
      gain: last(parameters.gain), mix: last(parameters.mix), output: last(parameters.output),
      resolution: parameters.resolution[0], rate: parameters.rate[0], dither: parameters.dither[0],
    };
    if (v.gain !== s.gain) lc.setGainDb((s.gain = v.gain));
    if (v.mix !== s.mix) lc.setMix((s.mix = v.mix));
    if (v.output !== s.output) lc.setOutputDb((s.output = v.output));
    if (v.resolution !== s.resolution) lc.setResolution((s.resolution = v.resolution));
    if (v.rate !== s.rate) lc.setRate((s.rate = v.rate));
    if (v.dither !== s.dither) lc.setDither((s.dither = v.dither));
  }

  // Wall-clock bookkeeping: the audio clock (currentFrame) against Date.now(). The render thread works ahead of the
  // device in bursts of one callback, so `lag` (wall time − audio time) wanders above a floor by about a callback
  // (10–15 ms in headless Chromium). A block rendered more than LATE_MS above the floor (the lowest lag of this and
  // the previous 1 s window) missed its slot: the device was already waiting. Chromium then catches up by rendering
  // quickly, so the audio clock does not lose the time, but the lag spikes; each block in the spike counts.
  clock(n) {
    if (this.lastFrame >= 0 && currentFrame - this.lastFrame > n) {
      this.droppedBlocks += Math.round((currentFrame - this.lastFrame) / n) - 1;
    }
    this.lastFrame = currentFrame;
    if (!this.realtime) return;
    const now = Date.now();
    if (this.frame0 < 0) { this.frame0 = currentFrame; this.wall0 = now; this.windowEnd = now + 1000; }
    const lag = now - this.wall0 - ((currentFrame - this.frame0) * 1000) / sampleRate;
    if (lag < this.lagMin) this.lagMin = lag;
    if (lag > this.lagMax) this.lagMax = lag;
    if (lag < this.windowMin) this.windowMin = lag;
    const over = lag - Math.min(this.windowMin, this.prevWindowMin);
    if (over > LATE_MS) this.lateBlocks++;
    if (over > this.worstLateMs) this.worstLateMs = over;
    if (now >= this.windowEnd) {
      this.prevWindowMin = this.windowMin;
      this.windowMin = Infinity;
      this.windowEnd = now + 1000;
    }
  }

  process(inputs, outputs, parameters) {
    if (!this.alive) return false;
    const t0 = Date.now();
    const out = outputs[0];
    const n = out?.[0]?.length ?? 128;
    this.blocks++;
    this.clock(n);
    if (!this.lc || !out || out.length === 0) return true; // silence until initialised
    try {
      const views = this.refreshViews(n);
      const input = inputs[0] ?? [];
      for (let c = 0; c < this.channels; c++) {
        // Missing channels (nothing connected, or a mono input into a wider chain) are silence or channel 0.
        const src = input[c] ?? (input.length === 1 ? input[0] : null);
        if (src && src.length === n) views.input[c].set(src); else views.input[c].fill(0);
      }
      this.sendParams(parameters);
      this.lc.process(n);
      const after = this.refreshViews(n); // the same views unless the block rebuilt the chain and memory grew
      for (let c = 0; c < out.length; c++) out[c].set(after.output[Math.min(c, this.channels - 1)]);
      this.processedBlocks++;
      const latency = this.lc.latencyFrames;
      if (latency !== this.latency) {
        this.latency = latency;
        this.port.postMessage({ type: 'latency', latencyFrames: latency });
      }
    } catch (err) {
      // Only a bug gets here (the core does not panic on input); stop using the chain rather than repeat it.
      this.lc = null;
      this.port.postMessage({ type: 'error', fatal: true, message: `processing failed: ${err?.message ?? err}` });
    }
    this.busyMs += Date.now() - t0;
    return true;
  }

  // Counters: blocks (process calls), processedBlocks (through the chain), droppedBlocks (gaps in currentFrame
  // between calls: quanta the processor never saw), lateBlocks (blocks rendered more than LATE_MS behind the pace,
  // see clock(); null offline), worstLateMs (the largest such delay), lagSpreadMs (the range of wall-clock minus
  // audio time: the rendering's burst jitter), busyMs and load (time inside process() over audio time, from
  // Date.now()'s 1 ms ticks: unbiased over many blocks), and `core`, the chain's own counters (underrunFrames,
  // rebuilds, latencyFrames, …: LiveChain.stats(): LiveStats in src/live/). The browser's own count of output underruns,
  // where it has one (AudioContext.playbackStats), is added on the main thread by Stairstep.getStats().
  statsNow() {
    const audioMs = this.frame0 >= 0 ? ((this.lastFrame - this.frame0) * 1000) / sampleRate : 0;
    const measured = this.realtime && this.frame0 >= 0;
    return {
      blocks: this.blocks,
      processedBlocks: this.processedBlocks,
      droppedBlocks: this.droppedBlocks,
      lateBlocks: measured ? this.lateBlocks : null,
      worstLateMs: measured ? this.worstLateMs : null,
      lagSpreadMs: measured ? this.lagMax - this.lagMin : null,
      busyMs: this.busyMs,
      load: audioMs > 0 ? this.busyMs / audioMs : null,
      currentFrame,
      sampleRate,
      core: this.lc ? JSON.parse(this.lc.stats()) : null,
    };
  }
}

registerProcessor(PROCESSOR_NAME, StairstepCrusher);
