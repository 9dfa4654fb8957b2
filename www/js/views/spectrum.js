// The spectrum view: processed and error spectra (Welch, dBFS) on a log frequency axis, with a pointer readout.
import { $ } from '../util.js';
import { state } from '../state.js';
import { css, startPlot } from './plot.js';

const SPEC = { top: 6, bottom: -168, fmin: 20 };
function specX(f, w, nyq) { return (Math.log(f / SPEC.fmin) / Math.log(nyq / SPEC.fmin)) * w; }
function specY(db, h) { return ((SPEC.top - db) / (SPEC.top - SPEC.bottom)) * h; }

export function drawSpectrum() {
  const c = $('spectrum');
  const { g, w, h, dpr } = startPlot(c);
  if (!state.spectra || !state.info) return;
  const nyq = state.info.sampleRate / 2;
  g.font = `${11 * dpr}px system-ui, sans-serif`;
  g.fillStyle = css('--dim');
  g.strokeStyle = css('--grid');
  const labelEvery = specY(-24, h) - specY(0, h) >= 15 * dpr ? 24 : 48; // as often as there is room
  for (let db = 0; db >= SPEC.bottom; db -= 24) {
    const y = specY(db, h);
    g.beginPath(); g.moveTo(0, y); g.lineTo(w, y); g.stroke();
    if (db % labelEvery) continue;
    // Labels just below their line, inside the canvas; none on the bottom edge (the frequency labels are there).
    if (y + 13 * dpr > h) continue;
    g.fillText(db === 0 ? '0 dBFS' : `${db}`, 4 * dpr, y + 11 * dpr);
  }
  let lastRight = 40 * dpr; // frequency labels start right of the level labels and never overlap
  for (const f of [50, 100, 200, 500, 1000, 2000, 5000, 10000, 20000]) {
    if (f >= nyq) continue;
    const x = specX(f, w, nyq);
    g.beginPath(); g.moveTo(x, 0); g.lineTo(x, h); g.stroke();
    const label = f >= 1000 ? `${f / 1000}k` : `${f}`;
    const tw = g.measureText(label).width;
    // Right of its line, or left of it where it would run past the edge ("20k" near a 22.05 kHz Nyquist).
    const lx = x + 2 * dpr + tw <= w - dpr ? x + 2 * dpr : x - 2 * dpr - tw;
    if (lx < lastRight + 4 * dpr) continue;
    g.fillText(label, lx, h - 4 * dpr);
    lastRight = lx + tw;
  }
  const curve = (s, color) => {
    const binHz = state.info.sampleRate / state.fftSize;
    g.strokeStyle = color;
    g.lineWidth = dpr;
    g.beginPath();
    // One point per pixel column: the strongest bin that falls in it.
    let col = -1, best = -Infinity, started = false;
    for (let k = 1; k < s.length; k++) {
      const x = Math.floor(specX(k * binHz, w, nyq));
      if (x !== col) {
        if (col >= 0) { const y = specY(best, h); if (started) g.lineTo(col, y); else { g.moveTo(col, y); started = true; } }
        col = x; best = -Infinity;
      }
      best = Math.max(best, s[k]);
    }
    g.stroke();
  };
  curve(state.spectra.error, css('--error'));
  curve(state.spectra.output, css('--processed'));
}

export function spectrumReadout(ev) {
  if (!state.spectra || !state.info) return;
  const c = $('spectrum');
  const r = c.getBoundingClientRect();
  const nyq = state.info.sampleRate / 2;
  const f = SPEC.fmin * Math.exp(((ev.clientX - r.left) / r.width) * Math.log(nyq / SPEC.fmin));
  const k = Math.min(state.spectra.output.length - 1, Math.round(f / (state.info.sampleRate / state.fftSize)));
  $('spec-readout').textContent = `${f < 1000 ? f.toFixed(0) + ' Hz' : (f / 1000).toFixed(2) + ' kHz'} · ` +
    `processed ${state.spectra.output[k].toFixed(1)} dBFS · error ${state.spectra.error[k].toFixed(1)} dBFS`;
}
