//! GSM 06.10 full-rate speech coding (ETSI EN 300 961): 160 samples at 8000 Hz (20 ms) become one 260-bit frame
//! (13 kbit/s); WAV format tag 0x0031 holds two frames in a 65-byte block (Microsoft's "WAV49" packing).
//!
//! Written from the specification's description of the algorithm, in its 16-bit fixed-point arithmetic (the
//! saturating `add`/`sub`, `mult`, `mult_r`, `norm`, `div` of the specification's basic operations), so that it is
//! bit-exact: the same 16-bit input gives the same frames as any conforming coder.
//!
//! # The encoder, per 160-sample frame
//! 1. Preprocessing: the 16-bit sample is taken as 13 bits (`x >> 3 << 2`), offset-compensated (a first-order high
//!    pass, pole 32735/32768, kept in 32 bits) and pre-emphasised (`s(k) − 28180/32768 · s(k−1)`).
//! 2. LPC analysis: the frame's autocorrelation (lags 0–8) on a copy scaled down so that it cannot overflow; eight
//!    reflection coefficients by the Schur recursion; each turned into a log-area ratio by the piecewise-linear
//!    approximation and quantized (6, 6, 5, 5, 4, 4, 3, 3 bits).
//! 3. Short-term analysis: the decoded log-area ratios, interpolated with the previous frame's over the first 40
//!    samples (three segments), give the reflection coefficients of an 8-stage lattice that whitens the frame.
//! 4. Per 40-sample subframe: long-term prediction (the lag 40–120 of highest cross-correlation with the past
//!    reconstructed residual, and a 2-bit gain), the remainder filtered by the 11-tap weighting filter, the best of
//!    the four decimation-by-3 grids (RPE grid selection), and its 13 samples coded by APCM: a 6-bit block maximum
//!    (3-bit exponent, 3-bit mantissa) and 3 bits per sample. The encoder then decodes its own subframe to update the
//!    past residual exactly as the decoder will.
//!
//! # The decoder
//! The reverse: APCM inverse quantization onto the grid, long-term synthesis (a lag outside 40–120 keeps the
//! previous lag), the short-term synthesis lattice with the same interpolated coefficients, de-emphasis, and the
//! 13-bit result scaled back to 16 bits (`2·x`, low three bits cleared).
//!
//! # WAV49 packing
//! A frame's 76 parameters (LARc\[0..8\], then per subframe `Nc`, `bc`, `Mc`, `xmaxc`, `xMc[0..13]`) are written as
//! one bit stream, least significant bit of each parameter first, filling each byte from its least significant bit.
//! Two frames (520 bits) make a 65-byte block: the first frame ends in the low nibble of byte 32, the second starts in
//! its high nibble. Decoding never fails: any 65 bytes are two valid frames.
//!
//! # References not available here
//! The specification's own test sequences (the ETSI input and bit-stream files) are not available offline on the
//! machines this project is built on; the coder is checked bit for bit against libsndfile's GSM 6.10 coder instead
//! (`tests/gsm610_reference.rs`), which is documented to reproduce those sequences.

// The loops follow the specification's index notation (parallel tables and arrays indexed together).
#![allow(clippy::needless_range_loop)]

/// Samples in one frame (20 ms at 8000 Hz).
pub const FRAME: usize = 160;
/// Bits in one frame.
pub const FRAME_BITS: usize = 260;
/// Bytes in one WAV49 block (two frames).
pub const BLOCK_BYTES: usize = 65;
/// Samples in one WAV49 block.
pub const SAMPLES_PER_BLOCK: usize = 2 * FRAME;
/// The only sample rate of the format.
pub const RATE: u32 = 8000;

/// One coded frame: the 76 parameters, each within its bit width.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Frame {
    /// Coded log-area ratios (6, 6, 5, 5, 4, 4, 3, 3 bits).
    pub larc: [u8; 8],
    /// Long-term prediction lag per subframe (7 bits; 40–120 from the encoder).
    pub nc: [u8; 4],
    /// Long-term prediction gain index per subframe (2 bits).
    pub bc: [u8; 4],
    /// RPE grid position per subframe (2 bits, 0–3).
    pub mc: [u8; 4],
    /// Coded block maximum per subframe (6 bits).
    pub xmaxc: [u8; 4],
    /// Coded RPE samples per subframe (3 bits each).
    pub xmc: [[u8; 13]; 4],
}

/// Bit widths of the coded log-area ratios.
const LAR_BITS: [u32; 8] = [6, 6, 5, 5, 4, 4, 3, 3];

mod arith;
mod decode;
mod encode;

use arith::*;
pub use decode::Decoder;
pub use encode::Encoder;

// --- Tables of the specification. ---

/// LAR quantizer slope, offset, smallest and largest code.
const LAR_A: [i32; 8] = [20480, 20480, 20480, 20480, 13964, 15360, 8534, 9036];
const LAR_B: [i32; 8] = [0, 0, 2048, -2560, 94, -1792, -341, -1144];
const LAR_MIC: [i32; 8] = [-32, -32, -16, -16, -8, -8, -4, -4];
const LAR_MAC: [i32; 8] = [31, 31, 15, 15, 7, 7, 3, 3];
/// 1/A for decoding the LARs.
const LAR_INVA: [i32; 8] = [13107, 13107, 13107, 13107, 19223, 17476, 31454, 29708];
/// LTP gain decision levels and the gains themselves.
const DLB: [i32; 4] = [6554, 16384, 26214, 32767];
const QLB: [i32; 4] = [3277, 11469, 21299, 32767];
/// The RPE weighting filter's impulse response.
const H: [i32; 11] = [-134, -374, 0, 2054, 5741, 8192, 5741, 2054, 0, -374, -134];
/// Inverse mantissas (encoder) and mantissas (decoder) of the APCM block maximum.
const NRFAC: [i32; 8] = [29128, 26215, 23832, 21846, 20165, 18725, 17476, 16384];
const FAC: [i32; 8] = [18431, 20479, 22527, 24575, 26623, 28671, 30719, 32767];

/// The four interpolation segments of a frame: first sample, one past the last, and how the previous frame's LARs
/// weigh against this frame's.
const SEGMENTS: [(usize, usize); 4] = [(0, 13), (13, 27), (27, 40), (40, 160)];

// --- Shared by encoder and decoder. ---

/// Decoding of the coded LARs (LARc → LARpp).
fn decode_lars(larc: &[u8; 8]) -> [i32; 8] {
    let mut out = [0; 8];
    for i in 0..8 {
        let mut t = add(larc[i] as i32, LAR_MIC[i]) << 10;
        t = sub(t, LAR_B[i] << 1);
        t = mult_r(LAR_INVA[i], t);
        out[i] = add(t, t);
    }
    out
}

/// The reflection coefficients of segment `seg` from the previous and the current frame's decoded LARs.
fn segment_rp(seg: usize, prev: &[i32; 8], cur: &[i32; 8]) -> [i32; 8] {
    let mut rp = [0; 8];
    for i in 0..8 {
        let (a, b) = (prev[i], cur[i]);
        let lar = match seg {
            0 => add(add(a >> 2, b >> 2), a >> 1),
            1 => add(a >> 1, b >> 1),
            2 => add(add(a >> 2, b >> 2), b >> 1),
            _ => b,
        };
        let t = abs_s(lar);
        let t = if t < 11059 {
            t << 1
        } else if t < 20070 {
            t + 11059
        } else {
            add(t >> 2, 26112)
        };
        rp[i] = if lar < 0 { -t } else { t };
    }
    rp
}

/// Exponent and mantissa (0–7) of a coded block maximum.
fn xmax_exp_mant(xmaxc: i32) -> (i32, i32) {
    let mut exp = if xmaxc > 15 { (xmaxc >> 3) - 1 } else { 0 };
    let mut mant = xmaxc - (exp << 3);
    if mant == 0 {
        exp = -4;
        mant = 7;
    } else {
        while mant <= 7 {
            mant = (mant << 1) | 1;
            exp -= 1;
        }
        mant -= 8;
    }
    (exp, mant)
}

/// APCM inverse quantization: the 13 RPE samples of a subframe.
fn apcm_decode(xmc: &[u8; 13], exp: i32, mant: i32) -> [i32; 13] {
    let fac = FAC[mant as usize];
    let t2 = sub(6, exp);
    let t3 = shl(1, sub(t2, 1));
    let mut out = [0; 13];
    for (o, &c) in out.iter_mut().zip(xmc) {
        let t = ((c as i32 & 7) << 1) - 7;
        let t = mult_r(fac, t << 12);
        *o = shr(add(t, t3), t2);
    }
    out
}

// --- WAV49 packing. ---

struct BitWriter<'a> {
    out: &'a mut [u8],
    pos: usize,
}

impl BitWriter<'_> {
    fn put(&mut self, value: u32, bits: u32) {
        for b in 0..bits {
            if (value >> b) & 1 == 1 {
                self.out[self.pos / 8] |= 1 << (self.pos % 8);
            }
            self.pos += 1;
        }
    }
}

struct BitReader<'a> {
    data: &'a [u8],
    pos: usize,
}

impl BitReader<'_> {
    fn get(&mut self, bits: u32) -> u8 {
        let mut v = 0u8;
        for b in 0..bits {
            v |= ((self.data[self.pos / 8] >> (self.pos % 8)) & 1) << b;
            self.pos += 1;
        }
        v
    }
}

/// The parameters of a frame in stream order with their widths.
fn for_each_field(f: &mut Frame, mut visit: impl FnMut(&mut u8, u32)) {
    for i in 0..8 {
        visit(&mut f.larc[i], LAR_BITS[i]);
    }
    for j in 0..4 {
        visit(&mut f.nc[j], 7);
        visit(&mut f.bc[j], 2);
        visit(&mut f.mc[j], 2);
        visit(&mut f.xmaxc[j], 6);
        for c in f.xmc[j].iter_mut() {
            visit(c, 3);
        }
    }
}

/// Packs two frames into one 65-byte WAV49 block.
pub fn pack_block(frames: &[Frame; 2], out: &mut [u8; BLOCK_BYTES]) {
    out.fill(0);
    let mut w = BitWriter { out, pos: 0 };
    for f in frames {
        let mut f = *f;
        for_each_field(&mut f, |v, bits| w.put(*v as u32, bits));
    }
}

/// Unpacks a 65-byte WAV49 block into its two frames.
pub fn unpack_block(block: &[u8; BLOCK_BYTES]) -> [Frame; 2] {
    let mut r = BitReader { data: block, pos: 0 };
    let mut frames = [Frame::default(); 2];
    for f in frames.iter_mut() {
        for_each_field(f, |v, bits| *v = r.get(bits));
    }
    frames
}

/// Number of 65-byte blocks for `frames` samples.
pub fn block_count(frames: u64) -> u64 {
    frames.div_ceil(SAMPLES_PER_BLOCK as u64)
}

/// Encodes 16-bit samples (one channel, 8000 Hz) into whole WAV49 blocks appended to `out`; the last block is
/// completed with silence. Zero samples give no block.
pub fn encode_blocks(samples: &[i16], out: &mut Vec<u8>) {
    let mut enc = Encoder::default();
    let mut block = [0u8; BLOCK_BYTES];
    for chunk in samples.chunks(SAMPLES_PER_BLOCK) {
        let mut frames = [Frame::default(); 2];
        for (h, f) in frames.iter_mut().enumerate() {
            let mut x = [0i16; FRAME];
            for (i, v) in x.iter_mut().enumerate() {
                *v = chunk.get(h * FRAME + i).copied().unwrap_or(0);
            }
            *f = enc.encode(&x);
        }
        pack_block(&frames, &mut block);
        out.extend_from_slice(&block);
    }
}

/// Decodes WAV49 blocks into at most `max_frames` samples; a partial block at the end is ignored (its length is
/// returned as the second value).
pub fn decode_blocks(data: &[u8], max_frames: u64) -> (Vec<i16>, usize) {
    let whole = data.len() / BLOCK_BYTES;
    let cap = (whole as u64 * SAMPLES_PER_BLOCK as u64).min(max_frames) as usize;
    let mut out = Vec::with_capacity(cap);
    let mut dec = Decoder::default();
    let mut pcm = [0i16; FRAME];
    for block in data.chunks_exact(BLOCK_BYTES) {
        if out.len() >= cap {
            break;
        }
        for f in unpack_block(block.try_into().expect("65 bytes")) {
            dec.decode(&f, &mut pcm);
            out.extend_from_slice(&pcm);
        }
    }
    out.truncate(cap);
    (out, data.len() % BLOCK_BYTES)
}

/// The round trip one sample at a time, for the codec stage: a frame is encoded and decoded once its 160th sample
/// arrives, so the output runs one frame (160 samples) behind the input.
#[derive(Debug, Clone)]
pub struct FrameRoundTrip {
    enc: Encoder,
    dec: Decoder,
    input: [i16; FRAME],
    output: [i16; FRAME],
    pos: usize,
}

impl Default for FrameRoundTrip {
    fn default() -> Self {
        FrameRoundTrip {
            enc: Encoder::default(),
            dec: Decoder::default(),
            input: [0; FRAME],
            output: [0; FRAME],
            pos: 0,
        }
    }
}

impl FrameRoundTrip {
    /// Takes one input sample and gives the decoded sample of one frame earlier (silence during the first frame).
    #[inline]
    pub fn push(&mut self, x: i16) -> i16 {
        let y = self.output[self.pos];
        self.input[self.pos] = x;
        self.pos += 1;
        if self.pos == FRAME {
            self.pos = 0;
            let f = self.enc.encode(&self.input);
            self.dec.decode(&f, &mut self.output);
        }
        y
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rng::Pcg32;

    #[test]
    fn basic_operations() {
        assert_eq!(add(32000, 1000), 32767);
        assert_eq!(sub(-32000, 1000), -32768);
        assert_eq!(mult(-32768, -32768), 32767);
        assert_eq!(mult_r(-32768, -32768), 32767);
        assert_eq!(mult_r(16384, 16384), 8192);
        assert_eq!(norm(0x4000_0000), 0);
        assert_eq!(norm(1), 30);
        assert_eq!(norm(-1), 31);
        assert_eq!(norm(i32::MIN), 0);
        assert_eq!(div(1, 2), 16384);
        assert_eq!(div(5, 5), 32767);
        assert_eq!(abs_s(-32768), 32767);
    }

    #[test]
    fn packing_round_trips() {
        let mut rng = Pcg32::new(3, 4);
        for _ in 0..50 {
            let mut block = [0u8; BLOCK_BYTES];
            for b in block.iter_mut() {
                *b = rng.next_u32() as u8;
            }
            let frames = unpack_block(&block);
            let mut again = [0u8; BLOCK_BYTES];
            pack_block(&frames, &mut again);
            assert_eq!(block, again);
        }
    }

    /// Arbitrary blocks decode without a panic (every bit pattern is a valid frame).
    #[test]
    fn random_blocks_decode() {
        let mut rng = Pcg32::new(9, 1);
        let data: Vec<u8> = (0..BLOCK_BYTES * 400).map(|_| rng.next_u32() as u8).collect();
        let (pcm, rest) = decode_blocks(&data, u64::MAX);
        assert_eq!((pcm.len(), rest), (400 * SAMPLES_PER_BLOCK, 0));
        for fill in [0u8, 0xFF, 0x55, 0xAA] {
            let (pcm, _) = decode_blocks(&[fill; BLOCK_BYTES * 20], u64::MAX);
            assert_eq!(pcm.len(), 20 * SAMPLES_PER_BLOCK);
        }
    }

    /// Encoding then decoding a speech-like signal keeps it recognisable (a loose check: the exact bits are checked
    /// against libsndfile in the integration tests), and full-scale input does not overflow.
    #[test]
    fn round_trip_tracks_a_voiced_signal() {
        let x: Vec<i16> = (0..8000)
            .map(|i| {
                let t = i as f64 / 8000.0;
                let mut s = 0.0;
                for h in 1..6 {
                    s += (2.0 * std::f64::consts::PI * 140.0 * h as f64 * t).sin() / h as f64;
                }
                (8000.0 * s) as i16
            })
            .collect();
        let mut bytes = Vec::new();
        encode_blocks(&x, &mut bytes);
        assert_eq!(bytes.len() as u64, block_count(8000) * BLOCK_BYTES as u64);
        let (y, _) = decode_blocks(&bytes, 8000);
        let (mut s, mut n) = (0f64, 0f64);
        for (a, b) in x[800..].iter().zip(&y[800..]) {
            s += (*a as f64).powi(2);
            n += (*a as f64 - *b as f64).powi(2);
        }
        let snr = 10.0 * (s / n).log10();
        assert!(snr > 5.0, "SNR {snr:.1} dB");
        let mut rng = Pcg32::new(1, 1);
        let loud: Vec<i16> =
            (0..3200).map(|i| if (rng.next_u32() & 1) == 1 || i % 7 == 0 { i16::MAX } else { i16::MIN }).collect();
        let mut bytes = Vec::new();
        encode_blocks(&loud, &mut bytes);
        assert_eq!(decode_blocks(&bytes, u64::MAX).0.len(), 3200);
    }

    /// The sample-by-sample round trip is the block codec one frame late.
    #[test]
    fn frame_round_trip_is_the_block_codec_delayed() {
        let x: Vec<i16> = (0..1000).map(|i| ((i * 37 % 200) as i16 - 100) * 50).collect();
        let mut bytes = Vec::new();
        encode_blocks(&x, &mut bytes);
        let (y, _) = decode_blocks(&bytes, u64::MAX);
        let mut rt = FrameRoundTrip::default();
        let z: Vec<i16> = x.iter().chain(&[0; FRAME]).map(|&v| rt.push(v)).collect();
        assert_eq!(&z[FRAME..FRAME + 960], &y[..960]);
    }
}
