// The preparation panel (the preset's `prep`: channels, trim, fades, normalisation, loop export) and its report
// under it: what the preparation did, and the headroom into the first quantizer with a one-click pre-gain.
import { $, el, setStatus } from './util.js';
import { CHANNEL_MODES, CURVES } from './schema.js';
import { state } from './state.js';
import { requestRender } from './session.js';
import { renderChain } from './chain-editor.js';

function num(id, value, min, max, step, unit, onChange) {
  const name = id.replace(/^prep-/, '').replace(/-/g, ' ');
  const box = el('input', { id, type: 'number', min, max, step, value, 'aria-label': `${name} in ${unit}`,
    onchange: () => { const v = parseFloat(box.value); if (Number.isFinite(v)) onChange(v); } });
  return [box, el('span', { class: 'unit' }, unit)];
}

// A loop as the preset holds it, in words: frames, the file's own loop, or the relative forms a preset file may hold
// (`{ "seconds": s }`, `{ "seconds_from_end": s }`, `{ "fraction": f }`; the core places them on each sound).
function loopText(loop) {
  if (loop === 'file' || loop.from === 'file') return "the file's own loop" + (state.info?.fileLoop ? '' : ' (this sound has none)');
  const point = (p) => (typeof p === 'number' ? `frame ${p}` : p.seconds !== undefined ? `${p.seconds} s`
    : p.seconds_from_end !== undefined ? `${p.seconds_from_end} s before the end` : `${p.fraction} of the length`);
  return `${point(loop.start)} to ${point(loop.end)}`;
}

export function renderPrep() {
  const prep = state.preset.prep ?? (state.preset.prep = {});
  if (prep.loop_region === 'file') prep.loop_region = { from: 'file', crossfade_ms: 0 };
  const changed = () => { renderPrep(); requestRender(); };
  const row = (label, ...controls) => el('div', { class: 'prep-row' }, el('span', {}, label), el('span', { class: 'inline' }, ...controls));
  const current = Object.keys(CHANNEL_MODES).find((k) => JSON.stringify(CHANNEL_MODES[k]) === JSON.stringify(prep.channels ?? 'keep'));
  const chSel = el('select', { id: 'prep-channels', 'aria-label': 'Channels',
    onchange: () => { prep.channels = CHANNEL_MODES[chSel.value]; changed(); $('prep-channels').focus(); } },
  ...Object.keys(CHANNEL_MODES).map((k) => el('option', { value: k, selected: k === current }, k)));
  const toggle = (key, make, label) => el('label', { class: 'check' }, el('input', { type: 'checkbox', id: `prep-${key}-on`,
    checked: !!prep[key], onchange: (e) => { if (e.target.checked) prep[key] = make(); else delete prep[key]; changed(); $(`prep-${key}-on`).focus(); } }), label);
  const trim = prep.trim;
  const fade = (key, label) => {
    const f = prep[key];
    return row(label, toggle(key, () => ({ ms: key === 'fade_in' ? 5 : 50, curve: 'linear' }), 'on'),
      ...(f ? [...num(`prep-${key}-ms`, f.ms, 0, 60000, 1, 'ms', (v) => { f.ms = v; requestRender(); }),
        el('select', { id: `prep-${key}-curve`, 'aria-label': `${label} curve`, onchange: (e) => { f.curve = e.target.value; requestRender(); } },
          ...CURVES.map((c) => el('option', { value: c, selected: c === (f.curve ?? 'linear') }, c)))] : []));
  };
  const norm = prep.normalize;
  const normSel = el('select', { id: 'prep-normalize', 'aria-label': 'Normalise',
    onchange: () => {
      const k = normSel.value;
      if (k === 'none') delete prep.normalize;
      else prep.normalize = k === 'peak' ? { kind: 'peak', target_dbfs: -1 } : { kind: 'loudness', target_lufs: -16 };
      changed();
      $('prep-normalize').focus();
    } }, ...['none', 'peak', 'loudness'].map((k) => el('option', { value: k, selected: k === (norm?.kind ?? 'none') }, k)));
  const loop = prep.loop_region;
  $('prep').replaceChildren(
    row('Channels', chSel),
    row('Trim silence', toggle('trim', () => ({ threshold_dbfs: -60, margin_ms: 10 }), 'below'),
      ...(trim ? [...num('prep-trim-threshold', trim.threshold_dbfs, -120, 0, 1, 'dBFS', (v) => { trim.threshold_dbfs = v; requestRender(); }),
        ...num('prep-trim-margin', trim.margin_ms, 0, 1000, 1, 'ms margin', (v) => { trim.margin_ms = v; requestRender(); })] : [])),
    fade('fade_in', 'Fade in'),
    fade('fade_out', 'Fade out'),
    row('Normalise', normSel, ...(norm?.kind === 'peak'
      ? num('prep-peak', norm.target_dbfs, -60, 0, 0.1, 'dBFS peak', (v) => { norm.target_dbfs = v; requestRender(); })
      : norm?.kind === 'loudness'
        ? num('prep-lufs', norm.target_lufs, -70, 0, 0.5, 'LUFS', (v) => { norm.target_lufs = v; requestRender(); }) : [])),
    row('Loop', el('button', { type: 'button', id: 'prep-loop-set', title: 'Export the region selected on the waveform as the loop',
      'aria-describedby': 'prep-loop-note',
      onclick: () => {
        if (!state.loop) {
          const text = 'No region selected yet: drag across the waveform, or type a loop start and end above it, then ' +
            'press "Use selection" again.';
          $('prep-loop-note').textContent = text;
          setStatus(text, 'error');
          return;
        }
        const off = state.report?.prep?.trimmed_start_frames ?? 0;
        prep.loop_region = { start: state.loop.start + off, end: state.loop.end + off, crossfade_ms: loop?.crossfade_ms ?? 0 };
        changed();
        $('prep-loop-set').focus();
      } }, 'Use selection'),
    el('button', { type: 'button', id: 'prep-loop-file',
      title: "Export the sound file's own loop (a WAV smpl loop); a file without one is refused",
      onclick: () => { prep.loop_region = { from: 'file', crossfade_ms: loop?.crossfade_ms ?? 0 }; changed(); $('prep-loop-file').focus(); } },
    "File's loop"),
    ...(loop ? [el('span', { class: 'note', id: 'prep-loop-form' }, loopText(loop)),
      ...num('prep-loop-xfade', loop.crossfade_ms ?? 0, 0, 1000, 1, 'ms crossfade', (v) => { loop.crossfade_ms = v; requestRender(); }),
      el('button', { type: 'button', id: 'prep-loop-remove', 'aria-label': 'Remove the loop', onclick: () => { delete prep.loop_region; changed(); $('prep-loop-set').focus(); } }, '✕')] : []),
      el('span', { class: 'note', id: 'prep-loop-note', role: 'alert' })),
  );
}

export function drawPrepReport() {
  const r = state.report;
  const h = state.headroom;
  const parts = [];
  const p = r?.prep;
  if (p) {
    const rate = state.info.sampleRate;
    if (p.trimmed_start_frames || p.trimmed_end_frames) {
      parts.push(`trimmed ${(p.trimmed_start_frames / rate).toFixed(3)} s + ${(p.trimmed_end_frames / rate).toFixed(3)} s`);
    }
    if (p.gain_db) parts.push(`gain ${p.gain_db >= 0 ? '+' : ''}${p.gain_db.toFixed(2)} dB`);
    if (p.loudness_lufs_after !== null && p.loudness_lufs_after !== undefined) parts.push(`${p.loudness_lufs_after.toFixed(1)} LUFS`);
    if (r.export_loop) parts.push(`loop ${r.export_loop.start}–${r.export_loop.end} at ${r.export_rate} Hz`);
    parts.push(...(p.notes ?? []));
  }
  const box = $('prep-report');
  box.replaceChildren(parts.join(' · '));
  if (h) {
    const gain = h.suggested_gain_db;
    box.append(el('div', { class: 'headroom', id: 'headroom' },
      `Into ${h.bits} bits: peak ${h.peak_dbfs.toFixed(2)} dBFS, headroom ${h.headroom_db.toFixed(2)} dB = ` +
      `${Math.round(h.headroom_lsb).toLocaleString('en')} LSB, ${h.used_bits.toFixed(1)} of ${h.bits - 1} magnitude bits used; ` +
      `best pre-gain without clipping ${gain >= 0 ? '+' : ''}${gain.toFixed(2)} dB`,
      el('button', { type: 'button', id: 'headroom-apply', title: 'Insert a gain stage with this gain at the start of the chain',
        onclick: () => {
          const first = state.preset.stages[0];
          const g = Math.floor(gain * 100) / 100;
          if (first?.kind === 'gain') first.gain_db = g; else state.preset.stages.unshift({ kind: 'gain', gain_db: g, overflow: 'clip' });
          renderChain();
          requestRender();
        } }, 'Apply')));
  }
}
