//! `stairstep render`: one file, many files or whole folders through one preset.
//!
//! Each file is independent, so a batch runs on all cores (rayon) and gives byte-identical outputs to a
//! single-threaded run (`--jobs 1`). Failures do not stop the batch; they are listed at the end and make the exit
//! code non-zero.

use super::{load_preset, read_file, write_atomic, write_atomic_with, Failure, EXIT_INPUT, EXIT_OUTPUT, EXIT_USAGE};
use indicatif::{ProgressBar, ProgressStyle};
use rayon::prelude::*;
use serde::Serialize;
use stairstep::chain::StageReport;
use stairstep::io::ExportFormat;
use stairstep::{io, render, Preset};
use std::collections::HashMap;
use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::sync::Mutex;

pub const HELP: &str = "\
Output names: with --out-dir, each output is named by --name, a template with the placeholders {stem} (input file
name without extension), {preset} (preset name), {ext} (the export format's extension) and {dir} (the input's folder
relative to the folder given on the command line, for --recursive). Default: {dir}/{stem}.{ext}.

Nothing is overwritten without --force, an input is never overwritten, and every output is written to a temporary
file first and renamed when complete.

Examples:
  stairstep render --preset crush.json in.wav -o out.wav
  stairstep render --preset handheld sfx/*.wav --out-dir build/sfx
  stairstep render --preset crush.json --recursive assets/ --out-dir out/ --name '{dir}/{stem}-{preset}.{ext}' --json";

#[derive(clap::Args)]
pub struct Args {
    /// Preset JSON file, or the name of a built-in preset (see `stairstep presets`).
    #[arg(short, long)]
    preset: String,
    /// Input WAV files or folders.
    #[arg(required = true)]
    inputs: Vec<PathBuf>,
    /// Output file (one input only).
    #[arg(short, long, conflicts_with = "out_dir")]
    output: Option<PathBuf>,
    /// Output folder (created if missing).
    #[arg(long)]
    out_dir: Option<PathBuf>,
    /// Output name template (with --out-dir).
    #[arg(long, default_value = "{dir}/{stem}.{ext}")]
    name: String,
    /// Look for WAV files in sub-folders too.
    #[arg(short, long)]
    recursive: bool,
    /// Export format instead of the preset's, as JSON, e.g. '{"type":"wav","encoding":"pcm-u8"}'.
    #[arg(long)]
    format: Option<String>,
    /// Replace existing outputs.
    #[arg(long)]
    force: bool,
    /// Print nothing but errors.
    #[arg(short, long)]
    quiet: bool,
    /// Print a JSON summary (one object per file) on standard output.
    #[arg(long)]
    json: bool,
    /// Worker threads (default: all cores).
    #[arg(short, long)]
    jobs: Option<usize>,
}

/// One file's outcome, as printed by `--json`.
#[derive(Serialize)]
struct Outcome {
    input: PathBuf,
    output: PathBuf,
    ok: bool,
    #[serde(skip_serializing_if = "Option::is_none")]
    error: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    duration_s: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    peak_dbfs: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    clipped: Option<u64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    sqnr_db: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    bytes: Option<u64>,
    /// What the reader noticed but could read past (e.g. a malformed `smpl` chunk, ignored).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    warnings: Vec<String>,
    /// Loop points written, at the export rate (inclusive end, as in `smpl`).
    #[serde(skip_serializing_if = "Option::is_none")]
    loop_frames: Option<(u32, u32)>,
    /// What each stage did on its own (the render report's `stages`: kind, SQNR, clipped samples, codes used).
    #[serde(skip_serializing_if = "Option::is_none")]
    stages: Option<Vec<StageReport>>,
    /// Exit code this failure maps to (0 when ok).
    #[serde(skip)]
    code: u8,
}

/// One input and where its output goes.
struct Job {
    input: PathBuf,
    output: PathBuf,
}

fn is_wav(p: &Path) -> bool {
    p.extension().is_some_and(|e| e.eq_ignore_ascii_case("wav") || e.eq_ignore_ascii_case("wave"))
}

fn collect(dir: &Path, base: &Path, recursive: bool, out: &mut Vec<(PathBuf, PathBuf)>) -> Result<(), Failure> {
    let mut entries: Vec<PathBuf> = std::fs::read_dir(dir)
        .map_err(|e| Failure::new(EXIT_INPUT, format!("{}: {e}", dir.display())))?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .collect();
    entries.sort();
    for p in entries {
        if p.is_dir() {
            if recursive {
                collect(&p, base, recursive, out)?;
            }
        } else if is_wav(&p) {
            let rel = p.parent().and_then(|d| d.strip_prefix(base).ok()).unwrap_or(Path::new("")).to_path_buf();
            out.push((p, rel));
        }
    }
    Ok(())
}

fn expand(template: &str, stem: &str, preset: &str, ext: &str, dir: &Path) -> PathBuf {
    let dir = dir.to_string_lossy();
    let s = template.replace("{stem}", stem).replace("{preset}", preset).replace("{ext}", ext).replace("{dir}", &dir);
    // An empty {dir} leaves a leading slash: keep outputs inside --out-dir.
    PathBuf::from(s.trim_start_matches('/'))
}

fn plan(args: &Args, preset: &Preset, export: &ExportFormat) -> Result<Vec<Job>, Failure> {
    let mut found = Vec::new();
    for input in &args.inputs {
        if input.is_dir() {
            collect(input, input, args.recursive, &mut found)?;
        } else {
            found.push((input.clone(), PathBuf::new()));
        }
    }
    if found.is_empty() {
        return Err(Failure::new(EXIT_INPUT, "no WAV files found in the inputs given"));
    }
    let jobs: Vec<Job> = match (&args.output, &args.out_dir) {
        (Some(out), None) => {
            if found.len() != 1 {
                return Err(Failure::new(
                    EXIT_USAGE,
                    format!("-o takes one input, got {}: use --out-dir", found.len()),
                ));
            }
            let (input, _) = found.pop().expect("one input");
            vec![Job { input, output: out.clone() }]
        }
        (None, Some(dir)) => found
            .into_iter()
            .map(|(input, rel_dir)| {
                let stem = input.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_default();
                let name = expand(&args.name, &stem, &slug(&preset.name), export.extension(), &rel_dir);
                Job { output: dir.join(name), input }
            })
            .collect(),
        _ => return Err(Failure::new(EXIT_USAGE, "give either -o FILE (one input) or --out-dir DIR")),
    };
    // Two inputs must not land on one output, and no output may be an input.
    let inputs: Vec<PathBuf> = jobs.iter().filter_map(|j| j.input.canonicalize().ok()).collect();
    let mut seen: HashMap<PathBuf, &Path> = HashMap::new();
    for j in &jobs {
        if let Some(first) = seen.insert(j.output.clone(), &j.input) {
            return Err(Failure::new(
                EXIT_USAGE,
                format!(
                    "{} and {} would both be written to {}: change --name",
                    first.display(),
                    j.input.display(),
                    j.output.display()
                ),
            ));
        }
        if j.output.canonicalize().is_ok_and(|o| inputs.contains(&o)) {
            return Err(Failure::new(EXIT_OUTPUT, format!("{}: refusing to overwrite an input", j.output.display())));
        }
    }
    Ok(jobs)
}

fn slug(s: &str) -> String {
    let s: String = s.chars().map(|c| if c.is_ascii_alphanumeric() { c.to_ascii_lowercase() } else { '-' }).collect();
    let s = s.split('-').filter(|p| !p.is_empty()).collect::<Vec<_>>().join("-");
    if s.is_empty() {
        "custom".into()
    } else {
        s
    }
}

/// What a render measured, for the report.
struct Measured {
    duration_s: f64,
    peak_dbfs: f64,
    clipped: u64,
    sqnr_db: f64,
    bytes: u64,
    loop_frames: Option<(u32, u32)>,
    stages: Vec<StageReport>,
}

/// Renders in blocks, from file to file, when nothing needs the whole sound at once: a byte-aligned WAV input
/// without loops, a preset without asset preparation (trim, normalisation, loops need the whole sound), a
/// byte-aligned WAV export. Memory stays at a few blocks whatever the length. `Ok(None)`: use the in-memory path.
fn render_streaming(
    job: &Job,
    preset: &Preset,
    export: &ExportFormat,
    force: bool,
    progress: Option<&ProgressBar>,
) -> Result<Option<Measured>, Failure> {
    use stairstep::chain::{Chain, ChainOutput};
    use stairstep::io::wav::stream::{StreamReader, StreamWriter};
    use stairstep::stages::BLOCK;
    let ExportFormat::Wav { encoding, block_align: None } = export else { return Ok(None) };
    if !preset.prep.is_noop() || !StreamWriter::<std::fs::File>::supports(*encoding) {
        return Ok(None);
    }
    let input_err = |e: std::io::Error| Failure::new(EXIT_INPUT, format!("{}: {e}", job.input.display()));
    let file = std::fs::File::open(&job.input).map_err(input_err)?;
    let reader = StreamReader::open(std::io::BufReader::with_capacity(1 << 20, file))
        .map_err(|e| Failure::new(EXIT_INPUT, e.to_string()))?;
    let Some(mut reader) = reader else { return Ok(None) };
    let f = reader.format().clone();
    let (ch, rate, frames) = (f.channels as usize, f.sample_rate, reader.frames());
    let mut chain = Chain::new(preset, ch, rate, frames).map_err(|e| Failure::new(EXIT_INPUT, e.to_string()))?;
    if let Some(p) = progress {
        p.set_length(frames as u64);
    }
    let mut out = ChainOutput::new(ch);
    let mut report = None;
    let mut bytes = 0u64;
    let mut stage_error = None;
    write_atomic_with(&job.output, force, |file| {
        let io_err = |e: stairstep::Error| std::io::Error::other(e.to_string());
        let sink = std::io::BufWriter::with_capacity(1 << 20, &mut *file);
        let mut w =
            StreamWriter::new(sink, *encoding, chain.export_rate(), ch, chain.export_frames(), Default::default())
                .map_err(io_err)?;
        loop {
            let block = match reader.read_block(BLOCK) {
                Ok(b) => b,
                Err(e) => {
                    stage_error = Some(Failure::new(EXIT_INPUT, format!("{}: {e}", job.input.display())));
                    return Err(std::io::Error::other("input failed"));
                }
            };
            if block[0].is_empty() {
                break;
            }
            chain.process_block(&block, &mut out);
            w.write_block(&out.export).map_err(io_err)?;
            out.clear();
            if let Some(p) = progress {
                p.inc(block[0].len() as u64);
            }
        }
        report = Some(chain.finish(&mut out));
        w.write_block(&out.export).map_err(io_err)?;
        w.finish().map_err(io_err)?;
        bytes = file.metadata()?.len();
        Ok(())
    })
    .map_err(|e| stage_error.take().unwrap_or(e))?;
    let r = report.expect("finished");
    Ok(Some(Measured {
        duration_s: frames as f64 / rate as f64,
        peak_dbfs: r.output.peak_dbfs,
        clipped: r.clipped,
        sqnr_db: r.sqnr_db,
        bytes,
        loop_frames: None,
        stages: r.stages,
    }))
}

/// Renders with the whole sound in memory (everything the streaming path does not cover).
fn render_in_memory(
    job: &Job,
    preset: &Preset,
    export: &ExportFormat,
    force: bool,
) -> Result<(Measured, Vec<String>), Failure> {
    let (clip, meta) =
        io::wav::read_with_meta(&read_file(&job.input)?).map_err(|e| Failure::new(EXIT_INPUT, e.to_string()))?;
    // A loop in the file's own `smpl` chunk is kept when the preset sets none; damaged metadata is a warning.
    let file_loop = meta.loops.first().map(|l| (l.start as u64, l.end as u64 + 1));
    let r = render::render_with_loop(preset, &clip, file_loop).map_err(|e| Failure::new(EXIT_INPUT, e.to_string()))?;
    let bytes = r.encode(export).map_err(|e| Failure::new(EXIT_OUTPUT, e.to_string()))?;
    write_atomic(&job.output, &bytes, force)?;
    let m = Measured {
        duration_s: clip.duration_s(),
        peak_dbfs: r.report.output.peak_dbfs,
        clipped: r.report.clipped,
        sqnr_db: r.report.sqnr_db,
        bytes: bytes.len() as u64,
        loop_frames: r.export_meta.loops.first().map(|l| (l.start, l.end)),
        stages: r.report.stages.clone(),
    };
    Ok((m, meta.warnings))
}

fn render_one(
    job: &Job,
    preset: &Preset,
    export: &ExportFormat,
    force: bool,
    progress: Option<&ProgressBar>,
) -> Outcome {
    let mut o = Outcome {
        input: job.input.clone(),
        output: job.output.clone(),
        ok: false,
        error: None,
        duration_s: None,
        peak_dbfs: None,
        clipped: None,
        sqnr_db: None,
        bytes: None,
        warnings: Vec::new(),
        loop_frames: None,
        stages: None,
        code: 0,
    };
    let result = (|| -> Result<(), Failure> {
        if !force && job.output.exists() {
            return Err(Failure::new(EXIT_OUTPUT, "output exists (use --force to replace it)"));
        }
        if let Some(parent) = job.output.parent() {
            std::fs::create_dir_all(parent)
                .map_err(|e| Failure::new(EXIT_OUTPUT, format!("{}: {e}", parent.display())))?;
        }
        let m = match render_streaming(job, preset, export, force, progress)? {
            Some(m) => m,
            None => {
                let (m, warnings) = render_in_memory(job, preset, export, force)?;
                o.warnings = warnings;
                m
            }
        };
        o.duration_s = Some(m.duration_s);
        o.peak_dbfs = Some(m.peak_dbfs);
        o.clipped = Some(m.clipped);
        o.sqnr_db = Some(m.sqnr_db);
        o.bytes = Some(m.bytes);
        o.loop_frames = m.loop_frames;
        o.stages = Some(m.stages);
        Ok(())
    })();
    match result {
        Ok(()) => o.ok = true,
        Err(f) => {
            o.error = Some(f.message);
            o.code = f.code;
        }
    }
    o
}

pub fn run(args: Args) -> Result<(), Failure> {
    let mut preset = load_preset(&args.preset)?;
    if let Some(f) = &args.format {
        preset.export = serde_json::from_str(f).map_err(|e| Failure::new(EXIT_USAGE, format!("--format: {e}")))?;
        preset.validate().map_err(|e| Failure::new(EXIT_USAGE, format!("--format: {e}")))?;
    }
    let export = preset.export.clone();
    let jobs = plan(&args, &preset, &export)?;
    let interactive = std::io::stderr().is_terminal() && !args.quiet;
    let bar = if interactive && jobs.len() > 1 {
        let b = ProgressBar::new(jobs.len() as u64);
        b.set_style(
            ProgressStyle::with_template("{bar:40} {pos}/{len} files  {elapsed_precise}  {msg}")
                .unwrap_or_else(|_| ProgressStyle::default_bar()),
        );
        Some(b)
    } else {
        None
    };
    // One file: a bar by frames (streamed renders advance it; an in-memory render finishes at once).
    let frame_bar = (interactive && jobs.len() == 1).then(|| {
        let b = ProgressBar::new(0);
        b.set_style(
            ProgressStyle::with_template("{bar:40} {percent:>3}%  {elapsed_precise} / {eta_precise} left")
                .unwrap_or_else(|_| ProgressStyle::default_bar()),
        );
        b
    });
    let print_lock = Mutex::new(());
    let work = |job: &Job| {
        let o = render_one(job, &preset, &export, args.force, frame_bar.as_ref());
        if let Some(b) = &bar {
            b.set_message(job.input.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default());
            b.inc(1);
        } else if !args.quiet && !args.json {
            let _g = print_lock.lock();
            match &o.error {
                None => {
                    eprintln!("ok   {} -> {} ({} bytes)", o.input.display(), o.output.display(), o.bytes.unwrap_or(0))
                }
                Some(e) => eprintln!("FAIL {}: {e}", o.input.display()),
            }
        }
        o
    };
    let outcomes: Vec<Outcome> = match args.jobs {
        Some(n) => rayon::ThreadPoolBuilder::new()
            .num_threads(n.max(1))
            .build()
            .map_err(|e| Failure::new(EXIT_USAGE, format!("--jobs: {e}")))?
            .install(|| jobs.par_iter().map(work).collect()),
        None => jobs.par_iter().map(work).collect(),
    };
    for b in bar.iter().chain(frame_bar.iter()) {
        b.finish_and_clear();
    }
    if args.json {
        println!("{}", serde_json::to_string_pretty(&outcomes).unwrap_or_default());
    }
    let failed: Vec<&Outcome> = outcomes.iter().filter(|o| !o.ok).collect();
    if !args.quiet {
        eprintln!("{} rendered, {} failed", outcomes.len() - failed.len(), failed.len());
        for f in &failed {
            eprintln!("  {}: {}", f.input.display(), f.error.as_deref().unwrap_or("?"));
        }
    }
    if failed.is_empty() {
        Ok(())
    } else if outcomes.len() == 1 {
        Err(Failure::new(
            failed[0].code,
            format!("{}: {}", failed[0].input.display(), failed[0].error.as_deref().unwrap_or("")),
        ))
    } else {
        Err(Failure::new(EXIT_INPUT, format!("{} of {} files failed", failed.len(), outcomes.len())))
    }
}
