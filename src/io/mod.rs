//! Reading and writing sound files: WAV (RIFF/WAVE), raw headerless samples, C source arrays.

pub mod wav;

use crate::audio::Clip;
use crate::error::Result;
use serde::{Deserialize, Serialize};

/// Sample encodings a WAV export can use.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum WavEncoding {
    /// 8-bit unsigned PCM (offset binary, 128 = silence).
    PcmU8,
    /// 16-bit signed PCM (the default).
    #[default]
    PcmS16,
    /// 24-bit signed PCM.
    PcmS24,
    /// 32-bit signed PCM.
    PcmS32,
    /// 32-bit IEEE float.
    Float32,
}

/// How an export is written.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "type", rename_all = "kebab-case", deny_unknown_fields)]
pub enum ExportFormat {
    /// A RIFF/WAVE file.
    Wav {
        /// Sample encoding.
        #[serde(default)]
        encoding: WavEncoding,
    },
}

impl Default for ExportFormat {
    fn default() -> Self {
        ExportFormat::Wav { encoding: WavEncoding::PcmS16 }
    }
}

impl ExportFormat {
    /// Checks the settings.
    pub fn validate(&self) -> Result<()> {
        Ok(())
    }

    /// Usual file extension, without the dot.
    pub fn extension(&self) -> &'static str {
        match self {
            ExportFormat::Wav { .. } => "wav",
        }
    }

    /// Exact size in bytes of the file [`encode`](Self::encode) writes for `frames` frames of `channels` channels.
    pub fn file_size(&self, frames: usize, channels: usize) -> u64 {
        match self {
            ExportFormat::Wav { encoding } => wav::file_size(*encoding, frames, channels),
        }
    }

    /// Encodes a clip in this format.
    pub fn encode(&self, clip: &Clip) -> Result<Vec<u8>> {
        match self {
            ExportFormat::Wav { encoding } => wav::write(clip, *encoding),
        }
    }
}
