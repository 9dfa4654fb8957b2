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

// --- The specification's basic operations on 16-bit words (held in i32) and 32-bit longs. ---

#[inline]
fn sat16(x: i32) -> i32 {
    x.clamp(-32768, 32767)
}

#[inline]
fn add(a: i32, b: i32) -> i32 {
    sat16(a + b)
}

#[inline]
fn sub(a: i32, b: i32) -> i32 {
    sat16(a - b)
}

#[inline]
fn mult(a: i32, b: i32) -> i32 {
    if a == -32768 && b == -32768 {
        32767
    } else {
        (a * b) >> 15
    }
}

#[inline]
fn mult_r(a: i32, b: i32) -> i32 {
    if a == -32768 && b == -32768 {
        32767
    } else {
        (a * b + 16384) >> 15
    }
}

#[inline]
fn abs_s(a: i32) -> i32 {
    if a == -32768 {
        32767
    } else {
        a.abs()
    }
}

#[inline]
fn l_add(a: i32, b: i32) -> i32 {
    a.saturating_add(b)
}

/// A 16-bit word as C keeps it: the low 16 bits, two's complement.
#[inline]
fn word(x: i32) -> i32 {
    x as i16 as i32
}

/// The left shifts that bring a non-zero 32-bit value to the normalised range (bit 30 differs from bit 31).
#[inline]
fn norm(x: i32) -> i32 {
    let v = if x < 0 { !x } else { x };
    if v == 0 {
        31
    } else {
        v.leading_zeros() as i32 - 1
    }
}

/// `num / den` as a 15-bit fraction, for `0 ≤ num ≤ den` (restoring division, 15 steps).
#[inline]
fn div(num: i32, den: i32) -> i32 {
    if num == 0 || den <= 0 {
        return 0;
    }
    let (mut n, mut q) = (num, 0);
    for _ in 0..15 {
        q <<= 1;
        n <<= 1;
        if n >= den {
            n -= den;
            q += 1;
        }
    }
    q
}

/// Arithmetic shift right by `n` (left for negative `n`), as the specification's `shr`, in 16 bits.
#[inline]
fn shr(a: i32, n: i32) -> i32 {
    if n >= 16 {
        -((a < 0) as i32)
    } else if n <= -16 {
        0
    } else if n < 0 {
        word(a << -n)
    } else {
        a >> n
    }
}

/// Arithmetic shift left by `n` (right for negative `n`), as the specification's `shl`, in 16 bits.
#[inline]
fn shl(a: i32, n: i32) -> i32 {
    if n >= 16 {
        0
    } else if n <= -16 {
        -((a < 0) as i32)
    } else if n < 0 {
        a >> -n
    } else {
        word(a << n)
    }
}

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

// --- The encoder. ---

/// The encoder's state between frames.
#[derive(Debug, Clone)]
pub struct Encoder {
    z1: i32,
    l_z2: i32,
    mp: i32,
    u: [i32; 8],
    larpp: [i32; 8],
    /// The last 120 samples of the reconstructed short-term residual.
    dp: [i32; 120],
}

impl Default for Encoder {
    fn default() -> Self {
        Encoder { z1: 0, l_z2: 0, mp: 0, u: [0; 8], larpp: [0; 8], dp: [0; 120] }
    }
}

impl Encoder {
    /// Encodes one frame of 16-bit samples.
    pub fn encode(&mut self, input: &[i16; FRAME]) -> Frame {
        let mut f = Frame::default();
        let mut s = [0i32; FRAME];
        self.preprocess(input, &mut s);
        let larc = lpc_analysis(&mut s);
        f.larc = larc;
        let cur = decode_lars(&larc);
        // Short-term analysis filtering, in place: s becomes the short-term residual d.
        for (seg, &(a, b)) in SEGMENTS.iter().enumerate() {
            let rp = segment_rp(seg, &self.larpp, &cur);
            for x in &mut s[a..b] {
                let mut di = *x;
                let mut sav = di;
                for i in 0..8 {
                    let ui = self.u[i];
                    self.u[i] = sav;
                    sav = add(ui, mult_r(rp[i], di));
                    di = add(di, mult_r(rp[i], ui));
                }
                *x = di;
            }
        }
        self.larpp = cur;
        for j in 0..4 {
            let d: &[i32; 40] = s[40 * j..40 * j + 40].try_into().expect("40 samples");
            self.subframe(d, j, &mut f);
        }
        f
    }

    /// Downscaling to 13 bits, offset compensation and pre-emphasis.
    fn preprocess(&mut self, input: &[i16; FRAME], out: &mut [i32; FRAME]) {
        for (o, &x) in out.iter_mut().zip(input) {
            let so = (x as i32 >> 3) << 2;
            let s1 = so - self.z1;
            self.z1 = so;
            let mut l_s2 = s1 << 15;
            let msp = word(self.l_z2 >> 15);
            let lsp = word(self.l_z2 - (msp << 15));
            l_s2 += mult_r(lsp, 32735);
            self.l_z2 = l_add(msp * 32735, l_s2);
            let l_temp = l_add(self.l_z2, 16384);
            let pre = mult_r(self.mp, -28180);
            self.mp = word(l_temp >> 15);
            *o = add(self.mp, pre);
        }
    }

    /// Long-term prediction, RPE coding and the update of the past residual for subframe `j`.
    fn subframe(&mut self, d: &[i32; 40], j: usize, f: &mut Frame) {
        let (nc, bc) = self.ltp_parameters(d);
        f.nc[j] = nc as u8;
        f.bc[j] = bc as u8;
        let bp = QLB[bc as usize];
        let mut e = [0i32; 40];
        let mut dpp = [0i32; 40];
        for k in 0..40 {
            dpp[k] = mult_r(bp, self.dp[120 + k - nc as usize]);
            e[k] = sub(d[k], dpp[k]);
        }
        // Weighting filter (block filtering, zero outside the subframe).
        let mut x = [0i32; 40];
        for (k, xk) in x.iter_mut().enumerate() {
            let mut acc: i32 = 4096;
            for (i, &h) in H.iter().enumerate() {
                let n = k + i;
                if (5..45).contains(&n) {
                    acc += e[n - 5] * h;
                }
            }
            *xk = sat16(acc >> 13);
        }
        // Grid selection.
        let (mut mc, mut em) = (0usize, 0i32);
        for m in 0..4 {
            let mut l = 0i32;
            for i in 0..13 {
                let t = x[m + 3 * i] >> 2;
                l = l_add(l, t * t * 2);
            }
            if l > em {
                mc = m;
                em = l;
            }
        }
        let xm: [i32; 13] = std::array::from_fn(|i| x[mc + 3 * i]);
        // APCM quantization: the block maximum, then the samples.
        let xmax = xm.iter().map(|&v| abs_s(v)).max().unwrap_or(0);
        let mut exp = 0;
        let mut t = xmax >> 9;
        let mut done = false;
        for _ in 0..6 {
            done |= t <= 0;
            t >>= 1;
            if !done {
                exp += 1;
            }
        }
        let xmaxc = add(xmax >> (exp + 5), exp << 3);
        let (exp, mant) = xmax_exp_mant(xmaxc);
        let t1 = 6 - exp;
        let t2 = NRFAC[mant as usize];
        let mut xmc = [0u8; 13];
        for (c, &v) in xmc.iter_mut().zip(&xm) {
            let q = mult(shl(v, t1), t2) >> 12;
            *c = (q + 4) as u8 & 7;
        }
        f.mc[j] = mc as u8;
        f.xmaxc[j] = xmaxc as u8;
        f.xmc[j] = xmc;
        // The decoder's view of this subframe, for the next subframes' prediction.
        let xmp = apcm_decode(&xmc, exp, mant);
        let mut ep = [0i32; 40];
        for (i, &v) in xmp.iter().enumerate() {
            ep[mc + 3 * i] = v;
        }
        self.dp.copy_within(40.., 0);
        for k in 0..40 {
            self.dp[80 + k] = add(ep[k], dpp[k]);
        }
    }

    /// The lag (40–120) and gain index (0–3) of the long-term predictor for residual `d`.
    fn ltp_parameters(&self, d: &[i32; 40]) -> (i32, i32) {
        let dmax = d.iter().map(|&v| abs_s(v)).max().unwrap_or(0);
        let t = if dmax == 0 { 0 } else { norm(dmax << 16) };
        let scal = if t > 6 { 0 } else { 6 - t };
        let wt: [i32; 40] = std::array::from_fn(|k| d[k] >> scal);
        let (mut l_max, mut nc) = (0i32, 40i32);
        for lambda in 40..=120usize {
            let mut l = 0i32;
            for k in 0..40 {
                l += wt[k] * self.dp[120 + k - lambda];
            }
            let l = l << 1;
            if l > l_max {
                nc = lambda as i32;
                l_max = l;
            }
        }
        let l_max = l_max >> (6 - scal);
        let mut l_power = 0i32;
        for k in 0..40 {
            let v = self.dp[120 + k - nc as usize] >> 3;
            l_power = l_add(l_power, v * v * 2);
        }
        if l_max <= 0 {
            return (nc, 0);
        }
        if l_max >= l_power {
            return (nc, 3);
        }
        let t = norm(l_power);
        let r = (l_max << t) >> 16;
        let s = (l_power << t) >> 16;
        let bc = (0..3).find(|&b| r <= mult(s, DLB[b])).unwrap_or(3);
        (nc, bc as i32)
    }
}

/// Autocorrelation, reflection coefficients, log-area ratios and their quantization; `s` is rescaled in place as the
/// specification does (the short-term analysis then filters the rescaled samples).
fn lpc_analysis(s: &mut [i32; FRAME]) -> [u8; 8] {
    // Autocorrelation with dynamic scaling.
    let smax = s.iter().map(|&v| abs_s(v)).max().unwrap_or(0);
    let scalauto = if smax == 0 { 0 } else { 4 - norm(smax << 16) };
    if scalauto > 0 {
        let t = 16384 >> (scalauto - 1);
        for v in s.iter_mut() {
            *v = mult_r(*v, t);
        }
    }
    let mut l_acf = [0i32; 9];
    for (k, acf) in l_acf.iter_mut().enumerate() {
        let mut l = 0i32;
        for i in k..FRAME {
            l = l.wrapping_add(s[i] * s[i - k]);
        }
        *acf = l.wrapping_shl(1);
    }
    if scalauto > 0 {
        for v in s.iter_mut() {
            *v = word(*v << scalauto);
        }
    }
    // Reflection coefficients (Schur recursion).
    let mut r = [0i32; 8];
    if l_acf[0] != 0 {
        let t = norm(l_acf[0]);
        let acf: [i32; 9] = std::array::from_fn(|k| (l_acf[k] << t) >> 16);
        let mut p = acf;
        let mut kk = acf;
        for n in 0..8 {
            let a = abs_s(p[1]);
            if p[0] < a {
                break; // the rest stay 0
            }
            r[n] = div(a, p[0]);
            if p[1] > 0 {
                r[n] = -r[n];
            }
            if n == 7 {
                break;
            }
            p[0] = add(p[0], mult_r(p[1], r[n]));
            for m in 1..8 - n {
                p[m] = add(p[m + 1], mult_r(kk[m], r[n]));
                kk[m] = add(kk[m], mult_r(p[m + 1], r[n]));
            }
        }
    }
    // Log-area ratios and their quantization.
    let mut larc = [0u8; 8];
    for i in 0..8 {
        let t = abs_s(r[i]);
        let t = if t < 22118 {
            t >> 1
        } else if t < 31130 {
            t - 11059
        } else {
            (t - 26112) << 2
        };
        let lar = if r[i] < 0 { -t } else { t };
        let q = add(add(mult(LAR_A[i], lar), LAR_B[i]), 256) >> 9;
        larc[i] = (q.clamp(LAR_MIC[i], LAR_MAC[i]) - LAR_MIC[i]) as u8;
    }
    larc
}

// --- The decoder. ---

/// The decoder's state between frames.
#[derive(Debug, Clone)]
pub struct Decoder {
    v: [i32; 9],
    larpp: [i32; 8],
    /// The last 120 samples of the reconstructed short-term residual.
    drp: [i32; 120],
    nrp: i32,
    msr: i32,
}

impl Default for Decoder {
    fn default() -> Self {
        Decoder { v: [0; 9], larpp: [0; 8], drp: [0; 120], nrp: 40, msr: 0 }
    }
}

impl Decoder {
    /// Decodes one frame into 160 16-bit samples (parameters wider than their fields are masked to them).
    pub fn decode(&mut self, f: &Frame, out: &mut [i16; FRAME]) {
        let mut wt = [0i32; FRAME];
        for j in 0..4 {
            let (exp, mant) = xmax_exp_mant(f.xmaxc[j] as i32 & 63);
            let xmp = apcm_decode(&f.xmc[j], exp, mant);
            let mut erp = [0i32; 40];
            let mc = (f.mc[j] & 3) as usize;
            for (i, &v) in xmp.iter().enumerate() {
                erp[mc + 3 * i] = v;
            }
            let ncr = (f.nc[j] & 127) as i32;
            let nr = if (40..=120).contains(&ncr) { ncr } else { self.nrp };
            self.nrp = nr;
            let brp = QLB[(f.bc[j] & 3) as usize];
            for k in 0..40 {
                // Samples of this subframe already made are at wt[40·j ..], the past at drp.
                let back = k as i32 - nr;
                let past = if back >= 0 { wt[40 * j + back as usize] } else { self.drp[(120 + back) as usize] };
                wt[40 * j + k] = add(erp[k], mult_r(brp, past));
            }
            self.drp.copy_within(40.., 0);
            self.drp[80..].copy_from_slice(&wt[40 * j..40 * j + 40]);
        }
        let larc: [u8; 8] = std::array::from_fn(|i| f.larc[i] & ((1u8 << LAR_BITS[i]) - 1));
        let cur = decode_lars(&larc);
        for (seg, &(a, b)) in SEGMENTS.iter().enumerate() {
            let rrp = segment_rp(seg, &self.larpp, &cur);
            for k in a..b {
                let mut sri = wt[k];
                for i in (0..8).rev() {
                    sri = sub(sri, mult_r(rrp[i], self.v[i]));
                    self.v[i + 1] = add(self.v[i], mult_r(rrp[i], sri));
                }
                self.v[0] = sri;
                // De-emphasis, then 13 bits back to 16.
                self.msr = add(sri, mult_r(self.msr, 28180));
                out[k] = (add(self.msr, self.msr) & !7) as i16;
            }
        }
        self.larpp = cur;
    }
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
