//! A workload to run under a profiler: one of the `make bench` workloads in a loop, nothing else.
//!
//! ```text
//! cargo build --profile bench --example bench_profile
//! perf record -g target/release/examples/bench_profile chain 20        # where perf works
//! valgrind --tool=callgrind target/release/examples/bench_profile chain 1   # instruction counts
//! ```
//!
//! Workloads: `chain` (gain → 4× hold → 8-bit TPDF on 10 s of stereo), `quantize` (undithered 8-bit, one block in
//! place), `tpdf` (8-bit TPDF, one block), `spectrum` (Welch 4096 Hann on 10 s of stereo). The second argument is
//! the number of repetitions.

use stairstep::analysis::{SpectrumAnalyzer, Window};
use stairstep::preset::Preset;
use stairstep::render;
use stairstep::stages;
use stairstep::stages::dither::DitherKind;
use stairstep::stages::gain::{GainParams, Overflow};
use stairstep::stages::quantize::{QuantizeParams, Quantizer};
use stairstep::stages::rate::RateParams;
use stairstep::stages::StageSpec;
use stairstep::{demo, Clip};
use std::hint::black_box;
use std::time::Instant;

fn main() {
    let mut args = std::env::args().skip(1);
    let what = args.next().unwrap_or_else(|| "chain".into());
    let reps: usize = args.next().and_then(|s| s.parse().ok()).unwrap_or(10);
    let pad = demo::demo("pad").expect("built-in demo");
    let n = 10 * 48_000;
    let clip =
        Clip::new(48_000, pad.channels.iter().map(|c| c.iter().copied().cycle().take(n).collect()).collect()).unwrap();
    let t = Instant::now();
    let samples = match what.as_str() {
        "chain" => {
            let preset = Preset::with_stages(
                "profile",
                vec![
                    StageSpec::Gain(GainParams { gain_db: 3.0, overflow: Overflow::Clip }),
                    StageSpec::Rate(RateParams::hold(12_000)),
                    StageSpec::Quantize(QuantizeParams { dither: DitherKind::Tpdf, ..QuantizeParams::bits(8) }),
                ],
            );
            for _ in 0..reps {
                black_box(render::render(&preset, black_box(&clip)).unwrap());
            }
            n * 2
        }
        "gain" => {
            let mut g =
                stairstep::stages::gain::Gain::new(&GainParams { gain_db: 3.0, overflow: Overflow::Clip }).unwrap();
            let mut buf = clip.channels[0][..stages::BLOCK].to_vec();
            for _ in 0..reps * 1000 {
                buf.copy_from_slice(&clip.channels[0][..stages::BLOCK]);
                g.process(black_box(&mut buf));
            }
            stages::BLOCK * 1000
        }
        "quantize" | "tpdf" => {
            let p = if what == "tpdf" {
                QuantizeParams { dither: DitherKind::Tpdf, ..QuantizeParams::bits(8) }
            } else {
                QuantizeParams::bits(8)
            };
            let mut q = Quantizer::new(&p, 1, 0).unwrap();
            let mut buf = clip.channels[0][..stages::BLOCK].to_vec();
            for _ in 0..reps * 1000 {
                q.process(black_box(&mut buf));
            }
            stages::BLOCK * 1000
        }
        "spectrum" => {
            let mut a = SpectrumAnalyzer::new(4096, Window::Hann).unwrap();
            let mut out = vec![0.0f32; a.bins()];
            for _ in 0..reps {
                a.analyze_into(black_box(&clip.channels), &mut out);
            }
            n * 2
        }
        other => {
            eprintln!("bench_profile: unknown workload {other:?}: chain, gain, quantize, tpdf, spectrum");
            std::process::exit(2);
        }
    };
    let s = t.elapsed().as_secs_f64() / reps as f64;
    eprintln!("{what}: {:.3} ms per repetition, {:.1} M samples/s", s * 1e3, samples as f64 / s / 1e6);
}
