//! ITU-T G.721 (1988) 32 kbit/s ADPCM, bit for bit as the Recommendation's block diagrams (the same algorithm is
//! G.726 at 32 kbit/s): 4 bits per sample at 8 kHz, a 2-pole/6-zero adaptive predictor, an adaptive quantizer in the
//! log domain whose speed follows a steady-state/transient detector, and a tone/transition detector that resets the
//! predictor for modem signals. Each function below is one of the Recommendation's blocks (named in capitals in the
//! comments), in its integer arithmetic.
//!
//! # Linear samples
//! The Recommendation codes 64 kbit/s A-law or μ-law. A WAV file holds 16-bit linear samples, so, as every WAV codec
//! does (Sun's reference code, libsndfile), the encoder takes the 14-bit uniform value `x >> 2` (what EXPAND would
//! give) and the decoder returns the reconstructed signal `sr`, limited to 14 bits, times 4. The Recommendation's
//! log-PCM output stage and its synchronous coding adjustment have no linear counterpart and are not used.
//!
//! # libsndfile's arithmetic
//! libsndfile (1.2.2, checked bit for bit by the integration tests) codes WAV format 0x0040 with a copy of Sun's code
//! that was changed in FMULT: the mantissa product drops the `+ 48` rounding term of the Recommendation
//! (`WANMANT = (SRNMANT·ANMANT + 48) >> 4`; its source says removing it "improved the SNR"). Its decoder also keeps
//! `sr << 2` in 16 bits, so a reconstruction beyond 14 bits wraps around. [`Arith`]
//! selects either arithmetic.
//!
//! The difference is small per product but the predictor is recursive: a file coded with one arithmetic and decoded
//! with the other drifts (on the integration tests' speech-like signal, the two decodes of one file are only about
//! 8 dB apart, while each arithmetic's own round trip gives about 29 dB). So an encoder must code for the decoder
//! that will play the file. Files with format tag 0x0040 are read in practice by libsndfile (and what is built on
//! it), so the export and the round-trip stage use [`Arith::Libsndfile`]: what the stage plays is what libsndfile
//! plays, bit for bit. [`Arith::Itu`] is the Recommendation's arithmetic, kept beside it for decoders that follow
//! the Recommendation; it is checked here only for self-consistency, there being no outside reference for it in the
//! test environment.

/// Which multiplication the predictor uses (see the module docs).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Arith {
    /// The Recommendation's FMULT, with its rounding term; the output limited to 14 bits.
    Itu,
    /// libsndfile's FMULT (no rounding term) and 16-bit wrapping output: what the export and the stage use.
    #[default]
    Libsndfile,
}

const POWER2: [i32; 15] = [1, 2, 4, 8, 0x10, 0x20, 0x40, 0x80, 0x100, 0x200, 0x400, 0x800, 0x1000, 0x2000, 0x4000];
/// QUAN decision levels of the 32 kbit/s quantizer (normalised log2 units, Table 1/G.721).
const QTAB: [i32; 7] = [-124, 80, 178, 246, 300, 349, 400];
/// Normalised log magnitude of each code's reconstruction (RECONST).
const DQLN: [i32; 16] = [-2048, 4, 135, 213, 273, 323, 373, 425, 425, 373, 323, 273, 213, 135, 4, -2048];
/// Scale-factor multiplier W(I), times 32 (FUNCTW).
const WI: [i32; 16] = [-12, 18, 41, 64, 112, 198, 355, 1122, 1122, 355, 198, 112, 64, 41, 18, -12];
/// F(I) for the speed control (FUNCTF).
const FI: [i32; 16] = [0, 0, 0, 0x200, 0x200, 0x200, 0x600, 0xE00, 0xE00, 0x600, 0x200, 0x200, 0x200, 0, 0, 0];

/// Index of the first table entry above `val` (the number of entries ≤ `val`).
#[inline]
fn quan(val: i32, table: &[i32]) -> i32 {
    table.iter().position(|&t| val < t).unwrap_or(table.len()) as i32
}

/// FMULT: a predictor coefficient (14-bit two's complement, `an`) times a signal in the coder's floating format
/// (`srn`: sign, 4-bit exponent, 6-bit mantissa).
#[inline]
fn fmult(an: i32, srn: i32, arith: Arith) -> i32 {
    let anmag = if an > 0 { an } else { (-an) & 0x1FFF };
    let anexp = quan(anmag, &POWER2) - 6;
    let anmant = if anmag == 0 {
        32
    } else if anexp >= 0 {
        anmag >> anexp
    } else {
        anmag << -anexp
    };
    let wanexp = anexp + ((srn >> 6) & 0xF) - 13;
    let wanmant = match arith {
        Arith::Itu => (anmant * (srn & 0x3F) + 48) >> 4,
        Arith::Libsndfile => (anmant * (srn & 0x3F)) >> 4,
    };
    let retval = if wanexp >= 0 { (wanmant << wanexp) & 0x7FFF } else { wanmant >> -wanexp };
    if (an ^ srn) < 0 {
        -retval
    } else {
        retval
    }
}

/// The coder state (the Recommendation's delay elements), identical in encoder and decoder.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct G721 {
    arith: Arith,
    yl: i32,
    yu: i32,
    dms: i32,
    dml: i32,
    ap: i32,
    a: [i32; 2],
    b: [i32; 6],
    pk: [i32; 2],
    dq: [i32; 6],
    sr: [i32; 2],
    td: bool,
}

impl Default for G721 {
    fn default() -> Self {
        G721::new(Arith::default())
    }
}

/// What one step of the coder computed before the state update.
struct Step {
    se: i32,
    sez: i32,
    y: i32,
}

impl G721 {
    /// The reset state of §4.3 (all delay elements at their initial values).
    pub fn new(arith: Arith) -> Self {
        G721 {
            arith,
            yl: 34816,
            yu: 544,
            dms: 0,
            dml: 0,
            ap: 0,
            a: [0; 2],
            b: [0; 6],
            pk: [0; 2],
            dq: [32; 6],
            sr: [32; 2],
            td: false,
        }
    }

    /// ACCUM (signal estimate) and MIX (step size).
    fn estimate(&self) -> Step {
        let sezi: i32 = (0..6).map(|i| fmult(self.b[i] >> 2, self.dq[i], self.arith)).sum();
        let sei = sezi + fmult(self.a[1] >> 2, self.sr[1], self.arith) + fmult(self.a[0] >> 2, self.sr[0], self.arith);
        // MIX: the quantizer scale factor between the fast (yu) and slow (yl) ones, weighted by ap.
        let y = if self.ap >= 256 {
            self.yu
        } else {
            let y = self.yl >> 6;
            let dif = self.yu - y;
            let al = self.ap >> 2;
            if dif > 0 {
                y + ((dif * al) >> 6)
            } else if dif < 0 {
                y + ((dif * al + 0x3F) >> 6)
            } else {
                y
            }
        };
        Step { se: sei >> 1, sez: sezi >> 1, y }
    }

    /// RECONST, ADDA, ANTILOG: the quantized difference in sign-magnitude form (negative values are
    /// `magnitude − 0x8000`, as the Recommendation's 16-bit word).
    fn reconstruct(code: u8, y: i32) -> i32 {
        let sign = code & 8 != 0;
        let dql = DQLN[code as usize] + (y >> 2);
        if dql < 0 {
            return if sign { -0x8000 } else { 0 };
        }
        let dex = (dql >> 7) & 15;
        let dqt = 128 + (dql & 127);
        let dq = (dqt << 7) >> (14 - dex);
        if sign {
            dq - 0x8000
        } else {
            dq
        }
    }

    /// Decodes one code; returns the reconstructed 16-bit sample (see the module docs for the linear output).
    pub fn decode(&mut self, code: u8) -> i16 {
        let code = code & 15;
        let st = self.estimate();
        let sr = self.finish(code, st);
        self.output(sr)
    }

    /// The 16-bit sample for a reconstructed signal `sr` (see the module docs).
    fn output(&self, sr: i32) -> i16 {
        match self.arith {
            Arith::Itu => (sr.clamp(-8192, 8191) << 2) as i16,
            Arith::Libsndfile => (sr << 2) as i16,
        }
    }

    /// Encodes one 16-bit sample into a 4-bit code; the state afterwards equals the decoder's after that code.
    pub fn encode(&mut self, x: i16) -> u8 {
        self.round_trip(x).0
    }

    /// Encodes one sample and returns the code and the sample a decoder plays for it.
    pub fn round_trip(&mut self, x: i16) -> (u8, i16) {
        let sl = (x as i32) >> 2;
        let st = self.estimate();
        // SUBTA, then LOG, SUBTB and QUAN: the difference quantized in the log domain.
        let d = (sl - st.se) as i16 as i32;
        let dqm = d.abs();
        let expon = quan(dqm >> 1, &POWER2);
        let mant = ((dqm << 7) >> expon) & 0x7F;
        let dl = (expon << 7) + mant;
        let dln = dl - (st.y >> 2);
        let i = quan(dln, &QTAB);
        let code = if d < 0 {
            15 - i
        } else if i == 0 {
            15 // the positive side has no code 0 since 1988: it maps to the 1's complement of 0
        } else {
            i
        } as u8;
        let sr = self.finish(code, st);
        (code, self.output(sr))
    }

    /// ADDB, ADDC and the state update (adaptation, predictor update, tone and transition detection) for `code`;
    /// returns the reconstructed signal `sr`.
    fn finish(&mut self, code: u8, st: Step) -> i32 {
        let Step { se, sez, y } = st;
        let dq = Self::reconstruct(code, y);
        let sr = if dq < 0 { se - (dq & 0x3FFF) } else { se + dq } as i16 as i32;
        let dqsez = (sr + sez - se) as i16 as i32;
        self.update(y, WI[code as usize] << 5, FI[code as usize], dq, sr, dqsez);
        sr
    }

    #[allow(clippy::too_many_arguments)]
    fn update(&mut self, y: i32, wi: i32, fi: i32, dq: i32, sr: i32, dqsez: i32) {
        let pk0 = (dqsez < 0) as i32;
        let mag = dq & 0x7FFF;
        // TRANS: a transition when the difference is large while the tone detector is on.
        let ylint = self.yl >> 15;
        let ylfrac = (self.yl >> 10) & 0x1F;
        let thr1 = (32 + ylfrac) << ylint;
        let thr2 = if ylint > 9 { 31 << 10 } else { thr1 };
        let dqthr = (thr2 + (thr2 >> 1)) >> 1;
        let tr = self.td && mag > dqthr;
        // FUNCTW, FILTD, LIMB: the fast scale factor; FILTE: the slow one.
        self.yu = (y + ((wi - y) >> 5)).clamp(544, 5120);
        self.yl += self.yu + ((-self.yl) >> 6);
        let mut a2p = 0;
        if tr {
            self.a = [0; 2];
            self.b = [0; 6];
        } else {
            // UPA2, LIMC: the second pole.
            let pks1 = pk0 ^ self.pk[0];
            a2p = self.a[1] - (self.a[1] >> 7);
            if dqsez != 0 {
                let fa1 = if pks1 != 0 { self.a[0] } else { -self.a[0] };
                if fa1 < -8191 {
                    a2p -= 0x100;
                } else if fa1 > 8191 {
                    a2p += 0xFF;
                } else {
                    a2p += fa1 >> 5;
                }
                if pk0 ^ self.pk[1] != 0 {
                    if a2p <= -12160 {
                        a2p = -12288;
                    } else if a2p >= 12416 {
                        a2p = 12288;
                    } else {
                        a2p -= 0x80;
                    }
                } else if a2p <= -12416 {
                    a2p = -12288;
                } else if a2p >= 12160 {
                    a2p = 12288;
                } else {
                    a2p += 0x80;
                }
            }
            self.a[1] = a2p;
            // UPA1, LIMD: the first pole.
            self.a[0] -= self.a[0] >> 8;
            if dqsez != 0 {
                self.a[0] += if pks1 == 0 { 192 } else { -192 };
            }
            let a1ul = 15360 - a2p;
            self.a[0] = self.a[0].clamp(-a1ul, a1ul);
            // UPB, XOR: the six zeros.
            for k in 0..6 {
                self.b[k] -= self.b[k] >> 8;
                if mag != 0 {
                    self.b[k] += if (dq ^ self.dq[k]) >= 0 { 128 } else { -128 };
                }
            }
        }
        // FLOATA: dq into the predictor's floating format.
        self.dq.copy_within(0..5, 1);
        self.dq[0] = if mag == 0 {
            if dq >= 0 {
                0x20
            } else {
                0xFC20u16 as i16 as i32
            }
        } else {
            let e = quan(mag, &POWER2);
            (e << 6) + ((mag << 6) >> e) - if dq >= 0 { 0 } else { 0x400 }
        };
        // FLOATB: sr likewise.
        self.sr[1] = self.sr[0];
        self.sr[0] = if sr == 0 {
            0x20
        } else if sr > 0 {
            let e = quan(sr, &POWER2);
            (e << 6) + ((sr << 6) >> e)
        } else if sr > -32768 {
            let m = -sr;
            let e = quan(m, &POWER2);
            (e << 6) + ((m << 6) >> e) - 0x400
        } else {
            0xFC20u16 as i16 as i32
        };
        self.pk[1] = self.pk[0];
        self.pk[0] = pk0;
        // TONE: a strongly negative second pole suggests a modem tone.
        self.td = !tr && a2p < -11776;
        // FILTA, FILTB, SUBTC, FILTC: adaptation speed control.
        self.dms += (fi - self.dms) >> 5;
        self.dml += ((fi << 2) - self.dml) >> 7;
        self.ap = if tr {
            256
        } else if y < 1536 || self.td || ((self.dms << 2) - self.dml).abs() >= (self.dml >> 3) {
            self.ap + ((0x200 - self.ap) >> 4)
        } else {
            self.ap + ((-self.ap) >> 4)
        };
    }
}

/// Samples per block of the WAV layout: 60 bytes, 120 samples, first sample in the low nibble (as libsndfile).
pub const SAMPLES_PER_BLOCK: usize = 120;
/// Bytes per block of the WAV layout.
pub const BYTES_PER_BLOCK: usize = 60;

/// Encodes 16-bit samples (one channel) into whole 60-byte blocks, the last completed with coded silence.
/// Uses [`Arith::Libsndfile`] (see the module docs).
pub fn encode_stream(samples: &[i16], out: &mut Vec<u8>) {
    let mut enc = G721::new(Arith::Libsndfile);
    let padded = samples.len().div_ceil(SAMPLES_PER_BLOCK) * SAMPLES_PER_BLOCK;
    let mut it = samples.iter().copied().chain(std::iter::repeat(0)).take(padded);
    while let (Some(a), Some(b)) = (it.next(), it.next()) {
        let lo = enc.encode(a);
        let hi = enc.encode(b);
        out.push(lo | (hi << 4));
    }
}

/// Decodes a stream of packed codes (low nibble first) into at most `max` samples.
pub fn decode_stream(data: &[u8], arith: Arith, max: u64) -> Vec<i16> {
    let n = ((data.len() as u64) * 2).min(max) as usize;
    let mut dec = G721::new(arith);
    let mut out = Vec::with_capacity(n);
    for &byte in data {
        for nib in [byte & 15, byte >> 4] {
            if out.len() == n {
                return out;
            }
            out.push(dec.decode(nib));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Encoder and decoder agree, and a 1 kHz tone at 8 kHz comes back with the SNR G.721 is known for (well above
    /// 20 dB for a speech-level tone).
    #[test]
    fn tracks_a_tone() {
        let x: Vec<i16> =
            (0..8000).map(|i| (8000.0 * (i as f64 * 2.0 * std::f64::consts::PI / 8.0).sin()) as i16).collect();
        let mut bytes = Vec::new();
        encode_stream(&x, &mut bytes);
        assert_eq!(bytes.len(), 8040 / 2);
        let y = decode_stream(&bytes, Arith::Libsndfile, x.len() as u64);
        let (mut s, mut n) = (0f64, 0f64);
        for (a, b) in x[800..].iter().zip(&y[800..]) {
            s += (*a as f64).powi(2);
            n += (*a as f64 - *b as f64).powi(2);
        }
        let snr = 10.0 * (s / n).log10();
        assert!(snr > 20.0, "{snr}");
    }
}
