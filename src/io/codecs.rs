//! The headerless codec exports: Dialogic VOX ADPCM and the delta-modulation bit stream.

use crate::audio::Clip;
use crate::codec::delta::DeltaMod;
use crate::codec::vox;
use crate::error::{Error, Result};
use crate::io::{check_clip, BitOrder};
use crate::sample::{pcm_code, sanitize};

/// A VOX file: one channel of Dialogic ADPCM codes, two per byte (first in the high nibble).
pub(super) fn write_vox(clip: &Clip) -> Result<Vec<u8>> {
    check_clip(clip)?;
    if clip.channel_count() != 1 {
        return Err(Error::param(
            "channels",
            clip.channel_count(),
            "1: a VOX file holds one channel (set prep \"channels\": {\"mono\": \"sum-3db\"})",
        ));
    }
    let codes: Vec<i16> = clip.channels[0].iter().map(|&x| pcm_code(sanitize(x), 16) as i16).collect();
    let mut out = Vec::with_capacity(vox::byte_len(codes.len() as u64) as usize);
    vox::encode(&codes, &mut out);
    Ok(out)
}

/// The bits of a delta modulator run on each channel, frames interleaved, packed eight to a byte (the last byte
/// completed with zero bits).
pub(super) fn write_delta_bits(clip: &Clip, step: f64, leak: f64, order: BitOrder) -> Result<Vec<u8>> {
    check_clip(clip)?;
    let ch = clip.channel_count();
    let mut mods = vec![DeltaMod::new(step, leak); ch];
    let total = clip.frames() * ch;
    let mut out = vec![0u8; total.div_ceil(8)];
    let mut n = 0;
    for i in 0..clip.frames() {
        for (c, m) in mods.iter_mut().enumerate() {
            if m.encode(sanitize(clip.channels[c][i]) as f64).0 {
                let bit = match order {
                    BitOrder::MsbFirst => 7 - n % 8,
                    BitOrder::LsbFirst => n % 8,
                };
                out[n / 8] |= 1 << bit;
            }
            n += 1;
        }
    }
    Ok(out)
}
