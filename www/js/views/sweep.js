// The sweep view: SQNR against word length for this sound (measured in the worker), with the theory lines.
import { $ } from '../util.js';
import { state } from '../state.js';
import { call } from '../worker-client.js';
import { css, startPlot } from './plot.js';

const SWEEP_SECONDS = 10;
export function drawSweep() {
  const c = $('sweep');
  const { g, w, h, dpr } = startPlot(c);
  const pts = state.sweep;
  if (!pts) return;
  const top = 160;
  const x = (bits) => ((bits - 0.5) / 24) * w;
  const y = (db) => h - (Math.max(0, Math.min(top, db)) / top) * (h - 14) - 12;
  g.font = `${11 * dpr}px system-ui, sans-serif`;
  g.strokeStyle = css('--grid');
  g.fillStyle = css('--dim');
  // Grid every 40 dB; labels every 40 or 80 dB, whichever leaves room for them, inside the canvas.
  const labelEvery = y(0) - y(40) >= 14 * dpr ? 40 : 80;
  for (let db = 0; db <= top; db += 40) {
    g.beginPath(); g.moveTo(0, y(db)); g.lineTo(w, y(db)); g.stroke();
    // Above its line; the top line (the plot's ceiling) has no room for one.
    if (db % labelEvery === 0 && y(db) - 2 * dpr >= 11 * dpr) g.fillText(`${db} dB`, 4 * dpr, y(db) - 2 * dpr);
  }
  for (const p of pts) {
    if (p.bits % 4) continue;
    const label = p.bits === 24 ? '24 bits' : `${p.bits}`;
    g.fillText(label, Math.min(x(p.bits) - 4 * dpr, w - g.measureText(label).width - 2 * dpr), h - 2 * dpr);
  }
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

export function requestSweep() {
  state.sweep = null;
  drawSweep();
  const long = state.info.frames > SWEEP_SECONDS * state.info.sampleRate;
  $('sweep-note').textContent = long ? `(first ${SWEEP_SECONDS} s)` : '';
  call('sweep', { maxSeconds: SWEEP_SECONDS }).then((m) => { state.sweep = m.points; drawSweep(); }).catch(() => {});
}
