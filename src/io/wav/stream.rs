//! Streaming WAV reading and writing, for files too long to hold in memory.
//!
//! [`StreamReader`] walks the chunks with seeks and then decodes the `data` chunk block by block; it handles the
//! byte-aligned formats (PCM, float, G.711, extensible). [`StreamWriter`] writes the header for a known frame count,
//! then appends interleaved blocks; it handles the same encodings. IMA ADPCM input and output (small files by
//! nature), loops, raw and C-array outputs go through the in-memory [`read`](super::read) and writers instead.
//! Both produce exactly the bytes and samples of the in-memory functions.

use super::fmt::parse_fmt;
use super::read::{decode_frames, truncation};
use super::write::{body_append, header, trailer};
use super::{WavFormat, WAVE_FORMAT_G721_ADPCM, WAVE_FORMAT_GSM610, WAVE_FORMAT_IMA_ADPCM, WAVE_FORMAT_MS_ADPCM};
use crate::error::{Error, Result};
use crate::io::{ExportMeta, WavEncoding};
use std::io::{Read, Seek, SeekFrom, Write};

/// A WAV file opened for reading block by block.
pub struct StreamReader<R: Read + Seek> {
    r: R,
    format: WavFormat,
    frames: usize,
    left: usize,
    buf: Vec<u8>,
    /// What the reader noticed but read past.
    pub warnings: Vec<String>,
}

impl<R: Read + Seek> StreamReader<R> {
    /// Walks the chunks. `Ok(None)`: the file needs the in-memory reader — IMA ADPCM, loops or cue points (which it
    /// keeps), or an unusual layout (no `fmt ` before `data`, not RIFF/WAVE at all); use [`read`](super::read) for it,
    /// which also gives the precise error for a malformed file.
    pub fn open(mut r: R) -> Result<Option<Self>> {
        let len = r.seek(SeekFrom::End(0))?;
        r.seek(SeekFrom::Start(0))?;
        let mut head = [0u8; 12];
        if len < 12 || r.read_exact(&mut head).is_err() || &head[0..4] != b"RIFF" || &head[8..12] != b"WAVE" {
            return Ok(None);
        }
        let mut pos = 12u64;
        let mut format = None;
        let mut warnings = Vec::new();
        while pos + 8 <= len {
            let mut h = [0u8; 8];
            r.read_exact(&mut h)?;
            let size = u32::from_le_bytes([h[4], h[5], h[6], h[7]]) as u64;
            let body = pos + 8;
            match &h[0..4] {
                b"fmt " => {
                    if size > 4096 || body + size > len {
                        return Ok(None);
                    }
                    let mut b = vec![0u8; size as usize];
                    r.read_exact(&mut b)?;
                    format = Some(parse_fmt(&b, &mut warnings)?);
                }
                b"data" => {
                    let Some(f) = format else { return Ok(None) };
                    if matches!(
                        f.sub_format,
                        WAVE_FORMAT_IMA_ADPCM | WAVE_FORMAT_MS_ADPCM | WAVE_FORMAT_G721_ADPCM | WAVE_FORMAT_GSM610
                    ) {
                        return Ok(None);
                    }
                    let avail = size.min(len - body);
                    if avail < size {
                        let ba = f.block_align.max(1) as u64;
                        warnings.push(truncation(
                            size / ba,
                            avail / ba,
                            &format!("`data` chunk declares {size} bytes but the file ends after {avail}"),
                        ));
                    }
                    // Loops after the samples (`smpl`, `cue `) need the in-memory reader, which keeps them.
                    let mut next = body + size + (size & 1);
                    while next + 8 <= len {
                        r.seek(SeekFrom::Start(next))?;
                        let mut h2 = [0u8; 8];
                        r.read_exact(&mut h2)?;
                        if &h2[0..4] == b"smpl" || &h2[0..4] == b"cue " {
                            return Ok(None);
                        }
                        let s2 = u32::from_le_bytes([h2[4], h2[5], h2[6], h2[7]]) as u64;
                        next += 8 + s2 + (s2 & 1);
                    }
                    r.seek(SeekFrom::Start(body))?;
                    let frames = (avail / f.block_align as u64) as usize;
                    return Ok(Some(StreamReader { r, format: f, frames, left: frames, buf: Vec::new(), warnings }));
                }
                _ => {}
            }
            pos = body + size + (size & 1);
            r.seek(SeekFrom::Start(pos))?;
        }
        Ok(None)
    }

    /// The file's format.
    pub fn format(&self) -> &WavFormat {
        &self.format
    }

    /// Frames in the file.
    pub fn frames(&self) -> usize {
        self.frames
    }

    /// Reads up to `max_frames` frames (fewer at the end; none when done), one vector per channel.
    pub fn read_block(&mut self, max_frames: usize) -> Result<Vec<Vec<f32>>> {
        let n = max_frames.min(self.left);
        self.buf.resize(n * self.format.block_align as usize, 0);
        self.r.read_exact(&mut self.buf).map_err(|e| Error::Io(format!("reading samples: {e}")))?;
        self.left -= n;
        Ok(decode_frames(&self.buf, &self.format, &mut self.warnings))
    }
}

/// A WAV file written block by block, for a frame count known in advance.
pub struct StreamWriter<W: Write> {
    w: W,
    encoding: WavEncoding,
    rate: u32,
    channels: usize,
    frames: usize,
    written: usize,
    meta: ExportMeta,
    buf: Vec<u8>,
}

impl<W: Write> StreamWriter<W> {
    /// Whether this encoding can be streamed (every byte-aligned one; not the ADPCM codecs).
    pub fn supports(encoding: WavEncoding) -> bool {
        encoding.is_byte_aligned()
    }

    /// Writes the header of a file of `frames` frames.
    pub fn new(
        mut w: W,
        encoding: WavEncoding,
        rate: u32,
        channels: usize,
        frames: usize,
        meta: ExportMeta,
    ) -> Result<Self> {
        if !Self::supports(encoding) {
            return Err(Error::param(
                "encoding",
                encoding.name(),
                "a byte-aligned encoding (not an ADPCM codec) for streaming",
            ));
        }
        w.write_all(&header(encoding, None, frames, channels, rate, &meta)?)?;
        Ok(StreamWriter { w, encoding, rate, channels, frames, written: 0, meta, buf: Vec::new() })
    }

    /// Appends one block of frames, one slice per channel.
    pub fn write_block<C: AsRef<[f32]>>(&mut self, block: &[C]) -> Result<()> {
        let n = block.first().map_or(0, |c| c.as_ref().len());
        if block.len() != self.channels || self.written + n > self.frames {
            return Err(Error::format(format!(
                "stream writer: block of {} channels × {n} frames does not fit ({} channels, {} of {} frames written)",
                block.len(),
                self.channels,
                self.written,
                self.frames
            )));
        }
        self.buf.clear();
        body_append(self.encoding, block, &mut self.buf);
        self.w.write_all(&self.buf)?;
        self.written += n;
        Ok(())
    }

    /// Writes the end of the file (pad byte, `smpl`) and returns the writer.
    pub fn finish(mut self) -> Result<W> {
        if self.written != self.frames {
            return Err(Error::format(format!("stream writer: {} of {} frames written", self.written, self.frames)));
        }
        let data_len = super::write::data_size_of(self.encoding, self.frames, self.channels);
        self.w.write_all(&trailer(data_len, &self.meta, self.rate))?;
        self.w.flush()?;
        Ok(self.w)
    }
}
