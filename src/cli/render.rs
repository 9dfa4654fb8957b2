//! `stairstep render`: one file, many files or whole folders through one preset.
//!
//! Each file is independent, so a batch runs on all cores (rayon) and gives byte-identical outputs to a
//! single-threaded run (`--jobs 1`). Failures do not stop the batch; each is named with its reason as it happens and
//! makes the exit code non-zero. With `--out-dir`, a manifest in that folder (see [`super::manifest`]) lets a re-run
//! skip what is up to date and re-render what is stale; `--shard K/N` takes a fixed 1/N of the batch.

use super::manifest::{self, Entry, Known};
use super::plan::{parse_shard, plan, Job};
use super::render_file::{render_in_memory, render_streaming, WriteRules};
use super::{load_preset, Failure, EXISTS, EXIT_INPUT, EXIT_OUTPUT, EXIT_USAGE};
use indicatif::{ProgressBar, ProgressStyle};
use rayon::prelude::*;
use serde::Serialize;
use stairstep::chain::StageReport;
use stairstep::io::ExportFormat;
use stairstep::{io, Preset};
use std::io::IsTerminal;
use std::path::PathBuf;
use std::sync::mpsc::Sender;

pub const HELP: &str = "\
Output names: with --out-dir, each output is named by --name, a template with the placeholders {stem} (input file
name without extension), {input_ext} (the input's own extension, lower case: it tells drum.aiff and drum.mp3 apart),
{preset} (preset name), {ext} (the export format's extension) and {dir} (the input's folder relative to the folder
given on the command line, for --recursive). Default: {dir}/{stem}.{ext}. A C-array export's
array name may hold {stem} too (e.g. \"name\":\"sfx_{stem}\"), made a valid C identifier, so that one build can
include every header.

Re-runs (with --out-dir): the folder keeps a manifest, .stairstep-manifest.json, of what stairstep wrote there and
from what (SHA-256 of the input, of the preset's normalised JSON, the export and the tool version, and of the output).
An output that is up to date is skipped (\"up to date\", the file untouched); one that stairstep wrote from another
input, preset, export or version is stale and rendered again; a file the manifest does not know (or that changed
since) is never replaced without --force. --dry-run lists what a run would do and writes nothing.

Sharding: --shard K/N renders the inputs whose output path (relative to --out-dir) hashes to K of N (SHA-256, first
8 bytes, mod N): N jobs with the same command line and K = 1..N split a batch with no coordinator, whatever order the
file system lists the files in; together they write exactly the files (and bytes) of one run.

Loops: a preset's prep.loop_region may place its points on each sound ({\"seconds\": s}, {\"seconds_from_end\": s},
{\"fraction\": f}, rounded half away from zero at the file's rate) or take the file's own loop (\"file\"); a sound the
loop does not fit, or without a loop of its own, fails alone (exit 3) with the field and the sound's length.

Warnings (a truncated file, damaged metadata, preparation notes, non-finite samples) are printed as \"warn\" lines and
listed under \"warnings\" in --json; --strict makes any warning a failure of that file (nothing written).

Nothing is overwritten without --force (or a stale manifest entry), an input is never overwritten, and every output is
written to a temporary file first and put in place only when complete; a new output is hard-linked into place, so a
file that appears meanwhile under the same name is never replaced.

Examples:
  stairstep render --preset crush.json in.wav -o out.wav
  stairstep render --preset handheld sfx/*.wav --out-dir build/sfx
  stairstep render --preset crush.json --recursive assets/ --out-dir out/ --name '{dir}/{stem}-{preset}.{ext}' --json
  stairstep render --preset crush.json --recursive assets/ --out-dir out/ --shard 2/4 --strict";

#[derive(clap::Args)]
pub struct Args {
    /// Preset JSON file, or the name of a built-in preset (see `stairstep presets`).
    #[arg(short, long)]
    pub(super) preset: String,
    /// Input WAV files or folders.
    #[arg(required = true)]
    pub(super) inputs: Vec<PathBuf>,
    /// Output file (one input only).
    #[arg(short, long, conflicts_with = "out_dir")]
    pub(super) output: Option<PathBuf>,
    /// Output folder (created if missing).
    #[arg(long)]
    pub(super) out_dir: Option<PathBuf>,
    /// Output name template (with --out-dir).
    #[arg(long, default_value = "{dir}/{stem}.{ext}")]
    pub(super) name: String,
    /// Look for WAV files in sub-folders too.
    #[arg(short, long)]
    pub(super) recursive: bool,
    /// Export format instead of the preset's, as JSON, e.g. '{"type":"wav","encoding":"pcm-u8"}'.
    #[arg(long)]
    pub(super) format: Option<String>,
    /// Replace existing outputs.
    #[arg(long)]
    pub(super) force: bool,
    /// Print nothing but failures and warnings.
    #[arg(short, long)]
    pub(super) quiet: bool,
    /// Print a JSON array (one object per file) on standard output.
    #[arg(long)]
    pub(super) json: bool,
    /// Make any warning about a file (e.g. truncated) a failure of that file: nothing is written for it.
    #[arg(long)]
    pub(super) strict: bool,
    /// List what would be rendered, replaced, skipped (up to date) or refused, and write nothing.
    #[arg(long)]
    pub(super) dry_run: bool,
    /// Render only shard K of N (1 <= K <= N): a fixed share of the inputs, for N jobs that split a batch.
    #[arg(long, value_name = "K/N", value_parser = parse_shard)]
    pub(super) shard: Option<(u64, u64)>,
    /// Worker threads (default: all cores).
    #[arg(short, long)]
    pub(super) jobs: Option<usize>,
}

/// One file's outcome, as printed by `--json`.
#[derive(Serialize)]
struct Outcome {
    input: PathBuf,
    output: PathBuf,
    ok: bool,
    /// What was done (or, with --dry-run, would be): `create`, `replace`, `skip` (up to date) or `refuse`.
    action: &'static str,
    /// Why an output is replaced, skipped or refused.
    #[serde(skip_serializing_if = "Option::is_none")]
    reason: Option<String>,
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
    /// What the reader or the preparation noticed but could go past (e.g. a truncated file, a malformed `smpl`
    /// chunk); with --strict, any warning fails the file.
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

/// The export for one input: a C array's name template gets the input's stem.
fn export_for(export: &ExportFormat, stem: &str) -> ExportFormat {
    match export {
        ExportFormat::CArray { element, name } => {
            ExportFormat::CArray { element: *element, name: io::c_array::name_for(name, stem) }
        }
        other => other.clone(),
    }
}

/// What to do with one output.
enum Action {
    Create,
    Replace(String),
    Skip(Entry),
    Refuse(String),
}

/// Settings shared by every job of a batch.
struct Batch<'a> {
    preset: &'a Preset,
    export: &'a ExportFormat,
    preset_sha256: String,
    force: bool,
    strict: bool,
    dry_run: bool,
    /// The manifests of --out-dir (none with -o).
    known: Option<&'a Known>,
}

/// Decides what to do with a job's output. `want`: the manifest entry a render would record (its output hash empty).
fn decide(job: &Job, b: &Batch, want: Option<&Entry>) -> Result<Action, Failure> {
    let Ok(md) = job.output.symlink_metadata() else { return Ok(Action::Create) };
    if !md.is_file() {
        return Ok(Action::Refuse("exists and is not a file".into()));
    }
    let (Some(known), Some(want)) = (b.known, want) else {
        return Ok(if b.force { Action::Replace("--force".into()) } else { Action::Refuse(EXISTS.into()) });
    };
    let out_sha = manifest::sha256_file(&job.output)
        .map_err(|e| Failure::new(EXIT_OUTPUT, format!("{}: {e}", job.output.display())))?;
    Ok(match known.describing(&job.key, &out_sha) {
        None if b.force => Action::Replace("--force".into()),
        None if known.has_key(&job.key) => {
            Action::Refuse("exists and was changed since stairstep wrote it (use --force to replace it)".into())
        }
        None => Action::Refuse("exists and is not in stairstep's manifest (use --force to replace it)".into()),
        Some(e) => match e.stale_because(want) {
            None if b.force => Action::Replace("--force".into()),
            None => Action::Skip(e.clone()),
            Some(why) => Action::Replace(format!("stale: {why}")),
        },
    })
}

fn outcome(job: &Job) -> Outcome {
    Outcome {
        input: job.input.clone(),
        output: job.output.clone(),
        ok: false,
        action: "create",
        reason: None,
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
    }
}

/// Decides, then (unless --dry-run) renders one job; sends its manifest entry to the writer.
fn render_one(job: &Job, b: &Batch, tx: Option<&Sender<(String, Entry)>>, progress: Option<&ProgressBar>) -> Outcome {
    let mut o = outcome(job);
    let export = export_for(b.export, &job.stem);
    let result = (|| -> Result<(), Failure> {
        let want = match b.known {
            Some(_) => Some(Entry {
                input: job.input.clone(),
                input_sha256: manifest::sha256_file(&job.input).map_err(|e| Failure::new(EXIT_INPUT, e.to_string()))?,
                preset_sha256: b.preset_sha256.clone(),
                export: serde_json::to_value(&export).unwrap_or_default(),
                tool: manifest::tool(),
                output_sha256: String::new(),
                warnings: Vec::new(),
            }),
            None => None,
        };
        let replace = match decide(job, b, want.as_ref())? {
            Action::Create => false,
            Action::Replace(why) => {
                o.action = "replace";
                o.reason = Some(why);
                true
            }
            Action::Skip(e) => {
                o.action = "skip";
                o.reason = Some("up to date".into());
                // The warnings of the render that wrote it are not lost on a re-run.
                o.warnings = e.warnings.clone();
                if let (Some(tx), false) = (tx, b.dry_run) {
                    let _ = tx.send((job.key.clone(), e));
                }
                if b.strict && !o.warnings.is_empty() {
                    return Err(Failure::new(
                        EXIT_INPUT,
                        "--strict: the warnings above were recorded when this output was written (it is left as it is; \
                         fix the input, or remove the output to render it again)",
                    ));
                }
                return Ok(());
            }
            Action::Refuse(why) => {
                o.action = "refuse";
                o.reason = Some(why.clone());
                return Err(Failure::new(EXIT_OUTPUT, why));
            }
        };
        if b.dry_run {
            return Ok(());
        }
        if let Some(parent) = job.output.parent() {
            std::fs::create_dir_all(parent)
                .map_err(|e| Failure::new(EXIT_OUTPUT, format!("{}: {e}", parent.display())))?;
        }
        let rules = WriteRules { replace, strict: b.strict, hash: want.is_some() };
        let m = match render_streaming(job, b.preset, &export, &rules, &mut o.warnings, progress)? {
            Some(m) => m,
            None => render_in_memory(job, b.preset, &export, &rules, &mut o.warnings)?,
        };
        if let (Some(tx), Some(mut e), Some(sha)) = (tx, want, m.output_sha256) {
            e.output_sha256 = sha;
            e.warnings = o.warnings.clone();
            let _ = tx.send((job.key.clone(), e));
        }
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

/// The lines a finished job prints on standard error (failures and warnings even with --quiet).
fn lines(o: &Outcome, quiet: bool) -> Vec<String> {
    let mut v: Vec<String> = o.warnings.iter().map(|w| format!("warn {}: {w}", o.input.display())).collect();
    match (&o.error, o.action) {
        (Some(e), _) => v.push(format!("FAIL {}: {e}", o.input.display())),
        (None, _) if quiet => {}
        (None, "skip") => v.push(format!("up to date  {}", o.output.display())),
        (None, action) => {
            let why = o.reason.as_deref().map(|r| format!("; replaced: {r}")).unwrap_or_default();
            let done = if action == "replace" { why } else { String::new() };
            v.push(format!(
                "ok   {} -> {} ({} bytes{done})",
                o.input.display(),
                o.output.display(),
                o.bytes.unwrap_or(0)
            ))
        }
    }
    v
}

/// The line --dry-run prints on standard output for a job.
fn dry_line(o: &Outcome) -> String {
    let verb = match (o.action, &o.error) {
        ("refuse", _) => "refuse ",
        (_, Some(_)) => "fail   ",
        ("skip", _) => "skip   ",
        ("replace", _) => "replace",
        _ => "render ",
    };
    let why = o.reason.as_deref().or(o.error.as_deref()).map(|r| format!(": {r}")).unwrap_or_default();
    format!("{verb} {} -> {}{why}", o.input.display(), o.output.display())
}

pub fn run(args: Args) -> Result<(), Failure> {
    let mut preset = load_preset(&args.preset)?;
    if let Some(f) = &args.format {
        preset.export = serde_json::from_str(f).map_err(|e| Failure::new(EXIT_USAGE, format!("--format: {e}")))?;
        preset.validate().map_err(|e| Failure::new(EXIT_USAGE, format!("--format: {e}")))?;
    }
    let export = preset.export.clone();
    let mut jobs = plan(&args, &preset, &export)?;
    let total = jobs.len();
    if let Some((k, n)) = args.shard {
        jobs.retain(|j| manifest::hash64(&j.key) % n == k - 1);
    }
    // The manifest: with --out-dir only; each shard keeps its own file.
    let own_name = match args.shard {
        Some((k, n)) => format!(".stairstep-manifest.{k}-of-{n}.json"),
        None => manifest::FILE.to_string(),
    };
    let known = args.out_dir.as_ref().map(|d| Known::load(d, &own_name));
    for p in known.iter().flat_map(|k| &k.problems) {
        eprintln!("warn {p}");
    }
    let batch = Batch {
        preset: &preset,
        export: &export,
        preset_sha256: manifest::sha256(preset.to_json().as_bytes()),
        force: args.force,
        strict: args.strict,
        dry_run: args.dry_run,
        known: known.as_ref(),
    };
    let interactive = std::io::stderr().is_terminal() && !args.quiet && !args.dry_run;
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
    // The manifest's one writer (not for --dry-run, which writes nothing).
    let writer = known.as_ref().filter(|_| !args.dry_run).map(Known::writer);
    let tx = writer.as_ref().map(|w| w.sender());
    let work = |job: &Job| {
        let o = render_one(job, &batch, tx.as_ref(), frame_bar.as_ref());
        if !args.dry_run {
            let text = lines(&o, args.quiet || bar.is_some()).join("\n");
            match &bar {
                Some(b) => {
                    b.set_message(job.input.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default());
                    b.inc(1);
                    if !text.is_empty() {
                        b.suspend(|| eprintln!("{text}"));
                    }
                }
                // One eprintln per job: lines of parallel jobs do not interleave.
                None if !text.is_empty() => eprintln!("{text}"),
                None => {}
            }
        }
        o
    };
    let outcomes: Vec<Outcome> = match args.jobs {
        // One file (or one job at a time) needs no thread pool: idle pool threads looking for work take CPU time
        // from the render on a busy machine. The outputs are the same bytes either way.
        _ if jobs.len() <= 1 || args.jobs == Some(1) => jobs.iter().map(work).collect(),
        Some(n) => rayon::ThreadPoolBuilder::new()
            .num_threads(n.max(1))
            .build()
            .map_err(|e| Failure::new(EXIT_USAGE, format!("--jobs: {e}")))?
            .install(|| jobs.par_iter().map(work).collect()),
        None => jobs.par_iter().map(work).collect(),
    };
    drop(tx);
    for b in bar.iter().chain(frame_bar.iter()) {
        b.finish_and_clear();
    }
    let manifest_result = writer.map_or(Ok(()), |w| w.finish());
    if args.json {
        println!("{}", serde_json::to_string_pretty(&outcomes).unwrap_or_default());
    } else if args.dry_run {
        for o in &outcomes {
            println!("{}", dry_line(o));
        }
    }
    let failed = outcomes.iter().filter(|o| !o.ok).count();
    let skipped = outcomes.iter().filter(|o| o.ok && o.action == "skip").count();
    let rendered = outcomes.len() - failed - skipped;
    if !args.quiet && (outcomes.len() != 1 || args.shard.is_some()) {
        let shard = args.shard.map(|(k, n)| format!(" (shard {k}/{n}: {} of {total} files)", outcomes.len()));
        let verb = if args.dry_run { "to render" } else { "rendered" };
        let failed_word = if args.dry_run { "refused or failing" } else { "failed" };
        eprintln!("{rendered} {verb}, {skipped} up to date, {failed} {failed_word}{}", shard.unwrap_or_default());
    }
    manifest_result?;
    if failed == 0 {
        Ok(())
    } else if outcomes.len() == 1 {
        Err(Failure::reported(outcomes[0].code))
    } else {
        Err(Failure::reported(EXIT_INPUT))
    }
}
