#!/usr/bin/env node
// The page side of `make bench`: how long the offline page takes to re-render a long clip, in headless Chromium.
//
//   node scripts/bench/page.mjs [--page dist/stairstep.html] --seconds 60 --rounds 7 \
//     --preset build/bench/chain-preset.json --out build/bench
//
// Opens dist/stairstep.html from file:// in Debian's Chromium (playwright-core, the e2e tests' launcher), waits for
// the page to be ready, then, inside the page, starts a worker from the page's own embedded worker source and wasm
// bytes (the page keeps its worker private to its module) and speaks the page's worker protocol to it: `init`, one
// `load` of a synthetic stereo 48 kHz clip (sampleRate/channels/interleaved), then `render` requests with the page's
// view (whole clip, 1,200 columns, 4096-point Hann). A render is what the page does on every edit: the chain with
// its report, three spectra (input, output, error), input and output envelopes per channel and the output channels,
// transferred back. Each round times postMessage('render') until 'rendered' arrives on the page's thread. Reports the real-time factor
// (clip seconds / render seconds); asserts nothing about time.
import { readFileSync, appendFileSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import { launch, pageUrl as committedPage } from '../../tests/e2e/browser.mjs';

const args = process.argv.slice(2);
const opt = (name, def) => { const i = args.indexOf(name); return i >= 0 ? args[i + 1] : def; };
const seconds = Number(opt('--seconds', '60'));
const rounds = Number(opt('--rounds', '7'));
const preset = readFileSync(opt('--preset', 'build/bench/chain-preset.json'), 'utf8');
const out = opt('--out', 'build/bench');
const pageUrl = opt('--page') ? pathToFileURL(resolve(opt('--page'))).href : committedPage;

const median = (v) => { const s = [...v].sort((a, b) => a - b); const n = s.length; return n % 2 ? s[(n - 1) / 2] : (s[n / 2 - 1] + s[n / 2]) / 2; };

const browser = await launch();
try {
  const page = await (await browser.newContext()).newPage();
  const errors = [];
  page.on('pageerror', (e) => errors.push(String(e)));
  await page.goto(pageUrl);
  await page.waitForSelector('body[data-ready=true]', { timeout: 60_000 });
  const result = await page.evaluate(async ({ seconds, rounds, preset }) => {
    const b64 = document.getElementById('wasm-b64').textContent.trim();
    const bin = atob(b64);
    const wasm = new Uint8Array(bin.length);
    for (let i = 0; i < bin.length; i++) wasm[i] = bin.charCodeAt(i);
    const src = document.getElementById('worker-src').textContent;
    const worker = new Worker(URL.createObjectURL(new Blob([src], { type: 'text/javascript' })));
    let nextId = 1;
    const call = (type, payload = {}, transfer = []) => new Promise((resolve, reject) => {
      const id = nextId++;
      const onMessage = (e) => {
        if (e.data.id !== id) return;
        worker.removeEventListener('message', onMessage);
        if (e.data.type === 'error') reject(new Error(e.data.message)); else resolve(e.data);
      };
      worker.addEventListener('message', onMessage);
      worker.postMessage({ type, id, ...payload }, transfer);
    });
    await call('init', { wasm });
    // A synthetic stereo clip: two slow chords with a little noise (the content hardly matters to the timing).
    const rate = 48000;
    const frames = Math.round(seconds * rate);
    const interleaved = new Float32Array(frames * 2);
    let seed = 12345;
    for (let i = 0; i < frames; i++) {
      seed = (seed * 1664525 + 1013904223) >>> 0;
      const n = (seed / 4294967296 - 0.5) * 0.02;
      const t = i / rate;
      interleaved[2 * i] = 0.3 * Math.sin(2 * Math.PI * 220 * t) + 0.2 * Math.sin(2 * Math.PI * 331 * t) + n;
      interleaved[2 * i + 1] = 0.3 * Math.sin(2 * Math.PI * 277 * t) + 0.2 * Math.sin(2 * Math.PI * 440 * t) - n;
    }
    const loaded = await call('load', { sampleRate: rate, channels: 2, interleaved, name: 'bench' }, [interleaved.buffer]);
    const view = { start: 0, end: loaded.info.frames, columns: 1200, fftSize: 4096, window: 'hann' };
    const wall = [];
    const worker_ms = [];
    let report = null;
    const warmUp = 2; // V8 starts wasm in its baseline compiler and tiers hot functions up while they run
    for (let r = 0; r < rounds + warmUp; r++) {
      const t0 = performance.now();
      const msg = await call('render', { preset, view });
      const ms = performance.now() - t0;
      if (r >= warmUp) { wall.push(ms); worker_ms.push(msg.ms); }
      report = msg.report;
    }
    worker.terminate();
    return { frames: loaded.info.frames, wall, worker_ms, sqnr: report.sqnr_db, exportRate: report.export_rate };
  }, { seconds, rounds, preset });
  if (errors.length) throw new Error(`page errors: ${errors.join('; ')}`);
  const wallMed = median(result.wall);
  const rtf = result.wall.map((ms) => seconds / (ms / 1000));
  const version = browser.version();
  const row = {
    what: `page re-render of ${seconds} s stereo 48 kHz in headless Chromium (chain + 3 spectra + envelopes per channel)`,
    ours: `${wallMed.toFixed(1)} ms per render (worker's own ${median(result.worker_ms).toFixed(1)} ms)`,
    reference: `${seconds} s of audio`,
    ratio: seconds / (wallMed / 1000),
    lo: Math.min(...rtf),
    hi: Math.max(...rtf),
    rounds: result.wall.length,
    means: 'real-time factor: clip seconds / render seconds',
    target: '≥ 1000×',
    met: seconds / (wallMed / 1000) >= 1000,
    note: `Chromium ${version}; the page's worker code and wasm from dist/stairstep.html; SQNR ${result.sqnr.toFixed(2)} dB, export at ${result.exportRate} Hz`,
  };
  appendFileSync(join(out, 'results.jsonl'), `${JSON.stringify(row)}\n`);
  console.error(`  ${row.what}: ${row.ratio.toFixed(0)}× real time (${row.lo.toFixed(0)}–${row.hi.toFixed(0)}); ${row.ours}`);
} finally {
  await browser.close();
}
