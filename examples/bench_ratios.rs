//! Side-by-side ratios for `make bench` (see scripts/bench.sh): each ratio's two sides run alternately in the same
//! process tree on the same input, several rounds, and the table reports medians and the spread of the per-round
//! ratios. Nothing here asserts a time.
//!
//! ```text
//! cargo run --release --example bench_ratios -- [--quick] [--out-dir build/bench] [--python PY] [--node NODE]
//!     [--wasm-dir build/wasm] [--no-numpy] [--no-wasm]
//! ```
//!
//! - core chain (gain +3 dB with clip → zero-order hold 48,000 → 12,000 Hz → 8-bit TPDF dither, with the report's
//!   levels and SQNR) natively versus the numpy version in `tests/python/bench_reference.py`, whose figures are
//!   checked against the core's;
//! - undithered uniform quantization (`Quantizer::process`) versus `copy_from_slice` of the same buffer, in cache
//!   (one chain block) and out of cache;
//! - the same chain in wasm (the page's build, in node: `scripts/bench/wasm_harness.mjs`) versus native;
//! - a Welch spectrum (4096 points, Hann) versus numpy's FFT on the same frames, natively and in wasm.
//!
//! The numpy and node sides are long-lived child processes that answer one request per line, so that all sides are
//! warm and each round times them back to back. Rows go to `OUT_DIR/results.jsonl` for `scripts/bench/table.mjs`.

use serde_json::{json, Value};
use stairstep::analysis::{SpectrumAnalyzer, Window};
use stairstep::io::{ExportFormat, WavEncoding};
use stairstep::preset::Preset;
use stairstep::render;
use stairstep::stages;
use stairstep::stages::dither::DitherKind;
use stairstep::stages::gain::{Gain, GainParams, Overflow};
use stairstep::stages::quantize::{QuantizeParams, Quantizer};
use stairstep::stages::rate::RateParams;
use stairstep::stages::StageSpec;
use stairstep::{demo, Clip};
use std::hint::black_box;
use std::io::{BufRead, BufReader, Write};
use std::path::{Path, PathBuf};
use std::process::{Child, ChildStdin, ChildStdout, Command, Stdio};
use std::time::Instant;

const SOURCE_RATE: u32 = 48_000;
const TARGET_RATE: u32 = 12_000;
const GAIN_DB: f64 = 3.0;
const BITS: u32 = 8;
const SEED: u64 = 1;
const FFT_SIZE: usize = 4096;

struct Sizes {
    /// Seconds of stereo audio for the chain and the spectrum.
    seconds: f64,
    rounds: usize,
    /// Samples of the out-of-cache quantizer buffer.
    big: usize,
    /// Repetitions per timed sample: in-cache and out-of-cache quantizer.
    small_reps: usize,
    big_reps: usize,
}

struct Opts {
    quick: bool,
    out_dir: PathBuf,
    python: String,
    node: String,
    wasm_dir: PathBuf,
    numpy: bool,
    wasm: bool,
}

fn parse_args() -> Opts {
    let mut o = Opts {
        quick: false,
        out_dir: "build/bench".into(),
        python: ".venv/bin/python".into(),
        node: "node".into(),
        wasm_dir: "build/wasm".into(),
        numpy: true,
        wasm: true,
    };
    let mut args = std::env::args().skip(1);
    while let Some(a) = args.next() {
        let mut val = |name: &str| args.next().unwrap_or_else(|| panic!("{name} needs a value"));
        match a.as_str() {
            "--quick" => o.quick = true,
            "--out-dir" => o.out_dir = val("--out-dir").into(),
            "--python" => o.python = val("--python"),
            "--node" => o.node = val("--node"),
            "--wasm-dir" => o.wasm_dir = val("--wasm-dir").into(),
            "--no-numpy" => o.numpy = false,
            "--no-wasm" => o.wasm = false,
            "--bench" => {} // cargo passes it to examples run as benches
            other => {
                eprintln!("bench_ratios: unknown argument {other:?} (see the doc comment of examples/bench_ratios.rs)");
                std::process::exit(2);
            }
        }
    }
    o
}

/// A long-lived child that answers one JSON line per request line.
struct Peer {
    name: &'static str,
    child: Child,
    stdin: ChildStdin,
    stdout: BufReader<ChildStdout>,
}

impl Peer {
    fn spawn(name: &'static str, mut cmd: Command) -> Peer {
        let mut child = cmd
            .stdin(Stdio::piped())
            .stdout(Stdio::piped())
            .stderr(Stdio::inherit())
            .spawn()
            .unwrap_or_else(|e| panic!("cannot start the {name} side: {e}"));
        let stdin = child.stdin.take().expect("piped stdin");
        let stdout = BufReader::new(child.stdout.take().expect("piped stdout"));
        Peer { name, child, stdin, stdout }
    }

    fn ask(&mut self, request: &str) -> Value {
        writeln!(self.stdin, "{request}").and_then(|_| self.stdin.flush()).expect("write to child");
        let mut line = String::new();
        self.stdout.read_line(&mut line).expect("read from child");
        let v: Value = serde_json::from_str(&line)
            .unwrap_or_else(|e| panic!("{} answered {request:?} with {line:?}: {e}", self.name));
        if let Some(e) = v.get("error") {
            panic!("{} failed on {request:?}: {e}", self.name);
        }
        v
    }

    /// Seconds of one timed request.
    fn time(&mut self, request: &str) -> f64 {
        self.ask(request)["s"].as_f64().expect("a time in seconds")
    }

    fn quit(mut self) {
        let _ = writeln!(self.stdin, "quit");
        drop(self.stdin);
        let _ = self.child.wait();
    }
}

fn median(v: &[f64]) -> f64 {
    let mut s = v.to_vec();
    s.sort_by(f64::total_cmp);
    let n = s.len();
    if n % 2 == 1 {
        s[n / 2]
    } else {
        (s[n / 2 - 1] + s[n / 2]) / 2.0
    }
}

fn min_max(v: &[f64]) -> (f64, f64) {
    v.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &x| (lo.min(x), hi.max(x)))
}

/// Times both sides of a ratio `rounds` times, alternating which goes first; returns the seconds of each side.
fn alternate(rounds: usize, a: &mut dyn FnMut() -> f64, b: &mut dyn FnMut() -> f64) -> (Vec<f64>, Vec<f64>) {
    // Untimed warm-up of each side: at least three calls and a quarter of a second, so that V8 has tiered the wasm
    // up from its baseline compiler (Liftoff) to TurboFan and every cache and allocator is warm.
    for side in [0, 1] {
        let (t, mut calls) = (Instant::now(), 0);
        while calls < 3 || t.elapsed().as_secs_f64() < 0.25 {
            if side == 0 {
                a()
            } else {
                b()
            };
            calls += 1;
        }
    }
    let (mut ta, mut tb) = (Vec::new(), Vec::new());
    for r in 0..rounds {
        if r % 2 == 0 {
            ta.push(a());
            tb.push(b());
        } else {
            tb.push(b());
            ta.push(a());
        }
    }
    (ta, tb)
}

/// A measured pair: per-round ratio `num[r]/den[r]`, its median and range.
struct Pair {
    ta: Vec<f64>,
    tb: Vec<f64>,
}

impl Pair {
    fn ratios(&self, a_over_b: bool) -> Vec<f64> {
        self.ta.iter().zip(&self.tb).map(|(a, b)| if a_over_b { a / b } else { b / a }).collect()
    }
}

/// Human throughput: samples (or frames) per second.
fn per_s(n: f64, s: f64, unit: &str) -> String {
    let r = n / s;
    if r >= 1e9 {
        format!("{:.2} G{unit}/s", r / 1e9)
    } else if r >= 1e6 {
        format!("{:.1} M{unit}/s", r / 1e6)
    } else if r >= 1e3 {
        format!("{:.1} k{unit}/s", r / 1e3)
    } else {
        format!("{r:.1} {unit}/s")
    }
}

fn fmt_time(s: f64) -> String {
    if s >= 1.0 {
        format!("{s:.2} s")
    } else if s >= 1e-3 {
        format!("{:.2} ms", s * 1e3)
    } else if s >= 1e-6 {
        format!("{:.2} µs", s * 1e6)
    } else {
        format!("{:.2} ns", s * 1e9)
    }
}

struct Rows {
    file: std::fs::File,
}

impl Rows {
    #[allow(clippy::too_many_arguments)]
    fn push(
        &mut self,
        what: &str,
        ours: String,
        reference: String,
        ratios: &[f64],
        ratio_means: &str,
        target: Option<(&str, f64)>,
        note: &str,
    ) {
        let m = median(ratios);
        let (lo, hi) = min_max(ratios);
        let (target_text, met) = match target {
            Some((">=", t)) => (format!("≥ {t}×"), Some(m >= t)),
            Some(("<=", t)) => (format!("≤ {t}×"), Some(m <= t)),
            _ => (String::new(), None),
        };
        let row = json!({
            "what": what, "ours": ours, "reference": reference, "ratio": m, "lo": lo, "hi": hi,
            "rounds": ratios.len(), "means": ratio_means, "target": target_text, "met": met, "note": note,
        });
        writeln!(self.file, "{row}").expect("write results");
        eprintln!("  {what}: {m:.3}× ({lo:.3}–{hi:.3}, {} rounds) {ratio_means}", ratios.len());
    }

    fn check(&mut self, what: &str, text: String, ok: bool) {
        let row = json!({ "check": what, "text": text, "ok": ok });
        writeln!(self.file, "{row}").expect("write results");
        eprintln!("  check {what}: {text} [{}]", if ok { "ok" } else { "MISMATCH" });
    }
}

/// The benchmark chain: gain with clip, 4× zero-order hold, 8-bit TPDF dither.
fn bench_preset() -> Preset {
    Preset {
        seed: SEED,
        export: ExportFormat::Wav { encoding: WavEncoding::PcmU8, block_align: None },
        ..Preset::with_stages(
            "bench: gain, 4x hold, 8-bit TPDF",
            vec![
                StageSpec::Gain(GainParams { gain_db: GAIN_DB, overflow: Overflow::Clip }),
                StageSpec::Rate(RateParams::hold(TARGET_RATE)),
                StageSpec::Quantize(QuantizeParams { dither: DitherKind::Tpdf, ..QuantizeParams::bits(BITS) }),
            ],
        )
    }
}

/// The `pad` demo (dense harmonics, stereo) looped to `seconds`.
fn bench_clip(seconds: f64) -> Clip {
    let pad = demo::demo("pad").expect("built-in demo");
    let n = (seconds * SOURCE_RATE as f64).round() as usize;
    let channels = pad.channels.iter().map(|c| c.iter().copied().cycle().take(n).collect()).collect();
    Clip::new(SOURCE_RATE, channels).expect("valid clip")
}

/// Power of the quantizer's error alone in dBFS (sine-referenced, like the report): export sample `k` minus the
/// gained and clipped source sample it holds, `k · 48,000/12,000`.
fn quantizer_error_dbfs(clip: &Clip, export: &Clip) -> f64 {
    let gain = Gain::new(&GainParams { gain_db: GAIN_DB, overflow: Overflow::Clip }).expect("gain");
    let hold = (SOURCE_RATE / TARGET_RATE) as usize;
    let (mut sum, mut n) = (0.0f64, 0usize);
    for (x, y) in clip.channels.iter().zip(&export.channels) {
        for (k, &q) in y.iter().enumerate() {
            let e = q as f64 - gain.apply(x[k * hold]) as f64;
            sum += e * e;
            n += 1;
        }
    }
    10.0 * (2.0 * sum / n as f64).log10()
}

fn write_inputs(dir: &Path, clip: &Clip, preset: &Preset) {
    std::fs::create_dir_all(dir).expect("create the bench folder");
    let mut bytes = Vec::with_capacity(clip.frames() * clip.channel_count() * 4);
    for c in &clip.channels {
        for s in c {
            bytes.extend_from_slice(&s.to_le_bytes());
        }
    }
    std::fs::write(dir.join("input.f32"), bytes).expect("write input.f32");
    let meta = json!({
        "sample_rate": clip.sample_rate, "channels": clip.channel_count(), "frames": clip.frames(),
        "chain": { "gain_db": GAIN_DB, "source_rate": SOURCE_RATE, "target_rate": TARGET_RATE, "bits": BITS,
                   "seed": SEED },
        "spectrum": { "fft_size": FFT_SIZE, "window": "hann" },
    });
    std::fs::write(dir.join("input.json"), meta.to_string()).expect("write input.json");
    std::fs::write(dir.join("chain-preset.json"), preset.to_json()).expect("write chain-preset.json");
}

fn main() {
    let o = parse_args();
    let z = if o.quick {
        Sizes { seconds: 1.0, rounds: 3, big: 1 << 20, small_reps: 2_000, big_reps: 2 }
    } else {
        Sizes { seconds: 20.0, rounds: 9, big: 16 << 20, small_reps: 20_000, big_reps: 3 }
    };
    let preset = bench_preset();
    let clip = bench_clip(z.seconds);
    write_inputs(&o.out_dir, &clip, &preset);
    let samples = (clip.frames() * clip.channel_count()) as f64;
    let mut rows = Rows { file: std::fs::File::create(o.out_dir.join("results.jsonl")).expect("results file") };
    eprintln!(
        "bench_ratios: {} s stereo at {} Hz ({} samples), {} rounds per ratio",
        z.seconds, SOURCE_RATE, samples, z.rounds
    );

    let mut numpy = o.numpy.then(|| {
        let mut cmd = Command::new(&o.python);
        // Only in the numpy command: let OpenBLAS and numpy pick their kernels for the real CPU.
        cmd.arg("tests/python/bench_reference.py")
            .arg("--serve")
            .arg(&o.out_dir)
            .env_remove("OPENBLAS_CORETYPE")
            .env_remove("OPENBLAS_L2_SIZE");
        Peer::spawn("numpy", cmd)
    });
    if let Some(p) = numpy.as_mut() {
        let info = p.ask("info");
        std::fs::write(o.out_dir.join("numpy-runtime.txt"), info["show_runtime"].as_str().unwrap_or(""))
            .expect("write numpy-runtime.txt");
        let found: Vec<&str> =
            info["simd"]["found"].as_array().map(|a| a.iter().filter_map(Value::as_str).collect()).unwrap_or_default();
        let baseline: Vec<&str> = info["simd"]["baseline"]
            .as_array()
            .map(|a| a.iter().filter_map(Value::as_str).collect())
            .unwrap_or_default();
        let row = json!({ "fact": "numpy", "text": format!("{} (OPENBLAS_CORETYPE/OPENBLAS_L2_SIZE unset); SIMD \
            baseline {}; dispatched on this CPU: {}", info["numpy"].as_str().unwrap_or("?"), baseline.join(" "),
            found.join(" ")) });
        writeln!(rows.file, "{row}").expect("write results");
    }
    let mut wasm = o.wasm.then(|| {
        let mut cmd = Command::new(&o.node);
        cmd.arg("scripts/bench/wasm_harness.mjs").arg(&o.wasm_dir).arg(&o.out_dir);
        Peer::spawn("wasm (node)", cmd)
    });

    // ---- core chain: native versus numpy, then versus wasm --------------------------------------------------------
    eprintln!("core chain (gain → 4× hold → 8-bit TPDF):");
    let last = std::cell::RefCell::new(None::<render::Render>);
    let mut native_chain = || {
        let t = Instant::now();
        let r = render::render(&preset, &clip).expect("render");
        black_box(&r.export);
        let s = t.elapsed().as_secs_f64();
        *last.borrow_mut() = Some(r); // the previous render is freed here, outside the timing
        s
    };
    if let Some(p) = numpy.as_mut() {
        let mut figures = None;
        let pair = {
            let mut np_side = || {
                let v = p.ask("chain");
                let s = v["s"].as_f64().expect("seconds");
                figures = Some(v);
                s
            };
            let (ta, tb) = alternate(z.rounds, &mut native_chain, &mut np_side);
            Pair { ta, tb }
        };
        let (tn, tp) = (median(&pair.ta), median(&pair.tb));
        rows.push(
            "core chain, native vs numpy (throughput)",
            per_s(samples, tn, "S"),
            per_s(samples, tp, "S"),
            &pair.ratios(false),
            "numpy time / native time",
            Some((">=", 20.0)),
            "same input; numpy vectorized (float32, default_rng)",
        );
        let render = last.borrow();
        let r = &render.as_ref().expect("a native render").report;
        let native_qerr = quantizer_error_dbfs(&clip, &render.as_ref().expect("a native render").export);
        let f = figures.expect("a numpy run");
        let d_qerr = (f["quant_err_dbfs"].as_f64().unwrap() - native_qerr).abs();
        let d_sqnr = (f["sqnr_db"].as_f64().unwrap() - r.sqnr_db).abs();
        let d_rms = (f["out_rms_dbfs"].as_f64().unwrap() - r.output.rms_dbfs).abs();
        let d_in = (f["in_rms_dbfs"].as_f64().unwrap() - r.input.rms_dbfs).abs();
        let gain_clipped = f["gain_clipped"].as_u64().unwrap();
        rows.check(
            "numpy chain output is equivalent",
            format!(
                "quantizer error (export − held input) core {:.3} dBFS, numpy {:.3} (|Δ| {:.3}, tolerance 0.1); \
                 SQNR of the audition core {:.3} dB, numpy {:.3} dB (|Δ| {:.3}, tolerance 0.2); output RMS core \
                 {:.3}, numpy {:.3} dBFS (|Δ| {:.4}, tolerance 0.05); input RMS |Δ| {:.1e} dB; gain clips core {}, \
                 numpy {}; export frames core {}, numpy {}",
                native_qerr,
                f["quant_err_dbfs"].as_f64().unwrap(),
                d_qerr,
                r.sqnr_db,
                f["sqnr_db"].as_f64().unwrap(),
                d_sqnr,
                r.output.rms_dbfs,
                f["out_rms_dbfs"].as_f64().unwrap(),
                d_rms,
                d_in,
                r.clipped_per_stage[0],
                gain_clipped,
                r.export_frames,
                f["export_frames"]
            ),
            d_qerr < 0.1
                && d_sqnr < 0.2
                && d_rms < 0.05
                && d_in < 1e-3
                && gain_clipped == r.clipped_per_stage[0]
                && f["export_frames"].as_u64() == Some(r.export_frames as u64),
        );
    }
    if let Some(p) = wasm.as_mut() {
        let mut wasm_report = None;
        let pair = {
            let mut wasm_side = || {
                let v = p.ask("chain");
                let s = v["s"].as_f64().expect("seconds");
                wasm_report = Some(v["report"].clone());
                s
            };
            let (ta, tb) = alternate(z.rounds, &mut native_chain, &mut wasm_side);
            Pair { ta, tb }
        };
        let (tn, tw) = (median(&pair.ta), median(&pair.tb));
        rows.push(
            "core chain, wasm in node (V8) vs native (throughput)",
            per_s(samples, tw, "S"),
            per_s(samples, tn, "S"),
            &pair.ratios(true),
            "native time / wasm time",
            Some((">=", 0.5)),
            "wasm: the page's build (opt-level s, wasm-opt -Os, no SIMD); native: x86-64 baseline",
        );
        let render = last.borrow();
        let render = render.as_ref().expect("a native render");
        let r = &render.report;
        let w = wasm_report.expect("a wasm run");
        p.ask("export");
        let native_file = preset.export.encode(&render.export).expect("encode the export");
        let wasm_file = std::fs::read(o.out_dir.join("export-wasm.bin")).expect("read the wasm export");
        let close = |a: Option<f64>, b: f64| a.is_some_and(|a| (a - b).abs() <= 1e-9 * b.abs().max(1.0));
        rows.check(
            "wasm chain output is identical to native",
            format!(
                "export files (8-bit WAV, {} bytes) {}; SQNR native {:.12} dB, wasm {}; output RMS native {:.12}, wasm {} \
                 (the report's dB figures use std's log10, which may differ in the last bit between glibc and \
                 wasm)",
                native_file.len(),
                if native_file == wasm_file { "byte-identical" } else { "DIFFER" },
                r.sqnr_db,
                w["sqnr_db"],
                r.output.rms_dbfs,
                w["output"]["rms_dbfs"]
            ),
            native_file == wasm_file
                && close(w["sqnr_db"].as_f64(), r.sqnr_db)
                && close(w["output"]["rms_dbfs"].as_f64(), r.output.rms_dbfs)
                && w["clipped"].as_u64() == Some(r.clipped),
        );
    }

    // ---- undithered quantization versus a plain copy -----------------------------------------------------------------
    eprintln!("undithered quantization vs copy_from_slice:");
    let source: Vec<f32> = clip.channels[0].iter().copied().cycle().take(z.big).collect();
    for (label, n, reps) in [
        ("in cache: 4,096 samples, one chain block", stages::BLOCK, z.small_reps),
        ("out of cache: buffer", z.big, z.big_reps),
    ] {
        let src = &source[..n];
        let mut buf = src.to_vec();
        let mut dst = vec![0.0f32; n];
        let mut q = Quantizer::new(&QuantizeParams::bits(BITS), SEED, 0).expect("quantizer");
        let mut quant = || {
            let t = Instant::now();
            for _ in 0..reps {
                q.process(black_box(&mut buf));
            }
            t.elapsed().as_secs_f64() / reps as f64
        };
        let mut copy = || {
            let t = Instant::now();
            for _ in 0..reps {
                black_box(&mut dst).copy_from_slice(black_box(src));
            }
            t.elapsed().as_secs_f64() / reps as f64
        };
        let (ta, tb) = alternate(z.rounds, &mut quant, &mut copy);
        let pair = Pair { ta, tb };
        let label = if n == stages::BLOCK {
            label.to_string()
        } else {
            format!("{label} of {} samples ({} MiB)", n, (n * 4) >> 20)
        };
        rows.push(
            &format!("8-bit quantize (no dither) vs copy, {label} (time)"),
            format!("{} ({})", fmt_time(median(&pair.ta)), per_s(n as f64, median(&pair.ta), "S")),
            format!("{} ({})", fmt_time(median(&pair.tb)), per_s(n as f64, median(&pair.tb), "S")),
            &pair.ratios(true),
            "quantize time / copy time",
            Some(("<=", 2.0)),
            "Quantizer::process in place vs copy_from_slice, same length",
        );
    }

    // ---- spectrum: native versus numpy (and wasm) ----------------------------------------------------------------
    eprintln!("Welch spectrum, 4096 points, Hann:");
    let mut analyzer = SpectrumAnalyzer::new(FFT_SIZE, Window::Hann).expect("analyzer");
    let checked_spec = analyzer.analyze(&clip.channels);
    let mut native_spec = vec![0.0f32; analyzer.bins()];
    let frames_per_ch = if clip.frames() <= FFT_SIZE { 1 } else { (clip.frames() - FFT_SIZE) / (FFT_SIZE / 2) + 1 };
    let frames = (frames_per_ch * clip.channel_count()) as f64;
    let mut native_spectrum = || {
        let t = Instant::now();
        analyzer.analyze_into(black_box(&clip.channels), &mut native_spec);
        t.elapsed().as_secs_f64()
    };
    if let Some(p) = numpy.as_mut() {
        let (ta, tb) = alternate(z.rounds, &mut native_spectrum, &mut || p.time("spectrum"));
        let pair = Pair { ta, tb };
        rows.push(
            "spectrum (Welch 4096, Hann), native vs numpy FFT (throughput)",
            per_s(frames, median(&pair.ta), "frame"),
            per_s(frames, median(&pair.tb), "frame"),
            &pair.ratios(false),
            "numpy time / native time",
            None,
            "same frames and window; native: realfft (real-input FFT on rustfft), numpy: rfft (pocketfft, float32)",
        );
        let v = p.ask("spectrum_values");
        let db: Vec<f64> = v["db"].as_array().expect("values").iter().filter_map(Value::as_f64).collect();
        let (mut worst, mut compared) = (0.0f64, 0usize);
        for (&a, &b) in checked_spec.iter().zip(&db) {
            if a > -150.0 || b > -150.0 {
                worst = worst.max((a as f64 - b).abs());
                compared += 1;
            }
        }
        let same_frames = v["frames"].as_f64() == Some(frames);
        rows.check(
            "numpy spectrum matches the core's",
            format!(
                "{} frames each; largest |Δ| {:.4} dB over the {} bins above −150 dBFS (tolerance 0.01)",
                frames, worst, compared
            ),
            same_frames && worst < 0.01 && db.len() == checked_spec.len(),
        );
    }
    if let Some(p) = wasm.as_mut() {
        let (ta, tb) = alternate(z.rounds, &mut native_spectrum, &mut || p.time("spectrum"));
        let pair = Pair { ta, tb };
        rows.push(
            "spectrum (Welch 4096, Hann), wasm in node vs native (throughput)",
            per_s(frames, median(&pair.tb), "frame"),
            per_s(frames, median(&pair.ta), "frame"),
            &pair.ratios(true),
            "native time / wasm time",
            None,
            "wasm: Session.spectrum('output') (the session caches the input's), same frame count and size",
        );
    }

    if let Some(p) = numpy {
        p.quit();
    }
    if let Some(p) = wasm {
        p.quit();
    }
}
