//! The GSM 06.10 encoder: preprocessing, LPC analysis, short-term analysis, and per subframe long-term
//! prediction, RPE grid selection and APCM (see the [module docs](super)).

use super::arith::*;
use super::*;

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
