#!/usr/bin/env node
// The edit-to-paint latency of the page, as a user feels it: from the input event of a chain control to the first
// frame painted after the views show its result, in headless Chromium.
//
//   node scripts/bench/edit.mjs [--page dist/stairstep.html] --seconds 10 --seconds 60 --edits 10 --out build/bench
//
// For each length: writes a stereo 48 kHz 16-bit WAV (two chords and a little noise, made here), opens the page from
// file://, loads the WAV through the page's own file input, uses one uniform quantizer (8 bits, no dither) and then
// types a new bit depth (alternately 7 and 8) into the stage's field and presses Enter, `edits` times after two
// warm-up edits. Each edit is timed inside the page: t0 just before the `change` event is dispatched, t1 in the
// second animation frame after the page counts the render as drawn (`body[data-rendered]` grows: the views are drawn
// synchronously before the count moves; the frame after the next animation frame has been painted). The worker's
// own time for the render (chain, report, spectra, envelopes) comes from the page's state; the rest is the trip
// across the worker boundary and the drawing. Medians with min–max; nothing is asserted about time.
import { appendFileSync, mkdirSync, writeFileSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import { launch, pageUrl as committedPage } from '../../tests/e2e/browser.mjs';

const args = process.argv.slice(2);
const opt = (name, def) => { const i = args.indexOf(name); return i >= 0 ? args[i + 1] : def; };
const all = (name) => args.flatMap((a, i) => (a === name ? [args[i + 1]] : []));
const lengths = all('--seconds').map(Number);
if (!lengths.length) lengths.push(10, 60);
const edits = Number(opt('--edits', '10'));
const out = opt('--out', 'build/bench');
const pageUrl = opt('--page') ? pathToFileURL(resolve(opt('--page'))).href : committedPage;
const targets = { 10: 33, 60: 100 }; // ms, the page's aims for 10 s and 60 s stereo clips

const median = (v) => { const s = [...v].sort((a, b) => a - b); const n = s.length; return n % 2 ? s[(n - 1) / 2] : (s[n / 2 - 1] + s[n / 2]) / 2; };

function stereoWav(seconds, rate = 48000) {
  const frames = Math.round(seconds * rate);
  const buf = Buffer.alloc(44 + frames * 4);
  buf.write('RIFF', 0); buf.writeUInt32LE(36 + frames * 4, 4); buf.write('WAVE', 8);
  buf.write('fmt ', 12); buf.writeUInt32LE(16, 16); buf.writeUInt16LE(1, 20); buf.writeUInt16LE(2, 22);
  buf.writeUInt32LE(rate, 24); buf.writeUInt32LE(rate * 4, 28); buf.writeUInt16LE(4, 32); buf.writeUInt16LE(16, 34);
  buf.write('data', 36); buf.writeUInt32LE(frames * 4, 40);
  let seed = 12345;
  for (let i = 0; i < frames; i++) {
    seed = (seed * 1664525 + 1013904223) >>> 0;
    const n = (seed / 4294967296 - 0.5) * 0.02;
    const t = i / rate;
    const l = 0.3 * Math.sin(2 * Math.PI * 220 * t) + 0.2 * Math.sin(2 * Math.PI * 331 * t) + n;
    const r = 0.3 * Math.sin(2 * Math.PI * 277 * t) + 0.2 * Math.sin(2 * Math.PI * 440 * t) - n;
    buf.writeInt16LE(Math.round(l * 32767), 44 + 4 * i);
    buf.writeInt16LE(Math.round(r * 32767), 46 + 4 * i);
  }
  return buf;
}

mkdirSync(out, { recursive: true });
const browser = await launch();
try {
  for (const seconds of lengths) {
    const wav = join(out, `edit-${seconds}s.wav`);
    writeFileSync(wav, stereoWav(seconds));
    const page = await (await browser.newContext({ viewport: { width: 1280, height: 800 } })).newPage();
    const errors = [];
    page.on('pageerror', (e) => errors.push(String(e)));
    await page.goto(pageUrl);
    await page.waitForSelector('body[data-ready=true]', { timeout: 60_000 });
    const renders = () => page.evaluate(() => +document.body.dataset.rendered || 0);
    const settle = async (before) => {
      await page.waitForFunction((n) => (+document.body.dataset.rendered || 0) > n, before, { timeout: 120_000 });
      for (let now = await renders(); ;) { await page.waitForTimeout(300); const later = await renders(); if (later === now) break; now = later; }
    };
    let before = await renders();
    await page.setInputFiles('#file', wav);
    await settle(before);
    // One quantizer: the edited stage is the first (fields are numbered from 0), and nothing else in the chain moves the timing.
    const preset = { format: 'stairstep-preset', version: 1, name: 'edit latency', seed: 1,
      stages: [{ kind: 'quantize', bits: 8 }], export: { type: 'wav', encoding: 'pcm-s16' } };
    const presetFile = join(out, 'edit-preset.json');
    writeFileSync(presetFile, JSON.stringify(preset));
    before = await renders();
    await page.setInputFiles('#preset-file', presetFile);
    await settle(before);
    const timings = await page.evaluate(async ({ count }) => {
      const field = document.getElementById('f-0-bits');
      const frame = () => new Promise((r) => requestAnimationFrame(() => r()));
      const rendered = () => +document.body.dataset.rendered || 0;
      const result = [];
      for (let i = 0; i < count; i++) {
        const start = rendered();
        const t0 = performance.now();
        field.value = String(i % 2 ? 8 : 7);
        field.dispatchEvent(new Event('input', { bubbles: true }));
        field.dispatchEvent(new Event('change', { bubbles: true }));
        while (rendered() === start) await new Promise((r) => setTimeout(r, 0));
        await frame(); await frame();
        result.push({ total: performance.now() - t0, worker: window.stairstep.renderMs, bits: window.stairstep.report && JSON.parse(window.stairstep.renderedPreset).stages[0].bits });
        await new Promise((r) => setTimeout(r, 200)); // let follow-up work (sweep, budget) settle between edits
      }
      return result;
    }, { count: edits + 2 });
    if (errors.length) throw new Error(`page errors: ${errors.join('; ')}`);
    const runs = timings.slice(2);
    const lost = runs.filter((r, i) => r.bits !== ((i + 2) % 2 ? 8 : 7)).length;
    if (lost) throw new Error(`${lost} edits did not reach the views`);
    const total = runs.map((r) => r.total);
    const worker = runs.map((r) => r.worker);
    const med = median(total);
    const target = targets[seconds];
    const row = {
      what: `page edit-to-paint, ${seconds} s stereo 48 kHz WAV, bit depth typed into a quantizer (headless Chromium)`,
      ours: `${med.toFixed(0)} ms median (${Math.min(...total).toFixed(0)}–${Math.max(...total).toFixed(0)}), of which the worker's render ${median(worker).toFixed(0)} ms`,
      reference: target ? `the aim, ${target} ms` : 'no aim',
      ratio: target ? med / target : med, lo: target ? Math.min(...total) / target : Math.min(...total),
      hi: target ? Math.max(...total) / target : Math.max(...total), rounds: runs.length,
      means: target ? 'edit-to-paint time / the aim' : 'ms',
      target: target ? '≤ 1×' : '', met: target ? med <= target : null,
      note: `the rest of each edit (${(med - median(worker)).toFixed(0)} ms median) is the request, the transfer of the views' data and the drawing; Chromium ${browser.version()}, 1280×800`,
    };
    appendFileSync(join(out, 'results.jsonl'), `${JSON.stringify(row)}\n`);
    console.error(`  ${row.what}: ${row.ours}`);
    await page.context().close();
  }
} finally {
  await browser.close();
}
