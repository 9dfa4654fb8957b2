// Files other than WAV, opened in the page from file://: each read at its own sample rate, the reader named in the
// sound info, and — where the page and the CLI decode alike (AIFF/AIFF-C by the core; FLAC, lossless, by the
// browser at the rate of its STREAMINFO) — a built-in preset's download equal, byte for byte (SHA-256), to
// `stairstep render --preset P` on the same file. Ogg Vorbis and MP3 are decoded by the browser's decoder, the CLI
// by symphonia's: their samples may legitimately differ, so the rate and the length are checked instead.
// The fixtures are written here by libsndfile (soundfile in .venv), nothing is committed.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { execFileSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { mkdtempSync, readFileSync, writeFileSync, existsSync, copyFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { launch, openPage, afterRender, screenshot, root } from './browser.mjs';

const cli = process.env.STAIRSTEP_BIN ?? join(root, 'target', 'release', 'stairstep');
const python = process.env.PYTHON ?? join(root, '.venv', 'bin', 'python');
const tmp = mkdtempSync(join(tmpdir(), 'stairstep-formats-'));
const sha = (b) => createHash('sha256').update(b).digest('hex');

// name → [libsndfile format, subtype, rate, channels, frames]
const FILES = {
  'tone-44100.flac': ['FLAC', 'PCM_16', 44100, 2, 22050],
  'tone-s24-96000.flac': ['FLAC', 'PCM_24', 96000, 1, 24000],
  'tone-s16.aiff': ['AIFF', 'PCM_16', 22050, 2, 11025],
  'tone-s24.aiff': ['AIFF', 'PCM_24', 32000, 1, 16000],
  'tone-f32.aifc': ['AIFF', 'FLOAT', 44100, 2, 22050],
  'tone-44100.ogg': ['OGG', 'VORBIS', 44100, 2, 22050],
  'tone-22050.mp3': ['MP3', 'MPEG_LAYER_III', 22050, 1, 22050],
  'tone-24000.opus': ['OGG', 'OPUS', 24000, 1, 12000],
  // Committed (tests/fixtures): a WAV with a `smpl` loop, which the page now keeps as the CLI does.
  'smpl-loop-s16-mono-22050.wav': [null, null, 22050, 1, 64],
};

// No stage, 32-bit float WAV: the decoded samples themselves, so any difference in reading shows in the bytes.
const transparent = join(tmp, 'transparent.json');
writeFileSync(transparent, JSON.stringify({ format: 'stairstep-preset', version: 1, name: 'transparent', stages: [],
  export: { type: 'wav', encoding: 'float32' } }));

before(() => {
  // A chord with a little seeded noise, below full scale: enough detail that any resampling or rounding shows.
  execFileSync(python, ['-c', `
import json, sys
import numpy as np, soundfile as sf
for name, (fmt, sub, rate, ch, n) in json.loads(sys.argv[1]).items():
    t = np.arange(n)[:, None] / rate
    x = 0.4 * np.sin(2 * np.pi * np.array([440.0, 661.0])[:ch] * t) + 0.05 * np.random.default_rng(5).uniform(-1, 1, (n, ch))
    sf.write(sys.argv[2] + '/' + name, x, rate, format=fmt, subtype=sub)
`, JSON.stringify(Object.fromEntries(Object.entries(FILES).filter(([, v]) => v[0]))), tmp]);
  copyFileSync(join(root, 'tests', 'fixtures', 'smpl-loop-s16-mono-22050.wav'), join(tmp, 'smpl-loop-s16-mono-22050.wav'));
});

let browser;
let s;
before(async () => {
  browser = await launch();
  s = await openPage(browser);
});
after(async () => { await browser?.close(); });

const info = () => s.page.evaluate(() => window.stairstep.info);

async function open(name) {
  await afterRender(s.page, () => s.page.setInputFiles('#file', join(tmp, name)));
  return info();
}

async function builtin(name) {
  await afterRender(s.page, () => s.page.selectOption('#preset-builtin', { label: name }));
}

// Downloads the page's export of the current preset and renders the same file with the CLI and the same built-in.
async function pageAndCli(name, preset) {
  const [download] = await Promise.all([s.page.waitForEvent('download'), s.page.click('#download')]);
  const tag = preset.replace(/.*\//, '');
  const pagePath = join(tmp, `page-${tag}-${name}`);
  await download.saveAs(pagePath);
  const cliPath = join(tmp, `cli-${tag}-${name}.out`);
  execFileSync(cli, ['render', '--preset', preset, join(tmp, name), '-o', cliPath, '--force', '--quiet']);
  return [readFileSync(pagePath), readFileSync(cliPath)];
}

const cliAnalyze = (name) => JSON.parse(execFileSync(cli, ['analyze', '--json', join(tmp, name)]).toString());

for (const [name, reader] of [['tone-s16.aiff', 'stairstep AIFF reader'], ['tone-s24.aiff', 'stairstep AIFF reader'],
  ['tone-f32.aifc', 'stairstep AIFF reader'], ['tone-44100.flac', 'browser decodeAudioData'],
  ['tone-s24-96000.flac', 'browser decodeAudioData'], ['smpl-loop-s16-mono-22050.wav', 'stairstep WAV reader']]) {
  const [, , rate, channels, frames] = FILES[name];
  test(`${name}: read at ${rate} Hz by ${reader}; handheld, clean-8 and float32 downloads equal the CLI's bytes`, async () => {
    const i = await open(name);
    assert.deepEqual([i.sampleRate, i.channels, i.frames], [rate, channels, frames]);
    assert.equal(i.decoder, reader);
    assert.equal(i.format, { 'tone-s16.aiff': 'AIFF, 16-bit PCM', 'tone-s24.aiff': 'AIFF, 24-bit PCM',
      'tone-f32.aifc': 'AIFF-C, fl32, 32-bit float', 'tone-44100.flac': 'FLAC, 16-bit',
      'tone-s24-96000.flac': 'FLAC, 24-bit', 'smpl-loop-s16-mono-22050.wav': '16-bit PCM' }[name]);
    const shown = await s.page.textContent('#source-info');
    assert.ok(shown.includes(`${rate.toLocaleString('en')} Hz`) && shown.includes(reader), shown);
    if (name.endsWith('.wav')) assert.ok(i.fileLoop, 'the `smpl` loop is read, as the CLI reads it');
    const cliSays = cliAnalyze(name);
    assert.deepEqual([cliSays.sample_rate, cliSays.frames], [rate, frames], 'the CLI reads the same shape');
    if (name === 'tone-44100.flac' || name === 'tone-s24.aiff') await screenshot(s.page, `formats-${name.replace('.', '-')}`);
    for (const preset of ['handheld', 'clean-8', transparent]) {
      if (preset === transparent) {
        await afterRender(s.page, () => s.page.evaluate((p) => window.stairstepApplyPreset(p), JSON.parse(readFileSync(preset))));
      } else {
        await builtin(preset);
      }
      const [a, b] = await pageAndCli(name, preset);
      assert.equal(sha(a), sha(b), `${name}, ${preset}: page ${a.length} bytes, CLI ${b.length} bytes`);
    }
  });
}

for (const [name, codec] of [['tone-44100.ogg', 'Vorbis'], ['tone-22050.mp3', 'MPEG Layer III']]) {
  const [, , rate, channels, frames] = FILES[name];
  test(`${name}: the header's ${rate} Hz, decoded by the browser at that rate, as long as the CLI's decode`, async () => {
    const i = await open(name);
    assert.equal(i.sampleRate, rate);
    assert.equal(i.channels, channels);
    assert.equal(i.decoder, 'browser decodeAudioData');
    assert.equal(i.format, codec);
    assert.equal(i.rateFrom, 'header');
    const shown = await s.page.textContent('#source-info');
    assert.ok(shown.includes(`${rate.toLocaleString('en')} Hz`) && shown.includes('browser'), shown);
    const cliSays = cliAnalyze(name);
    assert.equal(cliSays.sample_rate, rate);
    // Different decoders (the browser's, symphonia's) may trim the encoder's delay and padding differently: the
    // lengths agree within one frame of the codec (1,152 samples for MPEG-1 Layer III, 576 for MPEG-2).
    const slack = name.endsWith('.mp3') ? 1152 : 64;
    assert.ok(Math.abs(i.frames - cliSays.frames) <= slack, `page ${i.frames} frames, CLI ${cliSays.frames}`);
    assert.ok(Math.abs(cliSays.frames - frames) <= slack, `CLI ${cliSays.frames} frames, written ${frames}`);
    const [a, b] = await (async () => { await builtin('handheld'); return pageAndCli(name, 'handheld'); })();
    // Same export rate and layout: the files' sizes differ only by the frames the decoders disagree on.
    assert.ok(Math.abs(a.length - b.length) <= slack, `page ${a.length} bytes, CLI ${b.length} bytes`);
  });
}

test('Ogg Opus: decoded at 48,000 Hz, the only rate Opus decodes at, and the status says so', async () => {
  const i = await open('tone-24000.opus');
  assert.equal(i.sampleRate, 48000);
  assert.deepEqual([i.decoder, i.format], ['browser decodeAudioData', 'Opus']);
  assert.match(await s.page.textContent('#status'),
    /tone-24000\.opus: Opus at 48,000 Hz, read from its header; Opus always decodes at 48,000 Hz \(the encoder's input was 24,000 Hz\)/);
});

test('a file whose rate cannot be read from a header: the status says so and names the rate used', async () => {
  // An MP3 behind 70,000 bytes of zeros: no header the page reads, but the browser finds the frames.
  const mp3 = readFileSync(join(tmp, 'tone-22050.mp3'));
  writeFileSync(join(tmp, 'hidden.mp3'), Buffer.concat([Buffer.alloc(70000), mp3]));
  const i = await open('hidden.mp3');
  assert.deepEqual([i.sampleRate, i.rateFrom, i.format], [48000, 'assumed', 'format not recognised']);
  assert.match(await s.page.textContent('#status'),
    /^hidden\.mp3: no sample rate could be read from its header \(format not recognised\); the browser decoded it at 48,000 Hz/);
});

test('a file neither the core nor the browser reads is refused, and the current sound stays', async () => {
  const stub = join(tmp, 'stub.webm');
  writeFileSync(stub, Buffer.from([0x1a, 0x45, 0xdf, 0xa3, 0x80]));
  const before = await info();
  await s.page.setInputFiles('#file', stub);
  await s.page.waitForFunction(() => /stub\.webm/.test(document.getElementById('status').textContent));
  const status = await s.page.textContent('#status');
  assert.match(status, /Could not read stub\.webm/);
  assert.deepEqual(await info(), before, 'the current sound is unchanged');
});

test('no network request and no page error while opening these files', () => {
  assert.deepEqual(s.offline, []);
  assert.deepEqual(s.errors, []);
  assert.ok(existsSync(cli));
});
