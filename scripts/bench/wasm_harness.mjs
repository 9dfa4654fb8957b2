#!/usr/bin/env node
// The wasm side of `make bench`: the page's own build (build/wasm, wasm-bindgen's no-modules glue and the wasm-opt
// output) run in node's V8, timed on demand.
//
//   node scripts/bench/wasm_harness.mjs WASM_DIR BENCH_DIR
//
// Loads BENCH_DIR/input.json, BENCH_DIR/input.f32 (planar float32, written by examples/bench_ratios.rs) and
// BENCH_DIR/chain-preset.json into a `Session`, exactly as the page's worker does (loadSamples, setPreset), then
// answers lines on stdin with one JSON line each on stdout:
//   chain     times one Session.render() (the whole chain with its report, as in the page), replies { s, report }
//   spectrum  times one Session.spectrum('output', fft_size, 'hann') (not 'input': the session caches that one),
//             replies { s }
//   export    writes the latest render's export file (Session.exportFile()) to BENCH_DIR/export-wasm.bin
//   quit
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { createInterface } from 'node:readline';
import vm from 'node:vm';

const [wasmDir, benchDir] = process.argv.slice(2);
if (!wasmDir || !benchDir) {
  console.error('usage: node scripts/bench/wasm_harness.mjs WASM_DIR BENCH_DIR');
  process.exit(2);
}

// The glue is a classic script that declares `let wasm_bindgen`; evaluate it as one and hand the binding out.
const glue = readFileSync(join(wasmDir, 'stairstep.js'), 'utf8');
vm.runInThisContext(`${glue}\n;globalThis.wasm_bindgen = wasm_bindgen;`, { filename: join(wasmDir, 'stairstep.js') });
const { initSync, Session } = globalThis.wasm_bindgen;
initSync({ module: readFileSync(join(wasmDir, 'stairstep_opt.wasm')) });

const meta = JSON.parse(readFileSync(join(benchDir, 'input.json'), 'utf8'));
const raw = readFileSync(join(benchDir, 'input.f32'));
const planar = new Float32Array(raw.buffer, raw.byteOffset, raw.byteLength / 4);
const { frames, channels } = meta;
const interleaved = new Float32Array(frames * channels);
for (let c = 0; c < channels; c++) {
  for (let i = 0; i < frames; i++) interleaved[i * channels + c] = planar[c * frames + i];
}

const session = new Session();
session.loadSamples(meta.sample_rate, channels, interleaved);
session.setPreset(readFileSync(join(benchDir, 'chain-preset.json'), 'utf8'));

let rendered = false;
const rl = createInterface({ input: process.stdin });
for await (const line of rl) {
  const cmd = line.trim();
  let reply;
  if (cmd === 'chain') {
    const t0 = performance.now();
    const report = session.render();
    rendered = true;
    const s = (performance.now() - t0) / 1000;
    reply = { s, report: JSON.parse(report) };
  } else if (cmd === 'spectrum') {
    // The output's spectrum: the session keeps the input's (it never changes between renders), so timing that one
    // would time a cache. The output has the input's length, so the same frames are transformed.
    if (!rendered) { session.render(); rendered = true; }
    const t0 = performance.now();
    session.spectrum('output', meta.spectrum.fft_size, 'hann');
    reply = { s: (performance.now() - t0) / 1000 };
  } else if (cmd === 'export') {
    const file = session.exportFile();
    writeFileSync(join(benchDir, 'export-wasm.bin'), file);
    reply = { bytes: file.length };
  } else if (cmd === 'quit') {
    break;
  } else {
    reply = { error: `unknown request ${JSON.stringify(cmd)}` };
  }
  process.stdout.write(`${JSON.stringify(reply)}\n`);
}
session.free();
rl.close();
