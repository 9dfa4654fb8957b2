#!/usr/bin/env bash
# Builds the wasm core for the page: `wasm-pack build` (cargo for wasm32 with the `wasm` profile, then wasm-bindgen
# --target no-modules), then wasm-opt -Os from npm binaryen, run here rather than by wasm-pack.
# Output: build/wasm/stairstep.js (classic-script glue defining `wasm_bindgen`, so it runs in a classic worker from a
# blob: URL, which works from file:// where module workers do not), build/wasm/stairstep_bg.wasm (wasm-bindgen's
# output) and build/wasm/stairstep_opt.wasm (what the page embeds). Needs scripts/setup.sh first.
#
# wasm-pack runs offline in `--mode no-install`: it finds wasm-bindgen (exactly Cargo.lock's version, installed by
# setup) first on PATH instead of downloading it, and `--no-opt` stops it from looking for a wasm-opt of its own
# (it would download binaryen, or silently skip optimisation in no-install mode; Debian's wasm-opt breaks the glue).
set -euo pipefail
cd "$(dirname "$0")/.."
# shellcheck source=/dev/null
source build/toolchain.env
mkdir -p build/wasm build/wasm-pack-cache
# RUSTUP_TOOLCHAIN picks the wasm32 toolchain that setup chose (rustup's, or the Debian fallback) for the cargo and
# rustc that wasm-pack runs. Arguments after the crate path (.) go to `cargo build`.
RUSTUP_TOOLCHAIN=$WASM_TOOLCHAIN WASM_PACK_CACHE=$PWD/build/wasm-pack-cache PATH="$(dirname "$WASM_BINDGEN"):$PATH" \
  "$WASM_PACK" build --mode no-install --target no-modules --profile wasm --no-opt --no-pack \
  --no-typescript --no-gitignore --out-dir build/wasm --out-name stairstep . --target-dir target/wasm-build
"$WASM_OPT" -Os --enable-bulk-memory --enable-nontrapping-float-to-int --enable-sign-ext --enable-mutable-globals \
  --enable-reference-types --enable-multivalue build/wasm/stairstep_bg.wasm -o build/wasm/stairstep_opt.wasm
raw=$(stat -c %s build/wasm/stairstep_opt.wasm)
gz=$(gzip -9 -c build/wasm/stairstep_opt.wasm | wc -c)
echo "wasm: build/wasm/stairstep_opt.wasm ($((raw / 1024)) KiB, $((gz / 1024)) KiB gzipped)"
