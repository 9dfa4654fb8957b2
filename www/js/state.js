// The page's state: the loaded sound, the latest render, the preset being edited, what the views show.
import { $ } from './util.js';

export const state = {
  sourceName: 'chime-loop',
  info: null, // { sampleRate, channels, frames } and, for an opened file, { decoder, format, warnings, fileLoop }
  sourceNote: null, // how the newly opened file was read, for the status line after its first render
  input: null, // Float32Array per channel
  output: null,
  report: null,
  spectra: null,
  env: null,
  preset: { format: 'stairstep-preset', version: 1, name: 'Untitled', seed: 1,
            stages: [{ kind: 'quantize', bits: 8 }], export: { type: 'wav', encoding: 'pcm-s16' } },
  view: { start: 0, end: 0 },
  loop: null, // { start, end } in frames, or null for the whole sound
  matchLoudness: false, // play the processed render at the chain input's loudness (see audition.js)
  loudness: null, // { input, output } in LUFS, from the latest render when matchLoudness is on
  fftSize: 4096,
  window: 'hann',
  tap: null, // the stage (index) whose output the views and the audition show instead of the chain's, or null
  tapped: null, // the latest render's tap: { stage, sqnr_db }, or null
};
window.stairstep = state; // for tests and the curious

// The frames the waveform shows, and how many pixel columns it has.
export function viewRange() { return { start: state.view.start, end: state.view.end || (state.info ? state.info.frames : 0) }; }
export function waveColumns() { return Math.max(100, Math.round($('wave').getBoundingClientRect().width)); }
