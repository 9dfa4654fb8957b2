// What a sound file is and, for the formats the browser decodes, the sample rate its header declares — read from the
// first bytes alone, so that the browser can be asked to decode at the file's own rate (decodeAudioData resamples
// to its context's rate). Pure functions of a Uint8Array; no DOM.
//
// sniff(bytes) → { kind, label } where kind is one of
//   'wav', 'aiff' (AIFF and AIFF-C)                  — read by the core (the same samples as the CLI);
//   'flac', 'ogg', 'mp3', 'caf', 'mp4', 'webm'       — decoded by the browser;
//   'unknown'.
// headerRate(bytes, kind) → { rate, frames?, channels?, codec, note? } or null when the header says nothing usable.

const ascii = (b, at, n) => String.fromCharCode(...b.subarray(at, at + n));

export function sniff(b) {
  if (b.length >= 12 && ascii(b, 0, 4) === 'RIFF' && ascii(b, 8, 4) === 'WAVE') return { kind: 'wav', label: 'WAV' };
  if (b.length >= 12 && ascii(b, 0, 4) === 'FORM' && ascii(b, 8, 4) === 'AIFF') return { kind: 'aiff', label: 'AIFF' };
  if (b.length >= 12 && ascii(b, 0, 4) === 'FORM' && ascii(b, 8, 4) === 'AIFC') return { kind: 'aiff', label: 'AIFF-C' };
  if (b.length >= 4 && ascii(b, 0, 4) === 'fLaC') return { kind: 'flac', label: 'FLAC' };
  if (b.length >= 4 && ascii(b, 0, 4) === 'OggS') return { kind: 'ogg', label: 'Ogg' };
  if (b.length >= 4 && ascii(b, 0, 4) === 'caff') return { kind: 'caf', label: 'CAF' };
  if (b.length >= 12 && ascii(b, 4, 4) === 'ftyp') return { kind: 'mp4', label: 'MP4/M4A' };
  if (b.length >= 4 && b[0] === 0x1a && b[1] === 0x45 && b[2] === 0xdf && b[3] === 0xa3) return { kind: 'webm', label: 'WebM/Matroska' };
  if (b.length >= 3 && ascii(b, 0, 3) === 'ID3') return { kind: 'mp3', label: 'MP3' };
  if (mp3FrameAt(b, 0)) return { kind: 'mp3', label: 'MP3' };
  return { kind: 'unknown', label: 'unknown' };
}

export function headerRate(b, kind) {
  switch (kind) {
    case 'ogg': return oggRate(b);
    case 'mp3': return mp3Rate(b);
    case 'flac': return flacInfo(b);
    case 'aiff': return aiffInfo(b);
    case 'caf': return cafRate(b);
    case 'mp4': return mp4Rate(b);
    case 'webm': return { rate: 48000, codec: 'Opus or Vorbis in WebM',
      note: 'a WebM header is not read here; Opus always decodes at 48,000 Hz' };
    default: return null;
  }
}

// Ogg: the first page's first packet is the codec's identification header.
//   Vorbis: 0x01 'vorbis', version (u32 LE, 0), channels (u8), rate (u32 LE), ...
//   Opus:   'OpusHead', version, channels, pre-skip (u16 LE), input rate (u32 LE) — informational: Opus always
//           decodes at 48,000 Hz;
//   FLAC:   0x7F 'FLAC', 2 version bytes, header count (u16 BE), 'fLaC', then the STREAMINFO block.
function oggRate(b) {
  if (b.length < 28 || ascii(b, 0, 4) !== 'OggS') return null;
  const segments = b[26];
  const p = 27 + segments;
  if (p + 19 > b.length) return null; // the shortest header read here (OpusHead) is 19 bytes
  const dv = new DataView(b.buffer, b.byteOffset, b.byteLength);
  if (b[p] === 1 && ascii(b, p + 1, 6) === 'vorbis') {
    const channels = b[p + 11];
    const rate = dv.getUint32(p + 12, true);
    return rate ? { rate, channels, codec: 'Vorbis' } : null;
  }
  if (ascii(b, p, 8) === 'OpusHead') {
    const input = dv.getUint32(p + 12, true);
    return { rate: 48000, channels: b[p + 9], codec: 'Opus',
      note: `Opus always decodes at 48,000 Hz${input && input !== 48000 ? ` (the encoder's input was ${input.toLocaleString('en')} Hz)` : ''}` };
  }
  if (b[p] === 0x7f && ascii(b, p + 1, 4) === 'FLAC' && ascii(b, p + 9, 4) === 'fLaC') {
    const si = flacStreamInfo(b, p + 13 + 4);
    return si && { ...si, codec: 'FLAC in Ogg' };
  }
  return null;
}

// FLAC STREAMINFO (34 bytes after its 4-byte block header): min/max block (2+2), min/max frame (3+3), then 20 bits
// rate, 3 bits channels − 1, 5 bits bits − 1, 36 bits total frames (0: unknown).
function flacStreamInfo(b, at) {
  if (at + 18 > b.length) return null;
  const rate = (b[at + 10] << 12) | (b[at + 11] << 4) | (b[at + 12] >> 4);
  const channels = ((b[at + 12] >> 1) & 7) + 1;
  const bits = (((b[at + 12] & 1) << 4) | (b[at + 13] >> 4)) + 1;
  const frames = (b[at + 13] & 15) * 2 ** 32 + ((b[at + 14] << 24) >>> 0) + (b[at + 15] << 16) + (b[at + 16] << 8) + b[at + 17];
  return rate ? { rate, channels, bits, frames: frames || undefined, codec: 'FLAC' } : null;
}

function flacInfo(b) {
  if (b.length < 8 || ascii(b, 0, 4) !== 'fLaC' || (b[4] & 0x7f) !== 0) return null;
  return flacStreamInfo(b, 8);
}

// AIFF/AIFF-C: the COMM chunk holds channels (i16), frames (u32), bits (i16) and the rate as an 80-bit extended float.
function aiffInfo(b) {
  const dv = new DataView(b.buffer, b.byteOffset, b.byteLength);
  for (let at = 12, k = 0; at + 8 <= b.length && k < 64; k++) {
    const size = dv.getUint32(at + 4);
    if (ascii(b, at, 4) === 'COMM') {
      if (at + 26 > b.length) return null;
      const exp = dv.getUint16(at + 16) & 0x7fff;
      const mant = dv.getUint32(at + 18) * 2 ** 32 + dv.getUint32(at + 22);
      const rate = mant ? Math.floor(mant * 2 ** (exp - 16383 - 63)) : 0; // its integer part, as the core reads it
      return rate ? { rate, channels: dv.getInt16(at + 8), frames: dv.getUint32(at + 10), bits: dv.getInt16(at + 14),
        codec: 'AIFF' } : null;
    }
    at += 8 + size + (size & 1);
  }
  return null;
}

// CAF: the `desc` chunk (first after the 8-byte file header) starts with the rate as a big-endian f64.
function cafRate(b) {
  if (b.length < 32 || ascii(b, 8, 4) !== 'desc') return null;
  const dv = new DataView(b.buffer, b.byteOffset, b.byteLength);
  const rate = Math.round(dv.getFloat64(20));
  return rate > 0 ? { rate, channels: dv.getUint32(44), codec: ascii(b, 28, 4) } : null;
}

// MP4/M4A: the `mp4a` sample entry holds the rate as 16.16 fixed point, 28 bytes after its type (rates over
// 65,535 Hz are stored elsewhere and not read here).
function mp4Rate(b) {
  for (let i = 4; i + 32 <= b.length; i++) {
    if (b[i] === 0x6d && ascii(b, i, 4) === 'mp4a') {
      const rate = (b[i + 28] << 8) | b[i + 29];
      return rate ? { rate, channels: (b[i + 20] << 8) | b[i + 21], codec: 'AAC' } : null;
    }
  }
  return null;
}

// MPEG audio frame header: 11 sync bits, version (2), layer (2), protection, bitrate index (4), rate index (2),
// padding, private, channel mode (2), ...
const MPEG_RATES = { 3: [44100, 48000, 32000], 2: [22050, 24000, 16000], 0: [11025, 12000, 8000] };
const L3_KBPS = { 1: [0, 32, 40, 48, 56, 64, 80, 96, 112, 128, 160, 192, 224, 256, 320],
  2: [0, 8, 16, 24, 32, 40, 48, 56, 64, 80, 96, 112, 128, 144, 160] };

function mp3FrameAt(b, i) {
  if (i + 4 > b.length || b[i] !== 0xff || (b[i + 1] & 0xe0) !== 0xe0) return null;
  const version = (b[i + 1] >> 3) & 3; // 3: MPEG-1, 2: MPEG-2, 0: MPEG-2.5
  const layer = (b[i + 1] >> 1) & 3; // 1: Layer III
  const bi = b[i + 2] >> 4;
  const ri = (b[i + 2] >> 2) & 3;
  if (version === 1 || layer !== 1 || bi === 0 || bi === 15 || ri === 3) return null;
  const rate = MPEG_RATES[version][ri];
  const kbps = L3_KBPS[version === 3 ? 1 : 2][bi];
  const padding = (b[i + 2] >> 1) & 1;
  const samples = version === 3 ? 1152 : 576;
  const length = Math.floor((samples / 8) * kbps * 1000 / rate) + padding;
  const channels = (b[i + 3] >> 6) === 3 ? 1 : 2;
  return { rate, length, channels, version, samples };
}

// The first Layer III frame (after an ID3v2 tag) whose successor also parses at the same rate; its Xing/Info header,
// when it has one, gives the frame count (the LAME tag's encoder delay and padding are not read).
function mp3Rate(b) {
  let start = 0;
  if (b.length >= 10 && ascii(b, 0, 3) === 'ID3') {
    start = 10 + ((b[6] & 0x7f) << 21 | (b[7] & 0x7f) << 14 | (b[8] & 0x7f) << 7 | (b[9] & 0x7f)) + (b[5] & 0x10 ? 10 : 0);
  }
  const end = Math.min(b.length - 4, start + 65536);
  for (let i = start; i < end; i++) {
    const f = mp3FrameAt(b, i);
    if (!f || f.length < 21) continue;
    const next = mp3FrameAt(b, i + f.length);
    if (i + f.length + 4 <= b.length && !(next && next.rate === f.rate)) continue;
    const out = { rate: f.rate, channels: f.channels, codec: 'MPEG Layer III' };
    // Xing/Info: after the side information (MPEG-1: 17 bytes mono, 32 stereo; MPEG-2/2.5: 9, 17).
    const side = f.version === 3 ? (f.channels === 1 ? 17 : 32) : (f.channels === 1 ? 9 : 17);
    const x = i + 4 + side;
    const tag = x + 8 <= b.length ? ascii(b, x, 4) : '';
    if ((tag === 'Xing' || tag === 'Info') && (b[x + 7] & 1)) {
      const dv = new DataView(b.buffer, b.byteOffset, b.byteLength);
      out.frames = dv.getUint32(x + 8) * f.samples; // includes the encoder delay and padding
    }
    return out;
  }
  return null;
}
