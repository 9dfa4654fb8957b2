// Stairstep page: user interface, drawing and audition. All DSP runs in the worker (the Rust core compiled to wasm).
// Sections: stage schema · state · worker · chain editor · export panel · views · audition · start-up.

'use strict';

// ---------------------------------------------------------------------------------------------------------------------
// Stage schema: what the chain editor shows for each stage kind. Ranges mirror the core's validation; the core has the
// last word (its error messages name the field and range).
// ---------------------------------------------------------------------------------------------------------------------
const E = (options) => ({ type: 'enum', options });
const LAWS = E(['mulaw', 'alaw']);
const STAGES = {
  gain: {
    label: 'Gain and overflow',
    fields: [
      { key: 'gain_db', label: 'Gain', type: 'float', min: -60, max: 60, step: 0.1, unit: 'dB', def: 0 },
      { key: 'overflow', label: 'Beyond ±1', ...E(['clip', 'wrap', 'fold', 'saturate']), def: 'clip' },
    ],
  },
  rate: {
    label: 'Sample-rate reduction',
    fields: [
      { key: 'rate_hz', label: 'Rate', type: 'int', min: 1, max: 768000, step: 1, unit: 'Hz', def: 11025,
        range: [1000, 48000] },
      { key: 'mode', label: 'Mode', ...E(['hold', 'clean']), def: 'hold' },
    ],
  },
  quantize: {
    label: 'Uniform quantizer',
    fields: [
      { key: 'bits', label: 'Bits', type: 'int', min: 1, max: 24, unit: 'bit', def: 8 },
      { key: 'grid', label: 'Grid', ...E(['mid-tread', 'mid-rise']), def: 'mid-tread' },
      { key: 'rounding', label: 'Rounding', ...E(['nearest', 'truncate']), def: 'nearest' },
      { key: 'dither', label: 'Dither', ...E(['none', 'rpdf', 'tpdf', 'highpass-tpdf']), def: 'none' },
      { key: 'dither_peak_lsb', label: 'Dither peak', type: 'float', min: 0, max: 16, step: 0.05, unit: 'LSB',
        def: null, placeholder: 'standard' },
      { key: 'shaping', label: 'Noise shaping', ...E(['none', 'first-order', 'second-order', 'ewt5', 'ewt9']),
        def: 'none' },
    ],
  },
  g711: {
    label: 'G.711 (8-bit μ-law / A-law)',
    fields: [{ key: 'law', label: 'Law', ...LAWS, def: 'mulaw' }],
  },
  compand: {
    label: 'Companding curve',
    fields: [
      { key: 'law', label: 'Law', ...LAWS, def: 'mulaw' },
      { key: 'mu', label: 'μ', type: 'float', min: 1, max: 100000, step: 1, unit: '', def: 255,
        when: (s) => (s.law ?? 'mulaw') === 'mulaw' },
      { key: 'a', label: 'A', type: 'float', min: 1, max: 1000, step: 0.1, unit: '', def: 87.6,
        when: (s) => s.law === 'alaw' },
      { key: 'bits', label: 'Bits', type: 'int', min: 2, max: 24, unit: 'bit', def: 8 },
    ],
  },
  adpcm: {
    label: 'IMA ADPCM round trip (4-bit)',
    fields: [
      { key: 'samples_per_block', label: 'Block', type: 'int', min: 9, max: 65529, step: 8, unit: 'samples', def: 505,
        range: [9, 4089] },
    ],
  },
  minifloat: {
    label: 'Minifloat',
    fields: [
      { key: 'exponent_bits', label: 'Exponent', type: 'int', min: 1, max: 8, unit: 'bit', def: 4 },
      { key: 'mantissa_bits', label: 'Mantissa', type: 'int', min: 0, max: 23, unit: 'bit', def: 3 },
      { key: 'bias', label: 'Bias', type: 'int', min: 0, max: 255, unit: '', def: null, placeholder: 'IEEE' },
      { key: 'subnormals', label: 'Subnormals', type: 'bool', def: true },
    ],
  },
};

// Export formats: the `type` picks one of these, its fields are edited like a stage's.
const EXPORT_TYPES = {
  wav: {
    label: 'WAV',
    fields: [
      { key: 'encoding', label: 'Encoding',
        ...E(['pcm-u8', 'pcm-s16', 'pcm-s24', 'pcm-s32', 'float32', 'mulaw', 'alaw', 'ima-adpcm']), def: 'pcm-s16' },
      { key: 'block_align', label: 'Block align', type: 'int', min: 8, max: 65532, step: 4, unit: 'B', def: null,
        placeholder: '256 × ch', when: (s) => s.encoding === 'ima-adpcm' },
    ],
  },
  raw: {
    label: 'Raw samples (no header)',
    fields: [
      { key: 'bits', label: 'Bits', ...E([1, 2, 4, 8, 16]), numeric: true, def: 8 },
      { key: 'signed', label: 'Signed', type: 'bool', def: true },
      { key: 'endian', label: 'Byte order', ...E(['little', 'big']), def: 'little', when: (s) => +s.bits === 16 },
      { key: 'bit_order', label: 'Bit order', ...E(['msb-first', 'lsb-first']), def: 'msb-first',
        when: (s) => +s.bits < 8 },
    ],
  },
  'c-array': {
    label: 'C array',
    fields: [
      { key: 'element', label: 'Element', ...E(['int8', 'uint8', 'int16']), def: 'int8' },
      { key: 'name', label: 'Name', type: 'text', def: 'sound' },
    ],
  },
};

let BUILTIN_PRESETS = []; // from the core (Session.builtinPresets), shared with the CLI

// ---------------------------------------------------------------------------------------------------------------------
// State
// ---------------------------------------------------------------------------------------------------------------------
const $ = (id) => document.getElementById(id);
const state = {
  sourceName: 'chime-loop',
  info: null, // { sampleRate, channels, frames }
  input: null, // Float32Array per channel
  output: null,
  report: null,
  spectra: null,
  env: null,
  preset: { format: 'stairstep-preset', version: 1, name: 'Untitled', seed: 1,
            stages: [{ kind: 'quantize', bits: 8 }], export: { type: 'wav', encoding: 'pcm-s16' } },
  view: { start: 0, end: 0 },
  loop: null, // { start, end } in frames, or null for the whole sound
  fftSize: 4096,
  window: 'hann',
};
window.stairstep = state; // for tests and the curious

function setStatus(text, kind = 'info') {
  const s = $('status');
  s.textContent = text;
  s.dataset.kind = kind;
}

// ---------------------------------------------------------------------------------------------------------------------
// Worker
// ---------------------------------------------------------------------------------------------------------------------
function decodeBase64(b64) {
  const bin = atob(b64.trim());
  const out = new Uint8Array(bin.length);
  for (let i = 0; i < bin.length; i++) out[i] = bin.charCodeAt(i);
  return out;
}

const wasmBytes = decodeBase64($('wasm-b64').textContent);
const wasmBytesLive = wasmBytes.slice(); // the worker takes the first copy; the live worklet gets this one
const workerUrl = URL.createObjectURL(new Blob([$('worker-src').textContent], { type: 'text/javascript' }));
const worker = new Worker(workerUrl); // classic: module workers from blob: URLs fail on file:// pages
const waiting = new Map();
let nextId = 1;

worker.onmessage = (e) => {
  const msg = e.data;
  const w = waiting.get(msg.id);
  if (!w) { if (msg.type === 'error') setStatus(msg.message, 'error'); return; }
  waiting.delete(msg.id);
  if (msg.type === 'error') w.reject(new Error(msg.message)); else w.resolve(msg);
};
worker.onerror = (e) => setStatus(`Processing worker failed: ${e.message}`, 'error');

// Sends a request to the worker; resolves with its reply (every reply carries the request's id).
function call(type, payload = {}, transfer = []) {
  const id = nextId++;
  return new Promise((resolve, reject) => {
    waiting.set(id, { resolve, reject });
    worker.postMessage({ type, id, ...payload }, transfer);
  });
}

// Renders are coalesced: while one runs, only the newest request waits.
let rendering = false;
let pendingRender = false;
function requestRender() {
  live.presetChanged();
  if (rendering) { pendingRender = true; return; }
  rendering = true;
  pendingRender = false;
  const view = { ...viewRange(), columns: waveColumns(), fftSize: state.fftSize, window: state.window };
  call('render', { preset: JSON.stringify(state.preset), view })
    .then((msg) => {
      state.report = msg.report;
      state.headroom = msg.headroom;
      state.spectra = msg.spectra;
      state.env = msg.env;
      state.output = msg.output;
      if (!msg.referenceSame) state.reference = msg.reference.length ? msg.reference : null;
      state.errorSignal = null;
      state.renderMs = msg.ms;
      markStageErrors(null);
      drawAll();
      audio.refresh();
      setStatus(`Rendered in ${msg.ms.toFixed(0)} ms`);
      document.body.dataset.rendered = String((+document.body.dataset.rendered || 0) + 1);
    })
    .catch((err) => { markStageErrors(err.message); setStatus(err.message, 'error'); })
    .finally(() => { rendering = false; if (pendingRender) requestRender(); });
}

async function loadSource(payload, name, transfer = []) {
  try {
    const msg = await call('load', { ...payload, name }, transfer);
    state.info = msg.info;
    state.input = msg.input;
    state.sourceName = name;
    // The sound menu names what is loaded: a demo, or the file.
    const menu = $('demo');
    menu.querySelector('option[data-file]')?.remove();
    if (payload.demo) menu.value = payload.demo;
    else { menu.prepend(el('option', { value: '', 'data-file': '' }, `file: ${name}`)); menu.value = ''; }
    state.view = { start: 0, end: msg.info.frames };
    state.loop = null;
    audio.newSource();
    requestSweep();
    $('source-info').textContent =
      `${msg.info.channels === 1 ? 'mono' : msg.info.channels === 2 ? 'stereo' : msg.info.channels + ' ch'}, ` +
      `${msg.info.sampleRate.toLocaleString('en')} Hz, ${(msg.info.frames / msg.info.sampleRate).toFixed(2)} s`;
    requestRender();
  } catch (err) {
    setStatus(`Could not load ${name}: ${err.message}. The current sound is unchanged.`, 'error');
  }
}

// ---------------------------------------------------------------------------------------------------------------------
// Chain editor
// ---------------------------------------------------------------------------------------------------------------------
function el(tag, attrs = {}, ...children) {
  const e = document.createElement(tag);
  for (const [k, v] of Object.entries(attrs)) {
    if (k === 'class') e.className = v;
    else if (k.startsWith('on')) e.addEventListener(k.slice(2), v);
    else if (v !== null && v !== undefined && v !== false) e.setAttribute(k, v === true ? '' : v);
  }
  for (const c of children) e.append(c);
  return e;
}

function fieldControl(stage, f, onChange, id) {
  const value = stage[f.key] ?? f.def;
  if (f.type === 'enum') {
    // An enum can show or hide other fields (see `when`), so the stage is redrawn, keeping the focus here.
    const sel = el('select', { id, onchange: () => {
      stage[f.key] = f.numeric ? +sel.value : sel.value;
      onChange(true);
      $(id)?.focus();
    } }, ...f.options.map((o) => el('option', { value: o, selected: String(o) === String(value) }, String(o))));
    return el('label', { class: 'field', for: id }, el('span', {}, f.label), sel);
  }
  if (f.type === 'text') {
    const box = el('input', { id, type: 'text', value: value ?? '', spellcheck: 'false',
      onchange: () => { stage[f.key] = box.value; onChange(); } });
    return el('label', { class: 'field', for: id }, el('span', {}, f.label), box);
  }
  if (f.type === 'bool') {
    const box = el('input', { id, type: 'checkbox', checked: !!value,
      onchange: () => { stage[f.key] = box.checked; onChange(true); $(id)?.focus(); } });
    return el('label', { class: 'field check', for: id }, box, el('span', {}, f.label));
  }
  const step = f.step ?? (f.type === 'int' ? 1 : 0.1);
  const num = el('input', { id, type: 'number', min: f.min, max: f.max, step, value: value ?? '',
    placeholder: f.placeholder ?? '', 'aria-label': `${f.label} in ${f.unit}` });
  const [rmin, rmax] = f.range ?? [f.min, f.max];
  const range = el('input', { type: 'range', min: rmin, max: rmax, step, value: value ?? rmin, tabindex: -1,
    'aria-hidden': 'true' });
  const commit = (text) => {
    if (text === '' && f.def === null) { delete stage[f.key]; onChange(); return; }
    const v = f.type === 'int' ? parseInt(text, 10) : parseFloat(text);
    if (Number.isFinite(v)) { stage[f.key] = v; range.value = v; onChange(); }
  };
  num.addEventListener('change', () => commit(num.value));
  range.addEventListener('input', () => { num.value = range.value; commit(range.value); });
  return el('label', { class: 'field', for: id }, el('span', {}, f.label),
    el('span', { class: 'numeric' }, range, num, el('span', { class: 'unit' }, f.unit)));
}

function renderChain() {
  const box = $('chain');
  box.replaceChildren();
  state.preset.stages.forEach((stage, i) => {
    const schema = STAGES[stage.kind];
    // Enum and checkbox changes can show or hide other fields, so they redraw the stage; typing and dragging do not
    // (redrawing would take the focus away).
    const changed = (structural) => { if (structural) renderChain(); requestRender(); };
    const head = el('div', { class: 'stage-head' },
      el('span', { class: 'stage-index' }, String(i + 1)),
      el('strong', {}, schema ? schema.label : stage.kind),
      el('label', { class: 'check' }, el('input', { type: 'checkbox', checked: !!stage.bypass,
        onchange: (e) => { stage.bypass = e.target.checked; if (!stage.bypass) delete stage.bypass; renderChain(); requestRender(); } }),
        'Bypass'),
      el('button', { type: 'button', title: 'Move up', 'aria-label': `Move stage ${i + 1} up`, disabled: i === 0,
        onclick: () => moveStage(i, -1) }, '↑'),
      el('button', { type: 'button', title: 'Move down', 'aria-label': `Move stage ${i + 1} down`,
        disabled: i === state.preset.stages.length - 1, onclick: () => moveStage(i, 1) }, '↓'),
      el('button', { type: 'button', title: 'Remove', 'aria-label': `Remove stage ${i + 1}`,
        onclick: () => { state.preset.stages.splice(i, 1); renderChain(); requestRender(); } }, '✕'));
    const body = el('div', { class: 'stage-body' },
      ...(schema ? schema.fields.filter((f) => !f.when || f.when(stage))
        .map((f) => fieldControl(stage, f, changed, `f-${i}-${f.key}`)) : []));
    box.append(el('div', { class: `stage${stage.bypass ? ' bypassed' : ''}`, 'data-kind': stage.kind }, head, body,
      el('div', { class: 'stage-error', role: 'alert' })));
  });
}

function moveStage(i, d) {
  const s = state.preset.stages;
  [s[i], s[i + d]] = [s[i + d], s[i]];
  renderChain();
  requestRender();
}

function markStageErrors(message) {
  document.querySelectorAll('.stage-error').forEach((e) => { e.textContent = ''; });
  if (!message) return;
  const m = /stages\[(\d+)\]/.exec(message);
  const cards = document.querySelectorAll('.stage');
  if (m && cards[+m[1]]) cards[+m[1]].querySelector('.stage-error').textContent = message;
}

function setupChainTools() {
  const add = $('add-kind');
  for (const [k, s] of Object.entries(STAGES)) add.append(el('option', { value: k }, s.label));
  $('add-stage').onclick = () => {
    const kind = add.value;
    const stage = { kind };
    for (const f of STAGES[kind].fields) if (f.def !== null && f.def !== undefined) stage[f.key] = f.def;
    state.preset.stages.push(stage);
    renderChain();
    requestRender();
  };
  const sel = $('preset-builtin');
  sel.onchange = () => {
    if (sel.value === '') return;
    applyPreset(structuredClone(BUILTIN_PRESETS[+sel.value]));
    sel.value = '';
  };
  $('preset-save').onclick = () => {
    const text = JSON.stringify(state.preset, null, 2) + '\n';
    download(new Blob([text], { type: 'application/json' }), `${slug(state.preset.name || 'preset')}.json`);
  };
  $('preset-file').onchange = async (e) => {
    const f = e.target.files[0];
    e.target.value = '';
    if (!f) return;
    try {
      const p = JSON.parse(await f.text());
      if (await applyPreset(p)) setStatus(`Loaded preset ${f.name}`);
    } catch (err) {
      setStatus(`Could not load preset ${f.name}: ${err.message}`, 'error');
    }
  };
}

// Takes a preset (from a file, the built-ins or a script) through the core's validation, which also fills in every
// default, so the editor always shows the whole truth. On error the current preset stays.
async function applyPreset(p) {
  try {
    const msg = await call('normalize', { preset: JSON.stringify(p) });
    state.preset = msg.preset;
    state.preset.prep ??= {};
  } catch (err) {
    setStatus(`Preset not loaded: ${err.message}`, 'error');
    return false;
  }
  renderPrep();
  renderChain();
  renderExport();
  requestRender();
  return true;
}
window.stairstepApplyPreset = applyPreset; // for tests and scripting

// ---------------------------------------------------------------------------------------------------------------------
// Preparation panel: channels, trim, fades, normalisation, loop export (the preset's `prep`)
// ---------------------------------------------------------------------------------------------------------------------
const CHANNEL_MODES = {
  keep: 'keep', 'mono, sum −3 dB': { mono: 'sum-3db' }, 'mono, sum −6 dB': { mono: 'sum-6db' },
  'mono, average': { mono: 'average' }, 'left only': { mono: 'left' }, 'right only': { mono: 'right' },
  'mono → stereo': 'duplicate',
};
const CURVES = ['linear', 'equal-power', 'exponential'];

function num(id, value, min, max, step, unit, onChange) {
  const box = el('input', { id, type: 'number', min, max, step, value, 'aria-label': `${id} in ${unit}`,
    onchange: () => { const v = parseFloat(box.value); if (Number.isFinite(v)) onChange(v); } });
  return [box, el('span', { class: 'unit' }, unit)];
}

function renderPrep() {
  const prep = state.preset.prep ?? (state.preset.prep = {});
  const changed = () => { renderPrep(); requestRender(); };
  const row = (label, ...controls) => el('div', { class: 'prep-row' }, el('span', {}, label), el('span', { class: 'inline' }, ...controls));
  const current = Object.keys(CHANNEL_MODES).find((k) => JSON.stringify(CHANNEL_MODES[k]) === JSON.stringify(prep.channels ?? 'keep'));
  const chSel = el('select', { id: 'prep-channels', 'aria-label': 'Channels',
    onchange: () => { prep.channels = CHANNEL_MODES[chSel.value]; changed(); $('prep-channels').focus(); } },
  ...Object.keys(CHANNEL_MODES).map((k) => el('option', { value: k, selected: k === current }, k)));
  const toggle = (key, make, label) => el('label', { class: 'check' }, el('input', { type: 'checkbox', id: `prep-${key}-on`,
    checked: !!prep[key], onchange: (e) => { if (e.target.checked) prep[key] = make(); else delete prep[key]; changed(); $(`prep-${key}-on`).focus(); } }), label);
  const trim = prep.trim;
  const fade = (key, label) => {
    const f = prep[key];
    return row(label, toggle(key, () => ({ ms: key === 'fade_in' ? 5 : 50, curve: 'linear' }), 'on'),
      ...(f ? [...num(`prep-${key}-ms`, f.ms, 0, 60000, 1, 'ms', (v) => { f.ms = v; requestRender(); }),
        el('select', { 'aria-label': `${label} curve`, onchange: (e) => { f.curve = e.target.value; requestRender(); } },
          ...CURVES.map((c) => el('option', { value: c, selected: c === (f.curve ?? 'linear') }, c)))] : []));
  };
  const norm = prep.normalize;
  const normSel = el('select', { id: 'prep-normalize', 'aria-label': 'Normalise',
    onchange: () => {
      const k = normSel.value;
      if (k === 'none') delete prep.normalize;
      else prep.normalize = k === 'peak' ? { kind: 'peak', target_dbfs: -1 } : { kind: 'loudness', target_lufs: -16 };
      changed();
      $('prep-normalize').focus();
    } }, ...['none', 'peak', 'loudness'].map((k) => el('option', { value: k, selected: k === (norm?.kind ?? 'none') }, k)));
  const loop = prep.loop_region;
  $('prep').replaceChildren(
    row('Channels', chSel),
    row('Trim silence', toggle('trim', () => ({ threshold_dbfs: -60, margin_ms: 10 }), 'below'),
      ...(trim ? [...num('prep-trim-threshold', trim.threshold_dbfs, -120, 0, 1, 'dBFS', (v) => { trim.threshold_dbfs = v; requestRender(); }),
        ...num('prep-trim-margin', trim.margin_ms, 0, 1000, 1, 'ms margin', (v) => { trim.margin_ms = v; requestRender(); })] : [])),
    fade('fade_in', 'Fade in'),
    fade('fade_out', 'Fade out'),
    row('Normalise', normSel, ...(norm?.kind === 'peak'
      ? num('prep-peak', norm.target_dbfs, -60, 0, 0.1, 'dBFS peak', (v) => { norm.target_dbfs = v; requestRender(); })
      : norm?.kind === 'loudness'
        ? num('prep-lufs', norm.target_lufs, -70, 0, 0.5, 'LUFS', (v) => { norm.target_lufs = v; requestRender(); }) : [])),
    row('Loop', el('button', { type: 'button', id: 'prep-loop-set', title: 'Export the region selected on the waveform as the loop',
      onclick: () => {
        if (!state.loop) { setStatus('Drag on the waveform to select a region first.', 'error'); return; }
        const off = state.report?.prep?.trimmed_start_frames ?? 0;
        prep.loop_region = { start: state.loop.start + off, end: state.loop.end + off, crossfade_ms: loop?.crossfade_ms ?? 0 };
        changed();
      } }, 'Use selection'),
    ...(loop ? [...num('prep-loop-xfade', loop.crossfade_ms ?? 0, 0, 1000, 1, 'ms crossfade', (v) => { loop.crossfade_ms = v; requestRender(); }),
      el('button', { type: 'button', 'aria-label': 'Remove the loop', onclick: () => { delete prep.loop_region; changed(); } }, '✕')] : [])),
  );
}

function drawPrepReport() {
  const r = state.report;
  const h = state.headroom;
  const parts = [];
  const p = r?.prep;
  if (p) {
    const rate = state.info.sampleRate;
    if (p.trimmed_start_frames || p.trimmed_end_frames) {
      parts.push(`trimmed ${(p.trimmed_start_frames / rate).toFixed(3)} s + ${(p.trimmed_end_frames / rate).toFixed(3)} s`);
    }
    if (p.gain_db) parts.push(`gain ${p.gain_db >= 0 ? '+' : ''}${p.gain_db.toFixed(2)} dB`);
    if (p.loudness_lufs_after !== null && p.loudness_lufs_after !== undefined) parts.push(`${p.loudness_lufs_after.toFixed(1)} LUFS`);
    if (r.export_loop) parts.push(`loop ${r.export_loop.start}–${r.export_loop.end} at ${r.export_rate} Hz`);
    parts.push(...(p.notes ?? []));
  }
  const box = $('prep-report');
  box.replaceChildren(parts.join(' · '));
  if (h) {
    const gain = h.suggested_gain_db;
    box.append(el('div', { class: 'headroom', id: 'headroom' },
      `Into ${h.bits} bits: peak ${h.peak_dbfs.toFixed(2)} dBFS, headroom ${h.headroom_db.toFixed(2)} dB = ` +
      `${Math.round(h.headroom_lsb).toLocaleString('en')} LSB, ${h.used_bits.toFixed(1)} of ${h.bits - 1} magnitude bits used; ` +
      `best pre-gain without clipping ${gain >= 0 ? '+' : ''}${gain.toFixed(2)} dB`,
      el('button', { type: 'button', title: 'Insert a gain stage with this gain at the start of the chain',
        onclick: () => {
          const first = state.preset.stages[0];
          const g = Math.floor(gain * 100) / 100;
          if (first?.kind === 'gain') first.gain_db = g; else state.preset.stages.unshift({ kind: 'gain', gain_db: g, overflow: 'clip' });
          renderChain();
          requestRender();
        } }, 'Apply')));
  }
}

// ---------------------------------------------------------------------------------------------------------------------
// Export panel
// ---------------------------------------------------------------------------------------------------------------------
function renderExport() {
  const spec = state.preset.export;
  const typeSel = el('select', { id: 'export-type', 'aria-label': 'Export container',
    onchange: () => {
      const t = typeSel.value;
      const fresh = { type: t };
      for (const f of EXPORT_TYPES[t].fields) if (f.def !== null && f.def !== undefined) fresh[f.key] = f.def;
      state.preset.export = fresh;
      renderExport();
      requestRender();
    } },
  ...Object.entries(EXPORT_TYPES).map(([k, v]) => el('option', { value: k, selected: k === spec.type }, v.label)));
  const schema = EXPORT_TYPES[spec.type] ?? EXPORT_TYPES.wav;
  const changed = (structural) => { if (structural) renderExport(); requestRender(); };
  $('export').replaceChildren(el('label', { class: 'field', for: 'export-type' }, el('span', {}, 'Format'), typeSel),
    ...schema.fields.filter((f) => !f.when || f.when(spec)).map((f) => fieldControl(spec, f, changed, `x-${f.key}`)));
  drawBudget();
}

function drawBudget() {
  const r = state.report;
  if (!r) { $('budget').textContent = ''; return; }
  $('budget').replaceChildren(
    el('span', {}, `${fmtBytes(Math.round(r.export_bytes_per_second))}/s`), ' · ',
    el('b', { id: 'budget-size' }, `${r.export_bytes.toLocaleString('en')} bytes`),
    ` (${fmtBytes(r.export_bytes)}) at ${r.export_rate.toLocaleString('en')} Hz · SQNR ${fmtDb(r.sqnr_db)}`);
}

function fmtBytes(n) {
  if (n < 1024) return `${n} B`;
  if (n < 1024 * 1024) return `${(n / 1024).toFixed(1)} KiB`;
  return `${(n / 1024 / 1024).toFixed(2)} MiB`;
}
function fmtDb(v) { return v >= 239 ? '∞ dB' : `${v.toFixed(1)} dB`; }
function slug(s) { return s.toLowerCase().replace(/[^a-z0-9]+/g, '-').replace(/^-|-$/g, '') || 'untitled'; }

function download(blob, name) {
  const a = el('a', { href: URL.createObjectURL(blob), download: name });
  document.body.append(a);
  a.click();
  a.remove();
  setTimeout(() => URL.revokeObjectURL(a.href), 10_000);
}

async function doExport() {
  try {
    const msg = await call('export', { preset: JSON.stringify(state.preset) });
    const ext = msg.extension;
    download(new Blob([msg.file], { type: 'application/octet-stream' }),
      `${slug(state.sourceName.replace(/\.[^.]+$/, ''))}--${slug(state.preset.name || 'custom')}.${ext}`);
    setStatus(`Exported ${msg.file.length.toLocaleString('en')} bytes`);
  } catch (err) {
    setStatus(`Export failed: ${err.message}`, 'error');
  }
}

// ---------------------------------------------------------------------------------------------------------------------
// Views
// ---------------------------------------------------------------------------------------------------------------------
function css(name) { return getComputedStyle(document.body).getPropertyValue(name).trim(); }

function fitCanvas(c) {
  const r = c.getBoundingClientRect();
  const dpr = window.devicePixelRatio || 1;
  const w = Math.max(100, Math.round(r.width * dpr));
  const h = Math.max(60, Math.round(r.height * dpr));
  if (c.width !== w || c.height !== h) { c.width = w; c.height = h; }
  return { w, h, dpr };
}

function waveColumns() { return Math.max(100, Math.round($('wave').getBoundingClientRect().width)); }
function viewRange() { return { start: state.view.start, end: state.view.end || (state.info ? state.info.frames : 0) }; }

function drawWave() {
  const c = $('wave');
  const { w, h, dpr } = fitCanvas(c);
  const g = c.getContext('2d');
  g.fillStyle = css('--plot-bg');
  g.fillRect(0, 0, w, h);
  if (!state.env) return;
  const { start, end } = viewRange();
  if (state.loop) {
    const x0 = ((state.loop.start - start) / (end - start)) * w;
    const x1 = ((state.loop.end - start) / (end - start)) * w;
    g.fillStyle = css('--loop');
    g.fillRect(x0, 0, x1 - x0, h);
  }
  // One lane per channel (stacked, top to bottom), processed filled, original as its outline on top, so both stay
  // visible where they differ.
  const lanes = state.env.output.length;
  const laneH = h / lanes;
  for (let c = 0; c < lanes; c++) {
    const mid = laneH * (c + 0.5);
    const amp = laneH / 2 - 2;
    g.strokeStyle = css('--grid');
    g.lineWidth = 1;
    g.beginPath(); g.moveTo(0, mid); g.lineTo(w, mid); g.stroke();
    if (c) { g.beginPath(); g.moveTo(0, laneH * c); g.lineTo(w, laneH * c); g.stroke(); }
    const out = state.env.output[c];
    const n = out.length / 2;
    g.fillStyle = css('--processed');
    for (let i = 0; i < n; i++) {
      const y0 = mid - out[2 * i + 1] * amp;
      const y1 = mid - out[2 * i] * amp;
      g.fillRect((i / n) * w, y0, Math.max(1, w / n), Math.max(1, y1 - y0));
    }
    const inp = state.env.input[c];
    g.strokeStyle = css('--original');
    for (const k of [1, 0]) {
      g.beginPath();
      for (let i = 0; i < n; i++) {
        const px = (i / n) * w;
        const py = mid - inp[2 * i + k] * amp;
        if (i) g.lineTo(px, py); else g.moveTo(px, py);
      }
      g.stroke();
    }
    if (lanes > 1) {
      g.fillStyle = css('--fg');
      g.font = `${11 * dpr}px system-ui, sans-serif`;
      g.fillText(lanes === 2 ? ['L', 'R'][c] : String(c + 1), 4 * dpr, laneH * c + 13 * dpr);
    }
  }
  // Preparation on the waveform: the fades as gain ramps along the top, the exported loop as two markers.
  const prep = state.preset.prep ?? {};
  const rate = state.info.sampleRate;
  const fx = (f) => ((f - start) / (end - start)) * w;
  g.strokeStyle = css('--error');
  g.lineWidth = 1.5;
  const total = state.report?.frames ?? end;
  for (const [key, from, to] of [['fade_in', 0, 1], ['fade_out', 1, 0]]) {
    const f = prep[key];
    if (!f) continue;
    const len = (f.ms / 1000) * rate;
    const a = key === 'fade_in' ? 0 : total - len;
    g.beginPath(); g.moveTo(fx(a), 2 + (1 - from) * 20); g.lineTo(fx(a + len), 2 + (1 - to) * 20); g.stroke();
  }
  if (prep.loop_region && state.report?.prep) {
    const off = state.report.prep.trimmed_start_frames;
    g.setLineDash([4, 3]);
    for (const f of [prep.loop_region.start - off, prep.loop_region.end - off]) { g.beginPath(); g.moveTo(fx(f), 0); g.lineTo(fx(f), h); g.stroke(); }
    g.setLineDash([]);
  }
  if (audio.playing) {
    const pos = audio.position();
    const x = ((pos - start) / (end - start)) * w;
    g.fillStyle = css('--fg');
    g.fillRect(x, 0, 2, h);
  }
}

const SPEC = { top: 6, bottom: -168, fmin: 20 };
function specX(f, w, nyq) { return (Math.log(f / SPEC.fmin) / Math.log(nyq / SPEC.fmin)) * w; }
function specY(db, h) { return ((SPEC.top - db) / (SPEC.top - SPEC.bottom)) * h; }

function drawSpectrum() {
  const c = $('spectrum');
  const { w, h, dpr } = fitCanvas(c);
  const g = c.getContext('2d');
  g.fillStyle = css('--plot-bg');
  g.fillRect(0, 0, w, h);
  if (!state.spectra || !state.info) return;
  const nyq = state.info.sampleRate / 2;
  g.font = `${11 * dpr}px system-ui, sans-serif`;
  g.fillStyle = css('--dim');
  g.strokeStyle = css('--grid');
  for (let db = 0; db >= SPEC.bottom; db -= 24) {
    const y = specY(db, h);
    g.beginPath(); g.moveTo(0, y); g.lineTo(w, y); g.stroke();
    g.fillText(`${db}`, 4, y - 2);
  }
  for (const f of [50, 100, 200, 500, 1000, 2000, 5000, 10000, 20000]) {
    if (f >= nyq) continue;
    const x = specX(f, w, nyq);
    g.beginPath(); g.moveTo(x, 0); g.lineTo(x, h); g.stroke();
    g.fillText(f >= 1000 ? `${f / 1000}k` : `${f}`, x + 2, h - 4);
  }
  const curve = (s, color) => {
    const binHz = state.info.sampleRate / state.fftSize;
    g.strokeStyle = color;
    g.lineWidth = dpr;
    g.beginPath();
    // One point per pixel column: the strongest bin that falls in it.
    let col = -1, best = -Infinity, started = false;
    for (let k = 1; k < s.length; k++) {
      const x = Math.floor(specX(k * binHz, w, nyq));
      if (x !== col) {
        if (col >= 0) { const y = specY(best, h); if (started) g.lineTo(col, y); else { g.moveTo(col, y); started = true; } }
        col = x; best = -Infinity;
      }
      best = Math.max(best, s[k]);
    }
    g.stroke();
  };
  curve(state.spectra.error, css('--error'));
  curve(state.spectra.output, css('--processed'));
}

function spectrumReadout(ev) {
  if (!state.spectra || !state.info) return;
  const c = $('spectrum');
  const r = c.getBoundingClientRect();
  const nyq = state.info.sampleRate / 2;
  const f = SPEC.fmin * Math.exp(((ev.clientX - r.left) / r.width) * Math.log(nyq / SPEC.fmin));
  const k = Math.min(state.spectra.output.length - 1, Math.round(f / (state.info.sampleRate / state.fftSize)));
  $('spec-readout').textContent = `${f < 1000 ? f.toFixed(0) + ' Hz' : (f / 1000).toFixed(2) + ' kHz'} · ` +
    `processed ${state.spectra.output[k].toFixed(1)} dBFS · error ${state.spectra.error[k].toFixed(1)} dBFS`;
}

function drawMeters() {
  const r = state.report;
  if (!r) return;
  const m = (label, value, cls = '') => el('div', { class: `meter ${cls}` }, el('span', {}, label), el('b', {}, value));
  $('meters').replaceChildren(
    m('Peak', `${r.output.peak_dbfs.toFixed(2)} dBFS`),
    m('RMS', `${r.output.rms_dbfs.toFixed(2)} dBFS`),
    m('Clipped', `${r.clipped.toLocaleString('en')}`, r.clipped > 0 ? 'warn' : ''),
    m('SQNR', fmtDb(r.sqnr_db), 'sqnr'),
    el('div', { class: 'meter', title: r.theory_note ?? 'formula for this chain' }, el('span', {}, 'Theory'),
      el('b', {}, r.theory_sqnr_db === null || r.theory_sqnr_db === undefined ? 'n/a' : fmtDb(r.theory_sqnr_db))),
    m('Rate', `${r.export_rate.toLocaleString('en')} Hz`),
    // What the export costs, always in view (the export panel has the exact figures).
    el('div', { class: 'meter', id: 'meter-file',
      title: `${r.export_bytes.toLocaleString('en')} bytes, ${fmtBytes(Math.round(r.export_bytes_per_second))}/s` },
    el('span', {}, 'File'), el('b', {}, fmtBytes(r.export_bytes))),
  );
}

const SWEEP_SECONDS = 10;
function drawSweep() {
  const c = $('sweep');
  const { w, h, dpr } = fitCanvas(c);
  const g = c.getContext('2d');
  g.fillStyle = css('--plot-bg');
  g.fillRect(0, 0, w, h);
  const pts = state.sweep;
  if (!pts) return;
  const top = 160;
  const x = (bits) => ((bits - 0.5) / 24) * w;
  const y = (db) => h - (Math.max(0, Math.min(top, db)) / top) * (h - 14) - 12;
  g.font = `${11 * dpr}px system-ui, sans-serif`;
  g.strokeStyle = css('--grid');
  g.fillStyle = css('--dim');
  for (let db = 0; db <= top; db += 40) { g.beginPath(); g.moveTo(0, y(db)); g.lineTo(w, y(db)); g.stroke(); g.fillText(`${db} dB`, 4, y(db) - 2); }
  for (const p of pts) if (p.bits % 4 === 0) g.fillText(`${p.bits}`, x(p.bits) - 4, h - 1);
  const line = (key, dash, color) => {
    g.setLineDash(dash); g.strokeStyle = color; g.lineWidth = dpr; g.beginPath();
    pts.forEach((p, i) => (i ? g.lineTo(x(p.bits), y(p[key])) : g.moveTo(x(p.bits), y(p[key]))));
    g.stroke(); g.setLineDash([]);
  };
  line('sine_formula_db', [4 * dpr, 4 * dpr], css('--dim'));
  line('theory_db', [], css('--original'));
  g.fillStyle = css('--processed');
  for (const p of pts) { g.beginPath(); g.arc(x(p.bits), y(p.measured_db), 3 * dpr, 0, 7); g.fill(); }
  const q = state.preset.stages.find((s) => s.kind === 'quantize' && !s.bypass && !s.levels);
  if (q) {
    g.strokeStyle = css('--error'); g.beginPath(); g.moveTo(x(q.bits ?? 8), 0); g.lineTo(x(q.bits ?? 8), h); g.stroke();
  }
}

function requestSweep() {
  state.sweep = null;
  drawSweep();
  const long = state.info.frames > SWEEP_SECONDS * state.info.sampleRate;
  $('sweep-note').textContent = long ? `(first ${SWEEP_SECONDS} s)` : '';
  call('sweep', { maxSeconds: SWEEP_SECONDS }).then((m) => { state.sweep = m.points; drawSweep(); }).catch(() => {});
}

function drawAll() {
  drawPrepReport();
  drawSweep();
  drawWave();
  drawSpectrum();
  drawMeters();
  drawBudget();
}

function setupViews() {
  const wave = $('wave');
  let drag = null;
  const frameAt = (ev) => {
    const r = wave.getBoundingClientRect();
    const { start, end } = viewRange();
    return Math.round(start + ((ev.clientX - r.left) / r.width) * (end - start));
  };
  wave.addEventListener('pointerdown', (ev) => { drag = frameAt(ev); wave.setPointerCapture(ev.pointerId); });
  wave.addEventListener('pointermove', (ev) => {
    if (drag === null) return;
    const f = frameAt(ev);
    state.loop = { start: Math.max(0, Math.min(drag, f)), end: Math.min(state.info.frames, Math.max(drag, f)) };
    drawWave();
  });
  wave.addEventListener('pointerup', () => {
    drag = null;
    if (state.loop && state.loop.end - state.loop.start < 64) state.loop = null;
    audio.loopChanged();
    drawWave();
  });
  wave.addEventListener('wheel', (ev) => {
    if (!state.info) return;
    ev.preventDefault();
    const { start, end } = viewRange();
    const r = wave.getBoundingClientRect();
    const centre = start + ((ev.clientX - r.left) / r.width) * (end - start);
    if (ev.shiftKey || Math.abs(ev.deltaX) > Math.abs(ev.deltaY)) {
      const d = Math.round(((ev.deltaX || ev.deltaY) / r.width) * (end - start));
      const s = Math.max(0, Math.min(state.info.frames - (end - start), start + d));
      state.view = { start: s, end: s + (end - start) };
      refreshEnvelope();
      return;
    }
    const span = Math.min(state.info.frames, Math.max(256, (end - start) * (ev.deltaY > 0 ? 1.25 : 0.8)));
    let s = Math.round(centre - (centre - start) * (span / (end - start)));
    s = Math.max(0, Math.min(state.info.frames - span, s));
    state.view = { start: s, end: Math.round(s + span) };
    refreshEnvelope();
  }, { passive: false });
  wave.addEventListener('dblclick', () => { state.view = { start: 0, end: state.info.frames }; refreshEnvelope(); });
  $('spectrum').addEventListener('pointermove', spectrumReadout);
  window.addEventListener('resize', () => { refreshEnvelope(); drawSpectrum(); });
}

function refreshEnvelope() {
  if (!state.report) return;
  call('envelope', { view: { ...viewRange(), columns: waveColumns() } }).then((msg) => { state.env = msg.env; drawWave(); })
    .catch(() => {});
}

// ---------------------------------------------------------------------------------------------------------------------
// Audition: source → monitor gain → safety limiter → destination. The limiter is on this path only.
// ---------------------------------------------------------------------------------------------------------------------
const audio = {
  ctx: null,
  node: null,
  playing: false,
  startedAt: 0,
  offset: 0,
  buffers: {},

  ensure() {
    if (this.ctx) return;
    const ctx = new AudioContext();
    this.ctx = ctx;
    this.monitor = new GainNode(ctx, { gain: dbToGain(+$('monitor').value) });
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
    tick();
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

// Live audition: the chain in an AudioWorklet (www/worklet.js via www/live.js), fed by the sound on a loop or by a
// microphone / line input, into the same monitor gain and safety limiter. Chain edits reach it within a block.
const live = {
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

function errorSignal() {
  if (state.errorSignal) return state.errorSignal;
  if (!state.output) return null;
  const input = state.reference ?? state.input;
  state.errorSignal = state.output.map((o, c) => {
    const x = input[Math.min(c, input.length - 1)];
    const e = new Float32Array(o.length);
    for (let i = 0; i < o.length; i++) e[i] = o[i] - (Number.isFinite(x[i]) ? x[i] : 0);
    return e;
  });
  return state.errorSignal;
}

function dbToGain(db) { return Math.pow(10, db / 20); }

function updatePlayButton() { $('play').textContent = audio.playing ? '■ Stop' : '▶ Play'; }

let ticking = false;
function tick() {
  if (ticking) return;
  ticking = true;
  const step = () => {
    drawWave();
    if (audio.playing) requestAnimationFrame(step); else { ticking = false; drawWave(); }
  };
  requestAnimationFrame(step);
}

function setupAudition() {
  $('play').onclick = () => { if (live.mode !== 'off') { live.stop(); $('live').value = 'off'; } audio.toggle(); };
  $('live').onchange = () => live.start($('live').value);
  document.addEventListener('keydown', (ev) => {
    const typing = ev.target.closest('input[type=number], input[type=text], select, textarea');
    if (ev.code === 'Space' && !typing) { ev.preventDefault(); audio.toggle(); }
  });
  document.querySelectorAll('input[name=listen]').forEach((r) => r.addEventListener('change', () => {
    if (audio.playing) audio.start(audio.position());
  }));
  $('loop').onchange = () => { if (audio.playing) audio.start(audio.position()); };
  $('monitor').oninput = () => {
    const db = +$('monitor').value;
    $('monitor-out').textContent = `${db < 0 ? '−' : ''}${Math.abs(db)} dB`;
    if (audio.monitor) audio.monitor.gain.setTargetAtTime(dbToGain(db), audio.ctx.currentTime, 0.02);
  };
}

// ---------------------------------------------------------------------------------------------------------------------
// Start-up
// ---------------------------------------------------------------------------------------------------------------------
async function openFile(f) {
  const bytes = await f.arrayBuffer();
  const head = new Uint8Array(bytes, 0, Math.min(12, bytes.byteLength));
  const isWav = String.fromCharCode(...head.slice(0, 4)) === 'RIFF' && String.fromCharCode(...head.slice(8, 12)) === 'WAVE';
  if (isWav) return loadSource({ wav: bytes }, f.name, [bytes]);
  // Anything else: let the browser decode it. decodeAudioData resamples to the context's rate, so ask for a context
  // at a common rate and say so.
  try {
    const ctx = new OfflineAudioContext(1, 1, 48000);
    const b = await ctx.decodeAudioData(bytes);
    const inter = new Float32Array(b.length * b.numberOfChannels);
    for (let c = 0; c < b.numberOfChannels; c++) {
      const d = b.getChannelData(c);
      for (let i = 0; i < b.length; i++) inter[i * b.numberOfChannels + c] = d[i];
    }
    await loadSource({ sampleRate: b.sampleRate, channels: b.numberOfChannels, interleaved: inter }, f.name,
      [inter.buffer]);
    setStatus(`${f.name} was decoded by the browser at ${b.sampleRate} Hz (its own rate may differ).`);
  } catch (err) {
    setStatus(`Could not read ${f.name}: not a WAV file and the browser cannot decode it. The current sound is unchanged.`, 'error');
  }
}

async function main() {
  setupChainTools();
  setupViews();
  setupAudition();
  renderPrep();
  renderChain();
  renderExport();
  $('download').onclick = doExport;
  $('file').onchange = (e) => { const f = e.target.files[0]; e.target.value = ''; if (f) openFile(f); };
  document.addEventListener('dragover', (e) => e.preventDefault());
  document.addEventListener('drop', (e) => { e.preventDefault(); const f = e.dataTransfer.files[0]; if (f) openFile(f); });
  setStatus('Starting the engine…');
  const ready = await call('init', { wasm: wasmBytes.buffer }, [wasmBytes.buffer]);
  BUILTIN_PRESETS = ready.presets;
  BUILTIN_PRESETS.forEach((p, i) =>
    $('preset-builtin').append(el('option', { value: String(i), title: p.description ?? '' }, p.name)));
  const demo = $('demo');
  for (const d of ready.demos) demo.append(el('option', { value: d }, d));
  demo.onchange = () => { if (demo.value) loadSource({ demo: demo.value }, demo.value); };
  await loadSource({ demo: ready.demos[0] }, ready.demos[0]);
  document.body.dataset.ready = 'true';
}

main().catch((err) => setStatus(`Start-up failed: ${err.message}`, 'error'));
