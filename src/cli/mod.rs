//! Command-line interface (native only).

mod serve;

use clap::{Parser, Subcommand};
use stairstep::{chain, demo, io, Error, Preset};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Exit code for usage errors (bad arguments, bad preset).
pub const EXIT_USAGE: u8 = 2;
/// Exit code for input errors (unreadable or malformed input).
pub const EXIT_INPUT: u8 = 3;
/// Exit code for output errors (cannot write, would overwrite).
pub const EXIT_OUTPUT: u8 = 4;

#[derive(Parser)]
#[command(
    name = "stairstep",
    version,
    about = "Bit-crush and quantization sandbox: render, measure and export low-bit sound assets."
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Write a built-in demo sound as a WAV file.
    #[command(after_help = "Examples:\n  stairstep demo -o chime.wav\n  stairstep demo tone -o tone.wav")]
    Demo {
        /// Which demo: chime-loop, drum-hit, pad, sweep, tone.
        #[arg(default_value = demo::DEMOS[0])]
        name: String,
        /// Output file.
        #[arg(short, long)]
        output: PathBuf,
        /// Replace the output file if it exists.
        #[arg(long)]
        force: bool,
    },
    /// Render a sound through a preset and write the export.
    #[command(after_help = "Examples:\n  stairstep render --preset crush.json in.wav -o out.wav")]
    Render {
        /// Preset JSON file.
        #[arg(short, long)]
        preset: PathBuf,
        /// Input WAV file.
        input: PathBuf,
        /// Output file.
        #[arg(short, long)]
        output: PathBuf,
        /// Replace the output file if it exists.
        #[arg(long)]
        force: bool,
    },
    /// Serve the offline page on 127.0.0.1 and print its URL.
    Serve {
        /// The page to serve.
        #[arg(long, default_value = "dist/stairstep.html")]
        page: PathBuf,
        /// Port (0 = any free port).
        #[arg(long, default_value_t = 8737)]
        port: u16,
    },
}

/// An error with the exit code it maps to.
pub struct Failure {
    code: u8,
    message: String,
}

impl Failure {
    fn new(code: u8, message: impl Into<String>) -> Self {
        Failure { code, message: message.into() }
    }
}

fn input_err(path: &Path) -> impl Fn(Error) -> Failure + '_ {
    move |e| Failure::new(EXIT_INPUT, format!("{}: {e}", path.display()))
}

fn read_file(path: &Path) -> Result<Vec<u8>, Failure> {
    std::fs::read(path).map_err(|e| Failure::new(EXIT_INPUT, format!("{}: {e}", path.display())))
}

fn load_preset(path: &Path) -> Result<Preset, Failure> {
    let text = String::from_utf8(read_file(path)?)
        .map_err(|_| Failure::new(EXIT_USAGE, format!("{}: not UTF-8 text", path.display())))?;
    Preset::from_json(&text).map_err(|e| Failure::new(EXIT_USAGE, format!("{}: {e}", path.display())))
}

/// Writes `bytes` to `path` atomically: a temporary file in the same folder, then a rename. Refuses to replace an
/// existing file unless `force`.
pub fn write_atomic(path: &Path, bytes: &[u8], force: bool) -> Result<(), Failure> {
    use std::io::Write;
    let fail = |e: std::io::Error| Failure::new(EXIT_OUTPUT, format!("{}: {e}", path.display()));
    if !force && path.exists() {
        return Err(Failure::new(EXIT_OUTPUT, format!("{}: exists (use --force to replace it)", path.display())));
    }
    let dir = path.parent().filter(|p| !p.as_os_str().is_empty()).unwrap_or(Path::new("."));
    let name = path.file_name().ok_or_else(|| Failure::new(EXIT_OUTPUT, "output path has no file name"))?;
    let tmp = dir.join(format!(".{}.{}.tmp", name.to_string_lossy(), std::process::id()));
    let result = (|| {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
        std::fs::rename(&tmp, path)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result.map_err(fail)
}

fn run(cli: Cli) -> Result<(), Failure> {
    match cli.command {
        Command::Demo { name, output, force } => {
            let clip = demo::demo(&name).map_err(|e| Failure::new(EXIT_USAGE, e.to_string()))?;
            let bytes =
                io::ExportFormat::default().encode(&clip).map_err(|e| Failure::new(EXIT_OUTPUT, e.to_string()))?;
            write_atomic(&output, &bytes, force)?;
            eprintln!("wrote {} ({name}, {:.2} s, {} Hz)", output.display(), clip.duration_s(), clip.sample_rate);
            Ok(())
        }
        Command::Render { preset, input, output, force } => {
            let preset = load_preset(&preset)?;
            if same_file(&input, &output) {
                return Err(Failure::new(
                    EXIT_OUTPUT,
                    format!("{}: refusing to overwrite the input", output.display()),
                ));
            }
            let clip = io::wav::read(&read_file(&input)?).map_err(input_err(&input))?;
            let r = chain::render(&preset, &clip).map_err(input_err(&input))?;
            let bytes = preset.export.encode(&r.export).map_err(|e| Failure::new(EXIT_OUTPUT, e.to_string()))?;
            write_atomic(&output, &bytes, force)?;
            eprintln!(
                "wrote {} ({} bytes, peak {:.2} dBFS, {} clipped)",
                output.display(),
                bytes.len(),
                r.report.output.peak_dbfs,
                r.report.clipped
            );
            Ok(())
        }
        Command::Serve { page, port } => serve::serve(&page, port),
    }
}

fn same_file(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(a), Ok(b)) => a == b,
        _ => false,
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
            eprintln!("stairstep: {}", f.message);
            ExitCode::from(f.code)
        }
    }
}
