//! The GSM 06.10 decoder: APCM inverse quantization, long-term and short-term synthesis, de-emphasis (see the
//! [module docs](super)).

use super::arith::*;
use super::*;

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
