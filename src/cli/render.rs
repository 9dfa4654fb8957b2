//! `stairstep render`: one file, many files or whole folders through one preset.
//!
//! Each file is independent, so a batch runs on all cores (rayon) and gives byte-identical outputs to a
//! single-threaded run (`--jobs 1`). Failures do not stop the batch; they are listed at the end and make the exit
//! code non-zero.

use super::{load_preset, read_file, write_atomic, Failure, EXIT_INPUT, EXIT_OUTPUT, EXIT_USAGE};
use indicatif::{ProgressBar, ProgressStyle};
use rayon::prelude::*;
use serde::Serialize;
use stairstep::io::ExportFormat;
use stairstep::{chain, io, Preset};
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

fn render_one(job: &Job, preset: &Preset, export: &ExportFormat, force: bool) -> Outcome {
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
        code: 0,
    };
    let result = (|| -> Result<(), Failure> {
        if !force && job.output.exists() {
            return Err(Failure::new(EXIT_OUTPUT, "output exists (use --force to replace it)"));
        }
        let (clip, meta) =
            io::wav::read_with_meta(&read_file(&job.input)?).map_err(|e| Failure::new(EXIT_INPUT, e.to_string()))?;
        // A loop in the file's own `smpl` chunk is kept when the preset sets none; damaged metadata is a warning.
        o.warnings = meta.warnings.clone();
        let file_loop = meta.loops.first().map(|l| (l.start as u64, l.end as u64 + 1));
        let r =
            chain::render_with_loop(preset, &clip, file_loop).map_err(|e| Failure::new(EXIT_INPUT, e.to_string()))?;
        let bytes = r.encode(export).map_err(|e| Failure::new(EXIT_OUTPUT, e.to_string()))?;
        if let Some(parent) = job.output.parent() {
            std::fs::create_dir_all(parent)
                .map_err(|e| Failure::new(EXIT_OUTPUT, format!("{}: {e}", parent.display())))?;
        }
        write_atomic(&job.output, &bytes, force)?;
        o.duration_s = Some(clip.duration_s());
        o.peak_dbfs = Some(r.report.output.peak_dbfs);
        o.clipped = Some(r.report.clipped);
        o.sqnr_db = Some(r.report.sqnr_db);
        o.bytes = Some(bytes.len() as u64);
        o.loop_frames = r.export_meta.loops.first().map(|l| (l.start, l.end));
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
    let print_lock = Mutex::new(());
    let work = |job: &Job| {
        let o = render_one(job, &preset, &export, args.force);
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
    if let Some(b) = bar {
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
