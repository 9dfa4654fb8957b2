// The foundation slice, end to end: the committed single-file page from file://, no network, the demo, the spectrum,
// the bit depth, playback.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { launch, openPage, afterRender, screenshot } from './browser.mjs';

let browser;
let session;
before(async () => {
  browser = await launch();
  session = await openPage(browser);
});
after(async () => { await browser?.close(); });

test('the page starts with the demo loaded, drawn and measured', async () => {
  const { page } = session;
  const s = await page.evaluate(() => ({
    frames: window.stairstep.info.frames,
    rate: window.stairstep.info.sampleRate,
    sqnr: window.stairstep.report.sqnr_db,
  }));
  assert.equal(s.rate, 48000);
  assert.ok(s.frames > 48000);
  assert.ok(s.sqnr > 20 && s.sqnr < 60, `8-bit SQNR of the demo: ${s.sqnr}`);
  // The waveform canvas has ink on it (not a blank plot).
  const inked = await page.evaluate(() => {
    const c = document.getElementById('wave');
    const d = c.getContext('2d').getImageData(0, 0, c.width, c.height).data;
    const bg = [d[0], d[1], d[2]];
    let n = 0;
    for (let i = 0; i < d.length; i += 4) if (Math.abs(d[i] - bg[0]) + Math.abs(d[i + 1] - bg[1]) + Math.abs(d[i + 2] - bg[2]) > 60) n++;
    return n / (d.length / 4);
  });
  assert.ok(inked > 0.05, `waveform ink coverage ${inked}`);
  await screenshot(page, 'foundation-start');
});

test('the tone demo peaks in the bin of its frequency', async () => {
  const { page } = session;
  await afterRender(page, () => page.selectOption('#demo', 'tone'));
  const r = await page.evaluate(() => {
    const s = window.stairstep.spectra.output;
    let k = 0;
    for (let i = 1; i < s.length; i++) if (s[i] > s[k]) k = i;
    return { k, level: s[k], fft: window.stairstep.fftSize, rate: window.stairstep.info.sampleRate };
  });
  // 997 Hz at 48 kHz with a 4096-point FFT: bin 997 * 4096 / 48000 = 85.08 -> 85.
  assert.equal(r.k, Math.round((997 * r.fft) / r.rate));
  // The tone is at -6 dBFS; off-centre on its bin, Hann scalloping takes at most 1.42 dB.
  assert.ok(r.level < -6 + 0.1 && r.level > -6 - 1.5, `peak level ${r.level}`);
});

test('changing the bit depth changes the error spectrum by about 6 dB per bit', async () => {
  const { page } = session;
  const meanError = () => page.evaluate(() => {
    const s = window.stairstep.spectra.error;
    let sum = 0;
    for (let i = 1; i < s.length; i++) sum += Math.pow(10, s[i] / 10);
    return 10 * Math.log10(sum / (s.length - 1));
  });
  const at8 = await meanError();
  const bits = page.locator('.stage[data-kind=quantize] input[type=number]').first();
  await afterRender(page, async () => { await bits.fill('4'); await bits.press('Enter'); });
  const at4 = await meanError();
  const sqnr = await page.evaluate(() => window.stairstep.report.sqnr_db);
  // 4 bits fewer: about 24 dB more error (6.02 dB per bit).
  assert.ok(Math.abs(at4 - at8 - 24.08) < 3, `error floor moved by ${at4 - at8} dB`);
  assert.ok(sqnr > 15 && sqnr < 25, `4-bit SQNR of a -6 dBFS sine: ${sqnr}`);
  await screenshot(page, 'foundation-4bit');
});

test('playback starts, and the page made no network request', async () => {
  const { page, offline, errors } = session;
  await page.click('#play');
  await page.waitForFunction(() => window.stairstepAudio?.playing && window.stairstepAudio.ctx.state === 'running',
    null, { timeout: 10_000 });
  const t0 = await page.evaluate(() => window.stairstepAudio.ctx.currentTime);
  await page.waitForTimeout(400);
  const t1 = await page.evaluate(() => window.stairstepAudio.ctx.currentTime);
  assert.ok(t1 > t0, 'the audio clock advances');
  const gain = await page.evaluate(() => window.stairstepAudio.monitor.gain.value);
  assert.ok(gain <= 0.05, `monitor starts low (gain ${gain})`);
  await page.click('#play');
  assert.deepEqual(offline, [], 'requests that were not file:, data: or blob:');
  assert.deepEqual(errors, [], 'page errors');
});
