//! G.711 μ-law and A-law, bit-exact with the classic Sun reference code (`g711.c`) that CPython's `audioop` and
//! libsndfile follow.
//!
//! Private to [`crate::io`] for now: the WAV reader and writer need it, and a crate-wide companding module will take
//! its place later.
//!
//! - Encoding takes a 16-bit sample and drops the low bits first with an arithmetic shift (μ-law keeps 14 bits,
//!   A-law 13), exactly as `audioop.lin2ulaw` / `audioop.lin2alaw` do for 2-byte samples. So small negative values
//!   such as −1 become the smallest *negative* code, not zero.
//! - μ-law codes are stored with all bits inverted; A-law codes with the even bits inverted (XOR 0x55).
//! - Decoding returns the 16-bit value at the centre of the code's interval (μ-law ±32,124 at most, A-law ±32,256).

const BIAS: i32 = 0x84;
const ULAW_CLIP: i32 = 8159;
const SEG_UEND: [i32; 8] = [0x3F, 0x7F, 0xFF, 0x1FF, 0x3FF, 0x7FF, 0xFFF, 0x1FFF];
const SEG_AEND: [i32; 8] = [0x1F, 0x3F, 0x7F, 0xFF, 0x1FF, 0x3FF, 0x7FF, 0xFFF];

/// Index of the first segment whose end is at least `v`, or 8 when `v` is beyond the last.
fn segment(v: i32, ends: &[i32; 8]) -> i32 {
    ends.iter().position(|&e| v <= e).map_or(8, |s| s as i32)
}

/// μ-law code of a 16-bit sample (`audioop.lin2ulaw(x, 2)`).
pub(crate) fn linear_to_ulaw(sample: i16) -> u8 {
    let mut v = (sample as i32) >> 2;
    let mask = if v < 0 {
        v = -v;
        0x7F
    } else {
        0xFF
    };
    v = v.min(ULAW_CLIP) + (BIAS >> 2);
    let seg = segment(v, &SEG_UEND);
    if seg >= 8 {
        return 0x7F ^ mask;
    }
    (((seg << 4) | ((v >> (seg + 1)) & 0xF)) as u8) ^ mask
}

/// 16-bit value of a μ-law code (`audioop.ulaw2lin(c, 2)`).
pub(crate) fn ulaw_to_linear(code: u8) -> i16 {
    let u = !code as i32;
    let mut t = ((u & 0x0F) << 3) + BIAS;
    t <<= (u & 0x70) >> 4;
    (if u & 0x80 != 0 { BIAS - t } else { t - BIAS }) as i16
}

/// A-law code of a 16-bit sample (`audioop.lin2alaw(x, 2)`).
pub(crate) fn linear_to_alaw(sample: i16) -> u8 {
    let mut v = (sample as i32) >> 3;
    let mask: u8 = if v >= 0 {
        0xD5
    } else {
        v = -v - 1;
        0x55
    };
    let seg = segment(v, &SEG_AEND);
    if seg >= 8 {
        return 0x7F ^ mask;
    }
    let q = if seg < 2 { (v >> 1) & 0x0F } else { (v >> seg) & 0x0F };
    (((seg << 4) | q) as u8) ^ mask
}

/// 16-bit value of an A-law code (`audioop.alaw2lin(c, 2)`).
pub(crate) fn alaw_to_linear(code: u8) -> i16 {
    let a = (code ^ 0x55) as i32;
    let mut t = (a & 0x0F) << 4;
    let seg = (a & 0x70) >> 4;
    match seg {
        0 => t += 8,
        1 => t += 0x108,
        _ => {
            t += 0x108;
            t <<= seg - 1;
        }
    }
    (if a & 0x80 != 0 { t } else { -t }) as i16
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Published anchor values of the Sun reference tables.
    #[test]
    fn reference_table_anchors() {
        assert_eq!(ulaw_to_linear(0x00), -32124);
        assert_eq!(ulaw_to_linear(0x7F), 0);
        assert_eq!(ulaw_to_linear(0x80), 32124);
        assert_eq!(ulaw_to_linear(0xFF), 0);
        assert_eq!(alaw_to_linear(0x00), -5504);
        assert_eq!(alaw_to_linear(0x55), -8);
        assert_eq!(alaw_to_linear(0xD5), 8);
        assert_eq!(alaw_to_linear(0x2A), -32256);
        assert_eq!(alaw_to_linear(0xAA), 32256);
        assert_eq!(linear_to_ulaw(0), 0xFF);
        assert_eq!(linear_to_ulaw(-1), 0x7E);
        assert_eq!(linear_to_alaw(0), 0xD5);
        assert_eq!(linear_to_alaw(-1), 0x55);
        assert_eq!(linear_to_ulaw(i16::MAX), 0x80);
        assert_eq!(linear_to_ulaw(i16::MIN), 0x00);
        assert_eq!(linear_to_alaw(i16::MAX), 0xAA);
        assert_eq!(linear_to_alaw(i16::MIN), 0x2A);
    }

    /// Decoding then encoding every code gives the code back (except μ-law's second zero, 0x7F, which encodes as
    /// 0xFF).
    #[test]
    fn decode_then_encode_is_identity() {
        for c in 0..=255u8 {
            let u = linear_to_ulaw(ulaw_to_linear(c));
            assert!(u == c || (c == 0x7F && u == 0xFF), "ulaw {c:#04x} -> {u:#04x}");
            assert_eq!(linear_to_alaw(alaw_to_linear(c)), c, "alaw {c:#04x}");
        }
    }
}
