// The spectrogram view: short-time spectra of the original, the processed sound or the error (or, with a stage
// tapped, the signal after that stage and the error it alone adds) over the waveform's view window, in the "Kiln"
// colour map with its legend, the export rate's Nyquist frequency as a line, and a readout (time, frequency, level)
// that follows the pointer or a keyboard cursor.
//
// The core computes it in the worker for what is visible only: the view window's frames at the canvas's resolution
// (about one STFT frame per pixel column, resampled to one value per pixel row), sent as a Float32Array of dBFS.
// Levels follow the core's convention (Hann window normalised by its sum, the coherent gain): a full-scale sine
// centred on a bin reads 0 dBFS; between bins it reads up to 1.42 dB lower (the Hann window's scalloping loss).
// It is asked for after the main views are drawn, so it never delays the first paint after an edit.
import { $ } from '../util.js';
import { state, viewRange } from '../state.js';
import { call } from '../worker-client.js';
import { fitCanvas, startPlot } from './plot.js';
import { KILN_RGBA, KILN_NAME, kilnCss } from './colormap.js';
import { drawRuler, zoom, scroll, wholeView } from './waveform.js';

const LOG_LO_HZ = 20; // bottom of the log axis
const RULER = 16; // CSS px: the time ruler along the bottom, as on the waveform
export const SIZES = [256, 512, 1024, 2048, 4096, 8192];

export const sg = {
  which: 'output', // input (original) | output (processed) | error
  size: 2048,
  log: true,
  range: 120, // dB shown, down from 0 dBFS
  data: null, // the latest answer: { which, start, end, size, columns, rows, log, lo, hi, rate, db, frames }
  cursor: null, // { frame, hz }: where the readout reads (pointer or keys)
  timing: null, // { workerMs, totalMs, drawMs } of the latest request, for the curious and the tests
  image: null, // the data drawn at its own size (a canvas), rebuilt only when the data or the range change
};
window.stairstepSpectrogram = sg; // for tests and the curious

// Row position ↔ frequency, exactly as the core's FrequencyScale (row 0 = lo, rows − 1 = hi).
function hzAt(row, d) {
  const t = d.rows > 1 ? row / (d.rows - 1) : 0;
  return d.log ? d.lo * (d.hi / d.lo) ** t : d.lo + (d.hi - d.lo) * t;
}
function rowOf(hz, d) {
  const t = d.log ? Math.log(Math.max(hz, 1e-3) / d.lo) / Math.log(d.hi / d.lo) : (hz - d.lo) / (d.hi - d.lo);
  return t * (d.rows - 1);
}

const fmtHz = (f) => (f < 1000 ? `${f.toFixed(0)} Hz` : `${(f / 1000).toFixed(f < 10000 ? 2 : 1)} kHz`);
const fmtDbfs = (v) => (v <= -239 ? 'silence' : `${v < 0 ? '−' : ''}${Math.abs(v).toFixed(1)} dBFS`);

// After a render: once the browser has painted the main views, and only when the edits pause (a slider dragged
// renders many times; the worker would compute a spectrogram between each two renders).
let settle = null;
export function scheduleSpectrogram(ms = 80) {
  clearTimeout(settle);
  requestAnimationFrame(() => { clearTimeout(settle); settle = setTimeout(requestSpectrogram, ms); });
}

// Coalesced like renders: while one is computed, only the newest request waits.
let busy = false;
let again = false;
export function requestSpectrogram() {
  if (!state.report || !state.info || $('spectrogram').hidden) return;
  if (busy) { again = true; return; }
  busy = true;
  again = false;
  const c = $('spectrogram');
  const { w, h, dpr } = fitCanvas(c);
  const { start, end } = viewRange();
  const rate = state.report.source_rate;
  const req = { which: sg.which, start, end: Math.max(end, start + 1), size: sg.size,
    columns: Math.min(w, 4096), rows: Math.max(16, Math.min(1024, h - Math.round(RULER * dpr))), log: sg.log,
    lo: sg.log ? LOG_LO_HZ : 0, hi: rate / 2 };
  const t0 = performance.now();
  call('spectrogram', req)
    .then((msg) => {
      sg.data = { ...req, rate, db: msg.db, frames: Math.floor(msg.db.length / req.rows), tapped: msg.tapped };
      sg.image = null;
      const t1 = performance.now();
      drawSpectrogram();
      sg.timing = { workerMs: msg.ms, totalMs: performance.now() - t0, drawMs: performance.now() - t1 };
      describe();
      showReadout();
      document.body.dataset.spectrogram = String((+document.body.dataset.spectrogram || 0) + 1);
    })
    .catch(() => {}) // nothing rendered yet (a sound is loading): the next render asks again
    .finally(() => { busy = false; if (again) requestSpectrogram(); });
}

// The data as an image at its own size (frames × rows), through the colour table.
function buildImage(d) {
  const canvas = document.createElement('canvas');
  canvas.width = Math.max(1, d.frames);
  canvas.height = d.rows;
  if (!d.frames) return canvas;
  const g = canvas.getContext('2d');
  const img = g.createImageData(d.frames, d.rows);
  const px = new Uint32Array(img.data.buffer);
  const floor = -sg.range;
  const k = 255 / sg.range;
  for (let j = 0; j < d.frames; j++) {
    const col = d.db.subarray(j * d.rows, (j + 1) * d.rows);
    for (let r = 0; r < d.rows; r++) {
      let i = Math.round((col[r] - floor) * k);
      i = i < 0 ? 0 : i > 255 ? 255 : i;
      px[(d.rows - 1 - r) * d.frames + j] = KILN_RGBA[i];
    }
  }
  g.putImageData(img, 0, 0);
  return canvas;
}

// Text on the image: light on a dark chip, legible over every colour of the map.
function chip(g, text, x, y, dpr, align = 'left') {
  const tw = g.measureText(text).width;
  const pad = 3 * dpr;
  const lx = align === 'right' ? x - tw - 2 * pad : x;
  g.fillStyle = 'rgba(0, 0, 0, 0.62)';
  g.fillRect(lx, y - 7 * dpr, tw + 2 * pad, 14 * dpr);
  g.fillStyle = '#ffffff';
  g.fillText(text, lx + pad, y);
}

function ticks(d) {
  if (d.log) return [50, 100, 200, 500, 1000, 2000, 5000, 10000, 20000].filter((f) => f > d.lo && f < d.hi);
  const step = [500, 1000, 2000, 5000, 10000].find((s) => d.hi / s <= 8) ?? 20000;
  const out = [];
  for (let f = step; f < d.hi; f += step) out.push(f);
  return out;
}

export function drawSpectrogram() {
  const c = $('spectrogram');
  if (c.hidden) return;
  const { g, w, h, dpr } = startPlot(c);
  const d = sg.data;
  if (!d || !state.info) return;
  const ruler = Math.round(RULER * dpr);
  const plotH = h - ruler;
  // The data's frames tile d.start … d.end; the view may have moved since it was asked for (a zoom under way):
  // place it in the current view until the new data arrive.
  const { start, end } = viewRange();
  const span = end - start;
  const x0 = ((d.start - start) / span) * w;
  const x1 = ((d.end - start) / span) * w;
  sg.image ??= buildImage(d);
  g.fillStyle = kilnCss(0);
  g.fillRect(0, 0, w, plotH);
  g.imageSmoothingEnabled = false;
  if (d.frames) g.drawImage(sg.image, x0, 0, x1 - x0, plotH);
  g.font = `${11 * dpr}px system-ui, sans-serif`;
  g.textBaseline = 'middle';
  const yOfRow = (row) => plotH - ((row + 0.5) / d.rows) * plotH;
  // The export rate's Nyquist frequency: nothing above it reaches the file.
  const nyq = state.report.export_rate / 2;
  sg.nyquist = null;
  if (nyq <= d.hi) {
    const y = Math.round(yOfRow(rowOf(nyq, d))) + 0.5;
    sg.nyquist = { hz: nyq, y: y / dpr };
    g.setLineDash([6 * dpr, 4 * dpr]);
    g.strokeStyle = 'rgba(0, 0, 0, 0.85)'; g.lineWidth = 3 * dpr;
    g.beginPath(); g.moveTo(0, y); g.lineTo(w, y); g.stroke();
    g.strokeStyle = '#ffffff'; g.lineWidth = 1.5 * dpr;
    g.beginPath(); g.moveTo(0, y); g.lineTo(w, y); g.stroke();
    g.setLineDash([]);
    const ly = y < 12 * dpr ? y + 10 * dpr : y - 10 * dpr;
    chip(g, `export Nyquist ${fmtHz(nyq)}`, w - 4 * dpr, ly, dpr, 'right');
  }
  // Frequency ticks along the left edge.
  g.strokeStyle = 'rgba(255, 255, 255, 0.55)';
  g.lineWidth = dpr;
  let lastY = Infinity;
  for (const f of ticks(d)) {
    const y = Math.round(yOfRow(rowOf(f, d))) + 0.5;
    g.beginPath(); g.moveTo(0, y); g.lineTo(5 * dpr, y); g.stroke();
    if (lastY - y < 16 * dpr || y < 8 * dpr || y > plotH - 8 * dpr) continue;
    chip(g, f >= 1000 ? `${f / 1000} kHz` : `${f} Hz`, 7 * dpr, y, dpr);
    lastY = y;
  }
  // The readout's cursor.
  const at = cursorCell();
  if (at) {
    const x = ((at.frame - start) / span) * w;
    const y = yOfRow(at.row);
    g.strokeStyle = '#ffffff'; g.lineWidth = dpr;
    g.strokeRect(x - 5 * dpr, y - 5 * dpr, 10 * dpr, 10 * dpr);
    g.strokeStyle = '#000000';
    g.strokeRect(x - 6 * dpr, y - 6 * dpr, 12 * dpr, 12 * dpr);
  }
  g.textBaseline = 'alphabetic';
  drawRuler(g, w, h, ruler, dpr, start / d.rate, end / d.rate);
}

// The data cell under the cursor: { frame (sample position), row, j, r, hz, db } or null.
function cursorCell() {
  const d = sg.data;
  if (!d || !sg.cursor || !d.frames) return null;
  const j = Math.floor(((sg.cursor.frame - d.start) / (d.end - d.start)) * d.frames);
  const r = Math.round(rowOf(sg.cursor.hz, d));
  if (j < 0 || j >= d.frames || r < 0 || r >= d.rows) return null;
  return { frame: sg.cursor.frame, row: r, j, r, hz: hzAt(r, d), db: d.db[j * d.rows + r] };
}

function label(which) {
  const t = state.tap;
  if (which === 'input') return 'original';
  if (t === null || t === undefined) return which === 'output' ? 'processed' : 'error';
  return which === 'output' ? `after stage ${t + 1}` : `error of stage ${t + 1}`;
}

function showReadout() {
  const out = $('sg-readout');
  const at = cursorCell();
  if (!at) { out.textContent = ''; return; }
  out.textContent = `${(at.frame / sg.data.rate).toFixed(3)} s · ${fmtHz(at.hz)} · ${fmtDbfs(at.db)}`;
}

// The canvas's text alternative: what it shows, its scale, and the strongest point in view.
function describe() {
  const d = sg.data;
  let best = -Infinity;
  let bi = 0;
  for (let i = 0; i < d.db.length; i++) if (d.db[i] > best) { best = d.db[i]; bi = i; }
  const j = Math.floor(bi / d.rows);
  const strongest = d.frames ? `Strongest: ${fmtHz(hzAt(bi % d.rows, d))} at ${fmtDbfs(best)}, ` +
    `${((d.start + ((j + 0.5) * (d.end - d.start)) / d.frames) / d.rate).toFixed(2)} s.` : '';
  $('spectrogram').setAttribute('aria-label', `Spectrogram of the ${label(d.which)} signal, ` +
    `${(d.start / d.rate).toFixed(2)} to ${(d.end / d.rate).toFixed(2)} s; frequency up the side on a ` +
    `${d.log ? 'log' : 'linear'} axis to ${fmtHz(d.hi)}; colour is level, dark ${-sg.range} dBFS to light 0 dBFS. ` +
    strongest);
}

// The legend: the colour map from −range to 0 dBFS, ticks every 20 dB (30 for a wide range).
function drawLegend() {
  const c = $('sg-legend');
  const r = c.getBoundingClientRect();
  const dpr = window.devicePixelRatio || 1;
  const w = Math.max(40, Math.round(r.width * dpr));
  const h = Math.max(8, Math.round(r.height * dpr));
  if (c.width !== w || c.height !== h) { c.width = w; c.height = h; }
  const g = c.getContext('2d');
  for (let x = 0; x < w; x++) { g.fillStyle = kilnCss((x / (w - 1)) * 255); g.fillRect(x, 0, 1, h); }
  const every = sg.range > 120 ? 30 : 20;
  g.fillStyle = 'rgba(0, 0, 0, 0.55)';
  for (let db = -sg.range + every; db < 0; db += every) {
    const x = Math.round(((db + sg.range) / sg.range) * (w - 1));
    g.fillRect(x, 0, Math.max(1, dpr), h / 3);
    g.fillRect(x, (2 * h) / 3, Math.max(1, dpr), h / 3);
  }
  $('sg-legend-lo').textContent = `−${sg.range}`;
  c.setAttribute('aria-label', `Colour scale (${KILN_NAME}): from dark at −${sg.range} dBFS or below to light at 0 dBFS`);
}

// The signal menu names what the processed and error entries show (a tapped stage changes them).
export function updateSpectrogramLabels() {
  for (const o of $('sg-which').options) o.textContent = label(o.value);
}

// Moves the keyboard/pointer cursor and shows the readout.
function setCursor(frame, hz) {
  sg.cursor = { frame, hz };
  drawSpectrogram();
  showReadout();
}

export function setupSpectrogram() {
  const c = $('spectrogram');
  const sizeMenu = $('sg-size');
  sizeMenu.replaceChildren(...SIZES.map((n) => new Option(String(n), String(n), false, n === sg.size)));
  const changed = () => { requestSpectrogram(); };
  $('sg-which').onchange = (e) => { sg.which = e.target.value; changed(); };
  sizeMenu.onchange = (e) => { sg.size = +e.target.value; changed(); };
  $('sg-scale').onchange = (e) => { sg.log = e.target.value === 'log'; changed(); };
  $('sg-range').onchange = (e) => { sg.range = +e.target.value; sg.image = null; drawLegend(); drawSpectrogram(); if (sg.data) describe(); };
  drawLegend();
  const cellAt = (ev) => {
    const d = sg.data;
    const r = c.getBoundingClientRect();
    const { start, end } = viewRange();
    const frame = start + ((ev.clientX - r.left) / r.width) * (end - start);
    const plotH = r.height - RULER;
    const imgRow = Math.floor(((ev.clientY - r.top) / plotH) * d.rows);
    return { frame, hz: hzAt(d.rows - 1 - imgRow, d), inside: ev.clientY - r.top < plotH };
  };
  c.addEventListener('pointermove', (ev) => {
    if (!sg.data) return;
    const at = cellAt(ev);
    if (at.inside) setCursor(at.frame, at.hz);
  });
  c.addEventListener('wheel', (ev) => {
    if (!state.info) return;
    ev.preventDefault();
    const { start, end } = viewRange();
    const r = c.getBoundingClientRect();
    if (ev.shiftKey || Math.abs(ev.deltaX) > Math.abs(ev.deltaY)) {
      scroll(Math.round(((ev.deltaX || ev.deltaY) / r.width) * (end - start)));
      return;
    }
    zoom(start + ((ev.clientX - r.left) / r.width) * (end - start), ev.deltaY > 0 ? 1.25 : 0.8);
  }, { passive: false });
  c.addEventListener('dblclick', wholeView);
  // Keys: arrows move the cursor (Shift: a finer step), Page Up / Down a coarse frequency step, Shift + Alt + arrows
  // scroll, + − zoom, 0 or Home the whole sound, P the strongest point in view.
  c.addEventListener('keydown', (ev) => {
    const d = sg.data;
    if (!d || !state.info) return;
    const { start, end } = viewRange();
    const k = ev.key;
    if (k === '+' || k === '=') zoom(sg.cursor?.frame ?? (start + end) / 2, 0.8);
    else if (k === '-' || k === '_') zoom(sg.cursor?.frame ?? (start + end) / 2, 1.25);
    else if (k === '0' || k === 'Home') wholeView();
    else if (ev.altKey && (k === 'ArrowLeft' || k === 'ArrowRight')) scroll(Math.round(((k === 'ArrowLeft' ? -1 : 1) * (end - start)) / 10));
    else if (k === 'p' || k === 'P') {
      let best = 0;
      for (let i = 1; i < d.db.length; i++) if (d.db[i] > d.db[best]) best = i;
      const j = Math.floor(best / d.rows);
      setCursor(d.start + ((j + 0.5) * (d.end - d.start)) / d.frames, hzAt(best % d.rows, d));
    } else if (['ArrowLeft', 'ArrowRight', 'ArrowUp', 'ArrowDown', 'PageUp', 'PageDown'].includes(k)) {
      const cur = sg.cursor ?? { frame: (start + end) / 2, hz: hzAt((d.rows - 1) / 2, d) };
      const fine = ev.shiftKey;
      const dt = ((end - start) / 50) * (fine ? 0.2 : 1);
      const rowStep = k.startsWith('Page') ? Math.max(1, Math.round(d.rows / 10)) : fine ? 1 : Math.max(1, Math.round(d.rows / 50));
      let frame = cur.frame;
      let row = Math.round(rowOf(cur.hz, d));
      if (k === 'ArrowLeft') frame -= dt;
      if (k === 'ArrowRight') frame += dt;
      if (k === 'ArrowUp' || k === 'PageUp') row += rowStep;
      if (k === 'ArrowDown' || k === 'PageDown') row -= rowStep;
      frame = Math.max(start, Math.min(end - 1, frame));
      row = Math.max(0, Math.min(d.rows - 1, row));
      setCursor(frame, hzAt(row, d));
    } else return;
    ev.preventDefault();
  });
  c.addEventListener('blur', () => { drawSpectrogram(); });
}

// Where (CSS px from the canvas's top left) the readout reads `hz` at sample position `frame` (`exact`: where `hz`
// itself lies, not the centre of its pixel row): for tests.
sg.pixelOf = (frame, hz, exact = false) => {
  const d = sg.data;
  const r = $('spectrogram').getBoundingClientRect();
  const { start, end } = viewRange();
  const plotH = r.height - RULER;
  const row = exact ? rowOf(hz, d) : Math.round(rowOf(hz, d));
  return { x: ((frame - start) / (end - start)) * r.width, y: plotH - ((row + 0.5) / d.rows) * plotH };
};
