//! `stairstep analyze` and `stairstep sweep`: measurements for people (text) and scripts (`--json`).

use super::{read_file, write_atomic, Failure, EXIT_INPUT, EXIT_USAGE};
use serde::Serialize;
use stairstep::analysis::spectrogram::{SpectrogramAnalyzer, SpectrogramParams};
use stairstep::analysis::{sqnr_db, sqnr_sweep, Levels, SpectrumAnalyzer, SweepPoint, Window};
use stairstep::stages::quantize::{Grid, QuantizeParams, Rounding};
use stairstep::{io, Clip};
use std::path::{Path, PathBuf};

pub const ANALYZE_HELP: &str = "\
Reads WAV, FLAC, AIFF/AIFF-C, Ogg Vorbis, MP3 and CAF (PCM, ALAC).
JSON fields (--json): file, decoder (which reader decoded the file), format, sample_rate, channels, frames, duration_s; levels {peak_dbfs, rms_dbfs (a full-scale sine
reads 0 dBFS), dc, crest_db, at_full_scale (samples with |x| >= 1), non_finite, samples}; spectrum {fft_size, window,
bin_hz, peaks: [{hz, dbfs}] (the five strongest local maxima), median_dbfs}; with --reference: reference, sqnr_db
(reference power over the power of input minus reference; the files must have the same rate, channels and length);
with --spectrogram: spectrogram {file, fft_size, hop, frames, group (STFT frames averaged per column), bins,
seconds_per_column, hz_per_row, floor_dbfs}.

--spectrogram FILE writes a greyscale PGM image (Netpbm, viewable almost anywhere): one column per frame (Hann
window, powers averaged over channels, at most 2048 columns: longer sounds average neighbouring frames), one row per
bin with 0 Hz at the bottom, white at 0 dBFS (a full-scale sine) and black at the floor (−120 dBFS by default).

Examples:
  stairstep analyze out.wav
  stairstep analyze out.wav --reference in.wav --json
  stairstep analyze out.wav --spectrogram out.pgm --spectrogram-size 1024";

/// `sqnr_db`'s reading for an error of exactly zero.
const LOSSLESS_DB: f64 = 240.0;

pub const SWEEP_HELP: &str = "\
Quantizes the input at every word length from 1 to 24 bits (no dither) and prints the measured SQNR beside two theory
lines: this signal's mean square over the step's Δ²/12, and 6.02·N + 1.76 dB (a full-scale sine). \"lossless\": the
input already sits on that grid (no error at all; --json gives 240 for it).

Examples:
  stairstep sweep tone.wav
  stairstep sweep tone.wav --json";

#[derive(clap::Args)]
pub struct AnalyzeArgs {
    /// The sound file to measure (WAV, FLAC, AIFF, Ogg Vorbis, MP3, CAF).
    input: PathBuf,
    /// A reference sound file (e.g. the original) to measure the SQNR against.
    #[arg(long)]
    reference: Option<PathBuf>,
    /// FFT size of the spectrum summary (power of two, 64 to 65536).
    #[arg(long, default_value_t = 4096)]
    fft_size: usize,
    /// Print JSON instead of text.
    #[arg(long)]
    json: bool,
    /// Write a spectrogram of the input as a greyscale PGM image (see below).
    #[arg(long, value_name = "FILE")]
    spectrogram: Option<PathBuf>,
    /// FFT size of the spectrogram (power of two, 256 to 8192); the hop is a quarter of it.
    #[arg(long, default_value_t = 2048)]
    spectrogram_size: usize,
    /// Level drawn black in the spectrogram, in dBFS (below 0).
    #[arg(long, default_value_t = -120.0, allow_negative_numbers = true)]
    spectrogram_floor: f32,
    /// Replace the spectrogram file if it exists.
    #[arg(long)]
    force: bool,
}

#[derive(clap::Args)]
pub struct SweepArgs {
    /// The sound file to sweep.
    input: PathBuf,
    /// Grid: mid-tread (PCM) or mid-rise.
    #[arg(long, default_value = "mid-tread")]
    grid: String,
    /// Rounding: nearest or truncate.
    #[arg(long, default_value = "nearest")]
    rounding: String,
    /// Print JSON instead of a table.
    #[arg(long)]
    json: bool,
}

/// Reads an input; what the reader noticed but read past (e.g. a truncated file) is printed on standard error.
fn load(path: &Path) -> Result<Clip, Failure> {
    let d = read(path)?;
    for w in &d.warnings {
        eprintln!("warn {}: {w}", path.display());
    }
    Ok(d.clip)
}

/// Reads any supported sound file (WAV through the project's reader, the rest through symphonia).
fn read(path: &Path) -> Result<io::decode::Decoded, Failure> {
    let bytes = read_file(path)?;
    io::decode::read_any(&bytes, path.extension().and_then(|e| e.to_str()), Default::default())
        .map_err(|e| Failure::new(EXIT_INPUT, format!("{}: {e}", path.display())))
}

#[derive(Serialize)]
struct Peak {
    hz: f64,
    dbfs: f32,
}

#[derive(Serialize)]
struct SpectrumSummary {
    fft_size: usize,
    window: Window,
    bin_hz: f64,
    peaks: Vec<Peak>,
    median_dbfs: f32,
}

#[derive(Serialize)]
struct Analysis {
    file: PathBuf,
    decoder: String,
    format: String,
    sample_rate: u32,
    channels: usize,
    frames: usize,
    duration_s: f64,
    levels: Levels,
    spectrum: SpectrumSummary,
    #[serde(skip_serializing_if = "Option::is_none")]
    reference: Option<PathBuf>,
    #[serde(skip_serializing_if = "Option::is_none")]
    sqnr_db: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    spectrogram: Option<SpectrogramFile>,
}

/// Where a spectrogram image went and how to read its axes.
#[derive(Serialize)]
struct SpectrogramFile {
    file: PathBuf,
    fft_size: usize,
    hop: usize,
    frames: usize,
    group: usize,
    bins: usize,
    seconds_per_column: f64,
    hz_per_row: f64,
    floor_dbfs: f32,
}

/// Writes the spectrogram of `clip` as a binary PGM (P5): frames left to right, bins bottom (0 Hz) to top.
fn write_spectrogram(clip: &Clip, args: &AnalyzeArgs, path: &Path) -> Result<SpectrogramFile, Failure> {
    let usage = |e: stairstep::Error| Failure::new(EXIT_USAGE, format!("--spectrogram-size: {e}"));
    if !(args.spectrogram_floor.is_finite() && args.spectrogram_floor < 0.0) {
        return Err(Failure::new(EXIT_USAGE, "--spectrogram-floor: a level below 0 dBFS, e.g. -120"));
    }
    let params = SpectrogramParams { size: args.spectrogram_size, ..Default::default() };
    let s = SpectrogramAnalyzer::new(params).map_err(usage)?.analyze(&clip.channels, clip.sample_rate);
    let bytes = s.to_u8(args.spectrogram_floor, 0.0);
    let mut pgm = format!("P5\n{} {}\n255\n", s.frames, s.bins).into_bytes();
    pgm.reserve(bytes.len());
    for k in (0..s.bins).rev() {
        pgm.extend((0..s.frames).map(|j| bytes[j * s.bins + k]));
    }
    write_atomic(path, &pgm, args.force)?;
    Ok(SpectrogramFile {
        file: path.to_path_buf(),
        fft_size: s.size,
        hop: s.hop,
        frames: s.frames,
        group: s.group,
        bins: s.bins,
        seconds_per_column: (s.group * s.hop) as f64 / clip.sample_rate as f64,
        hz_per_row: s.bin_hz(1),
        floor_dbfs: args.spectrogram_floor,
    })
}

fn summary(clip: &Clip, fft_size: usize) -> Result<SpectrumSummary, Failure> {
    let mut a = SpectrumAnalyzer::new(fft_size, Window::Hann).map_err(|e| Failure::new(EXIT_USAGE, e.to_string()))?;
    let s = a.analyze(&clip.channels);
    let mut peaks: Vec<(usize, f32)> =
        (1..s.len() - 1).filter(|&k| s[k] > s[k - 1] && s[k] >= s[k + 1]).map(|k| (k, s[k])).collect();
    peaks.sort_by(|a, b| b.1.total_cmp(&a.1));
    peaks.truncate(5);
    let mut sorted = s.clone();
    sorted.sort_by(f32::total_cmp);
    Ok(SpectrumSummary {
        fft_size,
        window: Window::Hann,
        bin_hz: a.bin_hz(1, clip.sample_rate),
        peaks: peaks.into_iter().map(|(k, v)| Peak { hz: a.bin_hz(k, clip.sample_rate), dbfs: v }).collect(),
        median_dbfs: sorted[sorted.len() / 2],
    })
}

pub fn analyze(args: AnalyzeArgs) -> Result<(), Failure> {
    let decoded = read(&args.input)?;
    let clip = decoded.clip;
    for w in &decoded.warnings {
        eprintln!("stairstep: {}: warning: {w}", args.input.display());
    }
    let mut sqnr = None;
    if let Some(r) = &args.reference {
        let reference = load(r)?;
        if reference.sample_rate != clip.sample_rate
            || reference.channel_count() != clip.channel_count()
            || reference.frames() != clip.frames()
        {
            return Err(Failure::new(
                EXIT_INPUT,
                format!(
                    "{} ({} Hz, {} ch, {} frames) and the reference {} ({} Hz, {} ch, {} frames) must match to compare",
                    args.input.display(),
                    clip.sample_rate,
                    clip.channel_count(),
                    clip.frames(),
                    r.display(),
                    reference.sample_rate,
                    reference.channel_count(),
                    reference.frames()
                ),
            ));
        }
        sqnr = Some(sqnr_db(&reference.channels, &clip.channels));
    }
    let spectrogram = match &args.spectrogram {
        Some(path) => Some(write_spectrogram(&clip, &args, path)?),
        None => None,
    };
    let a = Analysis {
        file: args.input.clone(),
        decoder: decoded.decoder,
        format: decoded.format,
        sample_rate: clip.sample_rate,
        channels: clip.channel_count(),
        frames: clip.frames(),
        duration_s: clip.duration_s(),
        levels: Levels::measure(&clip.channels),
        spectrum: summary(&clip, args.fft_size)?,
        reference: args.reference.clone(),
        sqnr_db: sqnr,
        spectrogram,
    };
    if args.json {
        println!("{}", serde_json::to_string_pretty(&a).unwrap_or_default());
        return Ok(());
    }
    let l = &a.levels;
    println!(
        "{}: {} Hz, {} channel(s), {} frames ({:.3} s)",
        a.file.display(),
        a.sample_rate,
        a.channels,
        a.frames,
        a.duration_s
    );
    println!("  read by   {} ({})", a.decoder, a.format);
    println!("  peak      {:8.2} dBFS", l.peak_dbfs);
    println!("  RMS       {:8.2} dBFS   (a full-scale sine reads 0 dBFS)", l.rms_dbfs);
    println!("  crest     {:8.2} dB", l.crest_db);
    println!("  DC        {:+8.5}", l.dc);
    println!("  at ±1.0   {:8} samples", l.at_full_scale);
    println!("  NaN/Inf   {:8} samples", l.non_finite);
    println!(
        "  spectrum  {}-point Hann, {:.2} Hz per bin, median {:.1} dBFS",
        a.spectrum.fft_size, a.spectrum.bin_hz, a.spectrum.median_dbfs
    );
    for p in &a.spectrum.peaks {
        println!("            {:10.1} Hz  {:7.1} dBFS", p.hz, p.dbfs);
    }
    if let Some(s) = &a.spectrogram {
        println!(
            "  spectrogram {} ({} × {}: {:.1} ms per column, {:.2} Hz per row, black at {} dBFS)",
            s.file.display(),
            s.frames,
            s.bins,
            s.seconds_per_column * 1e3,
            s.hz_per_row,
            s.floor_dbfs
        );
    }
    if let Some(s) = a.sqnr_db {
        println!(
            "  SQNR      {:8.2} dB   against {}",
            s,
            args.reference.as_ref().map(|p| p.display().to_string()).unwrap_or_default()
        );
    }
    Ok(())
}

pub fn sweep(args: SweepArgs) -> Result<(), Failure> {
    let clip = load(&args.input)?;
    let grid: Grid = parse_enum("grid", &args.grid, "mid-tread or mid-rise")?;
    let rounding: Rounding = parse_enum("rounding", &args.rounding, "nearest or truncate")?;
    let base = QuantizeParams { grid, rounding, ..Default::default() };
    let pts: Vec<SweepPoint> =
        sqnr_sweep(&clip.channels, &base, 1..=24).map_err(|e| Failure::new(EXIT_USAGE, e.to_string()))?;
    if args.json {
        println!("{}", serde_json::to_string_pretty(&pts).unwrap_or_default());
        return Ok(());
    }
    // The same spellings as the options (mid-tread, nearest), from the serde names.
    let spell = |v: serde_json::Value| v.as_str().map(str::to_string).unwrap_or_default();
    println!(
        "{}: SQNR against word length ({}, {}, no dither)",
        args.input.display(),
        spell(serde_json::to_value(grid).unwrap_or_default()),
        spell(serde_json::to_value(rounding).unwrap_or_default())
    );
    println!("  bits  measured dB  this signal dB  full-scale sine dB   clipped");
    for p in &pts {
        // An error of exactly zero: the input already sits on this grid (sqnr_db reads it as +240 dB).
        let measured =
            if p.measured_db >= LOSSLESS_DB { "lossless".to_string() } else { format!("{:.2}", p.measured_db) };
        println!("  {:4}  {:>11}  {:14.2}  {:18.2}  {:8}", p.bits, measured, p.theory_db, p.sine_formula_db, p.clipped);
    }
    Ok(())
}

fn parse_enum<T: serde::de::DeserializeOwned>(flag: &str, v: &str, allowed: &str) -> Result<T, Failure> {
    serde_json::from_value(serde_json::Value::String(v.into()))
        .map_err(|_| Failure::new(EXIT_USAGE, format!("--{flag} {v:?}: {allowed}")))
}
