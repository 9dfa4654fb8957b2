#!/usr/bin/env node
// Assembles the offline page: one HTML file with the CSS, the scripts, the worker and the wasm inlined, a strict
// Content-Security-Policy (hashes for the inline style and script, no remote sources at all) and a hash of the sources
// it was built from.
//
//   node scripts/build-page.mjs --wasm-dir build/wasm --out dist/stairstep.html   build the page
//   node scripts/build-page.mjs --check dist/stairstep.html                        exit 1 if it is stale
//   node scripts/build-page.mjs --hash                                             print the source hash
import { createHash } from 'node:crypto';
import { readFileSync, writeFileSync, readdirSync, statSync, mkdirSync, renameSync } from 'node:fs';
import { dirname, join, relative } from 'node:path';
import { fileURLToPath } from 'node:url';

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

function build(wasmDir, out) {
  const www = (f) => readFileSync(join(root, 'www', f), 'utf8');
  const glue = readFileSync(join(wasmDir, 'stairstep.js'), 'utf8');
  const wasm = readFileSync(join(wasmDir, 'stairstep_opt.wasm'));
  const style = www('style.css');
  const app = scriptSafe(www('app.js'));
  const worker = scriptSafe(`${glue}\n${www('worker.js')}`);
  const csp = [
    "default-src 'none'",
    `script-src 'sha256-${sha256b64(app)}' 'wasm-unsafe-eval' blob:`,
    'worker-src blob:',
    `style-src 'sha256-${sha256b64(style)}'`,
    'img-src data: blob:',
    'media-src blob:',
    "connect-src 'none'",
    "base-uri 'none'",
    "form-action 'none'",
  ].join('; ');
  const parts = {
    CSP: csp,
    SOURCE_HASH: sourceHash(),
    STYLE: style,
    WASM_BASE64: wasm.toString('base64'),
    WORKER: worker,
    APP: app,
  };
  const html = www('index.html').replace(/%([A-Z_0-9]+)%/g, (m, k) => (k in parts ? parts[k] : m));
  mkdirSync(dirname(out), { recursive: true });
  writeFileSync(`${out}.tmp`, html);
  renameSync(`${out}.tmp`, out);
  console.log(`page: ${relative(root, out)} (${(html.length / 1024).toFixed(0)} KiB; wasm ${(wasm.length / 1024).toFixed(0)} KiB)`);
}

function check(file) {
  let html;
  try { html = readFileSync(file, 'utf8'); } catch {
    console.error(`${file} is missing. Build it with: make page`);
    process.exit(1);
  }
  const m = /<meta name="stairstep-source-hash" content="([0-9a-f]{64})">/.exec(html);
  const want = sourceHash();
  if (!m || m[1] !== want) {
    console.error(`${file} is stale: it was built from sources ${m ? m[1].slice(0, 12) : '(unknown)'}, ` +
      `the tree is at ${want.slice(0, 12)}. Refresh it with: make page, then commit ${file}.`);
    process.exit(1);
  }
  console.log(`${file} is up to date (sources ${want.slice(0, 12)})`);
}

if (args.includes('--hash')) console.log(sourceHash());
else if (opt('--check')) check(opt('--check'));
else build(opt('--wasm-dir') ?? join(root, 'build/wasm'), opt('--out') ?? join(root, 'dist/stairstep.html'));
