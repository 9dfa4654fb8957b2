//! `stairstep render`: one file, many files or whole folders through one preset.
//!
//! Each file is independent, so a batch runs on all cores (rayon) and gives byte-identical outputs to a
//! single-threaded run (`--jobs 1`). Failures do not stop the batch; each is named with its reason as it happens and
//! makes the exit code non-zero. With `--out-dir`, a manifest in that folder (see [`super::manifest`]) lets a re-run
//! skip what is up to date and re-render what is stale; `--shard K/N` takes a fixed 1/N of the batch.

use super::manifest::{self, Entry, Known};
use super::EXIT_USAGE;
use super::{load_preset, write_atomic, write_atomic_with, Failure, EXISTS, EXIT_INPUT, EXIT_OUTPUT};
use indicatif::{ProgressBar, ProgressStyle};
use rayon::prelude::*;
use serde::Serialize;
use stairstep::chain::StageReport;
use stairstep::io::ExportFormat;
use stairstep::{io, render, Clip, Preset};
use std::collections::HashMap;
use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::sync::mpsc::Sender;

pub const HELP: &str = "\
Output names: with --out-dir, each output is named by --name, a template with the placeholders {stem} (input file
name without extension), {preset} (preset name), {ext} (the export format's extension) and {dir} (the input's folder
relative to the folder given on the command line, for --recursive). Default: {dir}/{stem}.{ext}. A C-array export's
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
    /// Print nothing but failures and warnings.
    #[arg(short, long)]
    quiet: bool,
    /// Print a JSON array (one object per file) on standard output.
    #[arg(long)]
    json: bool,
    /// Make any warning about a file (e.g. truncated) a failure of that file: nothing is written for it.
    #[arg(long)]
    strict: bool,
    /// List what would be rendered, replaced, skipped (up to date) or refused, and write nothing.
    #[arg(long)]
    dry_run: bool,
    /// Render only shard K of N (1 <= K <= N): a fixed share of the inputs, for N jobs that split a batch.
    #[arg(long, value_name = "K/N", value_parser = parse_shard)]
    shard: Option<(u64, u64)>,
    /// Worker threads (default: all cores).
    #[arg(short, long)]
    jobs: Option<usize>,
}

fn parse_shard(s: &str) -> Result<(u64, u64), String> {
    let bad = || format!("{s:?}: K/N with 1 <= K <= N, e.g. 2/4");
    let (k, n) = s.split_once('/').ok_or_else(bad)?;
    let (k, n): (u64, u64) = (k.trim().parse().map_err(|_| bad())?, n.trim().parse().map_err(|_| bad())?);
    if k == 0 || n == 0 || k > n {
        return Err(bad());
    }
    Ok((k, n))
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

/// One input and where its output goes.
struct Job {
    input: PathBuf,
    output: PathBuf,
    /// The output's path relative to --out-dir (`/`-separated; the manifest's key and the shard hash's input), or the
    /// output as given to -o.
    key: String,
    /// The input's file name without extension.
    stem: String,
}

/// File name extensions a folder walk picks up (the content decides how a file is read; see `io::decode`).
const SOUND_EXTENSIONS: [&str; 10] = ["wav", "wave", "flac", "aif", "aiff", "aifc", "ogg", "oga", "mp3", "caf"];

fn is_sound(p: &Path) -> bool {
    p.extension().is_some_and(|e| SOUND_EXTENSIONS.iter().any(|s| e.eq_ignore_ascii_case(s)))
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
        } else if is_sound(&p) {
            let rel = p.parent().and_then(|d| d.strip_prefix(base).ok()).unwrap_or(Path::new("")).to_path_buf();
            out.push((p, rel));
        }
    }
    Ok(())
}

const PLACEHOLDERS: [&str; 4] = ["{stem}", "{preset}", "{ext}", "{dir}"];

/// Refuses a --name template with a placeholder other than [`PLACEHOLDERS`] (or an unclosed brace).
fn check_template(template: &str) -> Result<(), Failure> {
    let mut rest = template;
    while let Some(i) = rest.find('{') {
        let after = &rest[i..];
        let Some(j) = after.find('}') else {
            return Err(Failure::new(EXIT_USAGE, format!("--name {template:?}: a {{ without its }}")));
        };
        let ph = &after[..=j];
        if !PLACEHOLDERS.contains(&ph) {
            return Err(Failure::new(
                EXIT_USAGE,
                format!("--name {template:?}: unknown placeholder {ph}; there are {}", PLACEHOLDERS.join(", ")),
            ));
        }
        rest = &after[j + 1..];
    }
    Ok(())
}

fn expand(template: &str, stem: &str, preset: &str, ext: &str, dir: &Path) -> PathBuf {
    let dir = dir.to_string_lossy();
    let s = template.replace("{stem}", stem).replace("{preset}", preset).replace("{ext}", ext).replace("{dir}", &dir);
    // An empty {dir} leaves a leading slash: keep outputs inside --out-dir.
    PathBuf::from(s.trim_start_matches('/'))
}

fn stem_of(p: &Path) -> String {
    p.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_default()
}

/// A relative path as a `/`-separated key.
fn key_of(rel: &Path) -> String {
    rel.components().map(|c| c.as_os_str().to_string_lossy()).collect::<Vec<_>>().join("/")
}

fn plan(args: &Args, preset: &Preset, export: &ExportFormat) -> Result<Vec<Job>, Failure> {
    check_template(&args.name)?;
    let mut found = Vec::new();
    for input in &args.inputs {
        if input.is_dir() {
            collect(input, input, args.recursive, &mut found)?;
        } else {
            found.push((input.clone(), PathBuf::new()));
        }
    }
    if found.is_empty() {
        return Err(Failure::new(
            EXIT_INPUT,
            "no sound files (WAV, FLAC, AIFF, Ogg, MP3, CAF) found in the inputs given",
        ));
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
            vec![Job { stem: stem_of(&input), input, output: out.clone(), key: key_of(out) }]
        }
        (None, Some(dir)) => found
            .into_iter()
            .map(|(input, rel_dir)| {
                let stem = stem_of(&input);
                let name = expand(&args.name, &stem, &slug(&preset.name), export.extension(), &rel_dir);
                Job { output: dir.join(&name), key: key_of(&name), stem, input }
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
    /// SHA-256 of the bytes written (when a manifest is kept).
    output_sha256: Option<String>,
    /// What each stage did on its own (the render report's `stages`).
    stages: Vec<StageReport>,
}

/// How one render may write its output and what it must check.
struct WriteRules {
    /// Replace an existing output (--force or a stale manifest entry); otherwise the output must be new.
    replace: bool,
    /// Fail on any warning, before the output is put in place.
    strict: bool,
    /// Hash the bytes written (for the manifest).
    hash: bool,
}

/// Under --strict, any warning fails the file; the warnings stay in the outcome.
fn strict_check(rules: &WriteRules, warnings: &[String]) -> Result<(), Failure> {
    if rules.strict && !warnings.is_empty() {
        let n = warnings.len();
        return Err(Failure::new(
            EXIT_INPUT,
            format!("--strict: {n} warning{} (nothing written)", if n == 1 { "" } else { "s" }),
        ));
    }
    Ok(())
}

/// The warnings a render adds to the reader's: non-finite samples and the preparation's notes.
fn render_warnings(non_finite: u64, prep_notes: &[String], warnings: &mut Vec<String>) {
    if non_finite > 0 {
        warnings.push(format!("{non_finite} input samples were NaN or infinite (rendered as 0 and ±1.0)"));
    }
    warnings.extend(prep_notes.iter().map(|n| format!("preparation: {n}")));
}

/// The sound of an input file, as the in-memory render needs it. This is the one place that reads a whole input.
struct Input {
    clip: Clip,
    /// A loop from the file's own metadata (a WAV `smpl` chunk), in source frames, end exclusive.
    file_loop: Option<(u64, u64)>,
    /// What the reader noticed but could read past.
    warnings: Vec<String>,
}

/// Reads a whole input file. Errors do not repeat the file's name: the line that reports them names it.
fn read_input(path: &Path) -> Result<Input, Failure> {
    // WAV through the project's own reader, FLAC, AIFF, Ogg, MP3 and CAF through symphonia; a loop in the file's own
    // `smpl` (WAV) or `INST` (AIFF) chunk comes along.
    let d = io::decode::read_any_file(path).map_err(|e| Failure::new(EXIT_INPUT, e.to_string()))?;
    Ok(Input { clip: d.clip, file_loop: d.file_loop, warnings: d.warnings })
}

/// Renders in blocks, from file to file, when nothing needs the whole sound at once: a byte-aligned WAV input
/// without loops, a preset without asset preparation (trim, normalisation, loops need the whole sound), a
/// byte-aligned WAV export. Memory stays at a few blocks whatever the length. `Ok(None)`: use the in-memory path.
fn render_streaming(
    job: &Job,
    preset: &Preset,
    export: &ExportFormat,
    rules: &WriteRules,
    warnings: &mut Vec<String>,
    progress: Option<&ProgressBar>,
) -> Result<Option<Measured>, Failure> {
    use manifest::HashingWriter;
    use stairstep::chain::{Chain, ChainOutput};
    use stairstep::io::wav::stream::{StreamReader, StreamWriter};
    use stairstep::stages::BLOCK;
    let ExportFormat::Wav { encoding, block_align: None } = export else { return Ok(None) };
    if !preset.prep.is_noop() || !StreamWriter::<std::fs::File>::supports(*encoding) {
        return Ok(None);
    }
    let input_err = |e: std::io::Error| Failure::new(EXIT_INPUT, e.to_string());
    let file = std::fs::File::open(&job.input).map_err(input_err)?;
    let reader = StreamReader::open(std::io::BufReader::with_capacity(1 << 20, file))
        .map_err(|e| Failure::new(EXIT_INPUT, e.to_string()))?;
    let Some(mut reader) = reader else { return Ok(None) };
    warnings.append(&mut reader.warnings);
    strict_check(rules, warnings)?;
    let f = reader.format().clone();
    let (ch, rate, frames) = (f.channels as usize, f.sample_rate, reader.frames());
    let mut chain = Chain::new(preset, ch, rate, frames).map_err(|e| Failure::new(EXIT_INPUT, e.to_string()))?;
    if let Some(p) = progress {
        p.set_length(frames as u64);
    }
    let mut out = ChainOutput::new(ch);
    let mut report = None;
    let mut bytes = 0u64;
    let mut output_sha256 = None;
    let mut stage_error = None;
    write_atomic_with(&job.output, rules.replace, |file| {
        let io_err = |e: stairstep::Error| std::io::Error::other(e.to_string());
        let sink = std::io::BufWriter::with_capacity(1 << 20, HashingWriter::new(&mut *file, rules.hash));
        let mut w =
            StreamWriter::new(sink, *encoding, chain.export_rate(), ch, chain.export_frames(), Default::default())
                .map_err(io_err)?;
        // Encoding and writing run on a second thread, overlapping the chain: export blocks go over a bounded
        // channel (in order, so the bytes are those of one thread) and come back empty for reuse.
        let sink = std::thread::scope(|s| -> std::io::Result<_> {
            let (to_writer, blocks) = std::sync::mpsc::sync_channel::<Vec<Vec<f32>>>(4);
            let (give_back, spare) = std::sync::mpsc::channel::<Vec<Vec<f32>>>();
            let writer = s.spawn(move || -> std::io::Result<_> {
                for mut block in blocks {
                    w.write_block(&block).map_err(io_err)?;
                    block.iter_mut().for_each(Vec::clear);
                    let _ = give_back.send(block);
                }
                w.finish().map_err(io_err)
            });
            let send = |out: &mut ChainOutput| {
                let empty = spare.try_recv().unwrap_or_else(|_| vec![Vec::with_capacity(BLOCK); ch]);
                let full = std::mem::replace(&mut out.export, empty);
                out.clear();
                to_writer.send(full).is_ok()
            };
            let mut fed = true;
            loop {
                let block = match reader.read_block(BLOCK) {
                    Ok(b) => b,
                    Err(e) => {
                        stage_error = Some(Failure::new(EXIT_INPUT, e.to_string()));
                        fed = false;
                        break;
                    }
                };
                if block[0].is_empty() {
                    break;
                }
                chain.process_block(&block, &mut out);
                if !send(&mut out) {
                    fed = false;
                    break;
                }
                if let Some(p) = progress {
                    p.inc(block[0].len() as u64);
                }
            }
            if fed {
                let r = chain.finish(&mut out);
                warnings.append(&mut reader.warnings);
                render_warnings(r.non_finite_inputs, &[], warnings);
                if let Err(f) = strict_check(rules, warnings) {
                    stage_error = Some(f);
                    fed = false;
                }
                report = Some(r);
                fed = fed && send(&mut out);
            }
            drop(to_writer);
            let written = writer.join().unwrap_or_else(|_| Err(std::io::Error::other("writer thread stopped")));
            match (fed, written) {
                (true, w) => w,
                (false, Err(e)) if stage_error.is_none() => Err(e),
                (false, _) => Err(std::io::Error::other("render stopped")),
            }
        })?;
        output_sha256 = sink.into_inner().map_err(|e| e.into_error())?.hex();
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
        output_sha256,
        stages: r.stages,
    }))
}

/// Renders with the whole sound in memory (everything the streaming path does not cover).
fn render_in_memory(
    job: &Job,
    preset: &Preset,
    export: &ExportFormat,
    rules: &WriteRules,
    warnings: &mut Vec<String>,
) -> Result<Measured, Failure> {
    let mut input = read_input(&job.input)?;
    warnings.append(&mut input.warnings);
    strict_check(rules, warnings)?;
    // A loop in the file's own metadata is kept when the preset sets none.
    let r = render::render_with_loop(preset, &input.clip, input.file_loop)
        .map_err(|e| Failure::new(EXIT_INPUT, e.to_string()))?;
    render_warnings(r.report.non_finite_inputs, r.prep.as_ref().map_or(&[], |p| &p.notes), warnings);
    strict_check(rules, warnings)?;
    let bytes = r.encode(export).map_err(|e| Failure::new(EXIT_OUTPUT, e.to_string()))?;
    write_atomic(&job.output, &bytes, rules.replace)?;
    Ok(Measured {
        duration_s: input.clip.duration_s(),
        peak_dbfs: r.report.output.peak_dbfs,
        clipped: r.report.clipped,
        sqnr_db: r.report.sqnr_db,
        bytes: bytes.len() as u64,
        loop_frames: r.export_meta.loops.first().map(|l| (l.start, l.end)),
        output_sha256: rules.hash.then(|| manifest::sha256(&bytes)),
        stages: r.report.stages.clone(),
    })
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
