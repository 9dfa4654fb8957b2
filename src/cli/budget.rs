//! `stairstep budget`: every (rate, export) candidate for a sound and a preset, measured side by side; the best one
//! within a byte or bit-rate budget; for a folder, one total shared among its files. Candidates are measured in
//! parallel (rayon); the figures and the pick do not depend on the number of threads.

use super::{load_preset, write_atomic, Failure, EXIT_INPUT, EXIT_OUTPUT, EXIT_USAGE};
use rayon::prelude::*;
use serde::Serialize;
use stairstep::budget::{self, Allocation, Budget, Candidate, Limit, Score};
use stairstep::Preset;
use std::path::{Path, PathBuf};

pub const HELP: &str = "\
Candidates: the chain's own rate, the source rate and 44100/32000/22050/16000/11025/8000 Hz (at or below the source
rate), each with the preset's own export, WAV 16-bit, WAV 8-bit, WAV mu-law, WAV A-law, WAV IMA ADPCM, WAV Microsoft
ADPCM (1-2 channels), WAV G.721 (8000 Hz mono), VOX ADPCM (mono), raw 8-bit and raw 4-bit. GSM 06.10 is not a
candidate (its round-trip stage runs one frame late). The chain's rate stage gets the candidate's rate and keeps its
mode; a chain without one gets a clean (band-limited) rate stage first. The stage that makes the audition what the
file holds is appended (quantizer, G.711 or the codec's round trip); it does not change the bytes.

Inputs: what `stairstep render` reads (WAV, FLAC, AIFF, Ogg Vorbis, MP3, CAF), with the file's own loop.

Figures: bytes (exactly what `stairstep render` writes with the candidate's preset), bytes per second and kbit/s over
the sound's duration, SQNR, A-weighted SNR (IEC 61672-1 weighting A applied to the original and to the error), the
bandwidth kept (clean mode's cutoff, else the Nyquist frequency), clipped samples, and whether the candidate is on the
size-quality Pareto front. The pick is the best score within the limit (ties: fewer bytes); scores rank capped at
100 dB (an exact copy reads 240 dB), so a bigger file that only scores higher beyond that is not preferred.

A folder (--recursive DIR --total-bytes N): the choice with the best summed score, found exactly by combining the files
one at a time and keeping only partial sums that nothing beats on both bytes and score; for folders too large for that,
a greedy on score gained per extra byte, with an upper bound on the best summed score any choice could reach.

--json prints {input, source_rate, duration_s, score, limit, candidates, pick, skipped}; each candidate has id,
rate_hz, rate_mode, export_label, bytes, bytes_per_second, kbps, sqnr_db, a_weighted_snr_db, bandwidth_hz, clipped,
current, pareto and its complete preset; `pick` is one of them (null when nothing fits). For a folder: {score,
total_bytes_budget, total_bytes, total_score, upper_bound, method, files: [{input, pick, candidates}]}.

Examples:
  stairstep budget drum.wav --max-bytes 8192
  stairstep budget drum.wav --preset handheld --max-kbps 64 --score sqnr --json > b.json
  stairstep budget drum.wav --max-bytes 8192 --save-preset pick.json && stairstep render --preset pick.json drum.wav -o drum-8k.wav
  stairstep budget --recursive assets/sfx --total-bytes 2000000 --json";

#[derive(clap::Args)]
pub struct Args {
    /// Input sound file, or a folder with --recursive.
    input: PathBuf,
    /// Preset JSON file or built-in preset name (default: no stages, 16-bit WAV).
    #[arg(short, long)]
    preset: Option<String>,
    /// Budget: at most this many bytes for the file.
    #[arg(long, conflicts_with_all = ["max_kbps", "total_bytes"])]
    max_bytes: Option<u64>,
    /// Budget: at most this many kbit/s (whole file over the sound's duration).
    #[arg(long, conflicts_with = "total_bytes")]
    max_kbps: Option<f64>,
    /// Every sound file in the folder and its sub-folders, sharing --total-bytes.
    #[arg(short, long, requires = "total_bytes")]
    recursive: bool,
    /// Budget for all the files of the folder together, in bytes.
    #[arg(long, requires = "recursive")]
    total_bytes: Option<u64>,
    /// The figure that ranks the candidates: a-weighted (default) or sqnr.
    #[arg(long, default_value = "a-weighted")]
    score: String,
    /// Print JSON instead of a table.
    #[arg(long)]
    json: bool,
    /// Write the size-quality plot (SVG) to this file.
    #[arg(long)]
    plot: Option<PathBuf>,
    /// Write the pick's preset to this file (for `stairstep render --preset`).
    #[arg(long)]
    save_preset: Option<PathBuf>,
    /// Replace existing --plot and --save-preset files.
    #[arg(long)]
    force: bool,
    /// Worker threads (default: all cores).
    #[arg(short, long)]
    jobs: Option<usize>,
}

#[derive(Serialize)]
struct Report<'a> {
    input: &'a Path,
    source_rate: u32,
    duration_s: f64,
    score: &'static str,
    limit: Limit,
    candidates: &'a [Candidate],
    pick: Option<&'a Candidate>,
    #[serde(skip_serializing_if = "Vec::is_empty")]
    skipped: Vec<Skipped>,
}

#[derive(Serialize)]
struct Skipped {
    id: String,
    reason: String,
}

#[derive(Serialize)]
struct FolderFile<'a> {
    input: &'a Path,
    pick: &'a Candidate,
    candidates: &'a [Candidate],
}

#[derive(Serialize)]
struct FolderReport<'a> {
    score: &'static str,
    total_bytes_budget: u64,
    total_bytes: u64,
    total_score: f64,
    upper_bound: f64,
    method: budget::Method,
    method_note: &'static str,
    files: Vec<FolderFile<'a>>,
}

fn method_note(m: budget::Method) -> &'static str {
    match m {
        budget::Method::Exact => {
            "exact: partial sums over the files, pruned to those no other beats on both bytes and score; the best \
             summed score of all combinations within the total"
        }
        budget::Method::Greedy => {
            "greedy on score gained per extra byte along each file's convex hull, then single moves that fit (too many \
             partial sums for the exact search); the best summed score lies between total_score and upper_bound"
        }
    }
}

fn parse_score(s: &str) -> Result<Score, Failure> {
    match s {
        "a-weighted" | "a_weighted_snr_db" => Ok(Score::AWeighted),
        "sqnr" | "sqnr_db" => Ok(Score::Sqnr),
        _ => Err(Failure::new(EXIT_USAGE, format!("--score {s:?}: allowed: a-weighted, sqnr"))),
    }
}

/// Reads a sound (WAV, FLAC, AIFF, Ogg, MP3, CAF: what `render` reads) and the loop `render` would use from it.
fn load(path: &Path) -> Result<(stairstep::Clip, Option<(u64, u64)>), Failure> {
    let input = super::render_file::read_input(path)
        .map_err(|f| Failure::new(f.code, format!("{}: {}", path.display(), f.message)))?;
    Ok((input.clip, input.file_loop))
}

/// What one file's measurement gives: its source rate and duration, its candidates (in the order of
/// [`Budget::candidates`], Pareto marked) and those the sound cannot use.
struct Measured {
    source_rate: u32,
    duration_s: f64,
    candidates: Vec<Candidate>,
    skipped: Vec<Skipped>,
}

/// Every candidate of one file, measured in parallel.
fn measure(path: &Path, preset: &Preset, score: Score) -> Result<Measured, Failure> {
    let (clip, file_loop) = load(path)?;
    let b = Budget::new(preset, &clip, file_loop)
        .map_err(|e| Failure::new(EXIT_INPUT, format!("{}: {e}", path.display())))?;
    let specs = b.candidates().map_err(|e| Failure::new(EXIT_USAGE, format!("{}: {e}", path.display())))?;
    let results: Vec<_> = specs.par_iter().map(|s| b.measure(s)).collect();
    let mut candidates = Vec::new();
    let mut skipped = Vec::new();
    for (spec, r) in specs.iter().zip(results) {
        match r {
            Ok(c) => candidates.push(c),
            Err(e) => skipped.push(Skipped { id: spec.id.clone(), reason: e.to_string() }),
        }
    }
    budget::mark_pareto(&mut candidates, score);
    Ok(Measured { source_rate: b.source_rate(), duration_s: b.duration_s(), candidates, skipped })
}

fn fmt_bytes(b: u64) -> String {
    let s = b.to_string();
    let mut out = String::new();
    for (i, ch) in s.chars().enumerate() {
        if i > 0 && (s.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(ch);
    }
    out
}

fn print_table(candidates: &[Candidate], pick: Option<usize>, score: Score) {
    let mut order: Vec<usize> = (0..candidates.len()).collect();
    order.sort_by(|&a, &b| candidates[a].bytes.cmp(&candidates[b].bytes).then(a.cmp(&b)));
    println!(
        "{:>6} {:<6} {:<14} {:>9} {:>8} {:>7} {:>7} {:>8} {:>7}  notes",
        "rate", "mode", "export", "bytes", "kbit/s", "SQNR", "A-wt", "band", "clipped"
    );
    for i in order {
        let c = &candidates[i];
        let mut notes = Vec::new();
        if Some(i) == pick {
            notes.push("<- pick");
        }
        if c.pareto {
            notes.push("pareto");
        }
        if c.current {
            notes.push("current");
        }
        let mode = match c.rate_mode {
            None => "source",
            Some(stairstep::stages::rate::RateMode::Hold) => "hold",
            Some(_) => "clean",
        };
        println!(
            "{:>6} {:<6} {:<14} {:>9} {:>8.1} {:>7.1} {:>7.1} {:>8} {:>7}  {}",
            c.rate_hz,
            mode,
            c.export_label,
            fmt_bytes(c.bytes),
            c.kbps,
            c.sqnr_db,
            c.a_weighted_snr_db,
            format!("{:.0}", c.bandwidth_hz),
            c.clipped,
            notes.join(", ")
        );
    }
    println!("(dB; ranked by {}; pareto: nothing smaller scores as high)", score.field());
}

/// A scatter of score against bytes (log scale), the Pareto front as a line, the pick and the current export marked,
/// the byte limit as a dashed line. Plain SVG, no script, no external reference.
fn svg_plot(candidates: &[Candidate], pick: Option<usize>, score: Score, limit: Limit, title: &str) -> String {
    let (w, h, ml, mr, mt, mb) = (720.0, 420.0, 70.0, 20.0, 40.0, 50.0);
    let pw = w - ml - mr;
    let ph = h - mt - mb;
    let lb: Vec<f64> = candidates.iter().map(|c| (c.bytes.max(1) as f64).log10()).collect();
    // An exact copy scores +240 dB: draw it just above the others instead of squashing them.
    const EXACT: f64 = 200.0;
    let inexact = candidates.iter().map(|c| score.of(c)).filter(|&v| v < EXACT).fold(f64::MIN, f64::max);
    let top = if inexact == f64::MIN { 0.0 } else { (inexact / 10.0).ceil() * 10.0 + 10.0 };
    let sc: Vec<f64> = candidates.iter().map(|c| if score.of(c) >= EXACT { top } else { score.of(c) }).collect();
    let (mut x0, mut x1) = lb.iter().fold((f64::MAX, f64::MIN), |(a, b), &v| (a.min(v), b.max(v)));
    let (mut y0, mut y1) = sc.iter().fold((f64::MAX, f64::MIN), |(a, b), &v| (a.min(v), b.max(v)));
    if let Limit::MaxBytes(b) = limit {
        let l = (b.max(1) as f64).log10();
        x0 = x0.min(l);
        x1 = x1.max(l);
    }
    x0 = (x0 * 10.0).floor() / 10.0;
    x1 = (x1 * 10.0).ceil() / 10.0 + 0.05;
    y0 = (y0 / 10.0).floor() * 10.0;
    y1 = (y1 / 10.0).ceil() * 10.0;
    if x1 <= x0 {
        x1 = x0 + 1.0;
    }
    if y1 <= y0 {
        y1 = y0 + 10.0;
    }
    let px = |v: f64| ml + (v - x0) / (x1 - x0) * pw;
    let py = |v: f64| mt + (1.0 - (v - y0) / (y1 - y0)) * ph;
    let esc = |s: &str| s.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;");
    let mut s = format!(
        "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" height=\"{h}\" viewBox=\"0 0 {w} {h}\" \
         font-family=\"sans-serif\" font-size=\"12\">\n<rect width=\"{w}\" height=\"{h}\" fill=\"white\"/>\n\
         <text x=\"{ml}\" y=\"22\" font-size=\"14\">{}</text>\n",
        esc(title)
    );
    // Axes and ticks: decades and 1-2-5 steps of bytes; every 10 dB.
    s += &format!("<rect x=\"{ml}\" y=\"{mt}\" width=\"{pw}\" height=\"{ph}\" fill=\"none\" stroke=\"#444\"/>\n");
    let mut decade = 10f64.powf(x0.floor());
    while decade.log10() <= x1 {
        for m in [1.0, 2.0, 5.0] {
            let v = (decade * m).log10();
            if v >= x0 && v <= x1 {
                let x = px(v);
                s += &format!(
                    "<line x1=\"{x:.1}\" y1=\"{mt}\" x2=\"{x:.1}\" y2=\"{}\" stroke=\"#ddd\"/>\n\
                     <text x=\"{x:.1}\" y=\"{}\" text-anchor=\"middle\">{}</text>\n",
                    mt + ph,
                    mt + ph + 16.0,
                    fmt_bytes((decade * m).round() as u64)
                );
            }
        }
        decade *= 10.0;
    }
    let mut v = y0;
    while v <= y1 + 1e-9 {
        let y = py(v);
        s += &format!(
            "<line x1=\"{ml}\" y1=\"{y:.1}\" x2=\"{}\" y2=\"{y:.1}\" stroke=\"#ddd\"/>\n\
             <text x=\"{}\" y=\"{:.1}\" text-anchor=\"end\">{v:.0}</text>\n",
            ml + pw,
            ml - 6.0,
            y + 4.0
        );
        v += 10.0;
    }
    s += &format!(
        "<text x=\"{}\" y=\"{}\" text-anchor=\"middle\">file size, bytes (log scale)</text>\n\
         <text transform=\"translate(16 {}) rotate(-90)\" text-anchor=\"middle\">{} (dB)</text>\n",
        ml + pw / 2.0,
        h - 10.0,
        mt + ph / 2.0,
        score.field()
    );
    if let Limit::MaxBytes(b) = limit {
        let x = px((b.max(1) as f64).log10());
        s += &format!(
            "<line x1=\"{x:.1}\" y1=\"{mt}\" x2=\"{x:.1}\" y2=\"{}\" stroke=\"#c00\" stroke-dasharray=\"5 4\"/>\n\
             <text x=\"{:.1}\" y=\"{}\" fill=\"#c00\">budget {} bytes</text>\n",
            mt + ph,
            x + 4.0,
            mt + 14.0,
            fmt_bytes(b)
        );
    }
    let mut front: Vec<usize> = (0..candidates.len()).filter(|&i| candidates[i].pareto).collect();
    front.sort_by_key(|&i| candidates[i].bytes);
    let pts: Vec<String> = front.iter().map(|&i| format!("{:.1},{:.1}", px(lb[i]), py(sc[i]))).collect();
    s += &format!("<polyline points=\"{}\" fill=\"none\" stroke=\"#1a6\" stroke-width=\"1.5\"/>\n", pts.join(" "));
    for (i, c) in candidates.iter().enumerate() {
        let (x, y) = (px(lb[i]), py(sc[i]));
        let fill = if c.pareto { "#1a6" } else { "#999" };
        s += &format!(
            "<circle cx=\"{x:.1}\" cy=\"{y:.1}\" r=\"3.5\" fill=\"{fill}\"><title>{} Hz {}: {} bytes, {:.1} dB</title></circle>\n",
            c.rate_hz,
            esc(&c.export_label),
            c.bytes,
            score.of(c)
        );
        if c.current {
            s += &format!(
                "<rect x=\"{:.1}\" y=\"{:.1}\" width=\"11\" height=\"11\" fill=\"none\" stroke=\"#06c\" stroke-width=\"1.5\"/>\n",
                x - 5.5,
                y - 5.5
            );
        }
        if c.pareto {
            s += &format!(
                "<text x=\"{:.1}\" y=\"{:.1}\" font-size=\"10\" fill=\"#155\" text-anchor=\"{}\">{} {}{}</text>\n",
                // Labels in the right quarter go to the left of their point, so they stay inside the plot.
                if x > ml + 0.75 * pw { x - 6.0 } else { x + 6.0 },
                y - 5.0,
                if x > ml + 0.75 * pw { "end" } else { "start" },
                c.rate_hz,
                esc(&c.export_label),
                if score.of(c) >= EXACT { " (exact copy)" } else { "" }
            );
        }
    }
    if let Some(i) = pick {
        s += &format!(
            "<circle cx=\"{:.1}\" cy=\"{:.1}\" r=\"8\" fill=\"none\" stroke=\"#c00\" stroke-width=\"2\"/>\n",
            px(lb[i]),
            py(sc[i])
        );
    }
    s += &format!(
        "<text x=\"{}\" y=\"{}\" font-size=\"11\" text-anchor=\"end\">green: Pareto front · red ring: pick · blue \
         square: current export</text>\n</svg>\n",
        ml + pw - 4.0,
        mt + ph - 6.0
    );
    s
}

fn single(args: &Args, preset: &Preset, score: Score) -> Result<(), Failure> {
    let limit = match (args.max_bytes, args.max_kbps) {
        (Some(b), _) => Limit::MaxBytes(b),
        (None, Some(r)) if r.is_finite() && r > 0.0 => Limit::MaxKbps(r),
        (None, Some(r)) => return Err(Failure::new(EXIT_USAGE, format!("--max-kbps {r}: allowed: a positive number"))),
        (None, None) => Limit::None,
    };
    let Measured { source_rate, duration_s, candidates, skipped } = measure(&args.input, preset, score)?;
    let pick = budget::pick(&candidates, score, limit);
    if let Some(path) = &args.plot {
        let title = format!("{}: {} candidates", args.input.display(), candidates.len());
        write_atomic(path, svg_plot(&candidates, pick, score, limit, &title).as_bytes(), args.force)?;
    }
    if let (Some(path), Some(i)) = (&args.save_preset, pick) {
        write_atomic(path, (candidates[i].preset.to_json() + "\n").as_bytes(), args.force)?;
    }
    if args.json {
        let report = Report {
            input: &args.input,
            source_rate,
            duration_s,
            score: score.field(),
            limit,
            candidates: &candidates,
            pick: pick.map(|i| &candidates[i]),
            skipped,
        };
        println!("{}", serde_json::to_string_pretty(&report).unwrap_or_default());
    } else {
        println!("{}: {source_rate} Hz, {duration_s:.3} s", args.input.display());
        print_table(&candidates, pick, score);
        for s in &skipped {
            println!("skipped {}: {}", s.id, s.reason);
        }
        if let Some(i) = pick {
            let c = &candidates[i];
            println!(
                "pick: {} Hz {}, {} bytes, {} {:.1} dB{}",
                c.rate_hz,
                c.export_label,
                fmt_bytes(c.bytes),
                score.field(),
                score.of(c),
                args.save_preset.as_ref().map(|p| format!(" (preset written to {})", p.display())).unwrap_or_default()
            );
        }
    }
    if pick.is_none() {
        let smallest = candidates.iter().map(|c| c.bytes).min().unwrap_or(0);
        return Err(Failure::new(
            EXIT_USAGE,
            format!("nothing fits the budget; the smallest candidate is {} bytes", fmt_bytes(smallest)),
        ));
    }
    Ok(())
}

fn folder(args: &Args, preset: &Preset, score: Score, total: u64) -> Result<(), Failure> {
    if !args.input.is_dir() {
        return Err(Failure::new(EXIT_USAGE, format!("{}: --recursive wants a folder", args.input.display())));
    }
    let mut found = Vec::new();
    super::plan::collect(&args.input, &args.input, true, &mut found)?;
    let files: Vec<PathBuf> = found.into_iter().map(|(path, _)| path).collect();
    if files.is_empty() {
        return Err(Failure::new(EXIT_INPUT, format!("{}: no sound files", args.input.display())));
    }
    let measured: Vec<(Vec<Candidate>, Vec<Skipped>)> =
        files.iter().map(|f| measure(f, preset, score).map(|m| (m.candidates, m.skipped))).collect::<Result<_, _>>()?;
    let options: Vec<budget::Options> =
        measured.iter().map(|(c, _)| c.iter().map(|c| (c.bytes, score.rank(c))).collect()).collect();
    let Allocation { method, choice, total_bytes, total_score, upper_bound } =
        budget::allocate(&options, total).map_err(|e| Failure::new(EXIT_USAGE, format!("--total-bytes: {e}")))?;
    if args.json {
        let report = FolderReport {
            score: score.field(),
            total_bytes_budget: total,
            total_bytes,
            total_score,
            upper_bound,
            method,
            method_note: method_note(method),
            files: files
                .iter()
                .zip(&measured)
                .zip(&choice)
                .map(|((f, (c, _)), &j)| FolderFile { input: f, pick: &c[j], candidates: c })
                .collect(),
        };
        println!("{}", serde_json::to_string_pretty(&report).unwrap_or_default());
    } else {
        println!("{:<40} {:>6} {:<14} {:>9} {:>7}", "file", "rate", "export", "bytes", "score");
        for ((f, (c, _)), &j) in files.iter().zip(&measured).zip(&choice) {
            let p = &c[j];
            println!(
                "{:<40} {:>6} {:<14} {:>9} {:>7.1}",
                f.display(),
                p.rate_hz,
                p.export_label,
                fmt_bytes(p.bytes),
                score.rank(p)
            );
        }
        println!(
            "total {} of {} bytes; summed {} (each capped at 100 dB) {:.1} dB ({})",
            fmt_bytes(total_bytes),
            fmt_bytes(total),
            score.field(),
            total_score,
            match method {
                budget::Method::Exact => "the best of all combinations".to_string(),
                budget::Method::Greedy => format!("greedy; no combination can exceed {upper_bound:.1}"),
            }
        );
    }
    Ok(())
}

pub fn run(args: Args) -> Result<(), Failure> {
    let score = parse_score(&args.score)?;
    // Refuse before measuring, not after.
    for path in args.plot.iter().chain(&args.save_preset) {
        if !args.force && path.exists() {
            return Err(Failure::new(EXIT_OUTPUT, format!("{}: exists (use --force to replace it)", path.display())));
        }
    }
    let preset = match &args.preset {
        Some(p) => load_preset(p)?,
        None => Preset { name: String::new(), ..Preset::default() },
    };
    let go = || match args.total_bytes {
        Some(total) if args.recursive => folder(&args, &preset, score, total),
        _ => single(&args, &preset, score),
    };
    match args.jobs {
        Some(n) => rayon::ThreadPoolBuilder::new()
            .num_threads(n.max(1))
            .build()
            .map_err(|e| Failure::new(EXIT_USAGE, format!("--jobs: {e}")))?
            .install(go),
        None => go(),
    }
}
