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
    else info = session.loadSamples(msg.sampleRate, msg.channels, msg.interleaved);
    const d = describe(info);
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

// The format budget (see www/js/budget-panel.js): its candidates measured one per task, each followed by a progress
// message and a yield to the message queue, so that a render, a load or a cancel sent meanwhile is handled between
// two candidates. A newer budget request, a cancel or a load ends the job; its request is answered "cancelled".
let budgetJob = null;
const budgetTick = new MessageChannel(); // a zero-delay yield (nested timers would be clamped to 4 ms each)
budgetTick.port1.onmessage = (e) => { if (budgetJob && e.data === budgetJob.id) budgetStep(); };
function budgetEnd(reason) {
  if (budgetJob) reply('error', { id: budgetJob.id, request: 'budget', message: reason });
  budgetJob = null;
}
function budgetStep() {
  const job = budgetJob;
  if (job.next < job.specs.length) {
    try {
      job.measured.push(JSON.parse(session.budgetMeasure(job.preset, job.next)));
    } catch (err) {
      job.skipped.push({ id: job.specs[job.next].id, reason: String(err && err.message ? err.message : err) });
    }
    job.next++;
    reply('budget-progress', { token: job.token, done: job.next, total: job.specs.length });
    if (job.next < job.specs.length) { budgetTick.port2.postMessage(job.id); return; }
  }
  budgetJob = null;
  reply('budgeted', { id: job.id, source_rate: job.source_rate, duration_s: job.duration_s, candidates: job.measured,
    skipped: job.skipped, ms: performance.now() - job.t0 });
}
Object.assign(handlers, {
  budget(msg) {
    budgetEnd('cancelled');
    const t0 = performance.now();
    const list = JSON.parse(session.budgetCandidates(msg.preset));
    budgetJob = { id: msg.id, token: msg.token, preset: msg.preset, specs: list.candidates, source_rate: list.source_rate,
      duration_s: list.duration_s, measured: [], skipped: [], next: 0, t0 };
    reply('budget-progress', { token: msg.token, done: 0, total: list.candidates.length });
    budgetTick.port2.postMessage(msg.id);
  },
  'budget-cancel'(msg) {
    budgetEnd('cancelled');
    reply('budget-cancelled', { id: msg.id });
  },
  'budget-pick'(msg) {
    reply('budget-picked', { id: msg.id, ...JSON.parse(Session.budgetPick(msg.candidates, msg.score, msg.limit)) });
  },
});
const loadHandler = handlers.load;
handlers.load = (msg) => { budgetEnd('cancelled: a new sound'); loadHandler(msg); };

self.onmessage = (e) => {
  const msg = e.data;
  try {
    handlers[msg.type](msg);
  } catch (err) {
    reply('error', { id: msg.id, request: msg.type, message: String(err && err.message ? err.message : err) });
  }
};
