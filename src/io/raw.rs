//! Raw headerless export: interleaved integer samples and nothing else.
//!
//! # Layout
//! - Samples are interleaved frame by frame (channel 0, channel 1, …, then the next frame).
//! - Each sample becomes the code `pcm_code(x, bits)`, from −2^(bits−1) to 2^(bits−1)−1. Signed output stores it in
//!   two's complement; unsigned output stores `code + 2^(bits−1)` (offset binary, silence = 2^(bits−1)).
//! - 16 bits: two bytes per sample, in the chosen byte order.
//! - 8 bits: one byte per sample.
//! - 1, 2, 4 bits: 8/bits samples per byte, in stream order. With `msb-first` the first sample of a byte takes its most
//!   significant bits (for 4 bits: first sample = bits 7–4, second = bits 3–0); with `lsb-first` the first sample takes
//!   the least significant bits (first = bits 3–0). The unused bits of the last byte are zero.
//! - Size: `ceil(frames × channels × bits / 8)` bytes.
//!
//! With 1 bit the mid-tread codes are −1 and 0 (signed: bit 1 and bit 0; unsigned: 0 and 1): the grid of a 1-bit
//! quantizer in this project. A 1-bit mid-rise (±0.5) signal maps −0.5 to −1 and +0.5 to 0, i.e. its sign.

use super::{BitOrder, Endian};
use crate::audio::Clip;
use crate::error::{Error, Result};
use crate::sample::pcm_code;
use crate::sample::sanitize;

/// The settings of a raw export.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct RawLayout {
    /// 1, 2, 4, 8 or 16.
    pub bits: u32,
    /// Two's complement (true) or offset binary (false).
    pub signed: bool,
    /// Byte order of 16-bit samples.
    pub endian: Endian,
    /// Packing of sub-byte samples.
    pub bit_order: BitOrder,
}

/// Checks the sample width.
pub fn check_bits(bits: u32) -> Result<()> {
    if matches!(bits, 1 | 2 | 4 | 8 | 16) {
        Ok(())
    } else {
        Err(Error::param("bits", bits, "1, 2, 4, 8 or 16"))
    }
}

/// Exact output size in bytes.
pub fn file_size(bits: u32, frames: usize, channels: usize) -> u64 {
    (frames as u64).saturating_mul(channels as u64).saturating_mul(bits as u64).div_ceil(8)
}

/// Encodes a clip.
pub fn write(clip: &Clip, layout: &RawLayout) -> Result<Vec<u8>> {
    check_bits(layout.bits)?;
    super::check_clip(clip)?;
    let bits = layout.bits;
    let size = file_size(bits, clip.frames(), clip.channel_count());
    let size = usize::try_from(size).map_err(|_| Error::param("length", clip.frames(), "a smaller clip"))?;
    let mut out = Vec::with_capacity(size);
    let offset = if layout.signed { 0 } else { 1i32 << (bits - 1) };
    let mask = if bits == 16 { 0xFFFF } else { (1u32 << bits) - 1 };
    let mut acc = 0u8;
    let mut filled = 0u32;
    for i in 0..clip.frames() {
        for c in &clip.channels {
            let v = ((pcm_code(sanitize(c[i]), bits) + offset) as u32) & mask;
            match bits {
                16 => {
                    let v = v as u16;
                    out.extend_from_slice(&match layout.endian {
                        Endian::Little => v.to_le_bytes(),
                        Endian::Big => v.to_be_bytes(),
                    })
                }
                8 => out.push(v as u8),
                _ => {
                    let shift = match layout.bit_order {
                        BitOrder::MsbFirst => 8 - bits - filled,
                        BitOrder::LsbFirst => filled,
                    };
                    acc |= (v as u8) << shift;
                    filled += bits;
                    if filled == 8 {
                        out.push(acc);
                        acc = 0;
                        filled = 0;
                    }
                }
            }
        }
    }
    if filled > 0 {
        out.push(acc);
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn layout(bits: u32, signed: bool, endian: Endian, bit_order: BitOrder) -> RawLayout {
        RawLayout { bits, signed, endian, bit_order }
    }

    #[test]
    fn packs_as_documented() {
        // 4-bit codes: -8 -> 0x8 (signed) / 0x0 (unsigned); 0.5 -> 4; -0.125 -> -1 = 0xF; 0.875 -> 7.
        let clip = Clip::new(8000, vec![vec![-1.0, 0.5, -0.125, 0.875, 0.0]]).unwrap();
        let msb = write(&clip, &layout(4, true, Endian::Little, BitOrder::MsbFirst)).unwrap();
        assert_eq!(msb, [0x84, 0xF7, 0x00]);
        let lsb = write(&clip, &layout(4, true, Endian::Little, BitOrder::LsbFirst)).unwrap();
        assert_eq!(lsb, [0x48, 0x7F, 0x00]);
        let uns = write(&clip, &layout(4, false, Endian::Little, BitOrder::MsbFirst)).unwrap();
        assert_eq!(uns, [0x0C, 0x7F, 0x80]);
        // 2-bit: codes -2..1; -1.0 -> -2 = 0b10, 0.5 -> 1 = 0b01, -0.5 -> -1 = 0b11, 0 -> 0.
        let clip = Clip::new(8000, vec![vec![-1.0, 0.5, -0.5, 0.0, 0.5]]).unwrap();
        assert_eq!(
            write(&clip, &layout(2, true, Endian::Little, BitOrder::MsbFirst)).unwrap(),
            [0b10_01_11_00, 0b01_000000]
        );
        assert_eq!(write(&clip, &layout(2, true, Endian::Little, BitOrder::LsbFirst)).unwrap(), [0b00_11_01_10, 0b01]);
        // 1-bit: -1.0 -> -1 (bit 1), anything else -> 0.
        let clip = Clip::new(8000, vec![vec![-1.0, 0.9, -1.0, -1.0, 0.0, 0.0, 0.0, -1.0, -1.0]]).unwrap();
        assert_eq!(
            write(&clip, &layout(1, true, Endian::Little, BitOrder::MsbFirst)).unwrap(),
            [0b1011_0001, 0b1000_0000]
        );
        assert_eq!(write(&clip, &layout(1, false, Endian::Little, BitOrder::LsbFirst)).unwrap(), [0b0111_0010, 0]);
        // 16-bit endianness, 8-bit signedness, interleaving.
        let clip = Clip::new(8000, vec![vec![0.5, -1.0], vec![-0.5, 0.25]]).unwrap();
        assert_eq!(
            write(&clip, &layout(16, true, Endian::Big, BitOrder::MsbFirst)).unwrap(),
            [0x40, 0x00, 0xC0, 0x00, 0x80, 0x00, 0x20, 0x00]
        );
        assert_eq!(
            write(&clip, &layout(16, false, Endian::Little, BitOrder::MsbFirst)).unwrap(),
            [0x00, 0xC0, 0x00, 0x40, 0x00, 0x00, 0x00, 0xA0]
        );
        assert_eq!(
            write(&clip, &layout(8, true, Endian::Little, BitOrder::MsbFirst)).unwrap(),
            [0x40, 0xC0, 0x80, 0x20]
        );
        assert_eq!(
            write(&clip, &layout(8, false, Endian::Little, BitOrder::MsbFirst)).unwrap(),
            [0xC0, 0x40, 0x00, 0xA0]
        );
    }

    #[test]
    fn sizes_are_exact() {
        for bits in [1, 2, 4, 8, 16] {
            for ch in 1..=3 {
                for frames in 0..20 {
                    let clip = Clip::new(8000, vec![vec![0.1; frames]; ch]).unwrap();
                    for bo in [BitOrder::MsbFirst, BitOrder::LsbFirst] {
                        let b = write(&clip, &layout(bits, true, Endian::Little, bo)).unwrap();
                        assert_eq!(b.len() as u64, file_size(bits, frames, ch));
                    }
                }
            }
        }
    }
}
