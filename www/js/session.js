// The page's work with the core: loading a sound and rendering the preset on it (coalesced). It knows nothing of
// the panels and views above it; main.js connects them through `hooks`.
import { $, el, setStatus } from './util.js';
import { state, viewRange, waveColumns } from './state.js';
import { call } from './worker-client.js';

export const hooks = {
  presetChanged: () => {}, // before every render request (the live audition follows the preset)
  rendered: () => {}, // a render arrived and is in `state`: draw it
  refused: (message) => message, // the core refused the preset: say where; returns the text for the status line
  sourceLoaded: () => {}, // a new sound is in `state`, before its first render
};

// Renders are coalesced: while one runs, only the newest request waits.
let rendering = false;
let pendingRender = false;
export function requestRender() {
  hooks.presetChanged();
  if (rendering) { pendingRender = true; return; }
  rendering = true;
  pendingRender = false;
  const view = { ...viewRange(), columns: waveColumns(), fftSize: state.fftSize, window: state.window };
  const preset = JSON.stringify(state.preset);
  call('render', { preset, view, loudness: state.matchLoudness, tap: state.tap })
    .then((msg) => {
      state.renderedPreset = preset; // what the views show (tests compare it with the preset being edited)
      state.report = msg.report;
      state.headroom = msg.headroom;
      state.spectra = msg.spectra;
      state.env = msg.env;
      state.output = msg.output;
      state.errorSignal = null;
      state.renderMs = msg.ms;
      state.loudness = msg.loudness;
      state.tapped = msg.tap; // { stage, sqnr_db } when the views show a tapped stage, else null
      hooks.rendered();
      // The first render of a newly opened file also says how it was read (see loadSource).
      setStatus(`${state.sourceNote ? state.sourceNote + ' ' : ''}Rendered in ${msg.ms.toFixed(0)} ms`);
      state.sourceNote = null;
      document.body.dataset.rendered = String((+document.body.dataset.rendered || 0) + 1);
    })
    .catch((err) => {
      state.refusedPreset = preset;
      setStatus(hooks.refused(err.message) ?? err.message, 'error');
      document.body.dataset.refused = String((+document.body.dataset.refused || 0) + 1);
    })
    .finally(() => { rendering = false; if (pendingRender) requestRender(); });
}

// `note`: what the status line says about how the file was read (by default, from the reader's own description).
export async function loadSource(payload, name, transfer = [], note = null) {
  try {
    const msg = await call('load', { ...payload, name }, transfer);
    const d = msg.info;
    state.sourceNote = note ?? (d.decoder ? `${name}: ${d.format}, ${d.sampleRate.toLocaleString('en')} Hz, read by ` +
      `${d.decoder}${d.warnings?.length ? ` (${d.warnings.join('; ')})` : ''}.` : null);
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
    hooks.sourceLoaded();
    $('source-info').textContent =
      `${msg.info.channels === 1 ? 'mono' : msg.info.channels === 2 ? 'stereo' : msg.info.channels + ' ch'}, ` +
      `${msg.info.sampleRate.toLocaleString('en')} Hz, ${(msg.info.frames / msg.info.sampleRate).toFixed(2)} s` +
      (d.decoder ? ` · ${d.format} · ${d.decoder}` : '');
    $('source-info').title = d.decoder ? $('source-info').textContent : '';
    requestRender();
  } catch (err) {
    setStatus(`Could not load ${name}: ${err.message}. The current sound is unchanged.`, 'error');
  }
}
