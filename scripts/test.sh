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

step "core checks as wasm in headless Chromium (wasm-pack test, wasm-bindgen-test)"
# Offline: --mode no-install with the pinned wasm-bindgen(-test-runner) first on PATH, and Debian's chromedriver and
# the browser flags in webdriver.json given explicitly. wasm-pack first builds every test target for wasm32 (native-only
# test files start with #![cfg(not(target_arch = "wasm32"))]), then runs `cargo test` with the arguments after `.`.
mkdir -p build/wasm-pack-cache
RUSTUP_TOOLCHAIN=$WASM_TOOLCHAIN WASM_PACK_CACHE=$PWD/build/wasm-pack-cache \
PATH="$(dirname "$WASM_BINDGEN_TEST_RUNNER"):$PATH" \
CHROMEDRIVER=/usr/bin/chromedriver WASM_BINDGEN_TEST_WEBDRIVER_JSON=$PWD/webdriver.json WASM_BINDGEN_TEST_TIMEOUT=300 \
  "$WASM_PACK" test --headless --chrome --chromedriver /usr/bin/chromedriver --mode no-install \
  . --target-dir target/wasm-build --test wasm

step "offline page is built from the current sources"
node scripts/build-page.mjs --check dist/stairstep.html

step "release CLI (the end-to-end tests compare the page's downloads with its renders)"
cargo build -q --release --bin stairstep

step "end-to-end: the committed page from file:// in headless Chromium (playwright-core)"
node --test --test-concurrency=1 tests/e2e/
