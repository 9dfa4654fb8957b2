//! ITU-T G.711 μ-law and A-law codecs on 16-bit linear samples.
//!
//! [`linear_to_ulaw`], [`ulaw_to_linear`], [`linear_to_alaw`] and [`alaw_to_linear`] convert between 16-bit linear
//! PCM and 8-bit G.711 codes, bit-exact to Python's `audioop.lin2ulaw`/`ulaw2lin`/`lin2alaw`/`alaw2lin` with
//! `width=2` (which follow the Sun Microsystems reference code). G.711 itself works on 14-bit (μ-law) or 13-bit
//! (A-law) linear samples: the encoders drop the low 2 or 3 bits by an arithmetic shift, which floors, so −1
//! encodes like −4 (μ-law) or −8 (A-law). Codes are as transmitted: μ-law codes are bit-inverted (0 → `0xFF`),
//! A-law codes have their even bits inverted (XOR `0x55`; 0 → `0xD5`).

/// μ-law bias in the 14-bit domain (0x84 = 132 in the 16-bit domain, ÷ 4).
const ULAW_BIAS: i32 = 33;

/// Encodes a 16-bit linear sample as a G.711 μ-law code, exactly like `audioop.lin2ulaw(…, 2)`.
#[inline]
pub fn linear_to_ulaw(x: i16) -> u8 {
    let v = (x >> 2) as i32; // 14-bit sample, −8192…8191
    let (mag, mask) = if v < 0 { (-v, 0x7F) } else { (v, 0xFF) };
    let biased = mag + ULAW_BIAS; // 33…8225
                                  // Segment s holds biased magnitudes in [32·2^s, 64·2^s): bit length minus 6.
    let seg = (32 - (biased as u32).leading_zeros()).saturating_sub(6);
    if seg >= 8 {
        return 0x7F ^ mask; // beyond the last segment: the largest magnitude
    }
    let code = (seg << 4) | ((biased as u32 >> (seg + 1)) & 0x0F);
    code as u8 ^ mask
}

/// Decodes a G.711 μ-law code to 16-bit linear, exactly like `audioop.ulaw2lin(…, 2)` (range ±32124).
#[inline]
pub fn ulaw_to_linear(code: u8) -> i16 {
    let u = !code;
    let t = ((((u & 0x0F) as i32) << 3) + 0x84) << ((u & 0x70) >> 4);
    (if u & 0x80 != 0 { 0x84 - t } else { t - 0x84 }) as i16
}

/// Encodes a 16-bit linear sample as a G.711 A-law code, exactly like `audioop.lin2alaw(…, 2)`.
#[inline]
pub fn linear_to_alaw(x: i16) -> u8 {
    let v = (x >> 3) as i32; // 13-bit sample, −4096…4095
    let (mag, mask) = if v >= 0 { (v, 0xD5) } else { (-v - 1, 0x55) }; // one's-complement magnitude, 0…4095
                                                                       // Segment 0 holds 0…31, segment s ≥ 1 holds [16·2^s, 32·2^s): bit length minus 5.
    let seg = (32 - (mag as u32).leading_zeros()).saturating_sub(5);
    let shift = if seg < 2 { 1 } else { seg };
    let code = (seg << 4) | ((mag as u32 >> shift) & 0x0F);
    code as u8 ^ mask
}

/// Decodes a G.711 A-law code to 16-bit linear, exactly like `audioop.alaw2lin(…, 2)` (range ±32256).
#[inline]
pub fn alaw_to_linear(code: u8) -> i16 {
    let a = code ^ 0x55;
    let m = ((a & 0x0F) as i32) << 4;
    let t = match (a & 0x70) >> 4 {
        0 => m + 8,
        seg => (m + 0x108) << (seg - 1),
    };
    (if a & 0x80 != 0 { t } else { -t }) as i16
}

// ---------------------------------------------------------------------------------------------------------------------

#[cfg(test)]
mod tests {
    use super::*;

    // -----------------------------------------------------------------------------------------------------------------
    // Naive G.711 references: the segment tables searched linearly, mantissas by division, decoders in closed form.
    // -----------------------------------------------------------------------------------------------------------------

    /// Upper ends of the μ-law segments, biased 14-bit magnitude.
    const SEG_UEND: [i32; 8] = [0x3F, 0x7F, 0xFF, 0x1FF, 0x3FF, 0x7FF, 0xFFF, 0x1FFF];
    /// Upper ends of the A-law segments, 13-bit magnitude.
    const SEG_AEND: [i32; 8] = [0x1F, 0x3F, 0x7F, 0xFF, 0x1FF, 0x3FF, 0x7FF, 0xFFF];

    fn ref_linear_to_ulaw(x: i16) -> u8 {
        let v = (x as i32).div_euclid(4); // floor division, like the arithmetic shift
        let negative = v < 0;
        let biased = v.abs() + 33;
        let Some(seg) = SEG_UEND.iter().position(|&end| biased <= end) else {
            return if negative { 0x00 } else { 0x80 };
        };
        let mantissa = biased / (2 << seg) - 16;
        // Transmitted inverted, except that the sign bit reads 1 for positive samples.
        let word = ((seg as i32) << 4 | mantissa) as u8;
        (!word & 0x7F) | if negative { 0 } else { 0x80 }
    }

    fn ref_ulaw_to_linear(code: u8) -> i16 {
        let u = !code;
        let (seg, mantissa) = (((u >> 4) & 7) as i32, (u & 0x0F) as i32);
        // Interval midpoint of the segment: 4·((2m + 33)·2^s − 33).
        let mag = 4 * ((2 * mantissa + 33) * (1 << seg) - 33);
        (if u & 0x80 != 0 { -mag } else { mag }) as i16
    }

    fn ref_linear_to_alaw(x: i16) -> u8 {
        let v = (x as i32).div_euclid(8);
        let (mag, sign) = if v >= 0 { (v, 0x80) } else { (-v - 1, 0) };
        let seg = SEG_AEND.iter().position(|&end| mag <= end).unwrap() as i32; // 13 bits always fit
        let mantissa = if seg == 0 { mag / 2 } else { mag / (1 << seg) - 16 };
        (sign | seg << 4 | mantissa) as u8 ^ 0x55
    }

    fn ref_alaw_to_linear(code: u8) -> i16 {
        let a = code ^ 0x55;
        let (seg, mantissa) = (((a >> 4) & 7) as i32, (a & 0x0F) as i32);
        let mag = if seg == 0 { 8 * (2 * mantissa + 1) } else { (2 * mantissa + 33) * (4 << seg) };
        (if a & 0x80 != 0 { mag } else { -mag }) as i16
    }

    #[test]
    fn fast_codec_equals_reference_on_every_input() {
        for x in i16::MIN..=i16::MAX {
            assert_eq!(linear_to_ulaw(x), ref_linear_to_ulaw(x), "μ-law encode {x}");
            assert_eq!(linear_to_alaw(x), ref_linear_to_alaw(x), "A-law encode {x}");
        }
        for c in 0..=255u8 {
            assert_eq!(ulaw_to_linear(c), ref_ulaw_to_linear(c), "μ-law decode {c:#04x}");
            assert_eq!(alaw_to_linear(c), ref_alaw_to_linear(c), "A-law decode {c:#04x}");
        }
    }

    /// Values recalled from the G.711 tables (from memory of the standard; the audioop integration test in
    /// `tests/g711_reference.rs` cross-checks every code).
    #[test]
    fn values_from_the_g711_tables() {
        // μ-law: zero is 0xFF; the largest positive input gives 0x80, the largest negative 0x00.
        assert_eq!(linear_to_ulaw(0), 0xFF);
        assert_eq!(linear_to_ulaw(i16::MAX), 0x80);
        assert_eq!(linear_to_ulaw(i16::MIN), 0x00);
        assert_eq!(ulaw_to_linear(0x80), 32124);
        assert_eq!(ulaw_to_linear(0x00), -32124);
        assert_eq!(ulaw_to_linear(0xFF), 0);
        assert_eq!(ulaw_to_linear(0x7F), 0);
        // A-law: zero is 0xD5, decoded as +8 (A-law has no zero level); the extremes are 0xAA and 0x2A.
        assert_eq!(linear_to_alaw(0), 0xD5);
        assert_eq!(alaw_to_linear(0xD5), 8);
        assert_eq!(alaw_to_linear(0x55), -8);
        assert_eq!(linear_to_alaw(i16::MAX), 0xAA);
        assert_eq!(linear_to_alaw(i16::MIN), 0x2A);
        assert_eq!(alaw_to_linear(0xAA), 32256);
        assert_eq!(alaw_to_linear(0x2A), -32256);
    }

    #[test]
    fn codes_survive_decode_then_encode() {
        for c in 0..=255u8 {
            // μ-law has two zeros (0xFF and 0x7F); zero encodes as 0xFF.
            let expect = if c == 0x7F { 0xFF } else { c };
            assert_eq!(linear_to_ulaw(ulaw_to_linear(c)), expect, "μ-law {c:#04x}");
            assert_eq!(linear_to_alaw(alaw_to_linear(c)), c, "A-law {c:#04x}");
        }
    }
}
