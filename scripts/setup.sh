#!/usr/bin/env bash
# Installs everything Stairstep's build and tests need, from the package registries only. Idempotent: when
# everything is present it prints one line and takes a couple of seconds.
#
#   scripts/setup.sh                  make sure everything is there
#   scripts/setup.sh --wasm-fallback  force the Debian wasm32 toolchain even when rustup's target could be used
#                                     (also: STAIRSTEP_WASM_FALLBACK=1)
#
# It writes build/toolchain.env, which the Makefile reads: how to run cargo for wasm32 and where the tools are.
set -euo pipefail
cd "$(dirname "$0")/.."
ROOT=$PWD
mkdir -p build

FORCE_FALLBACK=${STAIRSTEP_WASM_FALLBACK:-0}
for arg in "$@"; do
  case "$arg" in
    --wasm-fallback) FORCE_FALLBACK=1 ;;
    -h|--help) sed -n '2,10p' "$0"; exit 0 ;;
    *) echo "setup: unknown option $arg" >&2; exit 2 ;;
  esac
done

did=()
say() { printf 'setup: %s\n' "$*"; }
installing() { did+=("$1"); say "installing $1 ..."; }

APT_UPDATED=0
apt_install() {
  if [ "$(id -u)" != 0 ]; then
    echo "setup: need root (or sudo) to install Debian packages: $*" >&2; exit 1
  fi
  if [ "$APT_UPDATED" = 0 ]; then
    DEBIAN_FRONTEND=noninteractive apt-get update -qq >/dev/null
    APT_UPDATED=1
  fi
  local out
  if ! out=$(DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends "$@" 2>&1); then
    printf '%s\n' "$out" >&2; echo "setup: apt-get install $* failed" >&2; exit 1
  fi
}

# ---------------------------------------------------------------------------------------------------------------------
# 1. A wasm32-unknown-unknown standard library.
#    a. rustup's target, if installed;   b. the Debian toolchain prepared earlier, if it still works;
#    c. rustup's target, if it can be added now;   d. otherwise prepare the Debian toolchain (see DEVELOPERS.md).
# ---------------------------------------------------------------------------------------------------------------------
DEB_TC_NAME=stairstep-debian
DEB_TC_DIR=/opt/stairstep-debian-toolchain
DEB_SYSROOT_LIB=/usr/lib/rustlib/wasm32-unknown-unknown/lib

wasm_sanity() { # $1 = rustc to check; compiles and links a cdylib and a test harness for wasm32
  local rustc=$1 dir
  dir=$(mktemp -d)
  echo '#[no_mangle] pub extern "C" fn add(a: i32, b: i32) -> i32 { a + b }' > "$dir/lib.rs"
  echo '#[test] fn t() { assert_eq!(1 + 1, 2); }' > "$dir/t.rs"
  local ok=0
  "$rustc" --edition 2021 --crate-type cdylib --target wasm32-unknown-unknown -O -o "$dir/a.wasm" "$dir/lib.rs" \
      >/dev/null 2>&1 &&
    "$rustc" --edition 2021 --test --target wasm32-unknown-unknown -o "$dir/t.wasm" "$dir/t.rs" >/dev/null 2>&1 ||
    ok=1
  rm -rf "$dir"
  return $ok
}

debian_fallback() {
  local need=()
  for p in rustc-web cargo-web rust-web-src rust-web-llvm wabt; do
    dpkg -s "$p" >/dev/null 2>&1 || need+=("$p")
  done
  if [ ${#need[@]} -gt 0 ]; then installing "Debian packages ${need[*]}"; apt_install "${need[@]}"; fi
  # rust-web-llvm ships /usr/bin/rust-lld pointing at lld-NN without depending on it.
  local lld
  lld=$(readlink /usr/bin/rust-lld || true)
  lld=${lld##*/}
  if [ -n "$lld" ] && ! command -v "$lld" >/dev/null 2>&1; then installing "$lld"; apt_install "$lld"; fi

  if ! wasm_sanity /usr/bin/rustc; then
    installing "a wasm32 std built from Debian's rust-web-src (about a minute)"
    local lib=/usr/lib/rustlib/src/rust/library dummy
    dummy=$(mktemp -d)
    mkdir -p "$dummy/src" "$dummy/.cargo"
    printf '#![no_std]\n' > "$dummy/src/lib.rs"
    cat > "$dummy/Cargo.toml" <<EOF
[package]
name = "stairstep-std-builder"
version = "0.0.0"
edition = "2021"
[lib]
path = "src/lib.rs"
[workspace]
[profile.release]
panic = "abort"
lto = false
codegen-units = 1
EOF
    cat > "$dummy/.cargo/config.toml" <<EOF
[source.crates-io]
replace-with = "vendored"
[source.vendored]
directory = "$lib/vendor"
EOF
    (cd "$dummy" && RUSTC_BOOTSTRAP=1 RUSTFLAGS=-Cembed-bitcode=yes RUSTC=/usr/bin/rustc \
      /usr/bin/cargo build -q --offline --release --target wasm32-unknown-unknown -Zbuild-std=std,panic_abort,test)
    mkdir -p "$DEB_SYSROOT_LIB"
    rm -f "$DEB_SYSROOT_LIB"/lib*.rlib
    find "$dummy/target/wasm32-unknown-unknown/release/deps" -name 'lib*.rlib' \
      ! -name 'libstairstep_std_builder*' -exec cp {} "$DEB_SYSROOT_LIB/" \;
    rm -rf "$dummy"
    wasm_sanity /usr/bin/rustc || { echo "setup: the Debian wasm32 std does not work; see DEVELOPERS.md" >&2; exit 1; }
  fi
  # A rustup toolchain name for Debian's compiler, so `cargo +stairstep-debian` builds for wasm32.
  if [ ! -x "$DEB_TC_DIR/bin/cargo" ]; then
    mkdir -p "$DEB_TC_DIR/bin" "$DEB_TC_DIR/lib"
    for t in rustc cargo rustdoc; do ln -sf "/usr/bin/$t" "$DEB_TC_DIR/bin/$t"; done
  fi
  if command -v rustup >/dev/null 2>&1 && ! rustup toolchain list | grep -q "^$DEB_TC_NAME"; then
    rustup toolchain link "$DEB_TC_NAME" "$DEB_TC_DIR" >/dev/null
  fi
  WASM_TOOLCHAIN=$DEB_TC_NAME
}

rustup_has_wasm() { rustup target list --installed 2>/dev/null | grep -q '^wasm32-unknown-unknown$'; }

WASM_TOOLCHAIN=
if [ "$FORCE_FALLBACK" = 1 ]; then
  debian_fallback
elif rustup_has_wasm; then
  WASM_TOOLCHAIN=$(rustup show active-toolchain | cut -d' ' -f1)
elif [ -x "$DEB_TC_DIR/bin/cargo" ] && wasm_sanity /usr/bin/rustc; then
  debian_fallback   # already prepared: only re-checks
elif timeout 45 rustup target add wasm32-unknown-unknown >/dev/null 2>&1 && rustup_has_wasm; then
  did+=("rustup target wasm32-unknown-unknown")
  WASM_TOOLCHAIN=$(rustup show active-toolchain | cut -d' ' -f1)
else
  say "rustup cannot add wasm32-unknown-unknown here; using Debian's Rust with its std source"
  debian_fallback
fi

# ---------------------------------------------------------------------------------------------------------------------
# 2. wasm-bindgen at exactly Cargo.lock's version.
# ---------------------------------------------------------------------------------------------------------------------
[ -f Cargo.lock ] || cargo generate-lockfile -q
WBG_VERSION=$(awk '/^name = "wasm-bindgen"$/ { getline; gsub(/[^0-9.]/, ""); print; exit }' Cargo.lock)
CARGO_BIN=${CARGO_HOME:-$HOME/.cargo}/bin
if [ "$("$CARGO_BIN/wasm-bindgen" --version 2>/dev/null | cut -d' ' -f2)" != "$WBG_VERSION" ]; then
  installing "wasm-bindgen-cli $WBG_VERSION (a few minutes)"
  # Not --locked: the published lock file pins a crate version the registry no longer has.
  cargo install -q wasm-bindgen-cli --version "=$WBG_VERSION" --force
fi

# ---------------------------------------------------------------------------------------------------------------------
# 2b. wasm-pack, pinned: it drives the wasm build (scripts/build-wasm.sh) and the wasm tests (scripts/test.sh) in
#     `--mode no-install`, with the wasm-bindgen above first on PATH and wasm-opt run by the project (DEVELOPERS.md).
#     Built with rustup's default toolchain whichever wasm32 toolchain was chosen above.
# ---------------------------------------------------------------------------------------------------------------------
WASM_PACK_VERSION=0.15.1
if [ "$("$CARGO_BIN/wasm-pack" --version 2>/dev/null | cut -d' ' -f2)" != "$WASM_PACK_VERSION" ]; then
  installing "wasm-pack $WASM_PACK_VERSION (a few minutes)"
  # --locked: the dependency versions wasm-pack was released and tested with. Should the registry ever lack one of
  # them (as happened to wasm-bindgen-cli's lock), build with a fresh resolution instead.
  cargo install -q wasm-pack --version "=$WASM_PACK_VERSION" --locked --force ||
    { say "wasm-pack's published lock file does not resolve; installing without --locked";
      cargo install -q wasm-pack --version "=$WASM_PACK_VERSION" --force; }
fi

# ---------------------------------------------------------------------------------------------------------------------
# 3. Chromium and its driver (Debian's), for the browser tests.
# ---------------------------------------------------------------------------------------------------------------------
if ! command -v chromium >/dev/null 2>&1 || ! command -v chromedriver >/dev/null 2>&1; then
  installing "Debian chromium and chromium-driver"
  apt_install chromium chromium-driver
fi

# ---------------------------------------------------------------------------------------------------------------------
# 4. Node tools pinned in package-lock.json: playwright-core, esbuild (joins the page's modules) and binaryen's
#    wasm-opt (not Debian's binaryen 108, which breaks wasm-bindgen output).
# ---------------------------------------------------------------------------------------------------------------------
lock_hash=$(sha256sum package-lock.json | cut -c1-16)
if [ ! -x node_modules/.bin/wasm-opt ] || [ "$(cat node_modules/.stairstep-lock 2>/dev/null)" != "$lock_hash" ]; then
  installing "node packages from package-lock.json (playwright-core, esbuild, binaryen)"
  npm ci --no-audit --no-fund --silent >/dev/null
  echo "$lock_hash" > node_modules/.stairstep-lock
fi

# ---------------------------------------------------------------------------------------------------------------------
# 5. Python reference libraries (pinned) in .venv.
# ---------------------------------------------------------------------------------------------------------------------
req_hash=$(sha256sum tests/python/requirements.txt | cut -c1-16)
if [ ! -x .venv/bin/python ] || [ "$(cat .venv/.stairstep-req 2>/dev/null)" != "$req_hash" ]; then
  installing "Python reference libraries into .venv ($(grep -v '^#' tests/python/requirements.txt | tr '\n' ' '))"
  python3 -m venv .venv
  .venv/bin/pip install -q --disable-pip-version-check -r tests/python/requirements.txt
  echo "$req_hash" > .venv/.stairstep-req
fi

cat > build/toolchain.env <<EOF
# Written by scripts/setup.sh.
WASM_TOOLCHAIN=$WASM_TOOLCHAIN
WASM_BINDGEN=$CARGO_BIN/wasm-bindgen
WASM_BINDGEN_TEST_RUNNER=$CARGO_BIN/wasm-bindgen-test-runner
WASM_PACK=$CARGO_BIN/wasm-pack
WASM_OPT=$ROOT/node_modules/.bin/wasm-opt
PYTHON=$ROOT/.venv/bin/python
EOF

if [ ${#did[@]} -eq 0 ]; then
  say "everything present (wasm32 via toolchain '$WASM_TOOLCHAIN', wasm-bindgen $WBG_VERSION, wasm-pack $WASM_PACK_VERSION)"
else
  say "done: ${did[*]}"
fi
