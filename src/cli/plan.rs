//! Which inputs a `render` takes and where each output goes: the folder walk, the output-name template, the
//! manifest key and the `--shard K/N` share.

use super::render::Args;
use super::{Failure, EXIT_INPUT, EXIT_OUTPUT, EXIT_USAGE};
use stairstep::io::ExportFormat;
use stairstep::Preset;
use std::collections::HashMap;
use std::path::{Path, PathBuf};

pub(super) fn parse_shard(s: &str) -> Result<(u64, u64), String> {
    let bad = || format!("{s:?}: K/N with 1 <= K <= N, e.g. 2/4");
    let (k, n) = s.split_once('/').ok_or_else(bad)?;
    let (k, n): (u64, u64) = (k.trim().parse().map_err(|_| bad())?, n.trim().parse().map_err(|_| bad())?);
    if k == 0 || n == 0 || k > n {
        return Err(bad());
    }
    Ok((k, n))
}

/// One input and where its output goes.
pub(super) struct Job {
    pub(super) input: PathBuf,
    pub(super) output: PathBuf,
    /// The output's path relative to --out-dir (`/`-separated; the manifest's key and the shard hash's input), or the
    /// output as given to -o.
    pub(super) key: String,
    /// The input's file name without extension.
    pub(super) stem: String,
}

/// File name extensions a folder walk picks up (the content decides how a file is read; see `io::decode`).
pub(super) const SOUND_EXTENSIONS: [&str; 10] =
    ["wav", "wave", "flac", "aif", "aiff", "aifc", "ogg", "oga", "mp3", "caf"];

pub(super) fn is_sound(p: &Path) -> bool {
    p.extension().is_some_and(|e| SOUND_EXTENSIONS.iter().any(|s| e.eq_ignore_ascii_case(s)))
}

pub(super) fn collect(
    dir: &Path,
    base: &Path,
    recursive: bool,
    out: &mut Vec<(PathBuf, PathBuf)>,
) -> Result<(), Failure> {
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

pub(super) const PLACEHOLDERS: [&str; 5] = ["{stem}", "{preset}", "{ext}", "{dir}", "{input_ext}"];

/// Refuses a --name template with a placeholder other than [`PLACEHOLDERS`] (or an unclosed brace).
pub(super) fn check_template(template: &str) -> Result<(), Failure> {
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

pub(super) fn expand(template: &str, input: &Path, preset: &str, ext: &str, dir: &Path) -> PathBuf {
    let dir = dir.to_string_lossy();
    let input_ext = input.extension().map(|e| e.to_string_lossy().to_lowercase()).unwrap_or_default();
    let s = template
        .replace("{stem}", &stem_of(input))
        .replace("{preset}", preset)
        .replace("{ext}", ext)
        .replace("{dir}", &dir)
        .replace("{input_ext}", &input_ext);
    // An empty {dir} leaves a leading slash: keep outputs inside --out-dir.
    PathBuf::from(s.trim_start_matches('/'))
}

pub(super) fn stem_of(p: &Path) -> String {
    p.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_default()
}

/// A relative path as a `/`-separated key.
pub(super) fn key_of(rel: &Path) -> String {
    rel.components().map(|c| c.as_os_str().to_string_lossy()).collect::<Vec<_>>().join("/")
}

pub(super) fn plan(args: &Args, preset: &Preset, export: &ExportFormat) -> Result<Vec<Job>, Failure> {
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
                let name = expand(&args.name, &input, &slug(&preset.name), export.extension(), &rel_dir);
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
                    "{} and {} would both be written to {}: change --name (e.g. '{{dir}}/{{stem}}-{{input_ext}}.{{ext}}')",
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

pub(super) fn slug(s: &str) -> String {
    let s: String = s.chars().map(|c| if c.is_ascii_alphanumeric() { c.to_ascii_lowercase() } else { '-' }).collect();
    let s = s.split('-').filter(|p| !p.is_empty()).collect::<Vec<_>>().join("-");
    if s.is_empty() {
        "custom".into()
    } else {
        s
    }
}
