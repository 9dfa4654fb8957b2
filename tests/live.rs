//! The live chain (`stairstep::live::LiveChain`), natively: fed blocks of seeded random sizes, its output is the
//! offline render ([`stairstep::render::render`], the page's and the CLI's path) of the same preset on the same input,
//! delayed by the latency it reports, sample for sample; its FIFO never runs dry or over; `process` allocates
//! nothing (counted by this binary's global allocator) except in the one call that starts a rebuild; a preset or
//! parameter change crossfades in 5 ms and then gives the new preset's offline render of the rest of the input.

use stairstep::live::{LiveChain, LiveStats};
use stairstep::render::render;
use stairstep::{Clip, Preset};
mod common;

use common::alloc::allocations;

#[global_allocator]
static GLOBAL: common::alloc::Counting = common::alloc::Counting;

const RATE: u32 = 48_000;

fn preset(stages: &str) -> Preset {
    let json = format!(r#"{{"format":"stairstep-preset","version":1,"name":"t","seed":7,"stages":[{stages}]}}"#);
    Preset::from_json(&json).unwrap()
}

fn builtin(name: &str) -> Preset {
    stairstep::preset::builtin().into_iter().find(|p| p.name == name).unwrap()
}

/// The typical live chain: gain, a hold-mode rate stage, 8-bit TPDF dither (seeded by the preset).
fn typical() -> Preset {
    preset(
        r#"{"kind":"gain","gain_db":3,"overflow":"clip"},{"kind":"rate","rate_hz":11025,"mode":"hold"},
        {"kind":"quantize","bits":8,"dither":"tpdf"}"#,
    )
}

/// A deterministic test signal: a chirp on even channels, an LCG noise burst on odd ones, `frames` long.
fn signal(channels: usize, frames: usize) -> Vec<Vec<f32>> {
    (0..channels)
        .map(|c| {
            let mut x: u64 = 12_345 + c as u64;
            (0..frames)
                .map(|i| {
                    let t = i as f64 / RATE as f64;
                    if c % 2 == 0 {
                        (0.7 * (2.0 * std::f64::consts::PI * (100.0 * t + 2_000.0 * t * t)).sin()) as f32
                    } else {
                        x = (x * 1_103_515_245 + 12_345) % 2_147_483_648;
                        ((x as f64 / 2_147_483_648.0 - 0.5) * if i < frames / 2 { 1.2 } else { 0.2 }) as f32
                    }
                })
                .collect()
        })
        .collect()
}

/// The offline render's audition of `input` through `preset`, over the input's length. An offline render ends (its
/// export stops at the clip's length, and a clean-mode audition made from it fades into the cut); a stream goes on.
/// So the reference is rendered with a second of silence after the input.
fn offline(preset: &Preset, input: &[Vec<f32>]) -> Vec<Vec<f32>> {
    let frames = input[0].len();
    let padded: Vec<Vec<f32>> =
        input.iter().map(|c| c.iter().copied().chain(std::iter::repeat_n(0.0, RATE as usize)).collect()).collect();
    let r = render(preset, &Clip::new(RATE, padded).unwrap()).unwrap();
    r.audition.channels.iter().map(|c| c[..frames].to_vec()).collect()
}

/// Block sizes: the worklet's 128, the edge sizes 1, 127 and 4,096 (`BLOCK`), odd sizes and one call longer than a
/// block (split inside `process`), then seeded random sizes from 1 to 4,096.
struct Sizes {
    fixed: std::vec::IntoIter<usize>,
    seed: u64,
}

impl Sizes {
    fn new(seed: u64) -> Self {
        Sizes { fixed: vec![1, 127, 128, 4096, 3, 4095, 1001, 5000, 128, 77].into_iter(), seed }
    }
}

impl Iterator for Sizes {
    type Item = usize;
    fn next(&mut self) -> Option<usize> {
        self.fixed.next().or_else(|| {
            self.seed = (self.seed.wrapping_mul(6_364_136_223_846_793_005)).wrapping_add(1_442_695_040_888_963_407);
            Some(1 + (self.seed >> 33) as usize % 4096)
        })
    }
}

/// What one run of a live chain gave.
struct Run {
    output: Vec<Vec<f32>>,
    /// Allocations counted in each `process` call, with the frame at which the call started.
    allocations: Vec<(usize, usize)>,
    stats: LiveStats,
    latency: usize,
}

/// Feeds `input` (then silence) to `live` in blocks of `sizes` until `frames` output frames exist; `at(frame, live)`
/// runs before each block (for parameter changes).
fn run(
    mut live: LiveChain,
    input: &[Vec<f32>],
    frames: usize,
    sizes: Sizes,
    mut at: impl FnMut(usize, &mut LiveChain),
) -> Run {
    let channels = input.len();
    let most = 5000;
    let padded: Vec<Vec<f32>> = input
        .iter()
        .map(|c| c.iter().copied().chain(std::iter::repeat_n(0.0, frames + most - c.len().min(frames))).collect())
        .collect();
    let mut out_block = vec![vec![f32::NAN; most]; channels];
    let mut output: Vec<Vec<f32>> = (0..channels).map(|_| Vec::with_capacity(frames + most)).collect();
    let mut counted = Vec::new();
    let mut pos = 0;
    for n in sizes {
        if pos >= frames {
            break;
        }
        at(pos, &mut live);
        let ins: Vec<&[f32]> = padded.iter().map(|c| &c[pos..pos + n]).collect();
        let mut outs: Vec<&mut [f32]> = out_block.iter_mut().map(|c| &mut c[..n]).collect();
        let a = allocations(|| live.process(&ins, &mut outs, n).unwrap());
        counted.push((pos, a));
        for (o, b) in output.iter_mut().zip(&out_block) {
            o.extend_from_slice(&b[..n]);
        }
        pos += n;
    }
    Run { output, allocations: counted, stats: live.stats(), latency: live.latency_frames() }
}

/// Counts samples where `got[offset + i] != want[i]` for i in `range` (f32 equality: bit-exact but for ±0).
fn mismatches(got: &[Vec<f32>], want: &[Vec<f32>], offset: usize, range: std::ops::Range<usize>) -> usize {
    got.iter().zip(want).map(|(g, w)| range.clone().filter(|&i| g[offset + i] != w[i]).count()).sum()
}

#[test]
fn blocks_of_any_size_give_the_offline_render_delayed_by_the_latency() {
    // The counter counts (the test would be vacuous otherwise).
    assert!(allocations(|| drop(std::hint::black_box(vec![1u8; 10]))) >= 1);
    let cases: Vec<(&str, Preset, usize, bool)> = vec![
        ("typical: gain, hold 11,025 Hz, 8-bit TPDF (seeded)", typical(), 2, false),
        (
            "clean 7,300 Hz + 5-bit RPDF",
            preset(r#"{"kind":"rate","rate_hz":7300,"mode":"clean"},{"kind":"quantize","bits":5,"dither":"rpdf"}"#),
            1,
            true,
        ),
        ("phone-line: clean 8 kHz, G.711", builtin("phone-line"), 1, true),
        ("clean-8: TPDF and noise shaping", builtin("clean-8"), 2, false),
        (
            "hold 1,000 Hz + minifloat",
            preset(r#"{"kind":"rate","rate_hz":1000,"mode":"hold"},{"kind":"minifloat"}"#),
            1,
            false,
        ),
        ("A-law compander, 6 bits", preset(r#"{"kind":"compand","law":"alaw","bits":6}"#), 1, false),
        ("no stages", preset(""), 1, false),
    ];
    for (seed, (name, p, channels, clean)) in cases.into_iter().enumerate() {
        let frames = 60_000;
        let x = signal(channels, frames);
        let want = offline(&p, &x);
        let live = LiveChain::new(&p, channels, RATE).unwrap();
        let latency = live.latency_frames();
        // Clean-mode rate stages delay the audition; hold mode and rate-keeping stages do not.
        assert_eq!(latency > 0, clean, "{name}: latency {latency}");
        let r = run(live, &x, frames + latency, Sizes::new(seed as u64 + 1), |_, _| {});
        let energy: f64 = want[0].iter().map(|&v| (v as f64) * (v as f64)).sum();
        assert!(energy > 1.0, "{name}: the reference is not silence");
        let lead: usize = r.output.iter().map(|c| c[..latency].iter().filter(|&&v| v != 0.0).count()).sum();
        assert_eq!(lead, 0, "{name}: silence during the latency");
        assert_eq!(mismatches(&r.output, &want, latency, 0..frames), 0, "{name}: output = offline render, delayed");
        assert_eq!(r.stats.underrun_frames, 0, "{name}: underruns");
        assert_eq!(r.stats.overrun_frames, 0, "{name}: overruns");
        let allocating: Vec<_> = r.allocations.iter().filter(|(_, a)| *a > 0).collect();
        assert!(allocating.is_empty(), "{name}: process allocated (frame, count): {allocating:?}");
        // Every call of at most BLOCK frames is one block; the 5,000-frame call is two.
        assert_eq!(r.stats.blocks, r.allocations.len() as u64 + 1, "{name}: blocks");
        assert_eq!(r.stats.frames, r.output[0].len() as u64, "{name}: frames");
        assert_eq!((r.stats.rebuilds, r.stats.transition), (0, false));
    }
}

#[test]
fn mix_zero_is_the_input_delayed_and_gain_is_the_db_factor() {
    let x = signal(1, 20_000);
    // mix 0 through phone-line (clean 8 kHz: latency): the dry input, delayed exactly like the wet one.
    let mut live = LiveChain::new(&builtin("phone-line"), 1, RATE).unwrap();
    live.set_mix(0.0);
    let latency = live.latency_frames();
    let r = run(live, &x, 20_000 + latency, Sizes::new(3), |_, _| {});
    assert_eq!(mismatches(&r.output, &x, latency, 0..20_000), 0);
    // Gain −6 dB into an empty chain: each sample times 10^(−6/20) (the dB definition for amplitude, IEC 60027-3),
    // as one f32 product.
    let mut live = LiveChain::new(&preset(""), 1, RATE).unwrap();
    live.set_gain_db(-6.0);
    let r = run(live, &x, 20_000, Sizes::new(4), |_, _| {});
    let g = 10f64.powf(-6.0 / 20.0) as f32;
    let want: Vec<f32> = x[0].iter().map(|&v| v * g).collect();
    let worst = r.output[0].iter().zip(&want).map(|(a, b)| (a - b).abs()).fold(0.0f32, f32::max);
    assert!(worst <= 1e-7, "gain error {worst}");
}

/// A crossfade from `old` output to `new` output: where each output sample lies from `from` on.
fn check_crossfade(name: &str, got: &[f32], before: &[f32], after: &[f32], from: usize, warm: usize, fade: usize) {
    let n = before.len().min(after.len());
    for t in from..n {
        let (a, b, y) = (before[t], after[t], got[t]);
        if t < from + warm {
            assert_eq!(y, a, "{name}: frame {t}, the old chain while the new one warms up");
        } else if t < from + warm + fade {
            assert!(y >= a.min(b) - 1e-6 && y <= a.max(b) + 1e-6, "{name}: frame {t}: {y} between {a} and {b}");
        } else {
            assert_eq!(y, b, "{name}: frame {t}, the new chain after the crossfade");
        }
    }
}

#[test]
fn a_preset_change_crossfades_into_the_new_presets_render_of_the_rest() {
    let frames = 50_000;
    let x = signal(1, frames);
    let old = typical();
    let new = preset(r#"{"kind":"rate","rate_hz":7300,"mode":"clean"},{"kind":"quantize","bits":6}"#);
    let fade = (RATE as f64 * 0.005).round() as usize;
    let mut change_at = None;
    let mut new_latency = 0;
    let r = run(LiveChain::new(&old, 1, RATE).unwrap(), &x, frames, Sizes::new(11), |pos, live| {
        if change_at.is_none() && pos >= 10_000 {
            change_at = Some(pos);
            new_latency = live.set_preset(&new).unwrap();
        }
    });
    let from = change_at.unwrap();
    // Guaranteed: up to the change, the old preset's render; from the first block after `set_preset`, the new chain
    // (built fresh: filters, hold phase and dither streams from their start) receives the input from that frame on,
    // and once its latency has passed and the 5 ms crossfade has run, the output is the new preset's offline render
    // of the input from that frame on, delayed by its latency.
    let old_render = offline(&old, &x);
    let rest = vec![x[0][from..].to_vec()];
    let new_render = offline(&new, &rest);
    let mut after = vec![0.0f32; frames];
    after[from + new_latency..].copy_from_slice(&new_render[0][..frames - from - new_latency]);
    assert_eq!(mismatches(&r.output, &old_render, 0, 0..from), 0, "the old preset until the change");
    check_crossfade("preset change", &r.output[0], &old_render[0], &after, from, new_latency, fade);
    assert!(new_latency > 0);
    assert_eq!((r.stats.rebuilds, r.stats.transition, r.latency), (1, false, new_latency));
    assert_eq!((r.stats.underrun_frames, r.stats.overrun_frames), (0, 0));
    // The chain was built by set_preset: taking it over allocates nothing.
    assert!(r.allocations.iter().all(|&(_, a)| a == 0), "{:?}", r.allocations);
}

#[test]
fn a_parameter_change_rebuilds_in_one_allocating_call_then_gives_the_effective_presets_render() {
    let frames = 40_000;
    let x = signal(2, frames);
    let p = typical();
    let fade = (RATE as f64 * 0.005).round() as usize;
    let mut change_at = None;
    let r = run(LiveChain::new(&p, 2, RATE).unwrap(), &x, frames, Sizes::new(5), |pos, live| {
        if change_at.is_none() && pos >= 8_000 {
            change_at = Some(pos);
            live.set_resolution(4.5);
            live.set_rate(8_000.0);
            live.set_dither(0.5);
        }
    });
    let from = change_at.unwrap();
    // The effective preset: levels round(2^4.5) = 23 (mid-tread), hold at 8,000 Hz, TPDF of 0.5 LSB peak.
    let mut probe = LiveChain::new(&p, 2, RATE).unwrap();
    probe.set_resolution(4.5);
    probe.set_rate(8_000.0);
    probe.set_dither(0.5);
    probe.process(&[[0.0f32], [0.0]], &mut [[0.0f32], [0.0]], 1).unwrap();
    let effective = probe.effective_preset().clone();
    let s = probe.stats();
    assert_eq!((s.levels, s.rate_hz, s.dither_lsb, s.rebuilds), (Some(23), Some(8_000), Some(0.5), 0));
    let old_render = offline(&p, &x);
    let rest: Vec<Vec<f32>> = x.iter().map(|c| c[from..].to_vec()).collect();
    let new_render = offline(&effective, &rest);
    assert_eq!(mismatches(&r.output, &old_render, 0, 0..from), 0);
    for ch in 0..2 {
        let mut after = vec![0.0f32; frames];
        after[from..].copy_from_slice(&new_render[ch]);
        check_crossfade("parameters", &r.output[ch], &old_render[ch], &after, from, 0, fade);
    }
    assert_eq!((r.stats.rebuilds, r.stats.transition, r.stats.levels), (1, false, Some(23)));
    // Only the call that started the rebuild allocated.
    let allocating: Vec<usize> = r.allocations.iter().filter(|(_, a)| *a > 0).map(|&(at, _)| at).collect();
    assert_eq!(allocating, vec![from]);
}

#[test]
fn stats_serialise_to_the_keys_the_worklet_reads_and_bad_buffers_are_errors() {
    let mut live = LiveChain::new(&typical(), 2, RATE).unwrap();
    let json: serde_json::Value = serde_json::to_value(live.stats()).unwrap();
    let keys: Vec<&str> = json.as_object().unwrap().keys().map(String::as_str).collect();
    // The keys www/worklet.js and examples/worklet/ read (documented on the wasm LiveChain's stats()).
    let documented = [
        "applies",
        "blocks",
        "ditherLsb",
        "exportRate",
        "failedRebuilds",
        "frames",
        "lastError",
        "latencyFrames",
        "levels",
        "overrunFrames",
        "rateHz",
        "rebuilds",
        "transition",
        "underrunBlocks",
        "underrunFrames",
    ];
    assert_eq!(keys, documented);
    assert_eq!(json["applies"], serde_json::json!({"dither": true, "rate": true, "resolution": true}));
    assert_eq!(json["exportRate"], 11_025);
    // Wrong channel counts and short buffers are errors, not panics; nothing is processed.
    let a = [0.0f32; 64];
    let mut b = [[0.0f32; 64]; 2];
    assert!(live.process(&[&a[..]], &mut b, 64).unwrap_err().to_string().contains("input"));
    assert!(live.process(&[&a[..], &a[..32]], &mut b, 64).unwrap_err().to_string().contains("frames"));
    assert_eq!(live.stats().blocks, 0);
    assert!(LiveChain::new(&typical(), 0, RATE).unwrap_err().to_string().contains("channels"));
    assert!(LiveChain::new(&typical(), 1, 0).unwrap_err().to_string().contains("sample_rate"));
}
