// The spectrogram view and the per-stage taps, end to end on the offline page: the level scale (a full-scale sine
// reads 0 dBFS at the pointer), the export rate's Nyquist line, a tapped stage's meters equal to the CLI's per-stage
// report, the export unchanged by tapping and listening, the time the spectrogram takes, and screenshots.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { execFileSync } from 'node:child_process';
import { mkdtempSync, readFileSync, writeFileSync, existsSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { launch, openPage, afterRender, screenshot, root } from './browser.mjs';

// The release CLI (built by `make run` or `cargo build --release`); STAIRSTEP_BIN overrides it.
const cli = process.env.STAIRSTEP_BIN ?? join(root, 'target', 'release', 'stairstep');
const tmp = mkdtempSync(join(tmpdir(), 'stairstep-spectro-'));

// A WAV file of `channels` (arrays of samples in −1…1): 32-bit float (format 3) or 16-bit PCM.
function wav(path, rate, channels, float = true) {
  const n = channels[0].length;
  const ch = channels.length;
  const bytes = float ? 4 : 2;
  const data = Buffer.alloc(n * ch * bytes);
  for (let i = 0; i < n; i++) {
    for (let c = 0; c < ch; c++) {
      const at = (i * ch + c) * bytes;
      if (float) data.writeFloatLE(channels[c][i], at);
      else data.writeInt16LE(Math.max(-32768, Math.min(32767, Math.round(channels[c][i] * 32768))), at);
    }
  }
  const head = Buffer.alloc(44);
  head.write('RIFF', 0); head.writeUInt32LE(36 + data.length, 4); head.write('WAVE', 8);
  head.write('fmt ', 12); head.writeUInt32LE(16, 16); head.writeUInt16LE(float ? 3 : 1, 20); head.writeUInt16LE(ch, 22);
  head.writeUInt32LE(rate, 24); head.writeUInt32LE(rate * ch * bytes, 28); head.writeUInt16LE(ch * bytes, 32);
  head.writeUInt16LE(bytes * 8, 34); head.write('data', 36); head.writeUInt32LE(data.length, 40);
  writeFileSync(path, Buffer.concat([head, data]));
  return path;
}
const sine = (n, rate, hz, a = 1) => Float64Array.from({ length: n }, (_, i) => a * Math.sin((2 * Math.PI * hz * i) / rate));

let browser;
let s;
before(async () => {
  // The meters are compared with the release CLI's report: build it when it is not there yet (a few minutes, once).
  if (!existsSync(cli) && !process.env.STAIRSTEP_BIN) {
    execFileSync('cargo', ['build', '--release', '--quiet', '--bin', 'stairstep'], { cwd: root, stdio: 'inherit' });
  }
  browser = await launch();
  s = await openPage(browser);
});
after(async () => { await browser?.close(); });

const spectrograms = (page) => page.evaluate(() => +(document.body.dataset.spectrogram || 0));
// Runs `action` and waits until the spectrogram it causes has arrived and no other follows.
async function afterSpectrogram(page, action) {
  const before = await spectrograms(page);
  await action();
  await page.waitForFunction((n) => +(document.body.dataset.spectrogram || 0) > n, before, { timeout: 60_000 });
  let now = await spectrograms(page);
  for (;;) {
    await page.waitForTimeout(150);
    const later = await spectrograms(page);
    if (later === now) return;
    now = later;
  }
}
// A render and the spectrogram after it.
async function renderAndSpectrogram(page, action) {
  await afterSpectrogram(page, () => afterRender(page, action));
}
async function setView(page, { which, size, scale, range }) {
  for (const [id, v] of [['sg-which', which], ['sg-size', size], ['sg-scale', scale]]) {
    if (v === undefined || (await page.inputValue(`#${id}`)) === String(v)) continue;
    await afterSpectrogram(page, () => page.selectOption(`#${id}`, String(v)));
  }
  if (range !== undefined) await page.selectOption('#sg-range', String(range));
}
const usePreset = (page, p) => renderAndSpectrogram(page, () => page.evaluate((x) => window.stairstepApplyPreset(x), p));

// The readout after moving the pointer onto (frame, hz): { t, hz, db }.
async function readAt(page, frame, hz) {
  const { x, y } = await page.evaluate(([f, h]) => window.stairstepSpectrogram.pixelOf(f, h), [frame, hz]);
  const box = await page.locator('#spectrogram').boundingBox();
  await page.mouse.move(box.x + x, box.y + y);
  const text = await page.textContent('#sg-readout');
  const m = text.match(/^([\d.]+) s · ([\d.]+) (Hz|kHz) · (−?[\d.]+) dBFS$/);
  assert.ok(m, `readout "${text}"`);
  return { t: +m[1], hz: +m[2] * (m[3] === 'kHz' ? 1000 : 1), db: +m[4].replace('−', '-'), text };
}
// Hz spanned by one pixel row of the spectrogram around `hz`.
const rowWidthHz = (page, hz) => page.evaluate((f) => {
  const d = window.stairstepSpectrogram.data;
  const t = (r) => d.log ? d.lo * (d.hi / d.lo) ** (r / (d.rows - 1)) : d.lo + ((d.hi - d.lo) * r) / (d.rows - 1);
  const r = d.log ? Math.log(f / d.lo) / Math.log(d.hi / d.lo) * (d.rows - 1) : ((f - d.lo) / (d.hi - d.lo)) * (d.rows - 1);
  return t(r + 0.5) - t(r - 0.5);
}, hz);

test('a full-scale sine reads 0 dBFS at its frequency under the pointer, on log and linear axes', async () => {
  // Level convention (the core's, and common practice for spectra of tones): the Hann window's coherent gain is
  // divided out (each frame is normalised by the window's sum, Σw = N/2), so a full-scale sine whose frequency sits
  // on a bin centre reads exactly 0 dBFS. Between bins the Hann window reads lower, by at most its scalloping loss of
  // 1.42 dB (half a bin off). Tolerances: 0.1 dB on a bin centre (float rounding); on 1 kHz, 0.43 bins off a 4096-point
  // bin at 48 kHz, the reading must lie between −1.42 − 0.1 dB and +0.1 dB.
  const { page } = s;
  const rate = 48_000;
  const n = 4 * rate;
  const centred = (85 * rate) / 4096; // 996.09375 Hz, bin 85 of 4096
  const path = wav(join(tmp, 'sines.wav'), rate, [sine(n, rate, centred)]);
  const path1k = wav(join(tmp, 'sine-1k.wav'), rate, [sine(n, rate, 1000)]);
  await renderAndSpectrogram(page, () => page.setInputFiles('#file', path));
  await usePreset(page, { format: 'stairstep-preset', version: 1, name: 'none', stages: [] });
  for (const scale of ['log', 'linear']) {
    await setView(page, { which: 'input', size: 4096, scale });
    const r = await readAt(page, n / 2, centred);
    assert.ok(Math.abs(r.db) <= 0.1, `${scale}: bin-centred sine reads ${r.text}`);
    assert.ok(Math.abs(r.hz - centred) <= (await rowWidthHz(page, centred)), `${scale}: readout at ${r.hz} Hz`);
    assert.ok(Math.abs(r.t - 2) < 0.05, `${scale}: time ${r.t}`);
    // A row away from the tone (an octave up) is far below it.
    const off = await readAt(page, n / 2, 2 * centred);
    assert.ok(off.db < -60, `${scale}: an octave above the tone reads ${off.text}`);
  }
  await renderAndSpectrogram(page, () => page.setInputFiles('#file', path1k));
  for (const scale of ['log', 'linear']) {
    await setView(page, { scale });
    const r = await readAt(page, n / 2, 1000);
    assert.ok(r.db <= 0.1 && r.db >= -1.52, `${scale}: 1 kHz reads ${r.text}`);
  }
  // The keyboard reaches the same reading: P puts the cursor on the strongest point in view.
  await page.focus('#spectrogram');
  await page.keyboard.press('p');
  const text = await page.textContent('#sg-readout');
  const m = text.match(/· ([\d.]+) (Hz|kHz) · (−?[\d.]+) dBFS$/);
  const hz = +m[1] * (m[2] === 'kHz' ? 1000 : 1);
  assert.ok(Math.abs(hz - 1000) <= (await rowWidthHz(page, 1000)), `keyboard readout "${text}"`);
  assert.ok(Math.abs(+m[3].replace('−', '-')) <= 1.52, `keyboard readout "${text}"`);
  await page.keyboard.press('ArrowUp');
  assert.notEqual(await page.textContent('#sg-readout'), text, 'the arrows move the cursor');
  assert.match(await page.getAttribute('#spectrogram', 'aria-label'), /Strongest: [\d.]+ k?Hz at −?[01]\.\d dBFS/);
});

test('a rate stage to 8 kHz puts the Nyquist line at 4 kHz', async () => {
  const { page } = s;
  await renderAndSpectrogram(page, () => page.selectOption('#demo', 'pad'));
  await usePreset(page, { format: 'stairstep-preset', version: 1, name: 'eight', stages: [
    { kind: 'rate', rate_hz: 8000, mode: 'hold' }, { kind: 'quantize', bits: 8 }] });
  for (const scale of ['log', 'linear']) {
    await setView(page, { which: 'output', size: 2048, scale });
    const line = await page.evaluate(() => window.stairstepSpectrogram.nyquist);
    assert.equal(line.hz, 4000);
    const frames = await page.evaluate(() => window.stairstep.info.frames);
    // Drawn on the pixel where 4 kHz lies (snapped to the pixel grid: within a pixel).
    const at = await page.evaluate((f) => window.stairstepSpectrogram.pixelOf(f, 4000, true), frames / 2);
    assert.ok(Math.abs(at.y - line.y) <= 1, `${scale}: line at ${line.y} px, 4 kHz at ${at.y} px`);
    // The pointer on the line reads 4 kHz (within the row's width).
    const r = await readAt(page, frames / 2, 4000);
    assert.ok(Math.abs(r.hz - 4000) <= (await rowWidthHz(page, 4000)), `${scale}: ${r.text}`);
    await screenshot(page, `spectro-nyquist-8k-${scale}`);
  }
  // Without a rate stage the line is at the source's Nyquist frequency (the top).
  await usePreset(page, { format: 'stairstep-preset', version: 1, name: 'full', stages: [{ kind: 'quantize', bits: 8 }] });
  assert.equal((await page.evaluate(() => window.stairstepSpectrogram.nyquist)).hz, 24000);
});

test('a tapped stage shows its own figures, equal to `stairstep render --json`, and tapping or listening changes no export byte', async () => {
  const { page } = s;
  assert.ok(existsSync(cli), `the release CLI is needed: ${cli} (cargo build --release)`);
  const preset = { format: 'stairstep-preset', version: 1, name: 'taps', seed: 7, stages: [
    { kind: 'gain', gain_db: 9, overflow: 'clip' }, { kind: 'rate', rate_hz: 11025, mode: 'hold' },
    { kind: 'quantize', bits: 6, dither: 'tpdf' }, { kind: 'g711', law: 'mulaw' }],
  export: { type: 'wav', encoding: 'pcm-u8' } };
  // A stereo demo written by the CLI, read by both.
  const fixture = join(tmp, 'chime.wav');
  execFileSync(cli, ['demo', 'chime-loop', '-o', fixture, '--force']);
  await renderAndSpectrogram(page, () => page.setInputFiles('#file', fixture));
  await usePreset(page, preset);
  const presetPath = join(tmp, 'taps.json');
  writeFileSync(presetPath, JSON.stringify(await page.evaluate(() => window.stairstep.preset)));
  const cliOut = join(tmp, 'cli-taps.wav');
  const json = JSON.parse(execFileSync(cli, ['render', '--preset', presetPath, fixture, '-o', cliOut, '--force', '--json'],
    { encoding: 'utf8' }));
  const stages = json[0].stages;
  assert.equal(stages.length, 4);
  const download = async (name) => {
    const [d] = await Promise.all([page.waitForEvent('download'), page.click('#download')]);
    const p = join(tmp, name);
    await d.saveAs(p);
    return readFileSync(p);
  };
  const untapped = await download('untapped.wav');
  assert.ok(untapped.equals(readFileSync(cliOut)), 'page and CLI export the same bytes');
  const outputBefore = await page.evaluate(() => window.stairstep.output.map((c) => Array.from(c.subarray(0, 2000))));

  for (let i = 0; i < stages.length; i++) {
    await renderAndSpectrogram(page, () => page.click(`#tap-${i}`));
    assert.equal(await page.getAttribute(`#tap-${i}`, 'aria-pressed'), 'true');
    const meters = await page.evaluate(() => Object.fromEntries([...document.querySelectorAll('#meters [data-value]')]
      .map((m) => [m.id, JSON.parse(m.dataset.value)])));
    const want = stages[i];
    assert.equal(meters['meter-tap'], i);
    assert.equal(meters['meter-stage-sqnr'], want.sqnr_db, `stage ${i + 1} SQNR`);
    assert.equal(meters['meter-stage-clipped'], want.clipped, `stage ${i + 1} clipped`);
    assert.deepEqual(meters['meter-stage-codes'], [want.codes_used ?? null, want.code_space ?? null], `stage ${i + 1} codes`);
    assert.equal(meters['meter-stage-rate'], want.rate_hz, `stage ${i + 1} rate`);
    // What the meters say, as text too.
    const text = await page.textContent('#meters');
    if (want.sqnr_db !== null) assert.match(text, new RegExp(want.sqnr_db.toFixed(1)));
    if (want.codes_used !== null) assert.match(text, new RegExp(`${want.codes_used} of 2`));
    // The stage's card says the same in one line.
    if (want.sqnr_db !== null) assert.match(await page.textContent(`#stage-${i}-figures`), new RegExp(`SQNR ${want.sqnr_db.toFixed(1)} dB`));
  }
  // The gain stage clipped (+9 dB on the fixture) and the quantizer used few of its codes: the figures mean something.
  assert.ok(stages[0].clipped > 0 && stages[2].codes_used <= 64 && stages[3].code_space === 256, JSON.stringify(stages));

  // Tapped after the quantizer: the views and the audition show the signal after it, not the chain's.
  await renderAndSpectrogram(page, () => page.click('#tap-2'));
  const tapped = await page.evaluate(() => window.stairstep.output.map((c) => Array.from(c.subarray(0, 2000))));
  assert.notDeepEqual(tapped, outputBefore, 'the tap shows another signal');
  assert.equal(await page.evaluate(() => window.stairstepSpectrogram.data.tapped), 2);
  await screenshot(page, 'spectro-tap-quantizer');
  // Listen to the tap and to the error the stage alone adds, then export: the same bytes as before.
  await page.click('input[name=listen][value=error]', { force: true });
  await page.click('#play');
  await page.waitForFunction(() => window.stairstepAudio?.playing && window.stairstepAudio.node.buffer ===
    window.stairstepAudio.buffers.error);
  await page.waitForTimeout(300);
  await page.click('#play');
  await page.click('input[name=listen][value=output]', { force: true });
  const tappedExport = await download('tapped.wav');
  assert.ok(tappedExport.equals(untapped), 'tapping and listening change no export byte');
  // After the export the tap is still shown (the worker re-taps after rendering for the file).
  await afterSpectrogram(page, () => page.selectOption('#sg-which', 'error'));
  assert.equal(await page.evaluate(() => window.stairstepSpectrogram.data.tapped), 2);
  // The meter's ✕ and the card's button untap.
  await renderAndSpectrogram(page, () => page.click('#meter-tap .untap'));
  assert.equal(await page.getAttribute('#tap-2', 'aria-pressed'), 'false');
  assert.equal(await page.locator('#meter-tap').count(), 0);
  assert.deepEqual(s.offline, []);
  assert.deepEqual(s.errors, []);
});

test('the spectrogram of a 10 s stereo clip: time to compute and draw, after the main views', async () => {
  const { page } = s;
  const rate = 48_000;
  const n = 10 * rate;
  // A chirp on the left, a chord on the right, at −6 dBFS.
  const left = Float64Array.from({ length: n }, (_, i) => 0.5 * Math.sin(2 * Math.PI * (100 * i / rate + (4000 * (i / rate) ** 2) / 20)));
  const right = Float64Array.from({ length: n }, (_, i) => 0.25 * (Math.sin(2 * Math.PI * 220 * i / rate) + Math.sin(2 * Math.PI * 330 * i / rate)));
  const path = wav(join(tmp, 'ten.wav'), rate, [left, right], false);
  await renderAndSpectrogram(page, () => page.setInputFiles('#file', path));
  await usePreset(page, { format: 'stairstep-preset', version: 1, name: 'crush', stages: [
    { kind: 'rate', rate_hz: 11025, mode: 'hold' }, { kind: 'quantize', bits: 6 }] });
  const result = {};
  for (const size of [1024, 2048, 4096]) {
    await setView(page, { which: 'output', size, scale: 'log' });
    const times = [];
    for (const which of ['input', 'output', 'error', 'output', 'input', 'error', 'output']) {
      await afterSpectrogram(page, () => page.selectOption('#sg-which', which));
      times.push(await page.evaluate(() => window.stairstepSpectrogram.timing));
    }
    const med = (k) => times.map((t) => t[k]).sort((a, b) => a - b)[times.length >> 1];
    result[size] = { worker: med('workerMs'), total: med('totalMs'), draw: med('drawMs') };
  }
  const d = await page.evaluate(() => { const x = window.stairstepSpectrogram.data; return `${x.frames}×${x.rows}`; });
  console.log(`spectrogram of 10 s stereo 48 kHz at 1280×800 (${d} cells), median of 7, ms: ` +
    Object.entries(result).map(([k, v]) => `FFT ${k}: core ${v.worker.toFixed(0)}, request to drawn ${v.total.toFixed(0)} ` +
      `(drawing ${v.draw.toFixed(1)})`).join('; '));
  // The edit-to-paint path: a render is drawn (meters, waveform, spectrum) before the spectrogram is asked for.
  const order = await page.evaluate(async () => {
    const seen = [];
    const obs = new MutationObserver((list) => { for (const m of list) seen.push(m.attributeName.slice(5)); });
    obs.observe(document.body, { attributes: true, attributeFilter: ['data-rendered', 'data-spectrogram'] });
    window.stairstepApplyPreset({ ...window.stairstep.preset, stages: [{ kind: 'quantize', bits: 5 }] });
    await new Promise((r) => setTimeout(r, 3000));
    obs.disconnect();
    return seen;
  });
  assert.deepEqual(order, ['rendered', 'spectrogram'], 'the render is drawn first, then the spectrogram');
  for (const v of Object.values(result)) assert.ok(v.draw < 100, `drawing took ${v.draw} ms`);
});

test('the transfer curve is the chain\'s staircase and zooms; the code histogram counts what the report counts', async () => {
  const { page } = s;
  await renderAndSpectrogram(page, () => page.selectOption('#demo', 'chime-loop'));
  await usePreset(page, { format: 'stairstep-preset', version: 1, name: 'steps', stages: [
    { kind: 'gain', gain_db: 6, overflow: 'clip' }, { kind: 'rate', rate_hz: 11025, mode: 'hold' }, { kind: 'quantize', bits: 3 }] });
  const transferred = () => page.waitForFunction(() => window.stairstepTransfer.data !== null);
  await page.selectOption('#lower-view', 'transfer');
  await transferred();
  let d = await page.evaluate(() => window.stairstepTransfer.data);
  // A 3-bit mid-tread quantizer: 8 levels over the whole range; the rate stage is passed through, with a note.
  assert.equal(d.levels, 8);
  assert.deepEqual(d.applied, [0, 2]);
  assert.match(await page.textContent('#tf-notes'), /stage 2 \(rate\)/);
  // Zoomed in four times (from the keyboard) around 0: fewer steps in view, recomputed for the range.
  await page.focus('#transfer');
  for (let i = 0; i < 4; i++) {
    const before = await page.evaluate(() => window.stairstepTransfer.data);
    await page.keyboard.press('+');
    await page.waitForFunction((b) => window.stairstepTransfer.data !== b && window.stairstepTransfer.data.hi - window.stairstepTransfer.data.lo < b.hi - b.lo, before);
  }
  d = await page.evaluate(() => window.stairstepTransfer.data);
  assert.ok(d.hi - d.lo <= 2 / 16 + 1e-9 && d.levels < 8, `${d.lo} … ${d.hi}: ${d.levels} levels`);
  await screenshot(page, 'spectro-transfer');
  // The code histogram of the quantizer: as many codes as the report's per-stage figure.
  await page.selectOption('#lower-view', 'codes');
  await page.waitForFunction(() => window.stairstepCodes.data !== null);
  const h = await page.evaluate(() => window.stairstepCodes.data);
  const st = (await page.evaluate(() => window.stairstep.report.stages))[2];
  assert.equal(h.stage, 2);
  assert.equal(h.codes_used, st.codes_used);
  assert.equal(h.code_space, 8);
  assert.equal(h.counts.reduce((a, b) => a + b, 0), h.samples);
  assert.match(await page.textContent('#codes-note'), new RegExp(`${st.codes_used} of 2³ codes used`));
  await screenshot(page, 'spectro-codes');
  await page.selectOption('#lower-view', 'spectrogram');
});

test('screenshots: original, processed and error on log and linear axes, and a tapped stage, at 1280 and 700 px wide', async () => {
  for (const viewport of [{ width: 1280, height: 800 }, { width: 700, height: 800 }]) {
    const o = await openPage(browser, { viewport });
    const { page } = o;
    await renderAndSpectrogram(page, () => page.selectOption('#demo', 'chime-loop'));
    await usePreset(page, { format: 'stairstep-preset', version: 1, name: 'handheld', seed: 1, stages: [
      { kind: 'rate', rate_hz: 11025, mode: 'hold' }, { kind: 'quantize', bits: 6, dither: 'tpdf' }] });
    const w = viewport.width;
    // In a narrow window the views column scrolls: bring the spectrogram into view.
    const reveal = () => page.evaluate(() => { document.getElementById('views').scrollTop = 1e9; });
    for (const scale of w === 1280 ? ['log', 'linear'] : ['log']) {
      for (const which of ['input', 'output', 'error']) {
        await setView(page, { which, scale, size: 2048 });
        await reveal();
        await screenshot(page, `spectro-${w}-${which}-${scale}`);
      }
    }
    await setView(page, { which: 'output', scale: 'log' });
    await renderAndSpectrogram(page, () => page.click('#tap-1'));
    await reveal();
    await page.hover('#spectrogram');
    await screenshot(page, `spectro-${w}-tap`);
    assert.deepEqual(o.offline, []);
    assert.deepEqual(o.errors, []);
    await o.context.close();
  }
});
