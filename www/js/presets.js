// Presets: the built-in ones (from the core, shared with the CLI), save to a file, load from a file, and
// `applyPreset`, the one way a preset enters the page.
import { $, el, setStatus, slug, download } from './util.js';
import { state } from './state.js';
import { call } from './worker-client.js';
import { requestRender } from './session.js';
import { renderChain } from './chain-editor.js';
import { renderPrep } from './prep-panel.js';
import { renderExport } from './export.js';
import { plainError } from './messages.js';

let BUILTIN_PRESETS = []; // from the core (Session.builtinPresets), shared with the CLI

export function setBuiltinPresets(list) {
  BUILTIN_PRESETS = list;
  BUILTIN_PRESETS.forEach((p, i) =>
    $('preset-builtin').append(el('option', { value: String(i), title: p.description ?? '' }, p.name)));
}

export function setupPresetTools() {
  const sel = $('preset-builtin');
  sel.onchange = () => {
    if (sel.value === '') return;
    applyPreset(structuredClone(BUILTIN_PRESETS[+sel.value]));
    sel.value = '';
  };
  setupSaveDialog();
  $('preset-load').onclick = () => $('preset-file').click();
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
export async function applyPreset(p) {
  try {
    const msg = await call('normalize', { preset: JSON.stringify(p) });
    state.preset = msg.preset;
    state.preset.prep ??= {};
  } catch (err) {
    setStatus(`Preset not loaded: ${plainError(err.message, p).text}`, 'error');
    return false;
  }
  renderPrep();
  renderChain();
  renderExport();
  requestRender();
  return true;
}
window.stairstepApplyPreset = applyPreset; // for tests and scripting

// "Save preset…" asks for a name (in a modal dialog: Enter saves, Escape cancels), keeps it in the preset and names
// the file after it.
function setupSaveDialog() {
  const dialog = $('save-dialog');
  const name = $('save-name');
  const fileName = () => `${slug(name.value.trim() || 'preset')}.json`;
  const showFile = () => { $('save-file').textContent = fileName(); };
  $('preset-save').onclick = () => {
    name.value = state.preset.name && state.preset.name !== 'Untitled' ? state.preset.name : '';
    showFile();
    dialog.showModal();
    name.focus();
    name.select();
  };
  name.addEventListener('input', showFile);
  const save = () => {
    const given = name.value.trim();
    if (!given) { name.setAttribute('aria-invalid', 'true'); name.focus(); $('save-file').textContent = 'give it a name first'; return; }
    name.removeAttribute('aria-invalid');
    state.preset.name = given;
    const text = JSON.stringify(state.preset, null, 2) + '\n';
    dialog.close();
    download(new Blob([text], { type: 'application/json' }), fileName());
    setStatus(`Saved preset "${given}" as ${fileName()}`);
    $('preset-save').focus();
  };
  $('save-confirm').onclick = save;
  $('save-cancel').onclick = () => { dialog.close(); $('preset-save').focus(); };
  name.addEventListener('keydown', (e) => { if (e.key === 'Enter') { e.preventDefault(); save(); } });
}
