// Stairstep processing worker, a classic worker script. The build prepends wasm-bindgen's no-modules glue, which
// defines the global `wasm_bindgen` (with `initSync` and `Session`).
// All DSP runs here, so the page never freezes. Messages in: init, load, render, error (the error signal) and more
// (see `handlers`); out: ready, loaded, rendered, error-signal, error.

const { initSync, Session } = wasm_bindgen;
let session = null;
let wasm = null; // the module's exports (for its memory's size)

function reply(type, payload, transfer = []) {
  self.postMessage({ type, ...payload }, transfer);
}

function describe(info) {
  const d = JSON.parse(info);
  const input = [];
  for (let c = 0; c < d.channels; c++) input.push(session.samples('input', c));
  return { info: d, input };
}

// Min/max envelopes of the chain's input and output for the waveform: one per channel of the latest render (the
// worker's own count, so that a zoom sent while a render that changes it is under way cannot mismatch), at most
// MAX_WAVE_LANES.
const MAX_WAVE_LANES = 8;
let renderedChannels = 1;
// The chain input's loudness (LUFS), kept for the preparation (as JSON) it was measured with; dropped on a load.
let inputLoudness = null;
function envelopes(v) {
  const n = Math.max(1, Math.min(renderedChannels, MAX_WAVE_LANES));
  const env = { input: [], output: [] };
  for (let c = 0; c < n; c++) {
    env.input.push(session.envelope('input', c, v.start, v.end, v.columns));
    env.output.push(session.envelope('output', c, v.start, v.end, v.columns));
  }
  return env;
}

const handlers = {
  init(msg) {
    wasm = initSync({ module: msg.wasm });
    session = new Session();
    reply('ready', { id: msg.id, demos: JSON.parse(Session.demoNames()), presets: JSON.parse(Session.builtinPresets()),
      schema: JSON.parse(Session.stageSchema()) });
  },

  load(msg) {
    let info;
    if (msg.demo) info = session.loadDemo(msg.demo);
    else if (msg.wav) info = session.loadWav(new Uint8Array(msg.wav));
    else if (msg.file) info = session.loadFile(new Uint8Array(msg.file), msg.maxSamples);
    else info = session.loadSamples(msg.sampleRate, msg.channels, msg.interleaved);
    const d = describe(info);
    if (msg.decoder) Object.assign(d.info, msg.decoder); // decoded by the browser: which decoder, at which rate
    inputLoudness = null;
    reply('loaded', { id: msg.id, ...d, name: msg.name }, d.input.map((a) => a.buffer));
  },

  // The error signal (audition − chain input) of the latest render, from the core (NaN → 0, ±Inf → ±1 as the chain
  // sanitizes its input), for listening to the error alone.
  error(msg) {
    const channels = [];
    for (let c = 0; c < renderedChannels; c++) channels.push(session.errorSignal(c));
    reply('error-signal', { id: msg.id, channels }, channels.map((a) => a.buffer));
  },

  render(msg) {
    const t0 = performance.now();
    session.setPreset(msg.preset);
    const report = JSON.parse(session.render());
    const v = msg.view;
    const spectra = {};
    for (const which of ['input', 'output', 'error']) spectra[which] = session.spectrum(which, v.fftSize, v.window);
    renderedChannels = report.channels;
    const env = envelopes(v);
    const output = [];
    for (let c = 0; c < report.channels; c++) output.push(session.samples('output', c));
    const preset = JSON.parse(msg.preset);
    const q = preset.stages.find((st) => st.kind === 'quantize' && !st.bypass && !st.levels);
    const headroom = JSON.parse(session.headroom(q ? (q.bits ?? 8) : 16, 0));
    let file = null;
    if (msg.withFile) file = session.exportFile();
    // Integrated loudness (BS.1770, by the core) of the render and of the chain's input, for loudness-matched
    // listening; only when asked (a long sound takes a while). null when it cannot be measured.
    let loudness = null;
    if (msg.loudness) {
      const key = JSON.stringify(preset.prep ?? null);
      if (inputLoudness?.key !== key) inputLoudness = { key, value: session.loudness('input') ?? null };
      loudness = { input: inputLoudness.value, output: session.loudness('output') ?? null };
    }
    const ms = performance.now() - t0;
    const transfer = [...Object.values(spectra), ...env.input, ...env.output, ...output].map((a) => a.buffer);
    if (file) transfer.push(file.buffer);
    reply('rendered', { id: msg.id, report, headroom, spectra, env, output, file, loudness, ms }, transfer);
  },

  // The size of the module's memory (it only grows: the high-water mark of everything so far), in bytes.
  memory(msg) {
    reply('memory', { id: msg.id, wasmBytes: wasm.memory.buffer.byteLength });
  },

  normalize(msg) {
    reply('normalized', { id: msg.id, preset: JSON.parse(Session.normalizePreset(msg.preset)) });
  },

  sweep(msg) {
    reply('swept', { id: msg.id, points: JSON.parse(session.sweep(msg.maxSeconds)) });
  },

  envelope(msg) {
    const env = envelopes(msg.view);
    reply('envelope', { id: msg.id, env }, [...env.input, ...env.output].map((a) => a.buffer));
  },

  export(msg) {
    session.setPreset(msg.preset);
    session.render();
    const file = session.exportFile();
    reply('exported', { id: msg.id, file, extension: session.exportExtension() }, [file.buffer]);
  },
};

self.onmessage = (e) => {
  const msg = e.data;
  try {
    handlers[msg.type](msg);
  } catch (err) {
    reply('error', { id: msg.id, request: msg.type, message: String(err && err.message ? err.message : err) });
  }
};
