// The format budget's candidates as a table: one row per (rate, export) the core measured, sortable by any column
// (a header is a button; aria-sort says the order), the pick, the Pareto front and the current export marked in words
// as well as by colour.
import { el } from '../util.js';

const MODE = { hold: 'hold', clean: 'clean' };
const db = (v) => (v >= 239 ? '∞' : v.toFixed(1)); // an exact copy reads +240 dB
const num = (v, digits = 0) => v.toLocaleString('en', { minimumFractionDigits: digits, maximumFractionDigits: digits });

// Columns: header, the value sorted by, the cell's text, and whether it is a number (right-aligned).
export const COLUMNS = [
  { key: 'rate', label: 'Rate, Hz', sort: (c) => c.rate_hz, text: (c) => num(c.rate_hz),
    sub: (c) => (c.rate_mode ? MODE[c.rate_mode] ?? c.rate_mode : 'source'), numeric: true },
  { key: 'export', label: 'Export', sort: (c) => c.export_label, text: (c) => c.export_label },
  { key: 'bytes', label: 'Bytes', headTitle: 'Exact size of the file', sort: (c) => c.bytes, text: (c) => num(c.bytes),
    numeric: true },
  { key: 'kbps', label: 'kbit/s', headTitle: 'The whole file over the sound\'s duration', sort: (c) => c.kbps,
    text: (c) => num(c.kbps, 1), cellTitle: (c) => `${num(Math.round(c.bytes_per_second))} bytes/s`, numeric: true },
  { key: 'sqnr', label: 'SQNR, dB', sort: (c) => c.sqnr_db, text: (c) => db(c.sqnr_db), numeric: true },
  { key: 'aw', label: 'A-wt, dB', headTitle: 'A-weighted SNR (IEC 61672-1 weighting A), dB', sort: (c) => c.a_weighted_snr_db,
    text: (c) => db(c.a_weighted_snr_db), numeric: true },
  { key: 'band', label: 'Band, kHz', headTitle: 'Audio bandwidth kept', sort: (c) => c.bandwidth_hz,
    text: (c) => num(c.bandwidth_hz / 1000, 1), numeric: true },
  { key: 'clipped', label: 'Clipped', headTitle: 'Samples clipped', sort: (c) => c.clipped, text: (c) => num(c.clipped),
    numeric: true },
];

// The row order for a sort: { key, dir } (dir 1 ascending, −1 descending); ties keep the core's order.
export function sortedRows(candidates, sort) {
  const col = COLUMNS.find((c) => c.key === sort.key) ?? COLUMNS[2];
  const idx = candidates.map((_, i) => i);
  idx.sort((a, b) => {
    const va = col.sort(candidates[a]);
    const vb = col.sort(candidates[b]);
    const d = typeof va === 'string' ? va.localeCompare(vb) : va - vb;
    return d * sort.dir || a - b;
  });
  return idx;
}

// Builds the table. `view`: { candidates, pareto (bool per candidate), pick (index or null), sort, onSort(key) }.
export function budgetTable(view) {
  const { candidates, pareto, pick, sort } = view;
  const head = el('tr', {}, ...COLUMNS.map((col) => {
    const on = sort.key === col.key;
    const b = el('button', { type: 'button', class: 'sort', id: `budget-sort-${col.key}`, title: col.headTitle ?? null,
      onclick: () => view.onSort(col.key) }, col.label, el('span', { class: 'arrow', 'aria-hidden': 'true' },
      on ? (sort.dir > 0 ? ' ▲' : ' ▼') : ''));
    return el('th', { scope: 'col', class: col.numeric ? 'n' : null,
      'aria-sort': on ? (sort.dir > 0 ? 'ascending' : 'descending') : null }, b);
  }), el('th', { scope: 'col', class: 'notes' }, el('span', { class: 'sr-only' }, 'Notes')));
  const rows = sortedRows(candidates, sort).map((i) => {
    const c = candidates[i];
    // The plot's own symbols (ring: the pick, dot: on the Pareto front, square: the current export), named for
    // screen readers and in a tooltip.
    const marks = [[i === pick, 'pick', '◯'], [pareto?.[i], 'Pareto front', '●'], [c.current, 'current export', '□']]
      .filter(([on]) => on);
    const notes = marks.map(([, name, symbol]) => el('span', { class: `mark-${name.split(' ')[0]}`, title: name },
      el('span', { 'aria-hidden': 'true' }, symbol), el('span', { class: 'sr-only' }, `${name} `)));
    const cls = [i === pick ? 'pick' : '', pareto?.[i] ? 'pareto' : '', c.current ? 'current' : ''].join(' ').trim();
    return el('tr', { class: cls || null, 'data-id': c.id }, ...COLUMNS.map((col) => {
      const cell = el(col.key === 'rate' ? 'th' : 'td', { class: col.numeric ? 'n' : null,
        scope: col.key === 'rate' ? 'row' : null, title: col.cellTitle?.(c) ?? null }, col.text(c));
      if (col.sub) cell.append(' ', el('span', { class: 'dim' }, col.sub(c)));
      if (col.key === 'clipped' && c.clipped > 0) cell.classList.add('warn');
      return cell;
    }), el('td', { class: 'notes' }, ...notes));
  });
  return el('table', { id: 'budget-table', class: 'budget-table' },
    el('caption', { class: 'sr-only' }, `${candidates.length} candidates: rate and export, exact file size, quality`),
    el('thead', {}, head), el('tbody', {}, ...rows));
}
