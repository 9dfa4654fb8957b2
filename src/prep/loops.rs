//! Loop points for the exporters: a loop at the source rate moved to the export rate, and snapped to codec blocks.

use super::check_loop_order;
use crate::error::{Error, Result};

/// Loop points `[start, end)` at `from_rate` mapped to a clip reduced to `to_rate` by a zero-order-hold reducer
/// that gives reduced sample `k` the value of source sample `ceil(k · from / to)`.
///
/// Each point maps to the first reduced sample whose value comes from at or after it, so the reduced loop plays
/// exactly the reduced samples whose source samples lie inside the source loop:
/// `p ↦ 0` for `p = 0`, else `floor((p − 1) · to / from) + 1`; that is `{k : start ≤ ceil(k·from/to) < end}` =
/// `[rescaled start, rescaled end)`. A loop ending at the source's end (`end = frames`) ends at the reduced clip's
/// end, whose length is `floor((frames − 1) · to / from) + 1` by the same rule.
///
/// When `from / to` is an integer (44,100 → 11,025, 48,000 → 8,000) this equals `ceil(p · to / from)`, the first
/// reduced sample *in time* at or after the point; for other ratios the two differ by one sample when
/// `0 < (p · to) mod from < to`, and the rule here is the one that agrees with the reducer's output (e.g.
/// 3 → 2 Hz: reduced sample 1 holds source sample 2, so a loop starting at source frame 2 starts at reduced sample
/// 1, while `ceil(2 · 2/3) = 2` would skip it).
///
/// Exact integer arithmetic (`u128` intermediates, saturating at `u64::MAX`). A rate of 0 returns the points
/// unchanged.
pub fn rescale_loop(start: u64, end: u64, from_rate: u32, to_rate: u32) -> (u64, u64) {
    if from_rate == 0 || to_rate == 0 {
        return (start, end);
    }
    let map = |p: u64| -> u64 {
        if p == 0 {
            return 0;
        }
        let k = (p as u128 - 1) * to_rate as u128 / from_rate as u128 + 1;
        k.min(u64::MAX as u128) as u64
    };
    (map(start), map(end))
}

/// Moves loop points to the nearest multiple of `samples_per_block` (halves round up) for block-based codecs such
/// as IMA ADPCM.
///
/// An IMA ADPCM block starts with a header holding the predictor's sample value and step index; every later 4-bit
/// code in the block is a difference relative to the decoder state left by the code before it. A decoder can
/// therefore only (re)start decoding at a block header: a loop start inside a block would begin from an unknown
/// predictor state and play a burst of wrong samples, and a loop end inside a block would cut a block that players
/// decode whole. So both points go to block boundaries. Rounding both to the *nearest* boundary (rather than start
/// down and end up) moves each point by at most half a block and keeps the loop length within one block of the
/// original, without systematically lengthening it.
///
/// A loop of at least one block keeps `end > start` after snapping (it spans at least one whole block). The snapped
/// end may lie up to half a block beyond the given end; the exporter clamps it to the data it writes. For 256-byte
/// mono IMA ADPCM blocks (WAV `block_align` 256) `samples_per_block` is 505.
///
/// # Errors
/// `samples_per_block` of 0; an empty or inverted loop; a loop shorter than one block ("loop of 300 samples is
/// shorter than one ADPCM block (505 samples)"); an end whose nearest boundary does not fit in a `u64`.
pub fn snap_to_block(start: u64, end: u64, samples_per_block: u64) -> Result<(u64, u64)> {
    if samples_per_block == 0 {
        return Err(Error::param("samples_per_block", 0, "1 or more"));
    }
    check_loop_order("loop_region", start, end)?;
    let len = end - start;
    if len < samples_per_block {
        return Err(Error::param(
            "loop_region",
            format!("{start}..{end}"),
            format!(
                "at least one block long: loop of {len} samples is shorter than one ADPCM block \
                 ({samples_per_block} samples)"
            ),
        ));
    }
    let b = samples_per_block as u128;
    let snap = |p: u64| (p as u128 + b / 2) / b * b;
    let (s, e) = (snap(start), snap(end));
    if e > u64::MAX as u128 {
        return Err(Error::param(
            "loop_region.end",
            end,
            format!("a value whose nearest block boundary ({e}) fits in 64 bits"),
        ));
    }
    Ok((s as u64, e as u64))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rng::Pcg32;

    /// 44,100 / 11,025 = 4 exactly (and 48,000 / 8,000 = 6): every point maps to ceil(p / 4) (ceil(p / 6)).
    #[test]
    fn rescale_44100_to_11025_is_exact() {
        // Integer ratio 4: every point maps to ceil(p / 4).
        assert_eq!(rescale_loop(44_100, 88_200, 44_100, 11_025), (11_025, 22_050));
        assert_eq!(rescale_loop(0, 4, 44_100, 11_025), (0, 1));
        assert_eq!(rescale_loop(1, 5, 44_100, 11_025), (1, 2));
        assert_eq!(rescale_loop(3, 8, 44_100, 11_025), (1, 2));
        for p in 0..10_000u64 {
            let (a, _) = rescale_loop(p, p + 1, 44_100, 11_025);
            assert_eq!(a, p.div_ceil(4), "{p}");
            let (a, _) = rescale_loop(p, p + 1, 48_000, 8_000);
            assert_eq!(a, p.div_ceil(6), "{p}");
        }
        // Same rate: unchanged; zero rate: unchanged, no panic; huge values saturate.
        assert_eq!(rescale_loop(123, 456, 22_050, 22_050), (123, 456));
        assert_eq!(rescale_loop(123, 456, 0, 22_050), (123, 456));
        assert_eq!(rescale_loop(u64::MAX - 1, u64::MAX, 1, 768_000), (u64::MAX, u64::MAX));
    }

    /// The zero-order-hold reducer: reduced sample k takes source sample ceil(k·from/to).
    fn zoh_source(k: u64, from: u32, to: u32) -> u64 {
        (k * from as u64).div_ceil(to as u64)
    }

    /// Brute force against the reducer's definition, for integer and fractional ratios.
    #[test]
    fn rescaled_loop_is_exactly_the_reduced_samples_from_inside_the_source_loop() {
        let mut rng = Pcg32::from_seed(7, 0);
        for (from, to) in
            [(44_100, 11_025), (44_100, 8_000), (48_000, 44_100), (44_100, 32_000), (22_050, 44_100), (3, 2)]
        {
            for _ in 0..300 {
                let s = (rng.next_u32() % 5000) as u64;
                let e = s + 1 + (rng.next_u32() % 5000) as u64;
                let (a, b) = rescale_loop(s, e, from, to);
                let inside: Vec<u64> = (0..(e * to as u64 / from as u64 + 3))
                    .filter(|&k| (s..e).contains(&zoh_source(k, from, to)))
                    .collect();
                let expect = (inside.first().copied().unwrap_or(a), inside.last().map_or(a, |&k| k + 1));
                assert_eq!((a, b), expect, "{from}→{to}: {s}..{e}");
            }
        }
        // Where the rule differs from ceil(p·to/from): 3 → 2 Hz, reduced sample 1 holds source sample 2.
        assert_eq!(zoh_source(1, 3, 2), 2);
        assert_eq!(rescale_loop(2, 5, 3, 2), (1, 3));
        // A loop to the very end ends at the end of the reduced clip (length floor((N−1)·to/from) + 1).
        let n = 44_101u64;
        let reduced_len = (n - 1) * 8_000 / 44_100 + 1;
        assert!(zoh_source(reduced_len - 1, 44_100, 8_000) < n);
        assert!(zoh_source(reduced_len, 44_100, 8_000) >= n);
        assert_eq!(rescale_loop(0, n, 44_100, 8_000).1, reduced_len);
    }

    /// 505 samples per block: IMA ADPCM in WAV (Microsoft/IMA "DVI ADPCM" WAVE format) with `block_align` 256, mono:
    /// a 4-byte header holding the first sample, then (256 − 4)·2 = 504 four-bit codes.
    #[test]
    fn snapping_to_adpcm_blocks() {
        assert_eq!(snap_to_block(1000, 5000, 505).unwrap(), (1010, 5050));
        assert_eq!(snap_to_block(252, 757, 505).unwrap(), (0, 505), "below half a block rounds down");
        assert_eq!(snap_to_block(253, 758, 505).unwrap(), (505, 1010), "half a block and more rounds up");
        assert_eq!(snap_to_block(0, 505, 505).unwrap(), (0, 505));
        // A loop of exactly one block that straddles boundaries still spans one block.
        let (a, b) = snap_to_block(250, 755, 505).unwrap();
        assert!(b > a && b - a == 505, "{a}..{b}");
        let e = snap_to_block(1000, 1300, 505).unwrap_err().to_string();
        assert!(e.contains("loop of 300 samples is shorter than one ADPCM block (505 samples)"), "{e}");
        assert!(e.contains("1000..1300"), "{e}");
        assert!(snap_to_block(10, 10, 505).unwrap_err().to_string().contains("empty"));
        assert!(snap_to_block(20, 10, 505).unwrap_err().to_string().contains("inverted"));
        assert!(snap_to_block(0, 10, 0).unwrap_err().to_string().contains("samples_per_block"));
        let (a, b) = snap_to_block(u64::MAX - 1200, u64::MAX - 600, 505).unwrap();
        assert!(b > a && b % 505 == 0);
        assert!(snap_to_block(0, u64::MAX, 1 << 63).unwrap_err().to_string().contains("loop_region.end"));
    }
}
