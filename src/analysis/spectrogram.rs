//! Spectrograms: short-time Fourier transforms (Hann window) of a signal, frame by frame, in dBFS, planned once with
//! realfft.
//!
//! # Frames and axes
//! Frame `j` covers samples `j·hop … j·hop + size − 1` (zero-padded past the end); frames follow until one reaches
//! the end of the signal, so every sample is in some frame (a signal shorter than a frame is one zero-padded frame).
//! Its time is the centre of its window, `(j·hop + size/2) / sample_rate` seconds. Bin `k` (`0 … size/2`) is at
//! `k·sample_rate/size` Hz.
//!
//! # Level
//! As the Welch spectra ([`crate::analysis::spectrum`]): a bin reads `20·log10(2·|X[k]| / Σw)` (`|X[k]| / Σw` at DC
//! and Nyquist), so a full-scale sine centred on a bin reads 0 dBFS there. Several channels: powers are averaged over
//! channels. Values are floored at [`crate::db::FLOOR_DB`].
//!
//! # Long signals
//! At most `max_frames` frames are returned (default [`DEFAULT_MAX_FRAMES`]). When the signal has more, each returned
//! frame is the **power average** of `group` consecutive STFT frames (`group` the smallest that fits), so every
//! sample still counts and a short loud event stays visible, smeared over its group's time span. The returned
//! frame's time is the centre of its group. The cost is one FFT per STFT frame whatever `max_frames` is.
//!
//! # For drawing
//! [`Spectrogram::db`] is `frames × bins` `f32` values, frame-major (a frame's bins are contiguous). [`Spectrogram::to_u8`]
//! quantises them to bytes over a dB range for a colour table; [`Spectrogram::rows`] resamples to pixel rows on a
//! linear or logarithmic frequency axis, [`FrequencyScale::hz`] and [`FrequencyScale::row`] convert between rows and
//! Hz for a pointer readout.

use crate::db::{power_db, FLOOR_DB};
use crate::error::{Error, Result};
use realfft::{num_complex::Complex, RealFftPlanner, RealToComplex};
use serde::{Deserialize, Serialize};
use std::sync::Arc;

/// Smallest and largest FFT sizes (powers of two).
pub const SIZES: std::ops::RangeInclusive<usize> = 256..=8192;
/// Default cap on returned frames: about two per pixel column of a wide view.
pub const DEFAULT_MAX_FRAMES: usize = 2048;

/// Settings of a spectrogram.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct SpectrogramParams {
    /// FFT size in samples, a power of two from 256 to 8192. Default 2048 (43 ms and 23.4 Hz bins at 48 kHz).
    pub size: usize,
    /// Samples from one frame's start to the next, 1 to `size`. `0` (default): `size/4` (75 % overlap).
    pub hop: usize,
    /// Most frames returned, at least 1 (see the module docs). Default [`DEFAULT_MAX_FRAMES`].
    pub max_frames: usize,
}

impl Default for SpectrogramParams {
    fn default() -> Self {
        SpectrogramParams { size: 2048, hop: 0, max_frames: DEFAULT_MAX_FRAMES }
    }
}

/// A spectrogram's data.
#[derive(Debug, Clone, Serialize)]
pub struct Spectrogram {
    /// Sample rate of the analysed signal, Hz.
    pub sample_rate: u32,
    /// FFT size, samples.
    pub size: usize,
    /// Hop between STFT frames, samples.
    pub hop: usize,
    /// STFT frames averaged into each returned frame (1 when the signal needed no more than `max_frames`).
    pub group: usize,
    /// Returned frames.
    pub frames: usize,
    /// Bins per frame, `size/2 + 1`.
    pub bins: usize,
    /// Levels in dBFS, `frames × bins`, frame-major: bin `k` of frame `j` is `db[j·bins + k]`.
    pub db: Vec<f32>,
}

impl Spectrogram {
    /// Frequency of bin `k`, Hz.
    pub fn bin_hz(&self, k: usize) -> f64 {
        k as f64 * self.sample_rate as f64 / self.size as f64
    }

    /// Time of returned frame `j`, seconds: the centre of its window (of its group's windows).
    pub fn frame_time_s(&self, j: usize) -> f64 {
        let first = (j * self.group * self.hop) as f64;
        let centre = first + ((self.group - 1) * self.hop) as f64 / 2.0 + self.size as f64 / 2.0;
        centre / self.sample_rate as f64
    }

    /// The bins of frame `j`.
    pub fn frame(&self, j: usize) -> &[f32] {
        &self.db[j * self.bins..(j + 1) * self.bins]
    }

    /// The levels as bytes for a colour table: `floor_db` and below → 0, `ceil_db` and above → 255, linear between
    /// (rounded). `floor_db < ceil_db`.
    pub fn to_u8(&self, floor_db: f32, ceil_db: f32) -> Vec<u8> {
        let span = (ceil_db - floor_db).max(f32::MIN_POSITIVE);
        self.db.iter().map(|&v| ((v - floor_db) / span * 255.0).round().clamp(0.0, 255.0) as u8).collect()
    }

    /// Resamples every frame to `rows` pixel rows on `scale` from `lo_hz` to `hi_hz` (row 0 at `lo_hz`): `frames ×
    /// rows` dBFS, frame-major. A row that spans several bins takes their largest value (a narrow peak stays
    /// visible); a row inside one bin interpolates linearly between the two nearest bins.
    pub fn rows(&self, rows: usize, scale: FrequencyScale, lo_hz: f64, hi_hz: f64) -> Vec<f32> {
        let mut out = vec![FLOOR_DB as f32; self.frames * rows];
        if rows == 0 || self.bins == 0 {
            return out;
        }
        let hz_per_bin = self.sample_rate as f64 / self.size as f64;
        let last = (self.bins - 1) as f64;
        // Each row's bin span: from the row's lower edge to its upper edge (half a row either side of its centre).
        let spans: Vec<(f64, f64)> = (0..rows)
            .map(|r| {
                let edge = |t: f64| (scale.hz(t, rows, lo_hz, hi_hz) / hz_per_bin).clamp(0.0, last);
                (edge(r as f64 - 0.5), edge(r as f64 + 0.5))
            })
            .collect();
        for (j, o) in out.chunks_mut(rows).enumerate() {
            let f = self.frame(j);
            for (v, &(a, b)) in o.iter_mut().zip(&spans) {
                let (ka, kb) = (a.ceil() as usize, b.floor() as usize);
                *v = if kb >= ka {
                    f[ka..=kb].iter().copied().fold(f32::MIN, f32::max)
                } else {
                    let c = (a + b) / 2.0;
                    let (k0, t) = (c.floor() as usize, (c - c.floor()) as f32);
                    let k1 = (k0 + 1).min(self.bins - 1);
                    f[k0] + (f[k1] - f[k0]) * t
                };
            }
        }
        out
    }
}

/// The spectrogram of the part `start … end` (frames, end exclusive) of `channels` for a view `columns` pixels wide:
/// about one returned frame per column, each centred on its column. Frame `j`'s window is centred on sample
/// `start + (j + ½)·hop·group` (samples outside the signal read as 0), with `hop = ⌈(end − start)/columns⌉` clamped to
/// `size/4 … size` and, when even a hop of `size` gives more frames than columns, `group` frames power-averaged into
/// one (see the module docs). The lower bound (75 % overlap, the usual choice for a Hann window) keeps the cost at most
/// 4 FFTs per window length of the range: a finer hop shows little more (the window itself smears time over `size`
/// samples), and a zoomed-in view then has fewer frames than columns, each drawn wider. So the returned frames tile the range evenly:
/// frame `j` stands for samples `start + j·span/frames …` where `span = end − start`. `size` as in
/// [`SpectrogramParams`]; `columns` at least 1.
pub fn view_spectrogram<C: AsRef<[f32]>>(
    channels: &[C],
    sample_rate: u32,
    start: usize,
    end: usize,
    size: usize,
    columns: usize,
) -> Result<Spectrogram> {
    if end <= start {
        return Err(Error::param("range", format!("{start}..{end}"), "start < end"));
    }
    let columns = columns.max(1);
    let span = end - start;
    let hop = span.div_ceil(columns).clamp((size / 4).max(1), size.max(1));
    let wanted = span.div_ceil(hop);
    let mut a = SpectrogramAnalyzer::new(SpectrogramParams { size, hop, max_frames: columns })?;
    // The analysed segment starts half a window before the first frame's centre (start + hop/2), zero-padded
    // where it lies outside the signal, and is as long as `wanted` frames need.
    let first = start as i64 + (hop / 2) as i64 - (size / 2) as i64;
    let len = (wanted - 1) * hop + size;
    let segment = |x: &[f32]| -> Vec<f32> {
        let mut out = vec![0f32; len];
        let lo = first.max(0) as usize;
        let hi = ((first + len as i64).max(0) as usize).min(x.len());
        if lo < hi {
            let at = (lo as i64 - first) as usize;
            out[at..at + hi - lo].copy_from_slice(&x[lo..hi]);
        }
        out
    };
    let segs: Vec<Vec<f32>> = channels.iter().map(|c| segment(c.as_ref())).collect();
    Ok(a.analyze(&segs, sample_rate))
}

/// How pixel rows map to frequency.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum FrequencyScale {
    /// Equal Hz per row.
    #[default]
    Linear,
    /// Equal ratio per row (octaves evenly spaced); the low end must be above 0 Hz (20 Hz is usual).
    Log,
}

impl FrequencyScale {
    /// The frequency (Hz) at row position `row` (0 = `lo_hz`, `rows − 1` = `hi_hz`; fractions allowed).
    pub fn hz(self, row: f64, rows: usize, lo_hz: f64, hi_hz: f64) -> f64 {
        let t = if rows > 1 { row / (rows - 1) as f64 } else { 0.0 };
        match self {
            FrequencyScale::Linear => lo_hz + (hi_hz - lo_hz) * t,
            FrequencyScale::Log => lo_hz.max(1e-3) * (hi_hz / lo_hz.max(1e-3)).powf(t),
        }
    }

    /// The row position of `hz`: the inverse of [`hz`](Self::hz).
    pub fn row(self, hz: f64, rows: usize, lo_hz: f64, hi_hz: f64) -> f64 {
        let t = match self {
            FrequencyScale::Linear => (hz - lo_hz) / (hi_hz - lo_hz),
            FrequencyScale::Log => {
                let lo = lo_hz.max(1e-3);
                (hz.max(1e-3) / lo).ln() / (hi_hz / lo).ln()
            }
        };
        t * rows.saturating_sub(1) as f64
    }
}

/// A planned STFT for one size. Reusable; allocates its buffers at construction and its output per call.
pub struct SpectrogramAnalyzer {
    params: SpectrogramParams,
    hop: usize,
    window: Vec<f32>,
    norm: f64,
    fft: Arc<dyn RealToComplex<f32>>,
    frame: Vec<f32>,
    spectrum: Vec<Complex<f32>>,
    scratch: Vec<Complex<f32>>,
    acc: Vec<f64>,
}

impl std::fmt::Debug for SpectrogramAnalyzer {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("SpectrogramAnalyzer").field("params", &self.params).finish()
    }
}

impl SpectrogramAnalyzer {
    /// Validates `params` and plans the FFT.
    pub fn new(params: SpectrogramParams) -> Result<Self> {
        let size = params.size;
        if !size.is_power_of_two() || !SIZES.contains(&size) {
            return Err(Error::param("size", size, "a power of two from 256 to 8192"));
        }
        let hop = if params.hop == 0 { size / 4 } else { params.hop };
        if hop > size {
            return Err(Error::param("hop", hop, format!("1..={size} (at most the FFT size)")));
        }
        if params.max_frames == 0 {
            return Err(Error::param("max_frames", 0, "at least 1"));
        }
        // The periodic Hann window, as the Welch spectra use.
        let window: Vec<f32> = (0..size)
            .map(|i| (0.5 - 0.5 * (2.0 * std::f64::consts::PI * i as f64 / size as f64).cos()) as f32)
            .collect();
        let sum: f64 = window.iter().map(|&w| w as f64).sum();
        let fft = RealFftPlanner::<f32>::new().plan_fft_forward(size);
        let (frame, spectrum, scratch) = (fft.make_input_vec(), fft.make_output_vec(), fft.make_scratch_vec());
        Ok(SpectrogramAnalyzer {
            params,
            hop,
            window,
            norm: 1.0 / sum,
            fft,
            frame,
            spectrum,
            scratch,
            acc: vec![0.0; size / 2 + 1],
        })
    }

    /// STFT frames a signal of `len` samples has (before the cap).
    pub fn stft_frames(&self, len: usize) -> usize {
        let size = self.params.size;
        if len <= size {
            1
        } else {
            (len - size).div_ceil(self.hop) + 1
        }
    }

    /// The spectrogram of `channels` (all the same length; powers averaged over them) at `sample_rate` Hz.
    /// Non-finite samples count as 0.
    pub fn analyze<C: AsRef<[f32]>>(&mut self, channels: &[C], sample_rate: u32) -> Spectrogram {
        let size = self.params.size;
        let bins = size / 2 + 1;
        let len = channels.iter().map(|c| c.as_ref().len()).max().unwrap_or(0);
        let total = self.stft_frames(len);
        let group = total.div_ceil(self.params.max_frames);
        let frames = total.div_ceil(group);
        let mut db = Vec::with_capacity(frames * bins);
        let last = bins - 1;
        for j in 0..frames {
            self.acc.iter_mut().for_each(|a| *a = 0.0);
            let members = (j * group..((j + 1) * group).min(total)).len();
            for f in j * group..((j + 1) * group).min(total) {
                let start = f * self.hop;
                for ch in channels {
                    let x = ch.as_ref();
                    let avail = &x[start.min(x.len())..(start + size).min(x.len())];
                    for ((o, &s), &w) in self.frame.iter_mut().zip(avail).zip(&self.window) {
                        *o = if s.is_finite() { s } else { 0.0 } * w;
                    }
                    self.frame[avail.len()..].fill(0.0);
                    // The buffers come from the plan, so their lengths always match (the only error it reports).
                    self.fft.process_with_scratch(&mut self.frame, &mut self.spectrum, &mut self.scratch).ok();
                    for (a, b) in self.acc.iter_mut().zip(&self.spectrum) {
                        *a += b.norm_sqr() as f64;
                    }
                }
            }
            let n = (members * channels.len().max(1)) as f64;
            for (k, &a) in self.acc.iter().enumerate() {
                let scale = if k == 0 || k == last { self.norm } else { 2.0 * self.norm };
                db.push(power_db(a / n * scale * scale).max(FLOOR_DB) as f32);
            }
        }
        Spectrogram { sample_rate, size, hop: self.hop, group, frames, bins, db }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tone(n: usize, cycles_per_sample: f64, a: f64) -> Vec<f32> {
        (0..n).map(|i| (a * (2.0 * std::f64::consts::PI * cycles_per_sample * i as f64).sin()) as f32).collect()
    }

    #[test]
    fn bin_centred_sine_reads_its_level_in_every_frame() {
        let mut a = SpectrogramAnalyzer::new(SpectrogramParams { size: 512, ..Default::default() }).unwrap();
        let s = a.analyze(&[tone(48_000, 40.0 / 512.0, 0.5)], 48_000);
        assert_eq!((s.hop, s.group, s.bins), (128, 1, 257));
        assert_eq!(s.frames, a.stft_frames(48_000));
        for j in 0..s.frames - 1 {
            assert!((s.frame(j)[40] + 6.0206).abs() < 0.01, "frame {j}: {}", s.frame(j)[40]);
        }
        assert!((s.bin_hz(40) - 3750.0).abs() < 1e-9);
        assert!((s.frame_time_s(0) - 256.0 / 48_000.0).abs() < 1e-12);
    }

    #[test]
    fn the_frame_cap_averages_groups_and_keeps_the_level() {
        let x = tone(100_000, 10.0 / 256.0, 1.0);
        let mut a = SpectrogramAnalyzer::new(SpectrogramParams { size: 256, hop: 64, max_frames: 100 }).unwrap();
        let s = a.analyze(&[&x[..]], 48_000);
        assert!(s.frames <= 100 && s.group > 1, "{} frames of {}", s.frames, s.group);
        assert!(s.frame(10)[10].abs() < 0.01);
        // The group's centre time.
        let t = s.frame_time_s(1);
        let first = s.group * 64;
        let expected = (first as f64 + ((s.group - 1) * 64) as f64 / 2.0 + 128.0) / 48_000.0;
        assert!((t - expected).abs() < 1e-12);
    }

    #[test]
    fn bad_settings_are_refused_and_short_or_empty_input_works() {
        assert!(SpectrogramAnalyzer::new(SpectrogramParams { size: 128, ..Default::default() }).is_err());
        assert!(SpectrogramAnalyzer::new(SpectrogramParams { size: 1000, ..Default::default() }).is_err());
        assert!(SpectrogramAnalyzer::new(SpectrogramParams { size: 256, hop: 257, max_frames: 1 }).is_err());
        assert!(SpectrogramAnalyzer::new(SpectrogramParams { size: 256, hop: 1, max_frames: 0 }).is_err());
        let mut a = SpectrogramAnalyzer::new(SpectrogramParams { size: 256, ..Default::default() }).unwrap();
        let s = a.analyze(&[vec![0.5f32; 10]], 8000);
        assert_eq!(s.frames, 1);
        let s = a.analyze::<Vec<f32>>(&[], 8000);
        assert_eq!(s.frames, 1);
        assert!(s.db.iter().all(|&v| v == FLOOR_DB as f32));
    }

    #[test]
    fn a_view_has_a_frame_per_column_centred_on_it() {
        // A tone that starts at 1 s, viewed from 0.5 s to 1.5 s in 100 columns: the left half is silent, the right
        // half reads the tone's level (0 dBFS, bin-centred), and the frames tile the range.
        let mut x = vec![0f32; 48_000];
        x.extend(tone(48_000, 40.0 / 1024.0, 1.0));
        let s = view_spectrogram(&[&x[..]], 48_000, 24_000, 72_000, 1024, 100).unwrap();
        assert_eq!((s.hop, s.group, s.frames), (480, 1, 100));
        assert!(s.frame(20)[40] < -100.0, "{}", s.frame(20)[40]);
        assert!(s.frame(80)[40].abs() < 0.01, "{}", s.frame(80)[40]);
        // Zoomed out past a hop of `size`: frames grouped, still at most one per column, level kept.
        let s = view_spectrogram(&[&x[..]], 48_000, 0, x.len(), 256, 10).unwrap();
        assert!(s.frames <= 10 && s.group > 1 && s.hop == 256, "{} frames of {}", s.frames, s.group);
        assert!(view_spectrogram(&[&x[..]], 48_000, 5, 5, 256, 10).is_err());
        // Zoomed in: no hop finer than a quarter of the window, so fewer frames than columns.
        let s = view_spectrogram(&[&x[..]], 48_000, 60_000, 61_000, 1024, 500).unwrap();
        assert_eq!((s.hop, s.frames), (256, 4));
        // A view past the end reads silence, not an error.
        let s = view_spectrogram(&[&x[..]], 48_000, 95_000, 97_000, 256, 10).unwrap();
        assert!(s.frame(s.frames - 1).iter().all(|&v| v == FLOOR_DB as f32));
    }

    #[test]
    fn rows_and_bytes_for_drawing() {
        let mut a = SpectrogramAnalyzer::new(SpectrogramParams { size: 1024, ..Default::default() }).unwrap();
        let s = a.analyze(&[tone(8192, 100.0 / 1024.0, 1.0)], 48_000);
        // A linear axis with fewer rows than bins keeps the peak; a log axis finds it at the right row.
        let hz = s.bin_hz(100);
        for scale in [FrequencyScale::Linear, FrequencyScale::Log] {
            let img = s.rows(64, scale, 20.0, 24_000.0);
            let frame = &img[2 * 64..3 * 64];
            let (best, _) = frame.iter().enumerate().fold((0, f32::MIN), |b, (i, &v)| if v > b.1 { (i, v) } else { b });
            let row = scale.row(hz, 64, 20.0, 24_000.0);
            assert!((best as f64 - row).abs() <= 1.0, "{scale:?}: row {best}, expected {row}");
            assert!((scale.hz(row, 64, 20.0, 24_000.0) - hz).abs() < 1e-6);
        }
        let bytes = s.to_u8(-120.0, 0.0);
        assert_eq!(bytes.len(), s.db.len());
        assert_eq!(bytes[2 * s.bins + 100], 255);
    }
}
