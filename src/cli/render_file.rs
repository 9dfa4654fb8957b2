//! One input to one output, for `render`: reading the input, rendering it block by block from file to file when
//! nothing needs the whole sound, or in memory otherwise, and writing the export.

use super::manifest;
use super::plan::Job;
use super::{write_atomic, write_atomic_with, Failure, EXIT_INPUT, EXIT_OUTPUT};
use indicatif::ProgressBar;
use stairstep::chain::StageReport;
use stairstep::io::ExportFormat;
use stairstep::{io, render, Clip, Preset};
use std::path::Path;

/// What a render measured, for the report.
pub(super) struct Measured {
    pub(super) duration_s: f64,
    pub(super) peak_dbfs: f64,
    pub(super) clipped: u64,
    pub(super) sqnr_db: f64,
    pub(super) bytes: u64,
    pub(super) loop_frames: Option<(u32, u32)>,
    /// SHA-256 of the bytes written (when a manifest is kept).
    pub(super) output_sha256: Option<String>,
    /// What each stage did on its own (the render report's `stages`).
    pub(super) stages: Vec<StageReport>,
}

/// How one render may write its output and what it must check.
pub(super) struct WriteRules {
    /// Replace an existing output (--force or a stale manifest entry); otherwise the output must be new.
    pub(super) replace: bool,
    /// Fail on any warning, before the output is put in place.
    pub(super) strict: bool,
    /// Hash the bytes written (for the manifest).
    pub(super) hash: bool,
}

/// Under --strict, any warning fails the file; the warnings stay in the outcome.
pub(super) fn strict_check(rules: &WriteRules, warnings: &[String]) -> Result<(), Failure> {
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
pub(super) fn render_warnings(non_finite: u64, prep_notes: &[String], warnings: &mut Vec<String>) {
    if non_finite > 0 {
        warnings.push(format!("{non_finite} input samples were NaN or infinite (rendered as 0 and ±1.0)"));
    }
    warnings.extend(prep_notes.iter().map(|n| format!("preparation: {n}")));
}

/// The sound of an input file, as the in-memory render needs it. This is the one place that reads a whole input.
pub(super) struct Input {
    pub(super) clip: Clip,
    /// A loop from the file's own metadata (a WAV `smpl` chunk), in source frames, end exclusive.
    pub(super) file_loop: Option<(u64, u64)>,
    /// What the reader noticed but could read past.
    pub(super) warnings: Vec<String>,
}

/// Reads a whole input file. Errors do not repeat the file's name: the line that reports them names it.
pub(super) fn read_input(path: &Path) -> Result<Input, Failure> {
    // WAV through the project's own reader, FLAC, AIFF, Ogg, MP3 and CAF through symphonia; a loop in the file's own
    // `smpl` (WAV) or `INST` (AIFF) chunk comes along.
    let d = io::decode::read_any_file(path).map_err(|e| Failure::new(EXIT_INPUT, e.to_string()))?;
    Ok(Input { clip: d.clip, file_loop: d.file_loop, warnings: d.warnings })
}

/// Export frames the streaming render hands to its writer thread at once (four blocks; about 128 KiB a channel as
/// floats).
const SEND_FRAMES: usize = 4 * stairstep::stages::BLOCK;

/// Bytes of the streaming render's read and write buffers.
const IO_BUFFER: usize = 64 << 10;

/// Renders in blocks, from file to file, when nothing needs the whole sound at once: a byte-aligned WAV input
/// without loops, a preset without asset preparation (trim, normalisation, loops need the whole sound), a
/// byte-aligned WAV export. Memory stays at a few blocks whatever the length. `Ok(None)`: use the in-memory path.
pub(super) fn render_streaming(
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
    // Buffers of 64 KiB: the reader asks for a block (4,096 frames) at a time and the writer gets a batch of
    // SEND_FRAMES frames, which goes past a buffer smaller than itself without being copied into it; megabyte
    // buffers only cost page faults and copies.
    let reader = StreamReader::open(std::io::BufReader::with_capacity(IO_BUFFER, file))
        .map_err(|e| Failure::new(EXIT_INPUT, e.to_string()))?;
    let Some(mut reader) = reader else { return Ok(None) };
    warnings.append(&mut reader.warnings);
    strict_check(rules, warnings)?;
    let f = reader.format().clone();
    let (ch, rate, frames) = (f.channels as usize, f.sample_rate, reader.frames());
    let mut chain = Chain::new(preset, ch, rate, frames)
        .map_err(|e| Failure::new(EXIT_INPUT, e.to_string()))?
        .without_audition_output();
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
        let sink = std::io::BufWriter::with_capacity(IO_BUFFER, HashingWriter::new(&mut *file, rules.hash));
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
            // Export blocks are handed over in batches of about SEND_FRAMES frames: each hand-over wakes the other
            // thread, which on a busy machine can cost a scheduler time slice, while the bytes do not depend on
            // where the stream is cut. The audition is not written, so the chain does not hand it out.
            let send = |out: &mut ChainOutput| {
                let empty = spare.try_recv().unwrap_or_else(|_| vec![Vec::with_capacity(SEND_FRAMES + BLOCK); ch]);
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
                if out.export[0].len() >= SEND_FRAMES && !send(&mut out) {
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
pub(super) fn render_in_memory(
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
