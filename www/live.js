// Stairstep live plug-in, main-thread side: a classic script (no modules, no network) that defines the global
// `Stairstep`. It loads the crusher's AudioWorklet (www/worklet.js, built with the wasm-bindgen glue) into an audio
// context and creates, configures and queries 'stairstep-crusher' nodes.
//
//   const node = await Stairstep.createCrusherNode(ctx, { wasmBytes, workletSource, preset: 'handheld' });
//   source.connect(node).connect(ctx.destination);
//   node.parameters.get('resolution').value = 4;           // AudioParams: gain, resolution, rate, dither, mix, output
//   await Stairstep.setPreset(node, presetObject);          // discrete changes go over the port
//   const s = await Stairstep.getStats(node);               // blocks, droppedBlocks, lateBlocks, core.underrunFrames…
//
// Loading the worklet: audioWorklet.addModule() needs a URL. Pages served over http(s) can use a blob: URL (CSP
// `script-src blob:`). A page opened from file:// cannot: Chromium refuses every blob: worklet module there (its
// origin is opaque; the same is true of module workers), whatever the CSP says. A data: URL works from file://, as
// long as the page's CSP allows data: in script-src. loadWorklet() tries data: first on file:// pages and blob:
// first elsewhere, falling back to the other.
//
// The wasm: pass `wasmBytes` (compiled here once per buffer, asynchronously, and handed to the worklet as a
// WebAssembly.Module in processorOptions) or `wasmModule`; with the standalone dist/stairstep-worklet.js, which
// carries its own wasm, pass neither (and `workletUrl` instead of `workletSource`).
(function (global) {
  'use strict';

  const PROCESSOR_NAME = 'stairstep-crusher';
  const loading = new WeakMap(); // BaseAudioContext -> Promise<void>
  const compiled = new WeakMap(); // ArrayBuffer -> Promise<WebAssembly.Module>
  const links = new WeakMap(); // AudioWorkletNode -> { pending, nextId }

  function toBase64(text) {
    const bytes = new TextEncoder().encode(text);
    let bin = '';
    for (let i = 0; i < bytes.length; i += 0x8000) bin += String.fromCharCode.apply(null, bytes.subarray(i, i + 0x8000));
    return btoa(bin);
  }

  // loadWorklet(ctx, { workletSource?: string, workletUrl?: string }) -> Promise<void>
  // Adds the worklet module to `ctx` once (later calls return the same promise).
  function loadWorklet(ctx, { workletSource, workletUrl } = {}) {
    let done = loading.get(ctx);
    if (done) return done;
    done = (async () => {
      if (workletUrl) return ctx.audioWorklet.addModule(workletUrl);
      if (typeof workletSource !== 'string') {
        throw new TypeError('Stairstep.loadWorklet: give workletSource (the worklet text) or workletUrl');
      }
      const viaBlob = async () => {
        const url = URL.createObjectURL(new Blob([workletSource], { type: 'text/javascript' }));
        try { await ctx.audioWorklet.addModule(url); } finally { URL.revokeObjectURL(url); }
      };
      const viaData = () => ctx.audioWorklet.addModule(`data:text/javascript;base64,${toBase64(workletSource)}`);
      const order = global.location?.protocol === 'file:' ? [viaData, viaBlob] : [viaBlob, viaData];
      const errors = [];
      for (const attempt of order) {
        try { return await attempt(); } catch (err) { errors.push(String(err?.message ?? err)); }
      }
      throw new Error(`could not load the Stairstep worklet (${errors.join('; ')}). ` +
        'From a file:// page the Content-Security-Policy must allow data: in script-src.');
    })();
    loading.set(ctx, done);
    done.catch(() => loading.delete(ctx));
    return done;
  }

  function compileWasm(bytes) {
    const buffer = bytes instanceof ArrayBuffer ? bytes : bytes.buffer;
    if (buffer.byteLength === 0) {
      return Promise.reject(new Error('Stairstep: wasmBytes is empty (transferred to a worker?); pass wasmModule, ' +
        'e.g. WebAssembly.compile(bytes) made before the transfer'));
    }
    let m = compiled.get(buffer);
    if (!m) {
      m = WebAssembly.compile(bytes);
      compiled.set(buffer, m);
    }
    return m;
  }

  // The port protocol: requests carry an id, replies {id, ok, ...}; see www/worklet.js.
  function attach(node) {
    const link = { pending: new Map(), nextId: 1 };
    let settle;
    link.ready = new Promise((resolve, reject) => { settle = { resolve, reject }; });
    node.port.onmessage = (e) => {
      const msg = e.data ?? {};
      if (msg.id !== undefined) {
        const p = link.pending.get(msg.id);
        if (!p) return;
        link.pending.delete(msg.id);
        if (msg.ok) p.resolve(msg); else p.reject(new Error(msg.message));
      } else if (msg.type === 'ready') {
        settle.resolve(msg);
      } else if (msg.type === 'latency') {
        if (node.stairstep) node.stairstep.latencyFrames = msg.latencyFrames;
        node.dispatchEvent(new CustomEvent('stairstep-latency', { detail: msg }));
      } else if (msg.type === 'error') {
        if (msg.fatal) settle.reject(new Error(msg.message));
        node.dispatchEvent(new CustomEvent('stairstep-error', { detail: msg }));
      }
    };
    node.onprocessorerror = () => settle.reject(new Error('the Stairstep processor failed'));
    links.set(node, link);
    return link;
  }

  function request(node, msg) {
    const link = links.get(node);
    if (!link) return Promise.reject(new Error('not a node made by Stairstep.createCrusherNode'));
    const id = link.nextId++;
    return new Promise((resolve, reject) => {
      link.pending.set(id, { resolve, reject });
      node.port.postMessage({ ...msg, id });
    });
  }

  // createCrusherNode(ctx, {
  //   wasmBytes?: ArrayBuffer | Uint8Array, wasmModule?: WebAssembly.Module,
  //   workletSource?: string, workletUrl?: string,
  //   preset?: object | string (JSON or a built-in name; default 'handheld'),
  //   channels?: number (default 2), params?: { gain, resolution, rate, dither, mix, output } initial values
  // }) -> Promise<AudioWorkletNode>
  // Resolves once the chain is built, with node.stairstep = { latencyFrames, exportRate, channels, sampleRate,
  // preset } (latencyFrames is kept up to date); rejects with the core's message on a bad preset.
  // Events on the node: 'stairstep-error' and 'stairstep-latency' (CustomEvent, detail = the message).
  async function createCrusherNode(ctx, options = {}) {
    const { wasmBytes, wasmModule, workletSource, workletUrl, preset, channels = 2, params = {} } = options;
    await loadWorklet(ctx, { workletSource, workletUrl });
    const wasm = wasmModule ?? (wasmBytes ? await compileWasm(wasmBytes) : undefined);
    const realtime = !(typeof OfflineAudioContext !== 'undefined' && ctx instanceof OfflineAudioContext);
    const node = new AudioWorkletNode(ctx, PROCESSOR_NAME, {
      numberOfInputs: 1,
      numberOfOutputs: 1,
      channelCount: channels,
      channelCountMode: 'explicit',
      channelInterpretation: 'speakers',
      outputChannelCount: [channels],
      parameterData: params,
      processorOptions: { preset, wasm, channels, realtime },
    });
    const ready = await attach(node).ready;
    node.stairstep = { latencyFrames: ready.latencyFrames, exportRate: ready.exportRate, channels: ready.channels,
      sampleRate: ready.sampleRate, preset: ready.preset };
    return node;
  }

  // Each of these resolves with {latencyFrames, preset}: the new chain's latency (node.stairstep.latencyFrames follows
  // when it has taken over, with a 'stairstep-latency' event) and the preset now in force; or rejects with the core's
  // message (the old chain keeps running).
  const setPreset = (node, preset) => request(node, { type: 'preset', preset }).then(track(node));
  const setQuantizer = (node, stage) => request(node, { type: 'quantizer', stage }).then(track(node));
  const setCurve = (node, overflow) => request(node, { type: 'curve', overflow }).then(track(node));
  const patchStage = (node, kind, patch) => request(node, { type: 'stage', kind, patch }).then(track(node));
  const reset = (node) => request(node, { type: 'reset' }).then(track(node));
  const dispose = (node) => request(node, { type: 'dispose' }).then(() => undefined);
  function track(node) {
    return (msg) => {
      const info = { latencyFrames: msg.latencyFrames, preset: msg.preset };
      if (node.stairstep) node.stairstep.preset = msg.preset;
      return info;
    };
  }

  // getStats(node) -> Promise<stats>: the worklet's counters (see statsNow in www/worklet.js), plus `playback`, the
  // context's own output statistics where the browser has them (AudioContext.playbackStats: underrunEvents,
  // underrunDuration, …), else null.
  async function getStats(node) {
    const { stats } = await request(node, { type: 'stats' });
    const ps = node.context.playbackStats;
    stats.playback = null;
    if (ps) {
      stats.playback = {};
      for (const k of ['underrunDuration', 'underrunEvents', 'totalDuration', 'averageLatency', 'minimumLatency',
        'maximumLatency']) {
        if (typeof ps[k] === 'number') stats.playback[k] = ps[k];
      }
    }
    return stats;
  }

  global.Stairstep = Object.freeze({
    PROCESSOR_NAME,
    loadWorklet,
    createCrusherNode,
    setPreset,
    setQuantizer,
    setCurve,
    patchStage,
    reset,
    getStats,
    dispose,
  });
})(globalThis);
