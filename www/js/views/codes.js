// The code histogram: how often a quantizing stage emitted each code of its word (the tapped stage when it quantizes,
// else the last active quantizing stage), counted by the core (analysis::codes) on the stage's output at its own rate.
// Counts on a log scale, so that codes used once still show.
import { $ } from '../util.js';
import { state } from '../state.js';
import { call } from '../worker-client.js';
import { css, fitCanvas, startPlot } from './plot.js';
import { codesText } from './meters.js';

const QUANTIZERS = ['quantize', 'g711', 'compand', 'minifloat'];
export const ch = { data: null };
window.stairstepCodes = ch; // for tests and the curious

function pickStage() {
  const st = state.preset.stages;
  const t = state.tapped?.stage;
  if (t !== undefined && t !== null && QUANTIZERS.includes(st[t]?.kind) && !st[t].bypass) return t;
  for (let i = st.length - 1; i >= 0; i--) if (QUANTIZERS.includes(st[i].kind) && !st[i].bypass) return i;
  return null;
}

let busy = false;
let again = false;
export function requestCodes() {
  const c = $('codes');
  if (c.hidden || !state.report) return;
  const stage = pickStage();
  if (stage === null) {
    ch.data = null;
    $('codes-note').textContent = 'No active quantizing stage (uniform, G.711, compand, minifloat) in the chain.';
    drawCodes();
    return;
  }
  if (busy) { again = true; return; }
  busy = true;
  again = false;
  const { w } = fitCanvas(c);
  call('codes', { stage, bins: Math.max(16, Math.min(4096, w)) })
    .then((msg) => { ch.data = { stage, ...msg.histogram }; drawCodes(); })
    .catch((err) => { ch.data = null; $('codes-note').textContent = err.message; drawCodes(); })
    .finally(() => { busy = false; if (again) requestCodes(); });
}

export function drawCodes() {
  const c = $('codes');
  if (c.hidden) return;
  const { g, w, h, dpr } = startPlot(c);
  const d = ch.data;
  if (!d) return;
  const left = 44 * dpr;
  const bottom = 16 * dpr;
  const pw = w - left - 4 * dpr;
  const ph = h - bottom - 4 * dpr;
  const max = Math.max(1, ...d.counts);
  const decades = Math.max(1, Math.ceil(Math.log10(max)));
  const Y = (n) => 4 * dpr + ph - (Math.log10(n) / decades) * ph; // n ≥ 1
  g.font = `${11 * dpr}px system-ui, sans-serif`;
  g.strokeStyle = css('--grid');
  g.fillStyle = css('--dim');
  g.lineWidth = dpr;
  const every = decades > 4 ? 2 : 1;
  for (let e = 0; e <= decades; e += every) {
    const y = Math.round(Y(10 ** e)) + 0.5;
    g.beginPath(); g.moveTo(left, y); g.lineTo(left + pw, y); g.stroke();
    const label = e === 0 ? '1' : `10${'⁰¹²³⁴⁵⁶⁷⁸⁹'[e] ?? `^${e}`}`;
    g.fillText(label, left - g.measureText(label).width - 4 * dpr, Math.min(Math.max(y + 4 * dpr, 11 * dpr), 4 * dpr + ph));
  }
  const bins = d.counts.length;
  const bw = pw / bins;
  g.fillStyle = css('--processed');
  for (let b = 0; b < bins; b++) {
    const n = d.counts[b];
    if (!n) continue;
    const y = Y(n);
    g.fillRect(left + b * bw, y - dpr, Math.max(dpr, bw - (bw > 3 * dpr ? dpr : 0)), 4 * dpr + ph - y + dpr);
  }
  // Codes along the bottom: the first, the middle and the last (signed codes where the word has them).
  g.fillStyle = css('--dim');
  const code = (i) => (d.lowest_code === null || d.lowest_code === undefined ? i : d.lowest_code + i);
  const last = d.code_space - 1;
  for (const [i, align] of [[0, 'left'], [Math.floor(d.code_space / 2), 'centre'], [last, 'right']]) {
    const label = String(code(i)).replace('-', '−');
    const tw = g.measureText(label).width;
    const x = left + ((i + 0.5) / d.code_space) * pw;
    g.fillText(label, align === 'left' ? left : align === 'right' ? w - tw - 4 * dpr : x - tw / 2, h - 4 * dpr);
  }
  const used = codesText(d);
  const kind = state.preset.stages[d.stage]?.kind ?? '';
  $('codes-note').textContent = `stage ${d.stage + 1} (${kind}): ${used} codes used · entropy ` +
    `${d.entropy_bits.toFixed(2)} bits per sample${d.bin_width > 1 ? ` · ${d.bin_width} codes per bar` : ''}`;
  c.setAttribute('aria-label', `Code histogram of stage ${d.stage + 1}: ${used} codes used, ` +
    `${d.samples.toLocaleString('en')} samples, entropy ${d.entropy_bits.toFixed(2)} bits per sample; counts on a log scale.`);
}
