// The waveform view: one lane per channel, processed filled and original outlined, the loop selection, the
// preparation's fades and loop markers, the playhead; drag to select a loop, wheel to zoom and scroll.
import { $, setStatus } from '../util.js';
import { state, viewRange, waveColumns } from '../state.js';
import { call } from '../worker-client.js';
import { audio } from '../audition.js';
import { css, startPlot } from './plot.js';

export function drawWave() {
  const c = $('wave');
  const { g, w, h, dpr } = startPlot(c);
  if (!state.env) return;
  const { start, end } = viewRange();
  const ruler = Math.round(16 * dpr); // the time ruler along the bottom
  const plotH = h - ruler;
  if (state.loop) {
    const x0 = ((state.loop.start - start) / (end - start)) * w;
    const x1 = ((state.loop.end - start) / (end - start)) * w;
    g.fillStyle = css('--loop');
    g.fillRect(x0, 0, x1 - x0, plotH);
  }
  // One lane per channel (stacked, top to bottom), processed filled, original as its outline on top, so both stay
  // visible where they differ.
  const lanes = state.env.output.length;
  const laneH = plotH / lanes;
  for (let c = 0; c < lanes; c++) {
    const mid = laneH * (c + 0.5);
    const amp = laneH / 2 - 2;
    g.strokeStyle = css('--grid');
    g.lineWidth = 1;
    g.beginPath(); g.moveTo(0, mid); g.lineTo(w, mid); g.stroke();
    if (c) { g.beginPath(); g.moveTo(0, laneH * c); g.lineTo(w, laneH * c); g.stroke(); }
    const out = state.env.output[c];
    const n = out.length / 2;
    g.fillStyle = css('--processed');
    for (let i = 0; i < n; i++) {
      const y0 = mid - out[2 * i + 1] * amp;
      const y1 = mid - out[2 * i] * amp;
      g.fillRect((i / n) * w, y0, Math.max(1, w / n), Math.max(1, y1 - y0));
    }
    const inp = state.env.input[c];
    g.strokeStyle = css('--original');
    for (const k of [1, 0]) {
      g.beginPath();
      for (let i = 0; i < n; i++) {
        const px = (i / n) * w;
        const py = mid - inp[2 * i + k] * amp;
        if (i) g.lineTo(px, py); else g.moveTo(px, py);
      }
      g.stroke();
    }
    if (lanes > 1) {
      g.fillStyle = css('--fg');
      g.font = `${11 * dpr}px system-ui, sans-serif`;
      g.fillText(lanes === 2 ? ['L', 'R'][c] : String(c + 1), 4 * dpr, laneH * c + 13 * dpr);
    }
  }
  // Preparation on the waveform: the fades as gain ramps along the top, the exported loop as two markers.
  const prep = state.preset.prep ?? {};
  const rate = state.info.sampleRate;
  const fx = (f) => ((f - start) / (end - start)) * w;
  g.strokeStyle = css('--error');
  g.lineWidth = 1.5;
  const total = state.report?.frames ?? end;
  for (const [key, from, to] of [['fade_in', 0, 1], ['fade_out', 1, 0]]) {
    const f = prep[key];
    if (!f) continue;
    const len = (f.ms / 1000) * rate;
    const a = key === 'fade_in' ? 0 : total - len;
    g.beginPath(); g.moveTo(fx(a), 2 + (1 - from) * 20); g.lineTo(fx(a + len), 2 + (1 - to) * 20); g.stroke();
  }
  // Where the core placed the loop on the prepared sound (any form: frames, seconds, fraction, the file's own).
  const placed = state.report?.prep?.loop_region;
  if (prep.loop_region && placed) {
    g.setLineDash([4, 3]);
    for (const f of placed) { g.beginPath(); g.moveTo(fx(f), 0); g.lineTo(fx(f), plotH); g.stroke(); }
    g.setLineDash([]);
  }
  if (audio.playing) {
    const pos = audio.position();
    const x = ((pos - start) / (end - start)) * w;
    g.fillStyle = css('--fg');
    g.fillRect(x, 0, 2, plotH);
  }
  drawRuler(g, w, h, ruler, dpr, start / rate, end / rate);
}

// Seconds along the bottom: ticks at a round step (1, 2 or 5 × a power of ten) at least ~80 px apart, labelled.
const STEPS = [1, 2, 5].flatMap((m) => [-4, -3, -2, -1, 0, 1, 2].map((e) => m * 10 ** e)).sort((a, b) => a - b);
export function drawRuler(g, w, h, ruler, dpr, t0, t1) {
  const span = t1 - t0;
  if (!(span > 0)) return;
  g.fillStyle = css('--plot-bg');
  g.fillRect(0, h - ruler, w, ruler);
  g.strokeStyle = css('--grid');
  g.lineWidth = 1;
  g.beginPath(); g.moveTo(0, h - ruler + 0.5); g.lineTo(w, h - ruler + 0.5); g.stroke();
  const step = STEPS.find((s) => (s / span) * w >= 80 * dpr) ?? STEPS[STEPS.length - 1];
  const decimals = Math.max(0, -Math.floor(Math.log10(step) + 1e-9));
  g.font = `${11 * dpr}px system-ui, sans-serif`;
  g.fillStyle = css('--dim');
  g.strokeStyle = css('--dim');
  g.textBaseline = 'middle';
  let lastRight = -Infinity;
  for (let k = Math.ceil(t0 / step); k * step <= t1 + 1e-9; k++) {
    const x = Math.round(((k * step - t0) / span) * w) + 0.5;
    g.beginPath(); g.moveTo(x, h - ruler); g.lineTo(x, h - ruler + 4 * dpr); g.stroke();
    const label = `${(k * step).toFixed(decimals)} s`;
    const tw = g.measureText(label).width;
    // Kept inside the canvas (the last label ends at the right edge instead of being cut), and never on another.
    const lx = Math.min(Math.max(x + 3 * dpr, 0), w - tw - 2 * dpr);
    if (lx < lastRight + 6 * dpr) continue;
    g.fillText(label, lx, h - ruler / 2 + dpr);
    lastRight = lx + tw;
  }
  g.textBaseline = 'alphabetic';
}

// The loop region as two number boxes in seconds (empty: no region, the whole sound loops).
export function showLoopFields() {
  const rate = state.info?.sampleRate;
  const s = $('loop-start');
  const e = $('loop-end');
  s.removeAttribute('aria-invalid');
  e.removeAttribute('aria-invalid');
  if (!rate) return;
  const dur = (state.info.frames / rate).toFixed(3);
  s.max = dur; e.max = dur;
  s.placeholder = '0.000'; e.placeholder = dur;
  s.value = state.loop ? (state.loop.start / rate).toFixed(3) : '';
  e.value = state.loop ? (state.loop.end / rate).toFixed(3) : '';
}

function typedLoop() {
  if (!state.info) return;
  const rate = state.info.sampleRate;
  const frames = state.info.frames;
  const s = $('loop-start');
  const e = $('loop-end');
  if (s.value === '' && e.value === '') { setLoop(null); return; }
  const a = s.value === '' ? 0 : Math.round(parseFloat(s.value) * rate);
  const b = e.value === '' ? frames : Math.round(parseFloat(e.value) * rate);
  const ok = Number.isFinite(a) && Number.isFinite(b) && a >= 0 && b <= frames && b - a >= 64;
  s.setAttribute('aria-invalid', String(!ok));
  e.setAttribute('aria-invalid', String(!ok));
  if (!ok) {
    setStatus(`Loop: the start must come before the end, both within 0 to ${(frames / rate).toFixed(3)} s ` +
      `(at least ${Math.ceil((64 / rate) * 1000)} ms apart). The loop is unchanged.`, 'error');
    return;
  }
  setLoop({ start: a, end: b });
  setStatus(`Loop ${(a / rate).toFixed(3)} s to ${(b / rate).toFixed(3)} s`);
}

function setLoop(loop) {
  state.loop = loop;
  showLoopFields();
  audio.loopChanged();
  drawWave();
}

// Zoom by `factor` around frame `centre`; scroll by `frames`; both keep the view inside the sound. The view window is
// shared: the spectrogram zooms and scrolls with these too, and follows every change (`viewHooks.changed`).
export const viewHooks = { changed: () => {} };
export function zoom(centre, factor) {
  const { start, end } = viewRange();
  const span = Math.min(state.info.frames, Math.max(256, (end - start) * factor));
  let s = Math.round(centre - (centre - start) * (span / (end - start)));
  s = Math.max(0, Math.min(state.info.frames - span, s));
  state.view = { start: s, end: Math.round(s + span) };
  refreshEnvelope();
}
export function scroll(frames) {
  const { start, end } = viewRange();
  const s = Math.max(0, Math.min(state.info.frames - (end - start), start + frames));
  state.view = { start: s, end: s + (end - start) };
  refreshEnvelope();
}

export function wholeView() { state.view = { start: 0, end: state.info.frames }; refreshEnvelope(); }

export function setupWaveform() {
  const wave = $('wave');
  let drag = null;
  const frameAt = (ev) => {
    const r = wave.getBoundingClientRect();
    const { start, end } = viewRange();
    return Math.round(start + ((ev.clientX - r.left) / r.width) * (end - start));
  };
  wave.addEventListener('pointerdown', (ev) => { drag = frameAt(ev); wave.setPointerCapture(ev.pointerId); });
  wave.addEventListener('pointermove', (ev) => {
    if (drag === null) return;
    const f = frameAt(ev);
    state.loop = { start: Math.max(0, Math.min(drag, f)), end: Math.min(state.info.frames, Math.max(drag, f)) };
    drawWave();
  });
  wave.addEventListener('pointerup', () => {
    drag = null;
    if (state.loop && state.loop.end - state.loop.start < 64) state.loop = null;
    showLoopFields();
    audio.loopChanged();
    drawWave();
  });
  wave.addEventListener('wheel', (ev) => {
    if (!state.info) return;
    ev.preventDefault();
    const { start, end } = viewRange();
    const r = wave.getBoundingClientRect();
    const centre = start + ((ev.clientX - r.left) / r.width) * (end - start);
    if (ev.shiftKey || Math.abs(ev.deltaX) > Math.abs(ev.deltaY)) {
      scroll(Math.round(((ev.deltaX || ev.deltaY) / r.width) * (end - start)));
      return;
    }
    zoom(centre, ev.deltaY > 0 ? 1.25 : 0.8);
  }, { passive: false });
  wave.addEventListener('dblclick', wholeView);
  // The same from the keyboard, on the focused waveform.
  wave.addEventListener('keydown', (ev) => {
    if (!state.info) return;
    const { start, end } = viewRange();
    const centre = (start + end) / 2;
    const k = ev.key;
    if (k === '+' || k === '=') zoom(centre, 0.8);
    else if (k === '-' || k === '_') zoom(centre, 1.25);
    else if (k === 'ArrowLeft') scroll(-Math.round((end - start) / 10));
    else if (k === 'ArrowRight') scroll(Math.round((end - start) / 10));
    else if (k === '0' || k === 'Home') wholeView();
    else return;
    ev.preventDefault();
  });
  $('loop-start').addEventListener('change', typedLoop);
  $('loop-end').addEventListener('change', typedLoop);
  $('loop-clear').addEventListener('click', () => { setLoop(null); setStatus('Loop: the whole sound'); });
}

export function refreshEnvelope() {
  if (!state.report) return;
  viewHooks.changed();
  call('envelope', { view: { ...viewRange(), columns: waveColumns() } }).then((msg) => { state.env = msg.env; drawWave(); })
    .catch(() => {});
}

// Redraws the waveform every frame while the sound plays (for the playhead).
let ticking = false;
export function tick() {
  if (ticking) return;
  ticking = true;
  const step = () => {
    drawWave();
    if (audio.playing) requestAnimationFrame(step); else { ticking = false; drawWave(); }
  };
  requestAnimationFrame(step);
}
