//! Micro-benchmarks of the core, one criterion group per stage, on the public API with preallocated buffers.
//!
//! ```text
//! cargo bench --bench core                      # all groups (criterion's default times)
//! cargo bench --bench core -- quantize          # one group
//! cargo bench --bench core -- --quick           # a fast, rough pass
//! ```
//!
//! Every stage is fed one chain block ([`stages::BLOCK`] samples) of the `pad` demo (dense harmonics, around −10 dBFS)
//! at a time, as the chain does; throughput is in input samples. `make bench` runs these with short times after its
//! ratio table (scripts/bench.sh). Nothing here asserts a time.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use stairstep::analysis::{envelope, Levels, SpectrumAnalyzer, Window};
use stairstep::preset::Preset;
use stairstep::stages::adpcm::{AdpcmParams, AdpcmRoundTrip};
use stairstep::stages::compand::{CompandParams, Compander};
use stairstep::stages::dither::{DitherKind, Shaping};
use stairstep::stages::g711::{G711Params, G711};
use stairstep::stages::gain::{Gain, GainParams, Overflow};
use stairstep::stages::minifloat::{Minifloat, MinifloatParams};
use stairstep::stages::quantize::{QuantizeParams, Quantizer};
use stairstep::stages::rate::{RateExpander, RateParams, RateReducer};
use stairstep::stages::StageSpec;
use stairstep::stages::{self, Stage};
use stairstep::{demo, Clip};
use std::hint::black_box;

const RATE: u32 = 48_000;

/// One chain block of the `pad` demo's left channel.
fn block() -> Vec<f32> {
    let pad = demo::demo("pad").expect("built-in demo");
    pad.channels[0][RATE as usize..RATE as usize + stages::BLOCK].to_vec()
}

/// The `pad` demo looped to `seconds`, stereo.
fn clip(seconds: f64) -> Clip {
    let pad = demo::demo("pad").expect("built-in demo");
    let n = (seconds * RATE as f64) as usize;
    Clip::new(RATE, pad.channels.iter().map(|c| c.iter().copied().cycle().take(n).collect()).collect()).unwrap()
}

/// Benchmarks a rate-keeping stage on one block: the block is restored from the source before each pass (a copy of
/// 16 KiB, in cache, a few per cent of the time of most stages; the `copy` line in the `gain` group measures it).
fn bench_stage(c: &mut Criterion, group: &str, cases: Vec<(&str, Box<dyn Stage>)>) {
    let src = block();
    let mut buf = src.clone();
    let mut g = c.benchmark_group(group);
    g.throughput(Throughput::Elements(src.len() as u64));
    for (name, mut stage) in cases {
        g.bench_function(name, |b| {
            b.iter(|| {
                buf.copy_from_slice(&src);
                stage.process(black_box(&mut buf));
            })
        });
    }
    g.finish();
}

fn copy_floor(c: &mut Criterion) {
    let src = block();
    let mut buf = vec![0.0f32; src.len()];
    let mut g = c.benchmark_group("copy");
    g.throughput(Throughput::Elements(src.len() as u64));
    g.bench_function("copy_from_slice", |b| b.iter(|| black_box(&mut buf).copy_from_slice(black_box(&src))));
    g.finish();
}

fn gain(c: &mut Criterion) {
    let mk = |gain_db, overflow| -> Box<dyn Stage> { Box::new(Gain::new(&GainParams { gain_db, overflow }).unwrap()) };
    bench_stage(
        c,
        "gain",
        vec![
            ("+3 dB clip", mk(3.0, Overflow::Clip)),
            ("+12 dB wrap", mk(12.0, Overflow::Wrap)),
            ("+12 dB fold", mk(12.0, Overflow::Fold)),
            ("+12 dB saturate", mk(12.0, Overflow::Saturate)),
        ],
    );
}

fn quantize(c: &mut Criterion) {
    let mk = |p: QuantizeParams| -> Box<dyn Stage> { Box::new(Quantizer::new(&p, 1, 0).unwrap()) };
    bench_stage(
        c,
        "quantize",
        vec![
            ("8-bit, no dither", mk(QuantizeParams::bits(8))),
            ("16-bit, no dither", mk(QuantizeParams::bits(16))),
            ("8-bit, TPDF", mk(QuantizeParams { dither: DitherKind::Tpdf, ..QuantizeParams::bits(8) })),
            (
                "8-bit, TPDF, first-order shaping",
                mk(QuantizeParams {
                    dither: DitherKind::Tpdf,
                    shaping: Shaping::FirstOrder,
                    ..QuantizeParams::bits(8)
                }),
            ),
            (
                "8-bit, TPDF, 9-tap E-weighted shaping",
                mk(QuantizeParams { dither: DitherKind::Tpdf, shaping: Shaping::Ewt9, ..QuantizeParams::bits(8) }),
            ),
        ],
    );
}

/// The undithered quantizer in place with no restore copy, beside the copy of the same buffer: the pair behind the
/// "quantize vs copy" ratio of `make bench`.
fn quantize_in_place(c: &mut Criterion) {
    let src = block();
    let mut buf = src.clone();
    let mut dst = vec![0.0f32; src.len()];
    let mut q = Quantizer::new(&QuantizeParams::bits(8), 1, 0).unwrap();
    let mut g = c.benchmark_group("quantize_in_place");
    g.throughput(Throughput::Elements(src.len() as u64));
    g.bench_function("8-bit, no dither", |b| b.iter(|| q.process(black_box(&mut buf))));
    g.bench_function("copy_from_slice", |b| b.iter(|| black_box(&mut dst).copy_from_slice(black_box(&src))));
    g.finish();
}

fn companding(c: &mut Criterion) {
    bench_stage(
        c,
        "companding",
        vec![
            ("G.711 mu-law", Box::new(G711::new(&G711Params::default()).unwrap())),
            ("compander 8-bit", Box::new(Compander::new(&CompandParams::default()).unwrap())),
        ],
    );
}

fn minifloat(c: &mut Criterion) {
    bench_stage(c, "minifloat", vec![("1-4-3", Box::new(Minifloat::new(&MinifloatParams::default()).unwrap()))]);
}

fn adpcm(c: &mut Criterion) {
    bench_stage(c, "adpcm", vec![("IMA round trip", Box::new(AdpcmRoundTrip::new(&AdpcmParams::default()).unwrap()))]);
}

fn rate(c: &mut Criterion) {
    let src = block();
    let mut g = c.benchmark_group("rate");
    g.throughput(Throughput::Elements(src.len() as u64));
    for (name, params) in [
        ("hold 48000 to 12000", RateParams::hold(12_000)),
        ("hold 48000 to 11025", RateParams::hold(11_025)),
        ("clean 48000 to 12000", RateParams::clean(12_000)),
    ] {
        let mut reducer = RateReducer::new(&params, RATE, stages::BLOCK).unwrap();
        let mut expander = RateExpander::new(&params, RATE, stages::BLOCK).unwrap();
        let mut reduced = vec![0.0f32; reducer.max_output(stages::BLOCK)];
        let mut expanded = vec![0.0f32; expander.max_output(reduced.len())];
        g.bench_function(BenchmarkId::new("reduce", name), |b| {
            b.iter(|| black_box(reducer.process(black_box(&src), &mut reduced)))
        });
        g.bench_function(BenchmarkId::new("reduce and expand", name), |b| {
            b.iter(|| {
                let n = reducer.process(black_box(&src), &mut reduced);
                black_box(expander.process(&reduced[..n], &mut expanded))
            })
        });
    }
    g.finish();
}

fn chain_render(c: &mut Criterion) {
    let input = clip(1.0);
    let bench = Preset::with_stages(
        "bench",
        vec![
            StageSpec::Gain(GainParams { gain_db: 3.0, overflow: Overflow::Clip }),
            StageSpec::Rate(RateParams::hold(12_000)),
            StageSpec::Quantize(QuantizeParams { dither: DitherKind::Tpdf, ..QuantizeParams::bits(8) }),
        ],
    );
    let mut g = c.benchmark_group("chain");
    g.throughput(Throughput::Elements((input.frames() * input.channel_count()) as u64));
    g.sample_size(20);
    g.bench_function("1 s stereo: gain, 4x hold, 8-bit TPDF", |b| {
        b.iter(|| black_box(stairstep::render::render(&bench, black_box(&input)).unwrap()))
    });
    for p in stairstep::preset::builtin() {
        g.bench_function(BenchmarkId::new("1 s stereo, built-in", &p.name), |b| {
            b.iter(|| black_box(stairstep::render::render(&p, black_box(&input)).unwrap()))
        });
    }
    g.finish();
}

fn analysis(c: &mut Criterion) {
    let input = clip(1.0);
    let mut g = c.benchmark_group("analysis");
    g.throughput(Throughput::Elements((input.frames() * input.channel_count()) as u64));
    let mut a = SpectrumAnalyzer::new(4096, Window::Hann).unwrap();
    let mut out = vec![0.0f32; a.bins()];
    g.bench_function("Welch spectrum 4096 Hann, 1 s stereo", |b| {
        b.iter(|| a.analyze_into(black_box(&input.channels), &mut out))
    });
    g.bench_function("levels, 1 s stereo", |b| b.iter(|| black_box(Levels::measure(black_box(&input.channels)))));
    g.bench_function("envelope 1200 columns, 1 s stereo", |b| {
        b.iter(|| {
            for ch in &input.channels {
                black_box(envelope(black_box(ch), 0, ch.len(), 1200));
            }
        })
    });
    g.finish();
}

criterion_group!(
    benches,
    copy_floor,
    gain,
    quantize,
    quantize_in_place,
    companding,
    minifloat,
    adpcm,
    rate,
    chain_render,
    analysis
);
criterion_main!(benches);
