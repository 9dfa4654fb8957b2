#!/usr/bin/env node
// Assembles the offline page: one HTML file with the CSS, the scripts, the worker and the wasm inlined, a strict
// Content-Security-Policy (hashes for the inline style and script, no remote sources at all) and a hash of the sources
// it was built from.
//
// The page's own code is ES modules under www/js/ (main.js at the top); esbuild (pinned in package-lock.json) joins
// them into one IIFE, not minified, which goes into the page's single inline script (see `bundleApp`).
//
// It also writes the standalone live plug-in next to the page: dist/stairstep-worklet.js, an AudioWorklet module with
// the wasm (base64) and the glue inside, for any Web Audio application (see examples/worklet/).
//
//   node scripts/build-page.mjs --wasm-dir build/wasm --out dist/stairstep.html   build the page and the worklet
//        [--worklet-out dist/stairstep-worklet.js]                               (default: next to the page)
//   node scripts/build-page.mjs --check dist/stairstep.html                        exit 1 if it or the worklet
//                                                                                  next to it is stale
//   node scripts/build-page.mjs --hash                                             print the source hash
//
// The live plug-in in the page: when www/index.html has a %WORKLET% slot (put it in a non-executed
// <script type="text/x-stairstep-worklet" id="worklet-src">), it receives the worklet source (glue + www/worklet.js,
// without the wasm: the page hands its own bytes over) and the CSP's script-src gains `data:`, because a file://
// page can load a worklet module only from a data: URL (blob: worklets are refused there). A %LIVE% slot (inside an
// executed <script>) receives www/live.js, and its hash joins script-src.
import { createHash } from 'node:crypto';
import { readFileSync, writeFileSync, readdirSync, statSync, mkdirSync, renameSync } from 'node:fs';
import { dirname, join, relative, resolve } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { createRequire } from 'node:module';

const root = join(dirname(fileURLToPath(import.meta.url)), '..');
const args = process.argv.slice(2);
const opt = (name) => { const i = args.indexOf(name); return i >= 0 ? args[i + 1] : undefined; };

// The files whose content decides the page. Anything else (tests, docs) can change without a rebuild.
const SOURCE_ROOTS = ['Cargo.toml', 'Cargo.lock', 'package-lock.json', 'src', 'www', 'scripts/build-page.mjs'];

function walk(p) {
  const full = join(root, p);
  if (statSync(full).isDirectory()) return readdirSync(full).sort().flatMap((n) => walk(join(p, n)));
  return [p];
}

export function sourceHash() {
  const h = createHash('sha256');
  for (const f of SOURCE_ROOTS.flatMap(walk).sort()) {
    h.update(relative(root, join(root, f)).split('\\').join('/'));
    h.update('\0');
    h.update(readFileSync(join(root, f)));
    h.update('\0');
  }
  return h.digest('hex');
}

const sha256b64 = (text) => createHash('sha256').update(text, 'utf8').digest('base64');
// Text inside a <script> element must not close it early.
const scriptSafe = (text) => text.replace(/<\/(script)/gi, '<\\/$1').replace(/<!--/g, '<\\!--');

// The page's Content-Security-Policy for the given inline texts. `live`: the text of an inline www/live.js (or
// undefined); `worklet`: whether the page loads the crusher's worklet (from a data: URL, see the top of this file).
export function pageCsp({ app, style, live, worklet = false }) {
  const scripts = [app, live].filter((t) => t !== undefined).map((t) => `'sha256-${sha256b64(t)}'`).join(' ');
  return [
    "default-src 'none'",
    `script-src ${scripts} 'wasm-unsafe-eval' blob:${worklet ? ' data:' : ''}`,
    'worker-src blob:',
    `style-src 'sha256-${sha256b64(style)}'`,
    'img-src data: blob:',
    'media-src blob:',
    "connect-src 'none'",
    "base-uri 'none'",
    "form-action 'none'",
  ].join('; ');
}

const GLUE_SLOT = '// @@STAIRSTEP_GLUE@@';

// The crusher's AudioWorklet module: www/worklet.js with the wasm-bindgen glue in its slot and, with `embedWasm`,
// the wasm as base64 (`STAIRSTEP_WASM_BASE64`), so that the module needs no other file.
export function workletSource(wasmDir = join(root, 'build/wasm'), { embedWasm = false } = {}) {
  const worklet = readFileSync(join(root, 'www', 'worklet.js'), 'utf8');
  if (!worklet.includes(GLUE_SLOT)) throw new Error(`www/worklet.js has lost its ${GLUE_SLOT} line`);
  let insert = readFileSync(join(wasmDir, 'stairstep.js'), 'utf8');
  if (embedWasm) {
    const wasm = readFileSync(join(wasmDir, 'stairstep_opt.wasm'));
    insert += `\nconst STAIRSTEP_WASM_BASE64 = '${wasm.toString('base64')}';\n`;
  }
  return worklet.replace(GLUE_SLOT, () => insert);
}

// The page's modules (www/js/main.js and what it imports) as one classic script: an IIFE with no imports left, no
// minification (the offline page stays readable) and no syntax lowering. Paths in its comments are relative to the
// repository, so the output (and the CSP hash over it) does not depend on where the build runs. esbuild is loaded
// only here, so that --check and --hash work without node_modules.
export function bundleApp() {
  const esbuild = createRequire(import.meta.url)('esbuild');
  const result = esbuild.buildSync({
    entryPoints: ['www/js/main.js'],
    absWorkingDir: root,
    bundle: true,
    format: 'iife',
    platform: 'browser',
    charset: 'utf8',
    legalComments: 'none',
    write: false,
    logLevel: 'silent',
  });
  return result.outputFiles[0].text;
}

function writeAtomically(out, text) {
  mkdirSync(dirname(out), { recursive: true });
  writeFileSync(`${out}.tmp`, text);
  renameSync(`${out}.tmp`, out);
}

function build(wasmDir, out) {
  const www = (f) => readFileSync(join(root, 'www', f), 'utf8');
  const glue = readFileSync(join(wasmDir, 'stairstep.js'), 'utf8');
  const wasm = readFileSync(join(wasmDir, 'stairstep_opt.wasm'));
  const template = www('index.html');
  const style = www('style.css');
  const app = scriptSafe(bundleApp());
  const worker = scriptSafe(`${glue}\n${www('worker.js')}`);
  const withWorklet = template.includes('%WORKLET%');
  const live = template.includes('%LIVE%') ? scriptSafe(www('live.js')) : undefined;
  const parts = {
    CSP: pageCsp({ app, style, live, worklet: withWorklet }),
    SOURCE_HASH: sourceHash(),
    STYLE: style,
    WASM_BASE64: wasm.toString('base64'),
    WORKER: worker,
    APP: app,
    ...(withWorklet ? { WORKLET: scriptSafe(workletSource(wasmDir)) } : {}),
    ...(live !== undefined ? { LIVE: live } : {}),
  };
  const html = template.replace(/%([A-Z_0-9]+)%/g, (m, k) => (k in parts ? parts[k] : m));
  writeAtomically(out, html);
  console.log(`page: ${relative(root, out)} (${(html.length / 1024).toFixed(0)} KiB; wasm ${(wasm.length / 1024).toFixed(0)} KiB)`);
}

// The standalone AudioWorklet module. Its second line carries the source hash, like the page's meta tag.
function buildWorklet(wasmDir, out) {
  const text = [
    '// Stairstep crusher: an AudioWorklet module with the DSP core (WebAssembly) inside; needs no other file.',
    `// stairstep-source-hash: ${sourceHash()}`,
    "//   await ctx.audioWorklet.addModule('stairstep-worklet.js');",
    "//   const node = new AudioWorkletNode(ctx, 'stairstep-crusher', { outputChannelCount: [2],",
    "//     processorOptions: { preset: 'handheld' } });",
    '// Parameters, messages and smoothing are described below; see also examples/worklet/README.md.',
    workletSource(wasmDir, { embedWasm: true }),
  ].join('\n');
  writeAtomically(out, text);
  console.log(`worklet: ${relative(root, out)} (${(text.length / 1024).toFixed(0)} KiB)`);
}

function builtFrom(file) {
  let text;
  try { text = readFileSync(file, 'utf8'); } catch { return { missing: true }; }
  const m = file.endsWith('.js')
    ? /^\/\/ stairstep-source-hash: ([0-9a-f]{64})$/m.exec(text)
    : /<meta name="stairstep-source-hash" content="([0-9a-f]{64})">/.exec(text);
  return { hash: m ? m[1] : null };
}

// Checks the page and the standalone worklet next to it (or just the worklet, given a .js file).
function check(file) {
  const files = file.endsWith('.js') ? [file] : [file, join(dirname(file), 'stairstep-worklet.js')];
  const want = sourceHash();
  let ok = true;
  for (const f of files) {
    const got = builtFrom(f);
    if (got.missing) {
      console.error(`${f} is missing. Build it with: make page`);
      ok = false;
    } else if (got.hash !== want) {
      console.error(`${f} is stale: it was built from sources ${got.hash ? got.hash.slice(0, 12) : '(unknown)'}, ` +
        `the tree is at ${want.slice(0, 12)}. Refresh it with: make page, then commit ${f}.`);
      ok = false;
    } else {
      console.log(`${f} is up to date (sources ${want.slice(0, 12)})`);
    }
  }
  if (!ok) process.exit(1);
}

// Run as a script (importing this file, as the tests do, only defines the functions above).
if (process.argv[1] && import.meta.url === pathToFileURL(resolve(process.argv[1])).href) {
  if (args.includes('--hash')) console.log(sourceHash());
  else if (opt('--check')) check(opt('--check'));
  else {
    const out = opt('--out') ?? join(root, 'dist/stairstep.html');
    const wasmDir = opt('--wasm-dir') ?? join(root, 'build/wasm');
    build(wasmDir, out);
    buildWorklet(wasmDir, opt('--worklet-out') ?? join(dirname(out), 'stairstep-worklet.js'));
  }
}
