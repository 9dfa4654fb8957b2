// The meters above the views: levels, clipped samples, SQNR measured and in theory, export rate and file size.
import { $, el, fmtBytes, fmtDb } from '../util.js';
import { state } from '../state.js';

export function drawMeters() {
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
