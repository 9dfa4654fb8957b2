#!/usr/bin/env bash
# Builds the wasm core for the page: cargo (wasm32) -> wasm-bindgen (--target no-modules) -> wasm-opt -Os.
# Output: build/wasm/stairstep.js (classic-script glue defining `wasm_bindgen`, so it runs in a classic worker from a
# blob: URL, which works from file:// where module workers do not) and build/wasm/stairstep_opt.wasm. Needs scripts/setup.sh first.
set -euo pipefail
cd "$(dirname "$0")/.."
# shellcheck source=/dev/null
source build/toolchain.env
cargo "+$WASM_TOOLCHAIN" build -q --lib --target wasm32-unknown-unknown --profile wasm --target-dir target/wasm-build
mkdir -p build/wasm
"$WASM_BINDGEN" --target no-modules --no-typescript --out-dir build/wasm \
  target/wasm-build/wasm32-unknown-unknown/wasm/stairstep.wasm
"$WASM_OPT" -Os --enable-bulk-memory --enable-nontrapping-float-to-int --enable-sign-ext --enable-mutable-globals \
  --enable-reference-types --enable-multivalue build/wasm/stairstep_bg.wasm -o build/wasm/stairstep_opt.wasm
raw=$(stat -c %s build/wasm/stairstep_opt.wasm)
gz=$(gzip -9 -c build/wasm/stairstep_opt.wasm | wc -c)
echo "wasm: build/wasm/stairstep_opt.wasm ($((raw / 1024)) KiB, $((gz / 1024)) KiB gzipped)"
