// Opening a sound file, at its own sample rate, with the core's own reader where it has one.
//
// - WAV and AIFF/AIFF-C are read by the core in the worker (src/io/read.rs: the same WAV reader as the command-line
//   tool, and an AIFF reader that gives the floats the tool's symphonia gives), so a preset tuned here batches to
//   the same bytes. The file's own loop comes along, as in the tool.
// - Anything else (FLAC, Ogg Vorbis or Opus, MP3, AAC, …) is decoded by the browser. decodeAudioData resamples to
//   its context's rate, so the context is created at the rate the file's header declares (headers.js) and the
//   result is checked to be at that rate; where no rate can be read, the status says so and names the rate used.
//   (A decoder in the wasm for these would cost over 100 kB gzipped: see DEVELOPERS.md.)
// The sound info beside the waveform names the reader, as `stairstep analyze` does.
import { setStatus } from './util.js';
import { loadSource } from './session.js';
import { limits, wavSize, refuseIfTooLong } from './limits.js';
import { sniff, headerRate } from './headers.js';

const CORE_KINDS = new Set(['wav', 'aiff']);
const FALLBACK_RATE = 48000;
const hz = (r) => `${r.toLocaleString('en')} Hz`;

// The first 64 KiB after any ID3v2 tag (MP3, and FLAC files some taggers prefix with one), and the tag's length.
async function head(f) {
  let b = new Uint8Array(await f.slice(0, 65536).arrayBuffer());
  if (b.length >= 10 && String.fromCharCode(b[0], b[1], b[2]) === 'ID3') {
    const tag = 10 + ((b[6] & 0x7f) << 21 | (b[7] & 0x7f) << 14 | (b[8] & 0x7f) << 7 | (b[9] & 0x7f)) + (b[5] & 0x10 ? 10 : 0);
    b = new Uint8Array(await f.slice(tag, tag + 65536).arrayBuffer());
    return { b, tagged: true };
  }
  return { b, tagged: false };
}

// Chromium turns a decoded integer sample v of an N-bit file into a float with an asymmetric scale, v / 2^(N−1)
// below zero but v / (2^(N−1) − 1) above it, so positive samples come out a hair louder than the core's (and the
// CLI's) v / 2^(N−1). For a lossless file whose bit depth the header gives (FLAC), each sample is taken back to its
// integer code (the nearest under either scale) and scaled as the core scales it, so page and CLI get the same
// floats; a value already on the core's grid is left as it is.
export function exactPcm(samples, bits) {
  const full = 2 ** (bits - 1);
  for (let i = 0; i < samples.length; i++) {
    const x = samples[i];
    const v = Math.max(-full, Math.min(full - 1, Math.round(x * (x > 0 ? full - 1 : full))));
    samples[i] = v / full;
  }
}

export async function openFile(f) {
  const { b, tagged } = await head(f);
  let { kind, label } = sniff(b);
  if (tagged && kind === 'unknown') ({ kind, label } = { kind: 'mp3', label: 'MP3' });
  const info = headerRate(b, kind);
  if (CORE_KINDS.has(kind)) {
    // Refused from the header before the file is read when it is too long for the page (see limits.js).
    const size = kind === 'wav' ? await wavSize(f).catch(() => null)
      : info?.frames && info.channels ? { samples: info.frames * info.channels, ...info } : null;
    if (refuseIfTooLong(f.name, size)) return;
    const bytes = await f.arrayBuffer();
    await loadSource({ file: bytes, maxSamples: limits.maxSamples }, f.name, [bytes]);
    return;
  }
  return decodeInBrowser(f, kind, label, info);
}

async function decodeInBrowser(f, kind, label, info) {
  // A header that gives the length (FLAC STREAMINFO) lets a sound too long for the page be refused before decoding.
  if (info?.frames && info.channels &&
    refuseIfTooLong(f.name, { samples: info.frames * info.channels, ...info })) return;
  const bytes = await f.arrayBuffer();
  const known = info && info.rate >= 3000 && info.rate <= 768000;
  const rate = known ? info.rate : FALLBACK_RATE;
  let b;
  try {
    b = await new OfflineAudioContext(1, 1, rate).decodeAudioData(bytes);
  } catch (err) {
    const which = kind === 'unknown' ? 'not a WAV or AIFF file, and the browser cannot decode it'
      : `${label}: the browser cannot decode it${kind === 'caf' ? ' (the stairstep command-line tool reads CAF)' : ''}`;
    setStatus(`Could not read ${f.name}: ${which}. The current sound is unchanged.`, 'error');
    return;
  }
  if (b.sampleRate !== rate) { // not expected: the context's rate is what decodeAudioData resamples to
    setStatus(`Could not read ${f.name} at its own rate: the browser decoded it at ${hz(b.sampleRate)}, not ` +
      `${hz(rate)}. The current sound is unchanged.`, 'error');
    return;
  }
  if (refuseIfTooLong(f.name, { samples: b.length * b.numberOfChannels, frames: b.length,
    channels: b.numberOfChannels, rate: b.sampleRate })) return;
  const inter = new Float32Array(b.length * b.numberOfChannels);
  for (let c = 0; c < b.numberOfChannels; c++) {
    const d = b.getChannelData(c);
    for (let i = 0; i < b.length; i++) inter[i * b.numberOfChannels + c] = d[i];
  }
  if (kind === 'flac' && info?.bits) exactPcm(inter, info.bits);
  const codec = info?.codec ?? (kind === 'unknown' ? 'format not recognised' : label);
  const note = known
    ? `${f.name}: ${codec} at ${hz(rate)}, read from its header${info.note ? `; ${info.note}` : ''}; decoded by the ` +
      'browser at that rate.'
    : `${f.name}: no sample rate could be read from its header (${kind === 'unknown' ? 'format not recognised' : label}); ` +
      'the browser decoded it at ' +
      `${hz(rate)}, resampling if the file's own rate differs. The command-line tool may read it at another rate.`;
  const decoder = { decoder: 'browser decodeAudioData', format: info?.bits ? `${codec}, ${info.bits}-bit` : codec,
    rateFrom: known ? 'header' : 'assumed' };
  await loadSource({ sampleRate: b.sampleRate, channels: b.numberOfChannels, interleaved: inter, decoder }, f.name,
    [inter.buffer], note);
}
