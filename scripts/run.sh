#!/usr/bin/env bash
# The main job: set up, build the page and the CLI, serve the page on 127.0.0.1 with the demo loaded.
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/setup.sh
bash scripts/build-wasm.sh
node scripts/build-page.mjs --wasm-dir build/wasm --out dist/stairstep.html
cargo build -q --release
exec target/release/stairstep serve --page dist/stairstep.html "$@"
