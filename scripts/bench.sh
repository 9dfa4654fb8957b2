#!/usr/bin/env bash
# `make bench`: builds what it needs, measures side by side and prints one table of ratios with the machine facts.
#
#   scripts/bench.sh            the full run (20 s clip for the ratios, 60 s clip in the page, 10 min WAV for the CLI)
#   scripts/bench.sh --quick    the same steps with tiny sizes (a smoke test for CI; a minute or two once built)
#   make bench [QUICK=1]        the same
#
# Steps: machine facts; builds (release CLI; the ratio example and the criterion benches in their own target dir,
# target/bench, so that they never invalidate the release build; the wasm core for the page); the ratio table's rows
# (examples/bench_ratios.rs: core chain vs numpy, quantize vs copy, wasm in node vs native, spectrum vs numpy);
# the page in headless Chromium (scripts/bench/page.mjs: a re-render; scripts/bench/edit.mjs: edit-to-paint latency); the wasm size; the CLI's peak memory on a long WAV; the CLI
# whole process against a numpy script and a no-stage render against cp + sync (scripts/bench/numpy_render.py); the
# criterion micro-benchmarks (benches/core.rs, short times); then the table (scripts/bench/table.mjs).
# Results go to build/bench/. Timings are never asserted: these machines are shared and noisy, so every ratio is a
# median of rounds that alternate the two sides, with the spread printed beside it.
set -euo pipefail
cd "$(dirname "$0")/.."
ROOT=$PWD

QUICK=0
CRITERION=1
for arg in "$@"; do
  case "$arg" in
    --quick) QUICK=1 ;;
    --no-criterion) CRITERION=0 ;;
    -h|--help) sed -n '2,15p' "$0"; exit 0 ;;
    *) echo "bench: unknown option $arg (--quick, --no-criterion)" >&2; exit 2 ;;
  esac
done
if [ "$QUICK" = 1 ]; then
  PAGE_SECONDS=5; PAGE_ROUNDS=3; EDIT_ARGS="--seconds 2 --edits 3"; WAV_SECONDS=10; QUICK_ARG=--quick; CLI_SECONDS=10; CLI_ROUNDS=3
  CRITERION_ARGS=(--warm-up-time 0.05 --measurement-time 0.1 --sample-size 10 --noplot)
else
  PAGE_SECONDS=60; PAGE_ROUNDS=7; EDIT_ARGS="--seconds 10 --seconds 60 --edits 10"; WAV_SECONDS=600; QUICK_ARG=; CLI_SECONDS=120; CLI_ROUNDS=7
  CRITERION_ARGS=(--warm-up-time 0.5 --measurement-time 1.5 --noplot)
fi

OUT=build/bench
mkdir -p "$OUT"
step() { printf '\n==> %s\n' "$*" >&2; }
started=$(date +%s)

step "setup"
bash scripts/setup.sh > "$OUT/setup.log" 2>&1 || { cat "$OUT/setup.log" >&2; exit 1; }
# shellcheck source=/dev/null
source build/toolchain.env

# ---- machine facts ----------------------------------------------------------------------------------------------
{
  echo "Stairstep benchmarks ($([ "$QUICK" = 1 ] && echo 'QUICK smoke run: tiny sizes, numbers are rough' || echo 'full run'))"
  echo "date:     $(date -u '+%Y-%m-%d %H:%M UTC'), git $(git rev-parse --short HEAD 2>/dev/null || echo '?')$(git diff --quiet 2>/dev/null || echo ' (uncommitted changes)')"
  echo "cpu:      $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2- | sed 's/^ *//'), $(nproc) cores; flags: $(grep -m1 '^flags' /proc/cpuinfo | grep -o -w -E 'avx2|avx512f|fma|sse4_2' | sort -u | tr '\n' ' ')"
  echo "load:     $(cut -d' ' -f1-3 /proc/loadavg) (1, 5, 15 min) at the start: a shared machine"
  echo "rustc:    $(rustc --version) (native: x86-64 baseline, no target-cpu), wasm toolchain $WASM_TOOLCHAIN"
  echo "node:     $(node --version)"
  echo "chromium: $(/usr/bin/chromium --version 2>/dev/null | head -1)"
} > "$OUT/machine.txt"
cat "$OUT/machine.txt" >&2

# ---- builds -----------------------------------------------------------------------------------------------------
step "build: release CLI"
cargo build -q --release --bin stairstep
step "build: ratio example and criterion benches (target/bench, bench profile)"
# Own target dir, so that switching profiles never invalidates the release build; panic=unwind (the release
# profile aborts, but a bench harness always unwinds), so that the library is built once, not once per panic
# strategy into the same file names.
CARGO_TARGET_DIR_BENCH="$ROOT/target/bench"
bench_cargo() { CARGO_TARGET_DIR=$CARGO_TARGET_DIR_BENCH CARGO_PROFILE_BENCH_PANIC=unwind cargo "$@"; }
bench_cargo build -q --profile bench --example bench_ratios
if [ "$CRITERION" = 1 ]; then
  bench_cargo bench -q --bench core --no-run > "$OUT/criterion-build.log" 2>&1 ||
    { cat "$OUT/criterion-build.log" >&2; exit 1; }
fi
step "build: wasm core (scripts/build-wasm.sh, unless build/wasm is newer than the sources)"
if [ -f build/wasm/stairstep_opt.wasm ] && [ -f build/wasm/stairstep.js ] &&
   [ -z "$(find src Cargo.toml Cargo.lock scripts/build-wasm.sh $(ls -d .cargo 2>/dev/null) \
     -newer build/wasm/stairstep_opt.wasm -print -quit)" ]; then
  echo "  build/wasm is up to date" >&2
else
  bash scripts/build-wasm.sh >&2
fi
# The page under test: the committed one when it is fresh, otherwise one built from the current sources.
PAGE=dist/stairstep.html
if ! node scripts/build-page.mjs --check dist/stairstep.html > /dev/null 2>&1; then
  PAGE=$OUT/stairstep.html
  echo "bench: dist/stairstep.html is stale; measuring a page built from the current sources ($PAGE)" >&2
  node scripts/build-page.mjs --wasm-dir build/wasm --out "$PAGE" >&2
fi

# ---- ratios: native vs numpy, quantize vs copy, wasm vs native, spectrum vs numpy --------------------------------
step "ratios (examples/bench_ratios.rs; numpy and node run as its children)"
"$CARGO_TARGET_DIR_BENCH/release/examples/bench_ratios" $QUICK_ARG --out-dir "$OUT" --python "$PYTHON" \
  --wasm-dir build/wasm

# ---- the page in headless Chromium --------------------------------------------------------------------------------
step "page: ${PAGE_SECONDS} s stereo re-render in headless Chromium (scripts/bench/page.mjs)"
node scripts/bench/page.mjs --page "$PAGE" --seconds "$PAGE_SECONDS" --rounds "$PAGE_ROUNDS" \
  --preset "$OUT/chain-preset.json" --out "$OUT"
step "page: edit-to-paint latency in headless Chromium (scripts/bench/edit.mjs)"
# shellcheck disable=SC2086 # EDIT_ARGS is a list of options
node scripts/bench/edit.mjs --page "$PAGE" $EDIT_ARGS --out "$OUT"

# ---- wasm size ----------------------------------------------------------------------------------------------------
step "wasm size"
WASM=build/wasm/stairstep_opt.wasm
raw=$(stat -c %s "$WASM")
gz=$(gzip -9 -c "$WASM" | wc -c)
node -e '
  const [raw, gz] = process.argv.slice(1).map(Number);
  const kb = (b) => `${(b / 1000).toFixed(1)} kB (${(b / 1024).toFixed(1)} KiB)`;
  console.log(JSON.stringify({
    what: "wasm size, gzip -9 (build/wasm/stairstep_opt.wasm)", ours: `${kb(gz)} gzipped`, reference: `${kb(raw)} raw`,
    ratio: gz / 200000, lo: gz / 200000, hi: gz / 200000, rounds: 1, means: "gzipped size / the 200 kB aim (200,000 bytes)",
    target: "≤ 1×", met: gz <= 200000, note: "wasm-opt -Os output, as inlined (base64) in the page",
  }));' "$raw" "$gz" >> "$OUT/results.jsonl"
echo "  $WASM: $raw bytes raw, $gz bytes gzipped" >&2

# ---- CLI peak memory on a long file -------------------------------------------------------------------------------
step "CLI peak memory: ${WAV_SECONDS} s stereo 48 kHz 16-bit WAV"
LONG=$OUT/long-${WAV_SECONDS}s.wav
if [ ! -f "$LONG" ]; then
  env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE "$PYTHON" tests/python/bench_reference.py --write-wav "$LONG.tmp" \
    --seconds "$WAV_SECONDS"
  mv "$LONG.tmp" "$LONG"
fi
/usr/bin/time -v target/release/stairstep render --quiet --force --preset "$OUT/chain-preset.json" "$LONG" \
  -o "$OUT/long-out.wav" 2> "$OUT/time-v.txt" || { cat "$OUT/time-v.txt" >&2; exit 1; }
rss_kb=$(grep 'Maximum resident set size' "$OUT/time-v.txt" | grep -o '[0-9]*$')
wall=$(grep 'Elapsed (wall clock)' "$OUT/time-v.txt" | sed 's/.*): //')
node -e '
  const [rssKb, seconds, wall, wavBytes] = process.argv.slice(1);
  const frames = Number(seconds) * 48000;
  const decoded = frames * 2 * 4;
  const rss = Number(rssKb) * 1024;
  const mb = (b) => `${(b / 1e6).toFixed(0)} MB`;
  console.log(JSON.stringify({
    what: `CLI render peak memory, ${Number(seconds) >= 60 ? `${Number(seconds) / 60} min` : `${seconds} s`} stereo 48 kHz 16-bit WAV (${mb(Number(wavBytes))})`,
    ours: `max RSS ${mb(rss)}`, reference: `decoded samples ${mb(decoded)} (${frames} frames × 2 ch × 4 B)`,
    ratio: rss / decoded, lo: rss / decoded, hi: rss / decoded, rounds: 1, means: "max RSS / decoded sample bytes",
    target: "", met: null, note: `/usr/bin/time -v, wall ${wall}; the CLI streams byte-aligned WAV in and out block by block, so memory stays flat with the file length`,
  }));' "$rss_kb" "$WAV_SECONDS" "$wall" "$(stat -c %s "$LONG")" >> "$OUT/results.jsonl"
echo "  max RSS $rss_kb KiB, wall $wall" >&2
rm -f "$OUT/long-out.wav"
[ "$QUICK" = 1 ] && rm -f "$LONG"

# ---- CLI whole process: against a numpy script, and a no-stage render against cp + sync ---------------------------
# Side by side, whole process to whole process (start-up, reading, writing and the final fsync included), alternating
# which side goes first; the medians of per-round ratios. The same job for both sides of each row:
#   1. gain -3 dB -> 12 kHz zero-order hold -> 8-bit TPDF -> unsigned 8-bit WAV, on a stereo 48 kHz float WAV:
#      `stairstep render` against scripts/bench/numpy_render.py (soundfile + numpy);
#   2. the same file through a preset with no stage, float32 WAV out: `stairstep render` against `cp` + `sync FILE`.
step "CLI whole process: ${CLI_SECONDS} s stereo 48 kHz float WAV, ${CLI_ROUNDS} rounds"
CLI_IN=$OUT/cli-in-${CLI_SECONDS}s.wav
if [ ! -f "$CLI_IN" ]; then
  env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE "$PYTHON" -c '
import sys, numpy as np, soundfile as sf
r, n = 48000, 48000 * int(sys.argv[2])
t = np.arange(n) / r
noise = 0.05 * np.random.default_rng(1).standard_normal(n)
x = np.stack([0.5 * np.sin(2 * np.pi * 440 * t) + noise, 0.4 * np.sin(2 * np.pi * 660 * t)], 1)
sf.write(sys.argv[1], x.astype(np.float32), r, subtype="FLOAT", format="WAV")' "$CLI_IN.tmp" "$CLI_SECONDS"
  mv "$CLI_IN.tmp" "$CLI_IN"
fi
cat > "$OUT/cli-chain.json" <<'JSON'
{"format":"stairstep-preset","version":1,"name":"bench-cli","seed":1,"stages":[{"kind":"gain","gain_db":-3},
 {"kind":"rate","rate_hz":12000,"mode":"hold"},{"kind":"quantize","bits":8,"dither":"tpdf"}],
 "export":{"type":"wav","encoding":"pcm-u8"}}
JSON
cat > "$OUT/cli-copy.json" <<'JSON'
{"format":"stairstep-preset","version":1,"name":"bench-copy","stages":[],"export":{"type":"wav","encoding":"float32"}}
JSON
now_ns() { date +%s%N; }
# time_cmd VAR CMD...: runs CMD, stores its wall time in ns in VAR.
time_cmd() { local var=$1; shift; local t0; t0=$(now_ns); "$@" > /dev/null 2>&1 || { echo "bench: failed: $*" >&2; exit 1; }; printf -v "$var" '%s' $(( $(now_ns) - t0 )); }
cli_chain() { target/release/stairstep render --quiet --force --preset "$OUT/cli-chain.json" "$CLI_IN" -o "$OUT/cli-chain-out.wav"; }
numpy_chain() { env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE "$PYTHON" scripts/bench/numpy_render.py "$CLI_IN" "$OUT/numpy-chain-out.wav"; }
cli_copy() { target/release/stairstep render --quiet --force --preset "$OUT/cli-copy.json" "$CLI_IN" -o "$OUT/cli-copy-out.wav"; }
cp_sync() { rm -f "$OUT/cp-out.wav"; cp "$CLI_IN" "$OUT/cp-out.wav" && sync "$OUT/cp-out.wav"; }
: > "$OUT/cli-rounds.txt"
for r in $(seq 1 "$CLI_ROUNDS"); do
  if [ $((r % 2)) = 1 ]; then
    time_cmd a cli_chain; time_cmd b numpy_chain; time_cmd c cli_copy; time_cmd d cp_sync
  else
    time_cmd b numpy_chain; time_cmd a cli_chain; time_cmd d cp_sync; time_cmd c cli_copy
  fi
  echo "$a $b $c $d" >> "$OUT/cli-rounds.txt"
done
/usr/bin/time -f '%M' -o "$OUT/cli-rss.txt" bash -c "$(declare -f cli_chain); OUT='$OUT' CLI_IN='$CLI_IN'; cli_chain"
/usr/bin/time -f '%M' -o "$OUT/numpy-rss.txt" bash -c "$(declare -f numpy_chain); OUT='$OUT' CLI_IN='$CLI_IN' PYTHON='$PYTHON'; numpy_chain"
node -e '
  const fs = require("fs");
  const [dir, seconds] = process.argv.slice(1);
  const rounds = fs.readFileSync(`${dir}/cli-rounds.txt`, "utf8").trim().split("\n").map((l) => l.split(" ").map(Number));
  const med = (v) => { const s = [...v].sort((x, y) => x - y); return s[s.length >> 1]; };
  const s = (ns) => `${(ns / 1e9).toFixed(3)} s`;
  const rss = (f) => `${(Number(fs.readFileSync(`${dir}/${f}`, "utf8").trim().split("\n").pop()) / 1024).toFixed(0)} MB`;
  const row = (what, ours, ref, invert, means, target, aim, note) => {
    const ratios = rounds.map((r) => invert ? r[ref] / r[ours] : r[ours] / r[ref]);
    const ratio = med(ratios);
    console.log(JSON.stringify({
      what, ours: `${s(med(rounds.map((r) => r[ours])))}`, reference: `${s(med(rounds.map((r) => r[ref])))}`,
      ratio, lo: Math.min(...ratios), hi: Math.max(...ratios), rounds: rounds.length, means, target,
      met: aim(ratio), note,
    }));
  };
  const len = `${seconds} s stereo 48 kHz float WAV`;
  row(`CLI render vs numpy script, whole process (${len})`, 0, 1, true,
    "numpy script time / stairstep render time (gain, 12 kHz hold, 8-bit TPDF, u8 WAV)", "≥ 10×", (r) => r >= 10,
    `peak memory: stairstep ${rss("cli-rss.txt")}, numpy ${rss("numpy-rss.txt")} (/usr/bin/time); both include start-up`);
  row(`CLI no-stage float32 render vs cp + sync (${len})`, 2, 3, false,
    "stairstep render time / (cp + sync FILE) time, same file", "≤ 2×", (r) => r <= 2,
    "the render reads, measures (levels, SQNR), writes and fsyncs; cp copies in the kernel");
' "$OUT" "$CLI_SECONDS" >> "$OUT/results.jsonl"
tail -2 "$OUT/results.jsonl" >&2
rm -f "$OUT"/cli-chain-out.wav "$OUT"/numpy-chain-out.wav "$OUT"/cli-copy-out.wav "$OUT"/cp-out.wav
[ "$QUICK" = 1 ] && rm -f "$CLI_IN"

# ---- criterion micro-benchmarks -------------------------------------------------------------------------------------
if [ "$CRITERION" = 1 ]; then
  step "criterion micro-benchmarks (benches/core.rs, short times; full output in $OUT/criterion.txt)"
  bench_cargo bench -q --bench core -- "${CRITERION_ARGS[@]}" \
    > "$OUT/criterion.txt" 2>&1 || { cat "$OUT/criterion.txt" >&2; exit 1; }
  # One line per benchmark: name, median time, throughput.
  awk '
    function mid(line) { sub(/.*: *\[[^ ]* [^ ]* /, "", line); sub(/ [^ ]* [^ ]*\].*$/, "", line); return line }
    /change:/ { skip = 1; next }
    /^[^ ]/ && !/^(Benchmarking|Found|Gnuplot|WARNING|Warning)/ {
      skip = 0; name = $0; sub(/ *time:.*/, "", name); if ($0 !~ /time:/) next
    }
    skip { next }
    /time:/ { t = mid($0); next }
    /thrpt:/ { printf "  %-62s %12s %16s\n", name, t, mid($0) }
' "$OUT/criterion.txt" > "$OUT/criterion-summary.txt"
fi

# ---- the table ----------------------------------------------------------------------------------------------------
step "results ($(( $(date +%s) - started )) s)"
node scripts/bench/table.mjs "$OUT"
if [ "$CRITERION" = 1 ]; then
  echo ''
  echo 'Criterion micro-benchmarks, one block (4,096 samples) per iteration unless named (median time, throughput):'
  cat "$OUT/criterion-summary.txt"
fi
