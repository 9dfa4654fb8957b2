// The page's header parsers (www/js/headers.js), on bytes put together here: the rate each format declares, which
// the page hands to decodeAudioData's context so that nothing is resampled. Real files, written by libsndfile, are
// opened in the page by formats.test.mjs.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { sniff, headerRate } from '../../www/js/headers.js';

const bytes = (...parts) => new Uint8Array(parts.flatMap((p) =>
  (typeof p === 'string' ? [...p].map((c) => c.charCodeAt(0)) : ArrayBuffer.isView(p) ? [...p] : p)));
const be32 = (v) => [v >>> 24, (v >> 16) & 255, (v >> 8) & 255, v & 255];
const le32 = (v) => [v & 255, (v >> 8) & 255, (v >> 16) & 255, v >>> 24];

// An MPEG audio frame header (Layer III), followed by zeros up to the frame's length, twice.
function mp3Frames(versionBits, rateIndex, bitrateIndex, count = 2) {
  const h = [0xff, 0xe0 | (versionBits << 3) | (1 << 1) | 1, (bitrateIndex << 4) | (rateIndex << 2), 0xc0];
  const rates = { 3: [44100, 48000, 32000], 2: [22050, 24000, 16000], 0: [11025, 12000, 8000] };
  const kbps = versionBits === 3 ? [0, 32, 40, 48, 56, 64, 80, 96, 112, 128] : [0, 8, 16, 24, 32, 40, 48, 56, 64, 80];
  const samples = versionBits === 3 ? 1152 : 576;
  const len = Math.floor((samples / 8) * kbps[bitrateIndex] * 1000 / rates[versionBits][rateIndex]);
  const frame = [...h, ...new Array(len - 4).fill(0)];
  return Array.from({ length: count }, () => frame).flat();
}

test('MP3: the rate of MPEG-1, MPEG-2 and MPEG-2.5 frame headers, after an ID3v2 tag', () => {
  for (const [v, ri, rate] of [[3, 0, 44100], [3, 2, 32000], [2, 1, 24000], [0, 2, 8000]]) {
    const b = bytes(...mp3Frames(v, ri, 9));
    assert.equal(sniff(b).kind, 'mp3');
    assert.equal(headerRate(b, 'mp3').rate, rate, `version ${v}, index ${ri}`);
  }
  // An ID3v2 tag of 100 bytes (syncsafe size) before the frames; a stray sync-like byte pair inside it is skipped.
  const tag = bytes('ID3', [4, 0, 0, 0, 0, 0, 100], new Array(100).fill(0xff));
  const b = bytes(tag, mp3Frames(2, 0, 8));
  assert.equal(sniff(b).kind, 'mp3');
  assert.equal(headerRate(b, 'mp3').rate, 22050);
});

test('Ogg: Vorbis identification header rate; Opus decodes at 48 kHz whatever its input rate', () => {
  const page = (packet) => bytes('OggS', [0, 2], new Array(20).fill(0), [1, packet.length], packet);
  const vorbis = page(bytes([1], 'vorbis', le32(0), [2], le32(32000), le32(0), le32(96000), le32(0), [0xb8, 1]));
  assert.equal(sniff(vorbis).kind, 'ogg');
  assert.deepEqual(headerRate(vorbis, 'ogg'), { rate: 32000, channels: 2, codec: 'Vorbis' });
  const opus = page(bytes('OpusHead', [1, 1], [0x38, 1], le32(16000), [0, 0, 0], new Array(10).fill(0)));
  const o = headerRate(opus, 'ogg');
  assert.equal(o.rate, 48000);
  assert.match(o.note, /16,000 Hz/);
});

test('FLAC STREAMINFO: rate, channels, bits and frames', () => {
  // 44,100 Hz = 0x0AC44 in 20 bits; 2 channels (1), 24 bits (23); 123,456 frames.
  const si = [0x10, 0, 0x10, 0, 0, 0, 0, 0, 0, 0, 0x0a, 0xc4, 0x40 | (1 << 1) | 1, 0x70, ...be32(123456), ...new Array(16).fill(0)];
  const b = bytes('fLaC', [0x80, 0, 0, 34], si);
  assert.equal(sniff(b).kind, 'flac');
  assert.deepEqual(headerRate(b, 'flac'), { rate: 44100, channels: 2, bits: 24, frames: 123456, codec: 'FLAC' });
});

test('AIFF COMM: the extended-float rate; CAF desc', () => {
  const comm = bytes('COMM', be32(18), [0, 1], be32(500), [0, 16], [0x40, 0x0e, 0xac, 0x44, 0, 0, 0, 0, 0, 0]);
  const aiff = bytes('FORM', be32(4 + comm.length), 'AIFF', comm);
  assert.equal(sniff(aiff).kind, 'aiff');
  assert.deepEqual(headerRate(aiff, 'aiff'), { rate: 44100, channels: 1, frames: 500, bits: 16, codec: 'AIFF' });
  const desc = new DataView(new ArrayBuffer(32));
  desc.setFloat64(0, 11025);
  const caf = bytes('caff', [0, 1, 0, 0], 'desc', [0, 0, 0, 0], be32(32), [...new Uint8Array(desc.buffer)].slice(0, 8),
    'lpcm', be32(2), be32(2), be32(1), be32(1), be32(16));
  assert.equal(sniff(caf).kind, 'caf');
  assert.equal(headerRate(caf, 'caf').rate, 11025);
});

test('anything else is unknown, with no rate', () => {
  const b = bytes('hello, this is not a sound file');
  assert.equal(sniff(b).kind, 'unknown');
  assert.equal(headerRate(b, 'unknown'), null);
});
