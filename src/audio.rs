//! The multichannel clip type every stage and file format works on.

use crate::error::{Error, Result};

/// A multichannel sound in memory: planar `f32` channels, full scale ±1.0.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Clip {
    /// Sample rate in Hz (1 to 768,000).
    pub sample_rate: u32,
    /// One vector per channel, all of the same length.
    pub channels: Vec<Vec<f32>>,
}

/// Highest sample rate accepted anywhere, in Hz.
pub const MAX_SAMPLE_RATE: u32 = 768_000;
/// Most channels accepted anywhere.
pub const MAX_CHANNELS: usize = 64;

/// Checks a channel count: 1 to [`MAX_CHANNELS`].
pub fn check_channels(channels: usize) -> Result<()> {
    if channels == 0 || channels > MAX_CHANNELS {
        return Err(Error::param("channels", channels, format!("1..={MAX_CHANNELS}")));
    }
    Ok(())
}

/// Checks a sample rate: 1 to [`MAX_SAMPLE_RATE`] Hz.
pub fn check_sample_rate(sample_rate: u32) -> Result<()> {
    if sample_rate == 0 || sample_rate > MAX_SAMPLE_RATE {
        return Err(Error::param("sample_rate", sample_rate, format!("1..={MAX_SAMPLE_RATE} Hz")));
    }
    Ok(())
}

impl Clip {
    /// Checks rate, channel count and equal lengths (what [`Clip::new`] checks, for clips built field by field).
    pub fn check(&self) -> Result<()> {
        check_sample_rate(self.sample_rate)?;
        check_channels(self.channels.len())?;
        let n = self.channels[0].len();
        if self.channels.iter().any(|c| c.len() != n) {
            return Err(Error::format("channels have different lengths"));
        }
        Ok(())
    }

    /// Builds a clip, checking rate, channel count and equal lengths.
    pub fn new(sample_rate: u32, channels: Vec<Vec<f32>>) -> Result<Self> {
        let clip = Clip { sample_rate, channels };
        clip.check()?;
        Ok(clip)
    }

    /// Builds a clip from interleaved samples.
    pub fn from_interleaved(sample_rate: u32, channel_count: usize, data: &[f32]) -> Result<Self> {
        check_channels(channel_count)?;
        let frames = data.len() / channel_count;
        let mut channels = vec![Vec::with_capacity(frames); channel_count];
        for frame in data.chunks_exact(channel_count) {
            for (c, &s) in channels.iter_mut().zip(frame) {
                c.push(s);
            }
        }
        Clip::new(sample_rate, channels)
    }

    /// Frames (samples per channel).
    pub fn frames(&self) -> usize {
        self.channels.first().map_or(0, |c| c.len())
    }

    /// Number of channels.
    pub fn channel_count(&self) -> usize {
        self.channels.len()
    }

    /// Duration in seconds.
    pub fn duration_s(&self) -> f64 {
        self.frames() as f64 / self.sample_rate as f64
    }

    /// Interleaved copy of the samples.
    pub fn interleaved(&self) -> Vec<f32> {
        let (n, c) = (self.frames(), self.channel_count());
        let mut out = Vec::with_capacity(n * c);
        for i in 0..n {
            for ch in &self.channels {
                out.push(ch[i]);
            }
        }
        out
    }
}
