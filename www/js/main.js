// Stairstep page: start-up and wiring. All DSP runs in the worker (the Rust core compiled to wasm).
// Imports go one way, from here down: main → presets → panels (chain editor, preparation, export; fields) → views,
// live mode → audition → session (load, render) → worker client, state → schema, util. Lower modules reach higher
// ones only through the hooks wired below (session.hooks, audio.onstart).
import { $, el, setStatus } from './util.js';
import { state } from './state.js';
import { call, wasmBytes } from './worker-client.js';
import { hooks, loadSource } from './session.js';
import { renderChain, markStageErrors, setupStageTools, fillAddMenu, showStageFigures } from './chain-editor.js';
import { useCoreSchema } from './schema.js';
import { renderPrep, drawPrepReport } from './prep-panel.js';
import { renderExport, drawBudget, doExport } from './export.js';
import { setupPresetTools, setBuiltinPresets } from './presets.js';
import { setupHistory, record } from './history.js';
import { openFile } from './open-file.js';
import { requestRender } from './session.js';
import { drawWave, setupWaveform, refreshEnvelope, tick, showLoopFields, viewHooks } from './views/waveform.js';
import { setupSpectrogram, requestSpectrogram, scheduleSpectrogram, drawSpectrogram, updateSpectrogramLabels }
  from './views/spectrogram.js';
import { setupTransfer, requestTransfer, drawTransfer } from './views/transfer.js';
import { requestCodes, drawCodes } from './views/codes.js';
import { drawSpectrum, spectrumReadout } from './views/spectrum.js';
import { drawMeters } from './views/meters.js';
import { drawSweep, requestSweep } from './views/sweep.js';
import { audio } from './audition.js';
import { live } from './live-mode.js';
import { setupBudget, budgetChainChanged, budgetRendered, budgetSourceLoaded } from './budget-panel.js';

function drawAll() {
  drawPrepReport();
  drawSweep();
  drawWave();
  drawSpectrum();
  drawMeters();
  drawBudget();
}

hooks.presetChanged = () => { record(); live.presetChanged(); };
hooks.rendered = () => {
  markStageErrors(null); showStale(null); drawAll(); audio.refresh(); audio.applyMonitor();
  showStageFigures();
  updateSpectrogramLabels();
  scheduleSpectrogram(); // after the main views are painted, never before
  requestTransfer(); // these two only when shown
  requestCodes();
};
viewHooks.changed = requestSpectrogram; // zoom and scroll are shared with the waveform
hooks.refused = (message) => { const text = markStageErrors(message); showStale(text); return text; };
hooks.sourceLoaded = () => { audio.newSource(); requestSweep(); showLoopFields(); };
// The format budget panel follows the chain (a change cancels its measurement), the renders and the sound.
for (const [name, follow] of [['presetChanged', budgetChainChanged], ['rendered', budgetRendered],
  ['sourceLoaded', budgetSourceLoaded]]) {
  const before = hooks[name];
  hooks[name] = (...args) => { const r = before(...args); follow(); return r; };
}

// While the core refuses a value, the views keep the last accepted render: they say so and are greyed.
function showStale(text) {
  const note = $('stale-note');
  $('views').classList.toggle('stale', !!text);
  note.hidden = !text;
  note.textContent = text ? `The views show the last accepted settings. ${text}` : '';
}
audio.onstart = tick;

function setupViews() {
  setupWaveform();
  setupSpectrogram();
  setupTransfer();
  // The lower view: the spectrogram, the SQNR sweep, the transfer curve or the code histogram, in one place.
  $('lower-view').onchange = () => {
    const v = $('lower-view').value;
    for (const k of ['spectrogram', 'sweep', 'transfer', 'codes']) {
      document.querySelectorAll(`.fig-lower .for-${k}, #${k}`).forEach((e) => { e.hidden = v !== k; });
    }
    if (v === 'sweep') drawSweep();
    else if (v === 'transfer') { drawTransfer(); requestTransfer(); } else if (v === 'codes') { drawCodes(); requestCodes(); }
    else { drawSpectrogram(); requestSpectrogram(); }
  };
  $('spectrum').addEventListener('pointermove', spectrumReadout);
  // The views share the window's height, so they follow any change of their own size (window, meters wrapping).
  const sized = new ResizeObserver((entries) => {
    for (const e of entries) {
      const id = e.target.firstElementChild.id;
      if (id === 'wave') refreshEnvelope(); else if (id === 'spectrum') drawSpectrum();
      else if (id === 'spectrogram') { drawSpectrogram(); requestSpectrogram(); drawSweep(); drawTransfer(); drawCodes(); }
      else drawSweep();
    }
  });
  document.querySelectorAll('.views .plot').forEach((p) => sized.observe(p));
}

// The Chain / Preparation tabs: arrow keys, Home and End move between them (one tab stop for the list).
function setupTabs() {
  const tabs = [...document.querySelectorAll('[role=tab]')];
  const select = (tab) => {
    for (const t of tabs) {
      const on = t === tab;
      t.setAttribute('aria-selected', String(on));
      t.tabIndex = on ? 0 : -1;
      $(t.getAttribute('aria-controls')).hidden = !on;
    }
  };
  tabs.forEach((tab, i) => {
    tab.addEventListener('click', () => select(tab));
    tab.addEventListener('keydown', (ev) => {
      const j = { ArrowRight: i + 1, ArrowLeft: i - 1, Home: 0, End: tabs.length - 1 }[ev.key];
      if (j === undefined) return;
      ev.preventDefault();
      const next = tabs[(j + tabs.length) % tabs.length];
      select(next);
      next.focus();
    });
  });
}

function setupAudition() {
  $('play').onclick = () => { if (live.mode !== 'off') { live.stop(); $('live').value = 'off'; } audio.toggle(); };
  $('live').onchange = () => live.start($('live').value);
  document.addEventListener('keydown', (ev) => {
    // The space bar plays and stops, except where it already means something: typing, and every control that a
    // space activates (buttons, check boxes, radio buttons, tabs) or moves (sliders).
    const control = ev.target.closest('input, select, textarea, button, [role=tab], a[href], dialog');
    if (ev.code === 'Space' && !control) { ev.preventDefault(); audio.toggle(); }
  });
  document.querySelectorAll('input[name=listen]').forEach((r) => r.addEventListener('change', () => {
    audio.applyMonitor();
    if (audio.playing) audio.start(audio.position());
  }));
  $('match-loudness').onchange = () => {
    state.matchLoudness = $('match-loudness').checked;
    if (state.matchLoudness) requestRender(); else audio.applyMonitor();
  };
  $('loop').onchange = () => { if (audio.playing) audio.start(audio.position()); };
  $('monitor').oninput = () => {
    const db = +$('monitor').value;
    $('monitor-out').textContent = `${db < 0 ? '−' : ''}${Math.abs(db)} dB`;
    audio.applyMonitor();
  };
}

async function main() {
  setupStageTools();
  setupPresetTools();
  setupHistory();
  setupViews();
  setupAudition();
  setupTabs();
  renderPrep();
  renderChain();
  renderExport();
  setupBudget();
  $('download').onclick = doExport;
  $('open-file').onclick = () => $('file').click();
  $('file').onchange = (e) => { const f = e.target.files[0]; e.target.value = ''; if (f) openFile(f); };
  document.addEventListener('dragover', (e) => e.preventDefault());
  document.addEventListener('drop', (e) => { e.preventDefault(); const f = e.dataTransfer.files[0]; if (f) openFile(f); });
  setStatus('Starting the engine…');
  const ready = await call('init', { wasm: wasmBytes.buffer }, [wasmBytes.buffer]);
  useCoreSchema(ready.schema);
  fillAddMenu();
  renderChain();
  setBuiltinPresets(ready.presets);
  const demo = $('demo');
  for (const d of ready.demos) demo.append(el('option', { value: d }, d));
  demo.onchange = () => { if (demo.value) loadSource({ demo: demo.value }, demo.value); };
  window.stairstepMemory = () => call('memory'); // the worker's WebAssembly memory, for tests and the curious
  await loadSource({ demo: ready.demos[0] }, ready.demos[0]);
  document.body.dataset.ready = 'true';
}

main().catch((err) => setStatus(`Start-up failed: ${err.message}`, 'error'));
