#!/usr/bin/env bash
# Every test: formatting and lints, native tests (with the Python reference libraries), the same core checks as
# wasm in headless Chromium, the offline page's freshness, and end-to-end tests of the page from file://.
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/setup.sh
# shellcheck source=/dev/null
source build/toolchain.env
step() { printf '\n==> %s\n' "$*"; }

step "format and lints"
cargo fmt --check
cargo clippy -q --all-targets -- -D warnings

step "native tests (cargo test)"
cargo test -q 2>&1 | grep -v '^running 0 tests$' | grep -vE '^test result: ok\. 0 passed' || { echo "native tests failed"; exit 1; }

step "core checks as wasm in headless Chromium (wasm-bindgen-test)"
CHROMEDRIVER=/usr/bin/chromedriver \
CARGO_TARGET_WASM32_UNKNOWN_UNKNOWN_RUNNER=$WASM_BINDGEN_TEST_RUNNER \
WASM_BINDGEN_TEST_TIMEOUT=300 \
  cargo "+$WASM_TOOLCHAIN" test --target wasm32-unknown-unknown --target-dir target/wasm-build --test wasm

step "offline page is built from the current sources"
node scripts/build-page.mjs --check dist/stairstep.html

step "end-to-end: the committed page from file:// in headless Chromium (playwright-core)"
node --test --test-concurrency=1 tests/e2e/
