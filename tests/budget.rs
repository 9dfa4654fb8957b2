//! Choosing an export by what it costs: the A-weighting against IEC 61672-1, candidates' bytes and figures against
//! the files `render` writes, the pick against brute force, the folder allocation against exhaustive search.
#![cfg(not(target_arch = "wasm32"))]

mod common;

use stairstep::analysis::weighting::a_weighted_energy;
use stairstep::budget::{self, Budget, Limit, Options, Score};
use stairstep::io::{self, ExportFormat};
use stairstep::{demo, render, Clip, Preset};
use std::process::Command;

/// The first `seconds` of a demo (short, so the debug build measures ~50 candidates quickly).
fn short_demo(name: &str, seconds: f64) -> Clip {
    let mut c = demo::demo(name).unwrap();
    let n = ((c.sample_rate as f64 * seconds) as usize).min(c.frames());
    for ch in &mut c.channels {
        ch.truncate(n);
    }
    c
}

/// IEC 61672-1:2013, Table 3: frequency weighting A at the exact mid-band frequencies 1000·10^(n/10) Hz (nominal
/// 31.5 Hz … 16 kHz), in dB, with the class 1 acceptance limits (upper, lower) in dB.
const IEC_61672_A: [(f64, f64, f64, f64); 7] = [
    (31.5, -39.4, 1.5, -1.5),
    (63.0, -26.2, 1.0, -1.0),
    (100.0, -19.1, 1.0, -1.0),
    (1000.0, 0.0, 0.7, -0.7),
    (4000.0, 1.0, 1.0, -1.0),
    (10_000.0, -2.5, 2.0, -3.0),
    (16_000.0, -6.6, 3.5, -17.0),
];

fn exact_midband(nominal: f64) -> f64 {
    // IEC 61260-1 base-10 mid-band frequencies: 1000·10^(n/10) for the one-third-octave band n nearest the nominal.
    let n = (10.0 * (nominal / 1000.0).log10()).round();
    1000.0 * 10f64.powf(n / 10.0)
}

#[test]
fn a_weighting_meets_iec_61672_1_class_1_at_44100_and_48000() {
    for rate in [44_100u32, 48_000] {
        for (nominal, table_db, up, down) in IEC_61672_A {
            let f = exact_midband(nominal);
            // A steady sine through the implemented weighting: weighted energy over plain energy. 4 s with 0.5 s
            // raised-cosine fades, so that the gating does not spread energy far from f (an abruptly gated 31.5 Hz
            // tone's clicks, weighted up by ~39 dB above 1 kHz, would read −36 dB instead of −39.4).
            let n = 4 * rate as usize;
            let fade = rate as usize / 2;
            let x: Vec<f32> = (0..n)
                .map(|i| {
                    let edge = i.min(n - 1 - i);
                    let g = if edge < fade {
                        0.5 - 0.5 * (std::f64::consts::PI * edge as f64 / fade as f64).cos()
                    } else {
                        1.0
                    };
                    (0.5 * g * (2.0 * std::f64::consts::PI * f * i as f64 / rate as f64).sin()) as f32
                })
                .collect();
            let plain: f64 = x.iter().map(|&s| s as f64 * s as f64).sum();
            let measured = 10.0 * (a_weighted_energy(&x, rate) / plain).log10();
            let dev = measured - table_db;
            eprintln!("A-weighting at {rate} Hz: {f:8.1} Hz {measured:+7.2} dB (IEC table {table_db:+.1} dB)");
            // Class 1 acceptance limits (IEC 61672-1:2013, Table 3).
            assert!(dev <= up && dev >= down, "{rate} Hz, {f:.1} Hz: {measured:.2} dB vs {table_db} dB (class 1)");
            // And the table itself, to its 0.1 dB rounding (with 0.05 dB for the sine's spectral leakage).
            assert!(dev.abs() <= 0.1, "{rate} Hz, {f:.1} Hz: {measured:.3} dB vs table {table_db} dB");
        }
    }
}

/// Decodes a raw export the way its layout is documented (`src/io/raw.rs`: signed codes, MSB-first nibbles).
fn decode_raw(bytes: &[u8], bits: u32, channels: usize) -> Vec<Vec<f32>> {
    let codes: Vec<i32> = match bits {
        8 => bytes.iter().map(|&b| b as i8 as i32).collect(),
        4 => bytes
            .iter()
            .flat_map(|&b| [(b >> 4) as i32, (b & 15) as i32])
            .map(|v| if v >= 8 { v - 16 } else { v })
            .collect(),
        _ => panic!("raw {bits}"),
    };
    let scale = (1u32 << (bits - 1)) as f32;
    let frames = codes.len() / channels;
    (0..channels).map(|c| (0..frames).map(|i| codes[i * channels + c] as f32 / scale).collect()).collect()
}

#[test]
fn every_candidates_file_is_what_the_chain_measured_and_has_its_bytes() {
    // Stereo, so that block layouts and interleaving are exercised; a preset with a hold rate stage and dither.
    let clip = short_demo("chime-loop", 0.3);
    for preset in [Preset::default(), stairstep::preset::builtin().into_iter().find(|p| p.name == "handheld").unwrap()]
    {
        let b = Budget::new(&preset, &clip, None).unwrap();
        let specs = b.candidates().unwrap();
        assert!(specs.iter().filter(|s| s.current).count() == 1, "exactly one candidate is the preset's own");
        for spec in &specs {
            let c = b.measure(spec).unwrap();
            let r = render::render(&spec.preset, &clip).unwrap();
            let bytes = r.encode(&spec.preset.export).unwrap();
            assert_eq!(c.bytes, bytes.len() as u64, "{}", spec.id);
            // The file holds exactly the chain's export (the appended stage makes the audition the file's).
            let decoded = match &spec.preset.export {
                ExportFormat::Wav { .. } => io::wav::read(&bytes).unwrap().channels,
                ExportFormat::Raw { bits, .. } => {
                    let mut d = decode_raw(&bytes, *bits, r.export.channel_count());
                    // 4-bit packing pads the last byte: drop the padding.
                    d.iter_mut().for_each(|ch| ch.truncate(r.export.frames()));
                    d
                }
                other => panic!("unexpected export {other:?}"),
            };
            assert_eq!(decoded, r.export.channels, "{}: the file differs from the measured export", spec.id);
        }
    }
}

fn run(args: &[&str], dir: &std::path::Path) -> std::process::Output {
    Command::new(common::bin()).args(args).current_dir(dir).output().expect("run stairstep")
}

#[test]
fn cli_candidates_render_to_their_bytes_and_the_pick_beats_brute_force() {
    let dir = tempfile::tempdir().unwrap();
    assert!(run(&["demo", "drum-hit", "-o", "d.wav"], dir.path()).status.success());
    let out = run(&["budget", "d.wav", "--max-bytes", "8192", "--json", "--save-preset", "pick.json"], dir.path());
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let j: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(j["score"], "a_weighted_snr_db");
    let cands = j["candidates"].as_array().unwrap();
    assert!(cands.len() >= 40, "{} candidates", cands.len());
    // Every candidate's preset, rendered by the CLI, writes exactly `bytes` bytes.
    for (i, c) in cands.iter().enumerate() {
        std::fs::write(dir.path().join("c.json"), serde_json::to_string(&c["preset"]).unwrap()).unwrap();
        let name = format!("c{i}.out");
        let r = run(&["render", "--preset", "c.json", "d.wav", "-o", &name], dir.path());
        assert!(r.status.success(), "{}: {}", c["id"], String::from_utf8_lossy(&r.stderr));
        let size = std::fs::metadata(dir.path().join(&name)).unwrap().len();
        assert_eq!(size, c["bytes"].as_u64().unwrap(), "{}", c["id"]);
    }
    // The saved preset is the pick's, and renders to pick.bytes.
    let pick = &j["pick"];
    let saved: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("pick.json")).unwrap()).unwrap();
    assert_eq!(saved, pick["preset"]);
    let r = run(&["render", "--preset", "pick.json", "d.wav", "-o", "pick.wav"], dir.path());
    assert!(r.status.success());
    assert_eq!(std::fs::metadata(dir.path().join("pick.wav")).unwrap().len(), pick["bytes"].as_u64().unwrap());
    // Brute force over the listed candidates: none within 8,192 bytes scores higher (or as high with fewer bytes).
    // Scores rank capped at 100 dB (budget::SCORE_CAP_DB).
    let cap = |v: f64| v.min(budget::SCORE_CAP_DB);
    let (pb, ps) = (pick["bytes"].as_u64().unwrap(), cap(pick["a_weighted_snr_db"].as_f64().unwrap()));
    assert!(pb <= 8192);
    for c in cands {
        let (b, s) = (c["bytes"].as_u64().unwrap(), cap(c["a_weighted_snr_db"].as_f64().unwrap()));
        if b <= 8192 {
            assert!(s < ps || (s == ps && b >= pb), "{} beats the pick", c["id"]);
        }
        // Pareto flag, recomputed by brute force: nothing else as small or smaller scores at least as high, one
        // strictly.
        let dominated = cands.iter().any(|o| {
            let (ob, os) = (o["bytes"].as_u64().unwrap(), cap(o["a_weighted_snr_db"].as_f64().unwrap()));
            ob <= b && os >= s && (ob < b || os > s)
        });
        if dominated {
            assert_eq!(c["pareto"], false, "{}", c["id"]);
        }
    }
    // The other limits and score: --max-kbps and --score sqnr, brute force again.
    let out = run(&["budget", "d.wav", "--max-kbps", "100", "--score", "sqnr", "--json"], dir.path());
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let j: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(j["score"], "sqnr_db");
    let best = j["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|c| c["kbps"].as_f64().unwrap() <= 100.0)
        .map(|c| cap(c["sqnr_db"].as_f64().unwrap()))
        .fold(f64::MIN, f64::max);
    assert_eq!(cap(j["pick"]["sqnr_db"].as_f64().unwrap()), best);
    // Nothing fits: a clear error, exit code 2.
    let out = run(&["budget", "d.wav", "--max-bytes", "100"], dir.path());
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("smallest candidate"));
}

/// The best summed score over every combination of one candidate per file (exhaustive search).
fn exhaustive(files: &[Options], total: u64) -> Option<f64> {
    fn go(files: &[Options], left: u64, acc: f64, best: &mut Option<f64>) {
        match files.split_first() {
            None => *best = Some(best.map_or(acc, |b: f64| b.max(acc))),
            Some((first, rest)) => {
                for &(b, s) in first {
                    if b <= left {
                        go(rest, left - b, acc + s, best);
                    }
                }
            }
        }
    }
    let mut best = None;
    go(files, total, 0.0, &mut best);
    best
}

#[test]
fn folder_allocation_equals_exhaustive_search_and_the_greedy_is_within_its_bound() {
    let names = ["drum-hit", "tone", "chime-loop", "sweep"];
    let files: Vec<Options> = names
        .iter()
        .map(|n| {
            let clip = short_demo(n, 0.25);
            let b = Budget::new(&Preset::default(), &clip, None).unwrap();
            let (cands, skipped) = b.measure_all().unwrap();
            assert!(skipped.is_empty());
            cands.iter().map(|c| (c.bytes, Score::AWeighted.rank(c))).collect()
        })
        .collect();
    let min: u64 = files.iter().map(|o| o.iter().map(|c| c.0).min().unwrap()).sum();
    let max: u64 = files.iter().map(|o| o.iter().map(|c| c.0).max().unwrap()).sum();
    // The a-priori bound: the greedy loses at most the gain of one hull step against the linear relaxation (Sinha &
    // Zoltners 1979, the multiple-choice knapsack), and a step gains at most its file's score range (best − worst).
    let max_step = files
        .iter()
        .map(|o| {
            let lo = o.iter().map(|c| c.1).fold(f64::MAX, f64::min);
            let hi = o.iter().map(|c| c.1).fold(f64::MIN, f64::max);
            hi - lo
        })
        .fold(0.0, f64::max);
    let mut worst_gap = 0.0f64;
    for k in 0..=24 {
        let total = min + (max - min) * k / 24;
        let opt = exhaustive(&files, total).unwrap();
        // The exact search equals exhaustive search.
        let a = budget::allocate(&files, total).unwrap();
        assert_eq!(a.method, budget::Method::Exact);
        assert!(a.total_bytes <= total);
        assert!((a.total_score - opt).abs() < 1e-9, "total {total}: {} vs exhaustive {opt}", a.total_score);
        // The greedy fallback: within its stated bound.
        let g = budget::allocate_greedy(&files, total).unwrap();
        assert!(g.total_bytes <= total);
        let recomputed: f64 = g.choice.iter().zip(&files).map(|(&j, o)| o[j].1).sum();
        assert!((recomputed - g.total_score).abs() < 1e-9);
        assert!(g.total_score <= opt + 1e-9, "greedy above the optimum?");
        assert!(opt <= g.upper_bound + 1e-9, "total {total}: optimum {opt} above the stated bound {}", g.upper_bound);
        assert!(opt - g.total_score <= max_step + 1e-9);
        worst_gap = worst_gap.max(opt - g.total_score);
    }
    eprintln!(
        "greedy's worst gap to exhaustive search over 25 budgets: {worst_gap:.3} dB (a-priori bound {max_step:.1} dB)"
    );
    assert!(budget::allocate(&files, min - 1).is_err());
}

#[test]
fn pick_respects_the_limits() {
    let clip = short_demo("tone", 0.2);
    let b = Budget::new(&Preset::default(), &clip, None).unwrap();
    let (mut cands, _) = b.measure_all().unwrap();
    budget::mark_pareto(&mut cands, Score::Sqnr);
    let best = budget::pick(&cands, Score::Sqnr, Limit::None).unwrap();
    assert!(cands.iter().all(|c| Score::Sqnr.rank(c) <= Score::Sqnr.rank(&cands[best])));
    assert!(cands[best].pareto);
    let small = cands.iter().map(|c| c.bytes).min().unwrap();
    assert!(budget::pick(&cands, Score::Sqnr, Limit::MaxBytes(small - 1)).is_none());
    let i = budget::pick(&cands, Score::Sqnr, Limit::MaxBytes(small)).unwrap();
    assert_eq!(cands[i].bytes, small);
}

#[test]
fn candidates_and_limits_read_back_from_their_json_give_the_same_front_and_pick() {
    // The page keeps the measured candidates in JS and hands them back to the core for the front and the pick
    // (Session::budgetPick), with the limit written as the CLI's `--json` writes it. serde_json's default float
    // parser may miss by one unit in the last place, so figures come back within 1e-12 relative; the same text
    // always gives the same number, so ties stay ties, and the front and the picks are the same.
    let clip = short_demo("drum-hit", 0.2);
    let b = Budget::new(&Preset::default(), &clip, None).unwrap();
    let (mut cands, _) = b.measure_all().unwrap();
    let mut back: Vec<budget::Candidate> = serde_json::from_str(&serde_json::to_string(&cands).unwrap()).unwrap();
    assert_eq!(back.len(), cands.len());
    for (a, c) in back.iter().zip(&cands) {
        assert_eq!(
            (&a.id, a.bytes, a.clipped, a.current, &a.preset),
            (&c.id, c.bytes, c.clipped, c.current, &c.preset)
        );
        for (x, y) in [(a.sqnr_db, c.sqnr_db), (a.a_weighted_snr_db, c.a_weighted_snr_db), (a.kbps, c.kbps)] {
            assert!((x - y).abs() <= 1e-12 * y.abs().max(1.0), "{}: {x} read back as {y}", c.id);
        }
    }
    for limit in [Limit::None, Limit::MaxBytes(8192), Limit::MaxKbps(64.0)] {
        let json = serde_json::to_string(&limit).unwrap();
        assert_eq!(serde_json::from_str::<Limit>(&json).unwrap(), limit, "{json}");
    }
    assert_eq!(serde_json::from_str::<Limit>(r#"{"kind":"max-bytes","value":8192}"#).unwrap(), Limit::MaxBytes(8192));
    for score in [Score::AWeighted, Score::Sqnr] {
        budget::mark_pareto(&mut cands, score);
        budget::mark_pareto(&mut back, score);
        assert_eq!(
            back.iter().map(|c| c.pareto).collect::<Vec<_>>(),
            cands.iter().map(|c| c.pareto).collect::<Vec<_>>()
        );
        let mut sizes: Vec<u64> = cands.iter().map(|c| c.bytes).collect();
        sizes.sort_unstable();
        for limit in std::iter::once(Limit::None).chain(sizes.into_iter().map(Limit::MaxBytes)) {
            assert_eq!(budget::pick(&back, score, limit), budget::pick(&cands, score, limit), "{limit:?}");
        }
    }
}

/// `budget` reads what `render` reads: the drum hit as a FLAC written by libsndfile (python-soundfile, lossless 16-bit)
/// gives the same candidates, bytes and figures as the WAV it came from; a folder walk takes both.
#[test]
fn budget_reads_flac_like_the_wav_it_came_from() {
    let dir = tempfile::tempdir().unwrap();
    assert!(run(&["demo", "drum-hit", "-o", "d.wav"], dir.path()).status.success());
    let wav = std::fs::read(dir.path().join("d.wav")).unwrap();
    let flac = common::run_python(
        "import io, sys, soundfile as sf\n\
         x, r = sf.read(io.BytesIO(sys.stdin.buffer.read()), dtype='int16')\n\
         b = io.BytesIO(); sf.write(b, x, r, format='FLAC', subtype='PCM_16'); sys.stdout.buffer.write(b.getvalue())",
        &wav,
    );
    std::fs::create_dir(dir.path().join("lib")).unwrap();
    std::fs::write(dir.path().join("lib/d.flac"), &flac).unwrap();
    let json = |input: &str| -> serde_json::Value {
        let out = run(&["budget", input, "--max-bytes", "8192", "--json"], dir.path());
        assert!(out.status.success(), "{input}: {}", String::from_utf8_lossy(&out.stderr));
        serde_json::from_slice(&out.stdout).unwrap()
    };
    let (a, b) = (json("d.wav"), json("lib/d.flac"));
    assert_eq!(a["candidates"], b["candidates"]);
    assert_eq!(a["pick"], b["pick"]);
    std::fs::copy(dir.path().join("d.wav"), dir.path().join("lib/d.wav")).unwrap();
    let out = run(&["budget", "--recursive", "lib", "--total-bytes", "20000", "--json"], dir.path());
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("d.flac") && text.contains("d.wav"), "{text}");
}
