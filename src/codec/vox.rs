//! Dialogic ("VOX") ADPCM: 4 bits per sample, 12-bit precision, raw and headerless, as described in Dialogic's
//! application note *Dialogic ADPCM Algorithm* (1988) and played by telephony cards, voice-mail systems and
//! libsndfile's `VOX_ADPCM`.
//!
//! # The codec
//! Like IMA ADPCM, but with 12-bit samples and a 49-entry step table (16 … 1552). A code is a sign bit (8) and a
//! 3-bit magnitude `m`; the decoder adds `±step·(2m + 1)/8` (rounded down) to its last output and moves the step
//! index by −1, −1, −1, −1, 2, 4, 6, 8 for m = 0 … 7. There is no header: both ends start from output 0 and step
//! index 0, and nothing ever resets them.
//!
//! # 16-bit samples
//! Samples are kept 16 times larger than the note's 12-bit values (steps 256 … 24,832, each increment rounded down
//! to a multiple of 16), so the decoder's output is directly a 16-bit sample; this is libsndfile's arithmetic, which
//! the tests check bit for bit. The note's description adds the bits' terms separately
//! (`step·b2 + step/2·b1 + step/4·b0 + step/8`, each halving rounded down); on the 12-bit table the two differ for odd
//! steps by at most 1 (12-bit) unit per sample, and because the decoder integrates without leakage such differences
//! add up: decoders of either kind drift apart slowly on long files. The output is clamped to 16 bits (libsndfile's
//! limit; the 12-bit limit of the note would be −32,768 … 32,752).
//!
//! # Layout
//! Two codes per byte, the first in the high nibble. An odd sample count is completed with a coded 0.
//!
//! # The encoder (ours)
//! The note's encoder (and libsndfile's) truncates `4·|diff|/step`. Ours picks, of the 16 codes, the one whose
//! decoded sample is nearest the input: same decoder, same state update, a lower error.

/// Step sizes of the 12-bit coder, times 16.
pub const STEPS: [i32; 49] = [
    256, 272, 304, 336, 368, 400, 448, 496, 544, 592, 656, 720, 800, 880, 960, 1056, 1168, 1280, 1408, 1552, 1712,
    1888, 2080, 2288, 2512, 2768, 3040, 3344, 3680, 4048, 4464, 4912, 5392, 5936, 6528, 7184, 7904, 8704, 9568, 10528,
    11584, 12736, 14016, 15408, 16960, 18656, 20512, 22576, 24832,
];
const INDEX_CHANGE: [i32; 8] = [-1, -1, -1, -1, 2, 4, 6, 8];

/// The coder state (identical in encoder and decoder).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct VoxState {
    /// Last output sample.
    pub last: i32,
    /// Step index, 0 to 48.
    pub index: usize,
}

impl VoxState {
    #[inline]
    fn value(&self, code: u8) -> i32 {
        let mut s = ((STEPS[self.index] * (((code as i32 & 7) << 1) | 1)) >> 3) & !15;
        if code & 8 != 0 {
            s = -s;
        }
        (self.last + s).clamp(i16::MIN as i32, i16::MAX as i32)
    }

    /// Decodes one code (low 4 bits) and returns the sample.
    #[inline]
    pub fn decode(&mut self, code: u8) -> i16 {
        let s = self.value(code & 15);
        self.index = (self.index as i32 + INDEX_CHANGE[(code & 7) as usize]).clamp(0, 48) as usize;
        self.last = s;
        s as i16
    }

    /// Encodes one sample: the code whose decoded sample is nearest `x`.
    #[inline]
    pub fn encode(&mut self, x: i16) -> u8 {
        let mut best = (u32::MAX, 0u8);
        for code in 0..16u8 {
            let e = (x as i32 - self.value(code)).unsigned_abs();
            if e < best.0 {
                best = (e, code);
            }
        }
        self.decode(best.1);
        best.1
    }
}

/// Bytes of a VOX file of `frames` samples.
pub fn byte_len(frames: u64) -> u64 {
    frames.div_ceil(2)
}

/// Encodes 16-bit samples into packed codes (first sample in the high nibble), appending to `out`.
pub fn encode(samples: &[i16], out: &mut Vec<u8>) {
    let mut st = VoxState::default();
    for pair in samples.chunks(2) {
        let hi = st.encode(pair[0]);
        let lo = st.encode(pair.get(1).copied().unwrap_or(0));
        out.push((hi << 4) | lo);
    }
}

/// Decodes packed codes into at most `max` samples.
pub fn decode(data: &[u8], max: u64) -> Vec<i16> {
    let n = ((data.len() as u64) * 2).min(max) as usize;
    let mut st = VoxState::default();
    let mut out = Vec::with_capacity(n);
    for &b in data {
        for nib in [b >> 4, b & 15] {
            if out.len() == n {
                return out;
            }
            out.push(st.decode(nib));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The encoder's state follows the decoder's, and it tracks a slow sine to within a few steps.
    #[test]
    fn round_trip_tracks() {
        let x: Vec<i16> = (0..4001).map(|i| (12000.0 * (i as f64 * 0.02).sin()) as i16).collect();
        let mut bytes = Vec::new();
        encode(&x, &mut bytes);
        assert_eq!(bytes.len() as u64, byte_len(x.len() as u64));
        let y = decode(&bytes, x.len() as u64);
        assert_eq!(y.len(), x.len());
        let mut st = VoxState::default();
        for (a, b) in x.iter().zip(&y) {
            st.encode(*a);
            assert_eq!(st.last as i16, *b);
        }
        let worst = x[50..].iter().zip(&y[50..]).map(|(a, b)| (a - b).abs()).max().unwrap();
        assert!(worst < 800, "{worst}");
    }
}
