// How long a sound the page takes, and the check made before a file is read.
//
// The engine runs in 32-bit WebAssembly (at most 4 GiB of memory, in one worker) and holds the sound several times
// as 32-bit floats: the source, the chain's input when prepared, the processed sound at the source rate and at the
// export rate, the export file, and one channel copied out at a time; the page itself keeps the original, the
// processed sound and the error (for the views and the playback buffers). Measured in Chromium with 11 minutes of
// stereo at 48 kHz (63,360,000 samples; loaded, rendered through gain, rate, quantizer and filter with a chain mix,
// played, loudness-matched, exported): the worker's memory grew to 1,099 MiB (18 bytes per sample) and the tab's
// renderer process (page and worker) to 2.2 GiB. At the limit, 2^26 = 67,108,864 samples (channels × frames: 11 min
// 39 s of stereo at 48 kHz, 23 min of mono), that is about 1.2 GiB in the worker and 2.3 GiB for the tab, which an
// ordinary machine can hold. A 30-minute stereo file (172,800,000 samples, 2.6 times as many) would need about
// 3 GiB of the 4 GiB the worker can ever have (too close: a vector that grows doubles) and about 6 GiB for the tab.
// So longer sounds are refused before they are read (from a WAV's, an AIFF's or a FLAC file's header; other formats
// once decoded, see open-file.js).
import { setStatus } from './util.js';

export const limits = { maxSamples: 2 ** 26 }; // tests may lower it (window.stairstepLimits)
window.stairstepLimits = limits;

const mmss = (s) => `${Math.floor(s / 60)} min ${Math.round(s % 60)} s`;

// Samples (channels × frames), channels and rate a WAV file's header announces, read from its chunk headers alone
// (a few small slices of the file, never the whole of it); null when the header cannot be read (the core's reader
// then says why, with the whole file).
export async function wavSize(file) {
  const read = async (at, n) => new DataView(await file.slice(at, at + n).arrayBuffer());
  const head = await read(0, 12);
  if (head.byteLength < 12) return null;
  let at = 12;
  let fmt = null;
  let fact = null;
  for (let k = 0; k < 64 && at + 8 <= file.size; k++) {
    const h = await read(at, 8);
    const id = String.fromCharCode(h.getUint8(0), h.getUint8(1), h.getUint8(2), h.getUint8(3));
    const size = h.getUint32(4, true);
    if (id === 'fmt ') {
      const f = await read(at + 8, 16);
      if (f.byteLength < 16) return null;
      fmt = { tag: f.getUint16(0, true), channels: f.getUint16(2, true), rate: f.getUint32(4, true),
        blockAlign: f.getUint16(12, true), bits: f.getUint16(14, true) };
    } else if (id === 'fact' && size >= 4) {
      fact = (await read(at + 8, 4)).getUint32(0, true);
    } else if (id === 'data') {
      if (!fmt || !fmt.channels || !fmt.blockAlign) return null;
      // The data the header announces (a header saying more than the file holds still counts: the reader would
      // warn about the truncation, and the size is what the file claims to be).
      const bytes = size === 0xffffffff ? file.size - at - 8 : size;
      const frames = fmt.tag === 0x11 && fact !== null ? fact // IMA ADPCM: the fact chunk's frame count
        : fmt.tag === 0x11 ? bytes * 2 / fmt.channels : Math.floor(bytes / fmt.blockAlign);
      return { samples: frames * fmt.channels, frames, channels: fmt.channels, rate: fmt.rate };
    }
    at += 8 + size + (size & 1);
  }
  return null;
}

// A refusal in plain words when `samples` is over the limit; null when it fits.
export function tooLong(name, { samples, frames, channels, rate }) {
  if (samples <= limits.maxSamples) return null;
  const ch = channels === 1 ? 'mono' : channels === 2 ? 'stereo' : `${channels} channels`;
  const fits = rate ? ` (${mmss(limits.maxSamples / channels / rate)} of ${ch} at ${rate.toLocaleString('en')} Hz)` : '';
  return `${name} is too long for the page: ${rate ? mmss(frames / rate) + ' of ' + ch + ', ' : ''}` +
    `${samples.toLocaleString('en')} samples; the page takes at most ${limits.maxSamples.toLocaleString('en')}${fits}, ` +
    'because its engine runs in 32-bit WebAssembly (4 GiB at most) and holds about 20 bytes per sample, with as ' +
    'much again in the page for the views and playback. Cut the sound shorter, or render it with the stairstep ' +
    'command-line tool. The current sound is unchanged.';
}

// Says so and returns true when the sound is over the limit.
export function refuseIfTooLong(name, size) {
  const text = size ? tooLong(name, size) : null;
  if (text) setStatus(text, 'error');
  return !!text;
}
