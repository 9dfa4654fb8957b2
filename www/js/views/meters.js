// The meters above the views: levels, clipped samples, SQNR measured and in theory, export rate and file size. With a
// stage tapped: that stage's own figures from the render report's `stages` (its SQNR against its own input, the
// samples it clipped, for quantizers the codes of its word it used, the rate it runs at).
import { $, el, fmtBytes, fmtDb } from '../util.js';
import { state } from '../state.js';
import { STAGES } from '../schema.js';

export function drawMeters() {
  const r = state.report;
  if (!r) return;
  const m = (label, value, cls = '', attrs = {}) =>
    el('div', { class: `meter ${cls}`, ...attrs }, el('span', {}, label), el('b', {}, value));
  // What the export costs, always in view (the export panel has the exact figures).
  const file = el('div', { class: 'meter', id: 'meter-file',
    title: `${r.export_bytes.toLocaleString('en')} bytes, ${fmtBytes(Math.round(r.export_bytes_per_second))}/s` },
  el('span', {}, 'File'), el('b', {}, fmtBytes(r.export_bytes)));
  const i = state.tapped?.stage;
  const st = i === undefined || i === null ? null : r.stages?.[i];
  if (st) {
    const kind = state.preset.stages[i]?.kind ?? st.kind;
    const codes = codesText(st);
    // data-value: the report's own figure (JSON), for tests and scripts.
    const v = (x) => ({ 'data-value': JSON.stringify(x ?? null) });
    $('meters').replaceChildren(
      el('div', { class: 'meter tap-meter', id: 'meter-tap', 'data-value': String(i) },
        el('span', {}, 'Tapped after'),
        el('b', {}, `${i + 1} · ${STAGES[kind]?.label ?? kind}`, st.active ? '' : ' (bypassed)'),
        el('button', { type: 'button', class: 'untap', 'aria-label': `Stop tapping stage ${i + 1}: show the whole chain`,
          title: 'Show the whole chain', onclick: () => $(`tap-${i}`)?.click() }, '✕')),
      m('Stage SQNR', st.sqnr_db === null || st.sqnr_db === undefined ? (st.active ? 'exact' : 'n/a') : fmtDb(st.sqnr_db),
        'sqnr', { id: 'meter-stage-sqnr', title: 'This stage alone: its output against its own input', ...v(st.sqnr_db) }),
      m('Stage clipped', st.clipped.toLocaleString('en'), st.clipped > 0 ? 'warn' : '',
        { id: 'meter-stage-clipped', ...v(st.clipped) }),
      m('Codes used', codes ?? 'n/a', '', { id: 'meter-stage-codes',
        title: codes ? `${st.codes_used.toLocaleString('en')} of the ${st.code_space.toLocaleString('en')} codes of this stage's word`
          : 'not a quantizer', 'data-value': JSON.stringify([st.codes_used ?? null, st.code_space ?? null]) }),
      m('Stage rate', `${st.rate_hz.toLocaleString('en')} Hz`, '', { id: 'meter-stage-rate', ...v(st.rate_hz) }),
      file,
    );
    return;
  }
  $('meters').replaceChildren(
    m('Peak', `${r.output.peak_dbfs.toFixed(2)} dBFS`),
    m('RMS', `${r.output.rms_dbfs.toFixed(2)} dBFS`),
    m('Clipped', `${r.clipped.toLocaleString('en')}`, r.clipped > 0 ? 'warn' : ''),
    m('SQNR', fmtDb(r.sqnr_db), 'sqnr'),
    el('div', { class: 'meter', title: r.theory_note ?? 'formula for this chain' }, el('span', {}, 'Theory'),
      el('b', {}, r.theory_sqnr_db === null || r.theory_sqnr_db === undefined ? 'n/a' : fmtDb(r.theory_sqnr_db))),
    m('Rate', `${r.export_rate.toLocaleString('en')} Hz`),
    file,
  );
}

// "N of 2^B" with the exponent as a superscript (or "N of M" for a level count that is not a power of two).
export function codesText(st) {
  if (st.codes_used === null || st.codes_used === undefined) return null;
  const b = Math.log2(st.code_space);
  const sup = (n) => String(n).replace(/\d/g, (c) => '⁰¹²³⁴⁵⁶⁷⁸⁹'[c]);
  return `${st.codes_used.toLocaleString('en')} of ${Number.isInteger(b) ? `2${sup(b)}` : st.code_space.toLocaleString('en')}`;
}

export function stageFigures(st) {
  if (!st.active) return 'bypassed';
  const parts = [st.sqnr_db === null || st.sqnr_db === undefined ? 'changes nothing here' : `SQNR ${st.sqnr_db.toFixed(1)} dB`,
    `${st.clipped.toLocaleString('en')} clipped`];
  const codes = codesText(st);
  if (codes) parts.push(`${codes} codes used`);
  return parts.join(' · ');
}
