// The format budget's size-quality plot: every candidate's score (dB) against its exact size (bytes, log scale), the
// Pareto front as a line, the current export and the pick marked, the byte limit (or the kbit/s limit as bytes for
// this sound's duration) as a dashed line.
import { css, startPlot } from './plot.js';

const EXACT_DB = 200; // an exact copy reads +240 dB: drawn just above the others, on an "exact" line

function niceBytes(b) {
  if (b >= 1024 * 1024) return `${b / 1024 / 1024} MiB`;
  if (b >= 1024) return `${b / 1024} KiB`;
  return `${b} B`;
}

// `view`: { candidates, pareto, pick, score ('a_weighted_snr_db' | 'sqnr_db'), limitBytes (or null) }.
export function drawBudgetPlot(canvas, view) {
  const { g, w, h, dpr } = startPlot(canvas);
  const cs = view?.candidates ?? [];
  if (!cs.length) return;
  const score = (c) => c[view.score];
  const inexact = cs.map(score).filter((v) => v < EXACT_DB);
  const top = inexact.length ? Math.ceil(Math.max(...inexact) / 10) * 10 + 10 : 10;
  const yv = (c) => (score(c) >= EXACT_DB ? top : score(c));
  const lo = Math.floor(Math.min(...cs.map(yv), top - 20) / 10) * 10;
  let x0 = Math.log10(Math.max(1, Math.min(...cs.map((c) => c.bytes))));
  let x1 = Math.log10(Math.max(...cs.map((c) => c.bytes)));
  if (view.limitBytes) { x0 = Math.min(x0, Math.log10(view.limitBytes)); x1 = Math.max(x1, Math.log10(view.limitBytes)); }
  x0 = Math.floor(x0 * 10) / 10 - 0.05;
  x1 = Math.ceil(x1 * 10) / 10 + 0.05;
  const fs = 11 * dpr;
  const ml = 44 * dpr;
  const mr = 14 * dpr;
  const mt = 10 * dpr;
  const mb = 18 * dpr;
  const X = (b) => ml + ((Math.log10(Math.max(1, b)) - x0) / (x1 - x0)) * (w - ml - mr);
  const Y = (db) => mt + (1 - (db - lo) / (top - lo)) * (h - mt - mb);
  g.font = `${fs}px system-ui, sans-serif`;
  g.lineWidth = dpr;
  // Grid: dB every 10 or 20 (whichever leaves room), bytes at 1, 2 and 5 of each decade.
  const stepDb = Y(lo) - Y(lo + 10) >= 2 * fs ? 10 : Y(lo) - Y(lo + 20) >= 2 * fs ? 20 : 40;
  g.strokeStyle = css('--grid');
  g.fillStyle = css('--dim');
  g.textAlign = 'right';
  for (let db = lo; db <= top; db += stepDb) {
    g.beginPath(); g.moveTo(ml, Y(db)); g.lineTo(w - mr, Y(db)); g.stroke();
    const label = db === top && inexact.length < cs.length ? 'exact' : `${db} dB`;
    g.fillText(label, ml - 4 * dpr, Y(db) + fs * 0.35);
  }
  // Bytes at powers of two (a byte budget is usually one: 8192 is 8 KiB), every other one when they crowd.
  g.textAlign = 'center';
  const k0 = Math.ceil(x0 / Math.log10(2));
  const k1 = Math.floor(x1 / Math.log10(2));
  const every = Math.max(1, Math.ceil((k1 - k0 + 1) / Math.max(2, Math.floor((w - ml - mr) / (48 * dpr)))));
  for (let k = k0; k <= k1; k++) {
    const x = X(2 ** k);
    g.beginPath(); g.moveTo(x, mt); g.lineTo(x, h - mb); g.stroke();
    if (k % every === 0) g.fillText(niceBytes(2 ** k), x, h - 4 * dpr);
  }
  g.textAlign = 'left';
  // The limit.
  if (view.limitBytes) {
    g.strokeStyle = css('--warn');
    g.setLineDash([5 * dpr, 4 * dpr]);
    g.beginPath(); g.moveTo(X(view.limitBytes), mt); g.lineTo(X(view.limitBytes), h - mb); g.stroke();
    g.setLineDash([]);
  }
  // Every candidate, then the front over them.
  g.fillStyle = css('--original');
  for (const c of cs) { g.beginPath(); g.arc(X(c.bytes), Y(yv(c)), 2.5 * dpr, 0, 7); g.fill(); }
  const front = cs.map((c, i) => i).filter((i) => view.pareto?.[i]).sort((a, b) => cs[a].bytes - cs[b].bytes);
  g.strokeStyle = css('--processed');
  g.fillStyle = css('--processed');
  g.lineWidth = 1.5 * dpr;
  g.beginPath();
  front.forEach((i, k) => (k ? g.lineTo(X(cs[i].bytes), Y(yv(cs[i]))) : g.moveTo(X(cs[i].bytes), Y(yv(cs[i])))));
  g.stroke();
  for (const i of front) { g.beginPath(); g.arc(X(cs[i].bytes), Y(yv(cs[i])), 3.5 * dpr, 0, 7); g.fill(); }
  // The current export: a square; the pick: a ring.
  const cur = cs.find((c) => c.current);
  if (cur) {
    const s = 5 * dpr;
    g.strokeStyle = css('--fg');
    g.lineWidth = 1.5 * dpr;
    g.strokeRect(X(cur.bytes) - s, Y(yv(cur)) - s, 2 * s, 2 * s);
  }
  if (view.pick !== null && view.pick !== undefined) {
    const c = cs[view.pick];
    g.strokeStyle = css('--error');
    g.lineWidth = 2.5 * dpr;
    g.beginPath(); g.arc(X(c.bytes), Y(yv(c)), 7 * dpr, 0, 7); g.stroke();
  }
  g.lineWidth = dpr;
}
