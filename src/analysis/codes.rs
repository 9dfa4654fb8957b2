//! Which codes a quantizer emits: a histogram over its word's code space, how many codes are used ("N of 2^B codes
//! used"), and the effective number of bits.
//!
//! # Codes
//! A quantizing stage (uniform quantizer, G.711, compander, minifloat) numbers the codes of its word `0 … 2^B − 1`
//! ([`crate::stages::Stage::code_indices`]): the uniform quantizer by level from the lowest (for N-bit PCM the
//! two's-complement code plus `2^(N−1)`), the compander by `k + K`, G.711 and the minifloat by the word's own bit
//! pattern. The samples given must be that stage's output at its own rate ([`crate::render::Tap::at_stage_rate`]).
//!
//! # Effective number of bits
//! Two figures, both in bits:
//! - `used_bits = log2(codes used)`: the word length that would hold the codes that occur (8 bits for a sound that
//!   uses all 256 codes of an 8-bit word even once);
//! - `entropy_bits`, **the effective number of bits** here: the Shannon entropy of the codes' distribution,
//!   `−Σ p·log2 p` over the codes used, `p` each code's share of the samples. It is the average information per
//!   sample, what an ideal lossless coder would need: a quiet passage on an 8-bit word that mostly sits on a few
//!   codes has an entropy of a few bits however many codes it touches once. It never exceeds `used_bits`.

use crate::error::{Error, Result};
use crate::stages::{self, StageSpec};
use serde::Serialize;

/// A histogram of the codes a quantizing stage emitted.
#[derive(Debug, Clone, Serialize)]
pub struct CodeHistogram {
    /// Codes of the word, `2^B` for a `B`-bit word.
    pub code_space: u64,
    /// Distinct codes that occur.
    pub codes_used: u64,
    /// Samples counted (all channels).
    pub samples: u64,
    /// Samples per bin: bin `b` counts the code indices `b·bin_width … (b+1)·bin_width − 1`.
    pub counts: Vec<u64>,
    /// Code indices per bin (1 unless the code space has more codes than the bins asked for).
    pub bin_width: u64,
    /// For words whose codes are signed integers (uniform quantizer: its lowest level, `−2^(N−1)` for N-bit PCM;
    /// compander: `−K`): the integer code of index 0, so index `i` is the code `lowest_code + i`. `None` where the
    /// index is the word's bit pattern (G.711, minifloat).
    pub lowest_code: Option<i64>,
    /// `log2(codes_used)`, in bits (0 when no sample was counted).
    pub used_bits: f64,
    /// The effective number of bits: the entropy of the code distribution in bits per sample (see the module docs).
    pub entropy_bits: f64,
}

/// Largest code space [`code_histogram`] counts with a table (one `u32` per code); larger words are counted by
/// sorting the samples' codes.
const TABLE_MAX: u64 = 1 << 20;

/// The histogram of the codes of `stage` (a quantizing stage) in `channels` (that stage's output), in at most
/// `max_bins` bins (at least 1; adjacent codes share a bin when the code space is larger).
pub fn code_histogram<C: AsRef<[f32]>>(stage: &StageSpec, channels: &[C], max_bins: usize) -> Result<CodeHistogram> {
    let built = stages::build(stage, crate::audio::MAX_SAMPLE_RATE, 0, 0)?;
    let Some((built, space)) = built.and_then(|s| s.code_space().map(|c| (s, c))) else {
        return Err(Error::param("stage", "this kind", "a quantizing stage (quantize, g711, compand, minifloat)"));
    };
    let lowest_code = match stage {
        StageSpec::Quantize(p) => Some(stages::quantize::Quantizer::new(p, 0, 0)?.lowest_code()),
        StageSpec::Compand(p) => Some(-(((1i64) << (p.bits - 1)) - 1)),
        _ => None,
    };
    // Exact counts per code used, as (index, count) in index order.
    let mut used: Vec<(u32, u64)> = Vec::new();
    let mut scratch = vec![0u32; 4096];
    let mut samples = 0u64;
    if space <= TABLE_MAX {
        let mut table = vec![0u32; space as usize];
        let mut wide: Vec<(u32, u64)> = Vec::new();
        for ch in channels {
            for block in ch.as_ref().chunks(scratch.len()) {
                let codes = &mut scratch[..block.len()];
                built.code_indices(block, codes);
                for &c in codes.iter() {
                    let slot = &mut table[(c as u64).min(space - 1) as usize];
                    // A u32 per code; on the (4-billion-sample) overflow, carry into a side list.
                    if *slot == u32::MAX {
                        wide.push((c, u32::MAX as u64));
                        *slot = 0;
                    }
                    *slot += 1;
                }
                samples += block.len() as u64;
            }
        }
        used.extend(table.iter().enumerate().filter(|(_, &n)| n > 0).map(|(i, &n)| (i as u32, n as u64)));
        for (c, n) in wide {
            match used.binary_search_by_key(&c, |u| u.0) {
                Ok(j) => used[j].1 += n,
                Err(j) => used.insert(j, (c, n)),
            }
        }
    } else {
        let mut all: Vec<u32> = Vec::with_capacity(channels.iter().map(|c| c.as_ref().len()).sum());
        for ch in channels {
            for block in ch.as_ref().chunks(scratch.len()) {
                let codes = &mut scratch[..block.len()];
                built.code_indices(block, codes);
                all.extend_from_slice(codes);
            }
        }
        samples = all.len() as u64;
        all.sort_unstable();
        for c in all {
            match used.last_mut() {
                Some(last) if last.0 == c => last.1 += 1,
                _ => used.push((c, 1)),
            }
        }
    }
    let max_bins = max_bins.max(1) as u64;
    let bin_width = space.div_ceil(max_bins);
    let mut counts = vec![0u64; space.div_ceil(bin_width) as usize];
    for &(c, n) in &used {
        counts[((c as u64).min(space - 1) / bin_width) as usize] += n;
    }
    let entropy_bits = if samples > 0 {
        let total = samples as f64;
        -used.iter().map(|&(_, n)| n as f64 / total).map(|p| p * p.log2()).sum::<f64>()
    } else {
        0.0
    };
    let codes_used = used.len() as u64;
    Ok(CodeHistogram {
        code_space: space,
        codes_used,
        samples,
        counts,
        bin_width,
        lowest_code,
        used_bits: if codes_used > 0 { (codes_used as f64).log2() } else { 0.0 },
        entropy_bits: entropy_bits.max(0.0),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stages::g711::G711Params;
    use crate::stages::minifloat::MinifloatParams;
    use crate::stages::quantize::QuantizeParams;
    use crate::stages::Stage;

    fn quantized(spec: &StageSpec, x: &[f32]) -> Vec<f32> {
        let mut s = stages::build(spec, 48_000, 0, 0).unwrap().unwrap();
        let mut y = x.to_vec();
        s.process(&mut y);
        y
    }

    #[test]
    fn a_ramp_uses_every_code_once_and_has_full_entropy() {
        let q = StageSpec::Quantize(QuantizeParams::bits(4));
        // The 16 levels of a 4-bit word, exactly.
        let x: Vec<f32> = (-8..8).map(|k| k as f32 / 8.0).collect();
        let h = code_histogram(&q, &[quantized(&q, &x)], 16).unwrap();
        assert_eq!((h.code_space, h.codes_used, h.samples), (16, 16, 16));
        assert_eq!(h.counts, vec![1; 16]);
        assert_eq!(h.lowest_code, Some(-8));
        assert!((h.used_bits - 4.0).abs() < 1e-12 && (h.entropy_bits - 4.0).abs() < 1e-12);
        // Four bins of four codes.
        let h = code_histogram(&q, &[quantized(&q, &x)], 4).unwrap();
        assert_eq!((h.bin_width, h.counts.clone()), (4, vec![4; 4]));
    }

    #[test]
    fn skewed_use_has_less_entropy_than_its_code_count_says() {
        let q = StageSpec::Quantize(QuantizeParams::bits(8));
        // 1000 samples at 0, one each at two other codes.
        let mut x = vec![0.0f32; 1000];
        x.extend([0.5, -0.5]);
        let h = code_histogram(&q, &[quantized(&q, &x)], 256).unwrap();
        assert_eq!(h.codes_used, 3);
        assert!(h.entropy_bits < 0.05 && h.used_bits > 1.5, "{h:?}");
    }

    #[test]
    fn minifloat_and_g711_codes_are_their_bit_patterns() {
        let m = StageSpec::Minifloat(MinifloatParams::default());
        let built = crate::stages::minifloat::Minifloat::new(&MinifloatParams::default()).unwrap();
        assert_eq!(built.code_space(), Some(256));
        // E4M3: full scale is 2^8; 1.0·2^−8 → exponent field 7, mantissa 0: 0x38. The largest, 240/256: 0x77.
        let mut codes = [0u32; 4];
        built.code_indices(&[1.0 / 256.0, 240.0 / 256.0, -240.0 / 256.0, -0.0], &mut codes);
        assert_eq!(codes, [0x38, 0x77, 0xF7, 0x80]);
        let h = code_histogram(&m, &[vec![0.0f32, 1.0 / 256.0]], 1000).unwrap();
        assert_eq!((h.codes_used, h.counts.len(), h.lowest_code), (2, 256, None));
        let g = StageSpec::G711(G711Params::default());
        let h = code_histogram(&g, &[quantized(&g, &[0.0, 0.25, -0.25])], 256).unwrap();
        assert_eq!((h.code_space, h.codes_used), (256, 3));
        assert_eq!(h.counts[0xFF], 1, "μ-law zero is code 0xFF");
    }

    #[test]
    fn stages_without_codes_are_refused() {
        let g = StageSpec::Gain(Default::default());
        assert!(code_histogram(&g, &[vec![0.0f32]], 16).is_err());
        let r = StageSpec::Rate(crate::stages::rate::RateParams::hold(8000));
        assert!(code_histogram(&r, &[vec![0.0f32]], 16).is_err());
    }
}
