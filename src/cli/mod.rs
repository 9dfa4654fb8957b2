//! Command-line interface (native only). One file per command; shared helpers here.

mod analyze;
mod budget;
mod manifest;
mod plan;
mod render;
mod render_file;
mod serve;
mod stages;

use clap::{Parser, Subcommand};
use stairstep::{demo, io, preset, Preset};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Exit code for usage errors (bad arguments, bad preset).
pub const EXIT_USAGE: u8 = 2;
/// Exit code for input errors (unreadable or malformed input; in a batch: any file failed).
pub const EXIT_INPUT: u8 = 3;
/// Exit code for output errors (cannot write, would overwrite).
pub const EXIT_OUTPUT: u8 = 4;

const EXIT_CODES: &str =
    "Exit codes: 0 success; 2 usage or preset error; 3 input error (in a batch: one or more files \
failed); 4 output error (cannot write, or the output exists and --force was not given).";

#[derive(Parser)]
#[command(
    name = "stairstep",
    version,
    about = "Bit-crush and quantization sandbox: render, measure and export low-bit sound assets.",
    after_help = EXIT_CODES
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Render sounds through a preset and write the exports (one file, many, or whole folders).
    #[command(after_help = render::HELP)]
    Render(render::Args),
    /// Measure a sound: levels, clipping, spectrum summary and, against a reference, the SQNR.
    #[command(after_help = analyze::ANALYZE_HELP)]
    Analyze(analyze::AnalyzeArgs),
    /// Measured SQNR against word length (1 to 24 bits) beside the theory lines.
    #[command(after_help = analyze::SWEEP_HELP)]
    Sweep(analyze::SweepArgs),
    /// Every (rate, export) candidate measured side by side: bytes, SQNR, A-weighted SNR; the best within a budget.
    #[command(after_help = budget::HELP)]
    Budget(budget::Args),
    /// Write a built-in demo sound as a WAV file.
    #[command(after_help = "Demos: chime-loop, drum-hit, pad, sweep, tone (all synthesised, 48 kHz).\n\n\
        Examples:\n  stairstep demo -o chime.wav\n  stairstep demo tone -o tone.wav")]
    Demo {
        /// Which demo.
        #[arg(default_value = demo::DEMOS[0])]
        name: String,
        /// Output file.
        #[arg(short, long)]
        output: PathBuf,
        /// Replace the output file if it exists.
        #[arg(long)]
        force: bool,
    },
    /// List the built-in presets, or print one as JSON.
    #[command(after_help = "Examples:\n  stairstep presets\n  stairstep presets handheld > my.json")]
    Presets {
        /// Print this preset's JSON.
        name: Option<String>,
    },
    /// The stage kinds a preset's chain can hold, with each field's unit, range and default.
    #[command(after_help = "Examples:\n  stairstep stages\n  stairstep stages quantize\n  stairstep stages --json")]
    Stages {
        /// Only this kind.
        kind: Option<String>,
        /// Print the schema as JSON (what the page builds its forms from).
        #[arg(long)]
        json: bool,
    },
    /// Serve the offline page on 127.0.0.1 and print its URL (the page is built into the binary).
    Serve {
        /// Serve this page file instead of the built-in one (e.g. a fresh `make page` build).
        #[arg(long)]
        page: Option<PathBuf>,
        /// Port (falls back to any free port when taken).
        #[arg(long, default_value_t = 8737)]
        port: u16,
    },
}

/// An error with the exit code it maps to.
#[derive(Debug)]
pub struct Failure {
    code: u8,
    message: String,
}

impl Failure {
    fn new(code: u8, message: impl Into<String>) -> Self {
        Failure { code, message: message.into() }
    }

    /// A failure already reported to the user (each failed file on its own line): only the exit code is left.
    fn reported(code: u8) -> Self {
        Failure { code, message: String::new() }
    }
}

fn read_file(path: &Path) -> Result<Vec<u8>, Failure> {
    std::fs::read(path).map_err(|e| Failure::new(EXIT_INPUT, format!("{}: {e}", path.display())))
}

/// Reads a preset file, or a built-in preset by name.
fn load_preset(arg: &str) -> Result<Preset, Failure> {
    let path = Path::new(arg);
    if !path.exists() {
        let builtin = preset::builtin();
        if let Some(p) = builtin.iter().find(|p| p.name == arg) {
            return Ok(p.clone());
        }
        let names: Vec<&str> = builtin.iter().map(|p| p.name.as_str()).collect();
        return Err(Failure::new(
            EXIT_USAGE,
            format!("{arg}: not a built-in preset or a file; built-ins: {}", names.join(", ")),
        ));
    }
    let text = String::from_utf8(read_file(path)?)
        .map_err(|_| Failure::new(EXIT_USAGE, format!("{}: not UTF-8 text", path.display())))?;
    Preset::from_json(&text).map_err(|e| Failure::new(EXIT_USAGE, format!("{}: {e}", path.display())))
}

/// Writes `bytes` to `path` atomically (see [`write_atomic_with`]); `replace`: may replace an existing file.
pub fn write_atomic(path: &Path, bytes: &[u8], replace: bool) -> Result<(), Failure> {
    write_atomic_with(path, replace, |f| std::io::Write::write_all(f, bytes))
}

/// The message for an output that exists and may not be replaced.
pub const EXISTS: &str = "exists (use --force to replace it)";

/// Writes `path` atomically: `fill` writes a temporary file in the same folder, which is synced and then put in
/// place, so an interrupted run leaves no half-written file under the real name (at worst a hidden
/// `.NAME.PID.N.stairstep-tmp`).
///
/// - `replace == false` (a new file): the temporary file is hard-linked to `path`, which fails if `path` exists —
///   also when it appeared after any earlier check (no check-then-rename race) — and the temporary name is removed.
///   On a file system without hard links (e.g. FAT) the name is claimed with an exclusive create instead and the
///   temporary file renamed over that empty claim.
/// - `replace == true`: the temporary file is renamed over `path` (atomic on POSIX file systems).
pub fn write_atomic_with(
    path: &Path,
    replace: bool,
    fill: impl FnOnce(&mut std::fs::File) -> std::io::Result<()>,
) -> Result<(), Failure> {
    use std::sync::atomic::{AtomicU64, Ordering};
    static COUNTER: AtomicU64 = AtomicU64::new(0);
    let exists = || Failure::new(EXIT_OUTPUT, format!("{}: {EXISTS}", path.display()));
    if !replace && path.symlink_metadata().is_ok() {
        return Err(exists());
    }
    let dir = path.parent().filter(|p| !p.as_os_str().is_empty()).unwrap_or(Path::new("."));
    let name = path.file_name().ok_or_else(|| Failure::new(EXIT_OUTPUT, "output path has no file name"))?;
    let n = COUNTER.fetch_add(1, Ordering::Relaxed);
    let tmp = dir.join(format!(".{}.{}.{n}.stairstep-tmp", name.to_string_lossy(), std::process::id()));
    let result = (|| {
        let mut f = std::fs::OpenOptions::new().write(true).create_new(true).open(&tmp)?;
        fill(&mut f)?;
        f.sync_all()?;
        drop(f);
        if replace {
            return std::fs::rename(&tmp, path);
        }
        match std::fs::hard_link(&tmp, path) {
            Ok(()) => std::fs::remove_file(&tmp),
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => Err(e),
            Err(_) => {
                // No hard links here: claim the name exclusively, then rename over the claim.
                std::fs::OpenOptions::new().write(true).create_new(true).open(path)?;
                std::fs::rename(&tmp, path)
            }
        }
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result.map_err(|e| {
        if e.kind() == std::io::ErrorKind::AlreadyExists {
            Failure::new(
                EXIT_OUTPUT,
                format!("{}: {EXISTS}; it appeared while this output was written", path.display()),
            )
        } else {
            Failure::new(EXIT_OUTPUT, format!("{}: {e}", path.display()))
        }
    })
}

fn run(cli: Cli) -> Result<(), Failure> {
    match cli.command {
        Command::Render(args) => render::run(args),
        Command::Analyze(args) => analyze::analyze(args),
        Command::Sweep(args) => analyze::sweep(args),
        Command::Budget(args) => budget::run(args),
        Command::Demo { name, output, force } => {
            let clip = demo::demo(&name).map_err(|e| Failure::new(EXIT_USAGE, e.to_string()))?;
            let bytes =
                io::ExportFormat::default().encode(&clip).map_err(|e| Failure::new(EXIT_OUTPUT, e.to_string()))?;
            write_atomic(&output, &bytes, force)?;
            eprintln!("wrote {} ({name}, {:.2} s, {} Hz)", output.display(), clip.duration_s(), clip.sample_rate);
            Ok(())
        }
        Command::Presets { name: None } => {
            // writeln!, not println!: a closed pipe (`stairstep presets | head -1`) ends the list instead of panicking.
            let mut out = std::io::stdout().lock();
            for p in preset::builtin() {
                if std::io::Write::write_fmt(&mut out, format_args!("{:<16} {}\n", p.name, p.description)).is_err() {
                    break;
                }
            }
            Ok(())
        }
        Command::Presets { name: Some(name) } => {
            let p = preset::builtin().into_iter().find(|p| p.name == name).ok_or_else(|| {
                let names: Vec<String> = preset::builtin().into_iter().map(|p| p.name).collect();
                Failure::new(EXIT_USAGE, format!("no built-in preset {name:?}; there are: {}", names.join(", ")))
            })?;
            println!("{}", p.to_json());
            Ok(())
        }
        Command::Stages { kind, json } => stages::run(kind.as_deref(), json),
        Command::Serve { page, port } => serve::serve(page.as_deref(), port),
    }
}

/// Entry point.
pub fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { EXIT_USAGE } else { 0 };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    match run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(f) => {
            if !f.message.is_empty() {
                eprintln!("stairstep: {}", f.message);
            }
            ExitCode::from(f.code)
        }
    }
}
