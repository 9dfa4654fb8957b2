// The export panel: the container and its fields, the budget (exact size, bytes per second, SQNR), the download.
import { $, el, setStatus, fmtBytes, fmtDb, slug, download } from './util.js';
import { EXPORT_TYPES } from './schema.js';
import { state } from './state.js';
import { requestRender } from './session.js';
import { call } from './worker-client.js';
import { fieldControl } from './fields.js';

export function renderExport() {
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

export function drawBudget() {
  const r = state.report;
  if (!r) { $('budget').textContent = ''; return; }
  $('budget').replaceChildren(
    el('span', {}, `${fmtBytes(Math.round(r.export_bytes_per_second))}/s`), ' · ',
    el('b', { id: 'budget-size' }, `${r.export_bytes.toLocaleString('en')} bytes`),
    ` (${fmtBytes(r.export_bytes)}) at ${r.export_rate.toLocaleString('en')} Hz · SQNR ${fmtDb(r.sqnr_db)}`);
}

export async function doExport() {
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
