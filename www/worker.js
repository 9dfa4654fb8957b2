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
// The stage tapped in the latest render (its index), or null: then `output` and `error` below mean the signal after
// that stage and the error it alone adds (the core's `tap` and `tap-error`).
let tapped = null;
const signalName = (which) => (tapped === null ? which : { output: 'tap', error: 'tap-error' }[which] ?? which);
function envelopes(v) {
  const n = Math.max(1, Math.min(renderedChannels, MAX_WAVE_LANES));
  const env = { input: [], output: [] };
  for (let c = 0; c < n; c++) {
    env.input.push(session.envelope('input', c, v.start, v.end, v.columns));
    env.output.push(session.envelope(signalName('output'), c, v.start, v.end, v.columns));
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
    for (let c = 0; c < renderedChannels; c++) channels.push(session.samples(signalName('error'), c));
    reply('error-signal', { id: msg.id, channels }, channels.map((a) => a.buffer));
  },

  render(msg) {
    const t0 = performance.now();
    session.setPreset(msg.preset);
    const report = JSON.parse(session.render());
    // A tapped stage (msg.tap, an index): the views and the audition show the signal after it.
    tapped = null;
    let tap = null;
    if (msg.tap !== null && msg.tap !== undefined && msg.tap < report.stages.length) {
      tap = JSON.parse(session.tap(msg.tap));
      tapped = msg.tap;
    }
    const v = msg.view;
    const spectra = {};
    for (const which of ['input', 'output', 'error']) spectra[which] = session.spectrum(signalName(which), v.fftSize, v.window);
    renderedChannels = report.channels;
    const env = envelopes(v);
    const output = [];
    for (let c = 0; c < report.channels; c++) output.push(session.samples(signalName('output'), c));
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
    reply('rendered', { id: msg.id, report, headroom, spectra, env, output, file, loudness, ms, tap }, transfer);
  },

  // The spectrogram of the view window at the canvas's resolution (see www/js/views/spectrogram.js): frames × rows
  // dBFS, transferred.
  spectrogram(msg) {
    const t0 = performance.now();
    const db = session.spectrogram(signalName(msg.which), msg.start, msg.end, msg.size, msg.columns, msg.rows, msg.log,
      msg.lo, msg.hi);
    reply('spectrogram', { id: msg.id, db, tapped, ms: performance.now() - t0 }, [db.buffer]);
  },

  // The chain's static transfer curve (up to stage msg.upto) over msg.lo … msg.hi, and a quantizing stage's code
  // histogram (see www/js/views/transfer.js and codes.js).
  transfer(msg) {
    const c = JSON.parse(session.transfer(msg.upto, msg.lo, msg.hi, msg.points));
    const output = Float32Array.from(c.output);
    reply('transfer', { id: msg.id, output, levels: c.levels, applied: c.applied, notes: c.notes }, [output.buffer]);
  },

  codes(msg) {
    reply('codes', { id: msg.id, histogram: JSON.parse(session.codes(msg.stage, msg.bins)) });
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
    if (tapped !== null) session.tap(tapped); // the render dropped the tap the views show
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
