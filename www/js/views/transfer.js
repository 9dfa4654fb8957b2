// The transfer view: the chain's static input → output curve (the staircase a quantizer draws), from the core's
// analysis::transfer, up to the tapped stage when one is tapped. Zoom with the wheel or + −, pan with ← → ↑ ↓ (when
// focused), 0 for the whole range; the core recomputes the curve for the range shown, so steps of any word length
// come into view.
import { $ } from '../util.js';
import { state } from '../state.js';
import { call } from '../worker-client.js';
import { css, fitCanvas, startPlot } from './plot.js';

export const tf = { lo: -1, hi: 1, data: null };
window.stairstepTransfer = tf; // for tests and the curious

const MIN_SPAN = 1e-6; // about eight 24-bit steps
const upto = () => (state.tapped ? state.tapped.stage : state.preset.stages.length - 1);

let busy = false;
let again = false;
export function requestTransfer() {
  const c = $('transfer');
  if (c.hidden || !state.report) return;
  if (busy) { again = true; return; }
  busy = true;
  again = false;
  const { w } = fitCanvas(c);
  const req = { upto: upto(), lo: tf.lo, hi: tf.hi, points: Math.max(256, Math.min(8192, 2 * w)) };
  call('transfer', req)
    .then((msg) => { tf.data = { ...req, ...msg }; drawTransfer(); })
    .catch((err) => { tf.data = null; $('tf-notes').textContent = err.message; drawTransfer(); })
    .finally(() => { busy = false; if (again) requestTransfer(); });
}

// Round tick steps (1, 2 or 5 × a power of ten) for a span, about `n` of them.
function tickStep(span, n) {
  const raw = span / n;
  const p = 10 ** Math.floor(Math.log10(raw));
  return [1, 2, 5, 10].map((m) => m * p).find((s) => s >= raw);
}
const fmt = (v, step) => {
  const d = Math.max(0, -Math.floor(Math.log10(step) + 1e-9));
  const s = v.toFixed(Math.min(d, 8));
  return s.startsWith('-') ? `−${s.slice(1)}` : s;
};

export function drawTransfer() {
  const c = $('transfer');
  if (c.hidden) return;
  const { g, w, h, dpr } = startPlot(c);
  const d = tf.data;
  if (!d) return;
  const left = 54 * dpr;
  const bottom = 16 * dpr;
  const top = 6 * dpr;
  const pw = w - left - 6 * dpr;
  const ph = h - bottom - top;
  let ylo = d.lo;
  let yhi = d.hi;
  for (const v of d.output) { if (v < ylo) ylo = v; if (v > yhi) yhi = v; }
  const X = (v) => left + ((v - d.lo) / (d.hi - d.lo)) * pw;
  const Y = (v) => top + ph - ((v - ylo) / (yhi - ylo)) * ph;
  g.font = `${11 * dpr}px system-ui, sans-serif`;
  g.lineWidth = dpr;
  g.strokeStyle = css('--grid');
  g.fillStyle = css('--dim');
  const sx = tickStep(d.hi - d.lo, Math.max(2, Math.floor(pw / (90 * dpr))));
  let lastRight = -Infinity;
  for (let k = Math.ceil(d.lo / sx); k * sx <= d.hi + 1e-12; k++) {
    const x = Math.round(X(k * sx)) + 0.5;
    g.beginPath(); g.moveTo(x, top); g.lineTo(x, top + ph); g.stroke();
    const label = fmt(k * sx, sx);
    const tw = g.measureText(label).width;
    const lx = Math.min(Math.max(x - tw / 2, left), w - tw - 2 * dpr);
    if (lx < lastRight + 6 * dpr) continue;
    g.fillText(label, lx, h - 4 * dpr);
    lastRight = lx + tw;
  }
  const sy = tickStep(yhi - ylo, Math.max(2, Math.floor(ph / (28 * dpr))));
  for (let k = Math.ceil(ylo / sy); k * sy <= yhi + 1e-12; k++) {
    const y = Math.round(Y(k * sy)) + 0.5;
    g.beginPath(); g.moveTo(left, y); g.lineTo(left + pw, y); g.stroke();
    const label = fmt(k * sy, sy);
    g.fillText(label, left - g.measureText(label).width - 4 * dpr, Math.min(Math.max(y + 4 * dpr, 11 * dpr), top + ph));
  }
  // No change at all: the diagonal.
  g.setLineDash([4 * dpr, 4 * dpr]);
  g.strokeStyle = css('--original');
  g.beginPath(); g.moveTo(X(Math.max(d.lo, ylo)), Y(Math.max(d.lo, ylo))); g.lineTo(X(Math.min(d.hi, yhi)), Y(Math.min(d.hi, yhi))); g.stroke();
  g.setLineDash([]);
  // The curve as steps: each point holds its output until the next input.
  g.strokeStyle = css('--processed');
  g.lineWidth = 1.5 * dpr;
  g.beginPath();
  const n = d.output.length;
  for (let i = 0; i < n; i++) {
    const x = X(d.lo + ((d.hi - d.lo) * i) / (n - 1));
    const y = Y(d.output[i]);
    if (i) g.lineTo(x, Y(d.output[i - 1]));
    if (i) g.lineTo(x, y); else g.moveTo(x, y);
  }
  g.stroke();
  const stages = d.applied.length ? `stages ${d.applied.map((i) => i + 1).join(', ')}` : 'no stage with a static curve';
  $('tf-levels').textContent = `${d.levels.toLocaleString('en')} output levels in view · ${stages}`;
  $('tf-notes').textContent = d.notes.length ? `${d.notes.join('; ')}.` : '';
  c.setAttribute('aria-label', `Transfer curve, input from ${fmt(d.lo, sx)} to ${fmt(d.hi, sx)} of full scale ` +
    `against output: ${d.levels} distinct output levels in view.`);
}

function zoomAt(centre, factor) {
  const span = Math.min(2, Math.max(MIN_SPAN, (tf.hi - tf.lo) * factor));
  let lo = centre - (centre - tf.lo) * (span / (tf.hi - tf.lo));
  lo = Math.max(-1, Math.min(1 - span, lo));
  tf.lo = lo;
  tf.hi = lo + span;
  requestTransfer();
}
function pan(frac) {
  const span = tf.hi - tf.lo;
  tf.lo = Math.max(-1, Math.min(1 - span, tf.lo + frac * span));
  tf.hi = tf.lo + span;
  requestTransfer();
}

export function setupTransfer() {
  const c = $('transfer');
  c.addEventListener('wheel', (ev) => {
    ev.preventDefault();
    const r = c.getBoundingClientRect();
    const x = Math.min(1, Math.max(0, (ev.clientX - r.left - 54) / (r.width - 60)));
    if (ev.shiftKey) pan((ev.deltaY || ev.deltaX) > 0 ? 0.1 : -0.1);
    else zoomAt(tf.lo + x * (tf.hi - tf.lo), ev.deltaY > 0 ? 1.25 : 0.8);
  }, { passive: false });
  c.addEventListener('dblclick', () => { tf.lo = -1; tf.hi = 1; requestTransfer(); });
  c.addEventListener('keydown', (ev) => {
    const k = ev.key;
    const mid = (tf.lo + tf.hi) / 2;
    if (k === '+' || k === '=') zoomAt(mid, 0.5);
    else if (k === '-' || k === '_') zoomAt(mid, 2);
    else if (k === 'ArrowLeft' || k === 'ArrowDown') pan(-0.1);
    else if (k === 'ArrowRight' || k === 'ArrowUp') pan(0.1);
    else if (k === '0' || k === 'Home') { tf.lo = -1; tf.hi = 1; requestTransfer(); }
    else return;
    ev.preventDefault();
  });
}
