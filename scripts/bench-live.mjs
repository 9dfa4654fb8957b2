#!/usr/bin/env node
// The live plug-in's CPU cost per 128-frame block, native and wasm side by side: the typical chain (gain → hold
// 11,025 Hz → 8-bit TPDF dither) at 48 kHz, as a fraction of the real-time budget of one block (2.667 ms).
//
//   node scripts/bench-live.mjs [--channels 2] [--seconds 60]   (seconds of audio per timing run)
//
// Native: examples/block_cost.rs (release build), which runs the core's LiveChain (src/live/), the code the wasm LiveChain wraps.
// Wasm: the LiveChain of the committed dist/stairstep-worklet.js (build it first: bash scripts/build-wasm.sh, then
// node scripts/build-page.mjs), driven from a page in headless Chromium exactly as the worklet drives it (input
// copied into wasm memory, process(128), output copied out), timed with performance.now() over many blocks.
// A measurement, not a test: nothing is asserted.
import { execFileSync } from 'node:child_process';
import { readFileSync, writeFileSync, mkdirSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { chromium } from 'playwright-core';

const root = join(dirname(fileURLToPath(import.meta.url)), '..');
const args = process.argv.slice(2);
const opt = (name, def) => { const i = args.indexOf(name); return i >= 0 ? args[i + 1] : def; };
const channels = Number(opt('--channels', 2));
const seconds = Number(opt('--seconds', 60));

console.log('native: cargo run --release --example block_cost ...');
const nativeOut = execFileSync('cargo', ['run', '-q', '--release', '--example', 'block_cost', '--',
  '--channels', String(channels), '--seconds', String(seconds), '--json'], { cwd: root, encoding: 'utf8' });
const native = JSON.parse(nativeOut.trim().split('\n').pop());

console.log('wasm: LiveChain in headless Chromium ...');
const standalone = readFileSync(join(root, 'dist', 'stairstep-worklet.js'), 'utf8');
const browser = await chromium.launch({
  executablePath: process.env.CHROMIUM ?? '/usr/bin/chromium',
  args: ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking',
    '--disable-component-update', '--disable-sync', '--disable-dev-shm-usage'],
});
let wasm;
try {
  const page = await browser.newPage();
  page.on('pageerror', (e) => console.error(`page error: ${e}`));
  // A file:// page (the glue resolves its script's URL against the page's, which about:blank cannot give).
  const blank = join(root, 'build', 'bench-live.html');
  mkdirSync(dirname(blank), { recursive: true });
  writeFileSync(blank, '<!doctype html><title>Stairstep live bench</title>');
  await page.goto(pathToFileURL(blank).href);
  // The module text defines `wasm_bindgen` at its top level; give it the two worklet globals it touches.
  await page.addScriptTag({ content: `globalThis.AudioWorkletProcessor = class {}; globalThis.registerProcessor = () => {};
${standalone}
globalThis.benchWasm = WebAssembly.compile(decodeBase64(STAIRSTEP_WASM_BASE64)).then((module) => wasm_bindgen({ module_or_path: module }));` });
  wasm = await page.evaluate(async ({ preset, channels, seconds }) => {
    await globalThis.benchWasm;
    const { LiveChain } = wasm_bindgen;
    const rate = 48000;
    const n = 128;
    const lc = new LiveChain(preset, channels, rate);
    const memory = LiveChain.memory();
    const inputs = [];
    const outputs = [];
    for (let c = 0; c < channels; c++) {
      inputs.push(new Float32Array(memory.buffer, lc.inputPtr(c), n));
      outputs.push(new Float32Array(memory.buffer, lc.outputPtr(c), n));
    }
    // The same busy input as the native run: two tones per channel, and the worklet's arrays to copy from and to.
    const period = rate;
    const src = [];
    for (let c = 0; c < channels; c++) {
      src.push(Float32Array.from({ length: period }, (_, i) => 0.35 * (Math.sin(2 * Math.PI * (220 + 3 * c) * i / rate)
        + Math.sin(2 * Math.PI * 1371 * i / rate))));
    }
    const dst = Array.from({ length: channels }, () => new Float32Array(n));
    let pos = 0;
    let checksum = 0;
    const block = () => {
      for (let c = 0; c < channels; c++) inputs[c].set(src[c].subarray(pos, pos + n));
      lc.process(n);
      for (let c = 0; c < channels; c++) { dst[c].set(outputs[c]); checksum += dst[c][n - 1]; }
      pos = (pos + n) % (period - n);
    };
    for (let i = 0; i < 2000; i++) block();
    const blocks = Math.ceil((seconds * rate) / n);
    const bytes0 = memory.buffer.byteLength;
    const t0 = performance.now();
    for (let i = 0; i < blocks; i++) block();
    const ms = performance.now() - t0;
    const stats = JSON.parse(lc.stats());
    lc.free();
    return { blocks, perBlockUs: (ms * 1000) / blocks, grew: memory.buffer.byteLength - bytes0,
      underruns: stats.underrunFrames, checksum, userAgent: navigator.userAgent };
  }, { preset: native.preset, channels, seconds });
} finally {
  await browser.close();
}

const budget = native.budgetUs;
const row = (name, us) => `  ${name.padEnd(34)} ${us.toFixed(2).padStart(7)} µs   ${(100 * us / budget).toFixed(3).padStart(6)} % of ${(budget / 1000).toFixed(3)} ms`;
console.log(`\nOne ${128}-frame block, gain → hold 11,025 Hz → 8-bit TPDF, 48 kHz, ${channels} channel(s):`);
console.log(row('native (release, this machine)', native.perBlockUs));
console.log(row(`wasm in Chromium (${/Chrome\/([\d.]+)/.exec(wasm.userAgent)?.[1] ?? '?'})`, wasm.perBlockUs));
console.log(`  wasm / native: ${(wasm.perBlockUs / native.perBlockUs).toFixed(2)}×; ` +
  `allocations in the native timed blocks: ${native.allocations}; wasm memory growth while processing: ${wasm.grew} B; ` +
  `underruns: ${wasm.underruns}; ${native.blocks} and ${wasm.blocks} blocks timed`);
