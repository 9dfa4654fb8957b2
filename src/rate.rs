//! Sample-rate reduction: the "stairstep" of a low-rate converter, either raw (zero-order hold, aliasing on purpose)
//! or clean (band-limited, anti-aliased).
//!
//! # The model
//! A chain runs the stages before the rate stage at the source rate `fs_in`. The rate stage then produces the signal
//! at the target rate `fs_out` ([`RateReducer`]); that reduced signal is what gets exported, and the stages after the
//! rate stage run at `fs_out`. For audition, the chain's final output is brought back to the source rate by a
//! [`RateExpander`], so it can be played and compared sample for sample with the input. Both processors are
//! per-channel, streaming and allocation-free after construction; [`reduce`], [`expand`] and [`round_trip`] are
//! whole-clip conveniences that compensate the latency.
//!
//! When `rate_hz` equals the source rate, every function here is an exact identity in both modes.
//!
//! # Hold mode: the index rule
//! No filtering at all, so everything above the new Nyquist frequency `fs_out/2` folds back (a tone at `f` lands at
//! `|f − k·fs_out|`). The arithmetic is exact integer arithmetic for any ratio, fractional ones included (the ratio
//! is reduced by the greatest common divisor and the indices are stepped with an exact quotient and remainder, so
//! nothing drifts however long the stream):
//!
//! - **Reduction**: reduced sample `k` (time `k/fs_out`) takes the source sample at index `⌈k·fs_in/fs_out⌉`, the
//!   first source sample at or after that instant. 44,100 → 11,025 Hz therefore takes samples 0, 4, 8, …;
//!   48,000 → 7,300 Hz takes 0, 7, 14, 20, 27, … (steps of 6 or 7).
//! - **Expansion**: reduced sample `k` is held over the source indices `[⌈k·fs_in/fs_out⌉, ⌈(k+1)·fs_in/fs_out⌉)`,
//!   i.e. output sample `j` is reduced sample `⌊j·fs_out/fs_in⌋`: what a zero-order-hold converter clocked at
//!   `fs_out` sounds like.
//!
//! Why the ceiling: with it, reduction followed by expansion is an exact sample-and-hold of the source, and the
//! value held over each span is the source sample at the *start* of that span (`round_trip[j] = x[⌈k·fs_in/fs_out⌉]`
//! with `k = ⌊j·fs_out/fs_in⌋`). Nothing is read from the future, so the hold path has no latency (delay 0), and every
//! reduced sample is a genuine source sample, bit for bit. At the very end of a clip the last instants may fall
//! after the last source sample (for example 2 source samples at 3:2 give reduced instants at source times 0 and
//! 1.5); those take the last source sample, as if it were held to the end of the clip. Hold mode copies values
//! verbatim (even NaN).
//!
//! # Clean mode: the filter
//! Band-limited conversion with rubato's synchronous FFT resampler [`rubato::Fft`] (`Fft::new_custom`,
//! `FixedSync::Both`, one FFT block per chunk), which rubato recommends for fixed ratios. Its anti-aliasing filter is a
//! windowed sinc as long as the FFT block on the high-rate side, with the `BlackmanHarris2` window (the squared 4-term
//! Blackman–Harris window), applied by overlap-add; the spectrum is then truncated (reduction) or zero-extended
//! (expansion), an exact rational-ratio conversion whose truncation is itself a brick wall at the low Nyquist
//! frequency. The cutoff is rubato's `calculate_cutoff` for the block length on the low-rate side (the highest cutoff
//! that keeps aliasing below the window's side lobes for that length), scaled to the low Nyquist frequency.
//!
//! The block is chosen here: with `g = gcd(fs_in, fs_out)`, the blocks are `c·fs_in/g` and `c·fs_out/g` samples
//! for the smallest even `c` that makes the low-rate block at least [`CLEAN_LOW_BLOCK`] (512) samples, so the
//! filter has the same shape at every ratio: with 512 samples the cutoff is 0.973 of the low Nyquist frequency
//! (3.89 kHz at 8 kHz, 5.37 kHz at 11.025 kHz). The high-rate block is capped at [`CLEAN_MAX_BLOCK`] samples,
//! which lowers the cutoff (not the alias rejection) for extreme ratios such as 48,000 → 10 Hz, and rejects the few
//! coprime pairs whose smallest block would be larger (for example 192,000 → 191,999 Hz) with an error naming
//! `rate_hz`.
//!
//! Measured with tones of amplitude ½ (steady-state output power; the tests in this module and
//! `tests/rate_reference.rs`): the passband is flat within 0.001 dB up to 0.95 of the new Nyquist frequency (1, 2 and
//! 3.5 kHz at 48 → 8 kHz), the transition is the last few per cent (3.9 kHz comes out 8 dB down at 8 kHz), and every
//! tone from 1.02 × the new Nyquist frequency up is rejected by at least 140 dB (140–160 dB: the f32 round-off floor).
//! A 5 kHz tone reduced from 48 to 8 kHz comes out 160 dB below the input, at its 3 kHz alias and everywhere else.
//! For comparison, SciPy's default `resample_poly` filter (Kaiser, β = 5) rejects 6 and 10 kHz by 69 and 76 dB.
//!
//! Clean mode replaces NaN by 0 and ±Inf by ±1.0 before filtering, since one bad sample would otherwise poison the
//! filter state for good (at equal rates it is the exact identity instead). Like any band-limited converter it may
//! ring slightly past ±1.0 on full-scale transients.
//!
//! # Latency
//! Hold mode: 0. Clean mode: half an FFT block, `c/(2g)` seconds, reported by `delay()` in *output* samples of each
//! processor (an exact integer because `c` is even). [`reduce`], [`expand`] and [`round_trip`] remove it.
//!
//! | fs_in → fs_out | reducer delay (at fs_out) | expander delay (at fs_in) | time |
//! |---|---|---|---|
//! | 44,100 → 22,050 | 256 | 512 | 11.6 ms |
//! | 44,100 → 11,025 | 256 | 1,024 | 23.2 ms |
//! | 48,000 → 8,000 | 256 | 1,536 | 32.0 ms |
//! | 48,000 → 7,300 | 292 | 1,920 | 40.0 ms |
//! | 44,100 → 8,000 | 320 | 1,764 | 40.0 ms |
//!
//! # A good starting value
//! `rate_hz` 11,025 in hold mode: the grainy, aliased sound of early samplers and games. Switch to clean mode to hear
//! only the loss of bandwidth, without the aliasing.

use crate::audio::MAX_SAMPLE_RATE;
use crate::chain::{sanitize, BLOCK};
use crate::error::{check_range_u, Error, Result};
use rubato::audioadapter_buffers::direct::SequentialSlice;
use rubato::{Fft, FixedSync, Resampler, WindowFunction};
use serde::{Deserialize, Serialize};

/// Smallest FFT block on the low-rate side of the clean-mode filter, in samples (see the module docs).
pub const CLEAN_LOW_BLOCK: u64 = 512;
/// Largest FFT block on the high-rate side of the clean-mode filter, in samples (bounds its memory to a few MB).
pub const CLEAN_MAX_BLOCK: u64 = 1 << 18;

/// How the rate is reduced.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum RateMode {
    /// Zero-order hold: pick samples, no filtering, aliasing on purpose (exact integer index arithmetic, no latency).
    #[default]
    Hold,
    /// Band-limited and anti-aliased, with rubato's FFT resampler (latency compensated by the whole-clip functions).
    Clean,
}

/// Parameters of the sample-rate reduction stage.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct RateParams {
    /// Target sample rate in Hz, 1 to the source rate. A good starting value: 11,025 (with `hold`).
    pub rate_hz: u32,
    /// Reduction mode; default `hold`.
    pub mode: RateMode,
}

impl Default for RateParams {
    fn default() -> Self {
        RateParams { rate_hz: 11_025, mode: RateMode::Hold }
    }
}

impl RateParams {
    /// Zero-order hold down to `rate_hz`.
    pub fn hold(rate_hz: u32) -> Self {
        RateParams { rate_hz, mode: RateMode::Hold }
    }

    /// Band-limited conversion down to `rate_hz`.
    pub fn clean(rate_hz: u32) -> Self {
        RateParams { rate_hz, mode: RateMode::Clean }
    }

    /// Checks these parameters against a source rate (errors name `source_rate` or `rate_hz`).
    pub fn validate(&self, source_rate: u32) -> Result<()> {
        Plan::new(self, source_rate).map(|_| ())
    }
}

/// Number of reduced samples for `n` source samples: `⌈n·target_rate/source_rate⌉`, the instants `k/target_rate`
/// that fall inside the clip. Returns 0 when `source_rate` is 0.
pub fn reduced_len(source_rate: u32, target_rate: u32, n: usize) -> usize {
    if source_rate == 0 {
        return 0;
    }
    to_usize(ceil_div(n as u128 * target_rate as u128, source_rate as u128))
}

/// Reduces a whole clip at `source_rate` to `params.rate_hz`: exactly [`reduced_len`] samples, latency removed, so
/// that reduced sample `k` corresponds to time `k/rate_hz`.
pub fn reduce(params: &RateParams, source_rate: u32, input: &[f32]) -> Result<Vec<f32>> {
    let mut r = RateReducer::new(params, source_rate, BLOCK)?;
    let n_out = reduced_len(source_rate, params.rate_hz, input.len());
    let mut buf = vec![0.0f32; r.max_output(BLOCK)];
    let mut out = Vec::with_capacity(r.delay() + n_out + buf.len());
    for block in input.chunks(BLOCK) {
        let w = r.process(block, &mut buf);
        out.extend_from_slice(&buf[..w]);
    }
    let w = r.flush(&mut buf);
    out.extend_from_slice(&buf[..w]);
    Ok(trim(out, r.delay(), n_out, 0.0))
}

/// Expands a reduced signal (at `params.rate_hz`) back to `source_rate`: exactly `out_len` samples, aligned with the
/// source (latency removed). Hold mode holds the last reduced sample if `out_len` asks for more than the reduced
/// signal spans; clean mode pads with silence.
pub fn expand(params: &RateParams, source_rate: u32, reduced: &[f32], out_len: usize) -> Result<Vec<f32>> {
    let mut e = RateExpander::new(params, source_rate, BLOCK)?;
    let mut buf = vec![0.0f32; e.max_output(BLOCK)];
    let mut out = Vec::with_capacity(e.delay() + out_len + buf.len());
    for block in reduced.chunks(BLOCK) {
        let w = e.process(block, &mut buf);
        out.extend_from_slice(&buf[..w]);
        if out.len() >= e.delay() + out_len {
            break;
        }
    }
    let w = e.flush(&mut buf);
    out.extend_from_slice(&buf[..w]);
    let pad = match params.mode {
        RateMode::Hold => reduced.last().copied().unwrap_or(0.0),
        RateMode::Clean => 0.0,
    };
    Ok(trim(out, e.delay(), out_len, pad))
}

/// `expand(reduce(input))`: the sound of the reduced rate at the source rate, same length as `input`, aligned.
pub fn round_trip(params: &RateParams, source_rate: u32, input: &[f32]) -> Result<Vec<f32>> {
    let reduced = reduce(params, source_rate, input)?;
    expand(params, source_rate, &reduced, input.len())
}

/// Drops `delay` leading samples, then truncates or pads (with `pad`) to `len`.
fn trim(mut v: Vec<f32>, delay: usize, len: usize, pad: f32) -> Vec<f32> {
    v.drain(..delay.min(v.len()));
    v.resize(len, pad);
    v
}

fn ceil_div(a: u128, b: u128) -> u128 {
    a.div_ceil(b)
}

fn to_usize(v: u128) -> usize {
    usize::try_from(v).unwrap_or(usize::MAX)
}

fn gcd(mut a: u64, mut b: u64) -> u64 {
    while b != 0 {
        (a, b) = (b, a % b);
    }
    a
}

/// Validated rates: source `hi = fs_in/g`, target `lo = fs_out/g`.
#[derive(Debug, Clone, Copy)]
struct Plan {
    target_rate: u32,
    hi: u64,
    lo: u64,
    mode: RateMode,
}

impl Plan {
    fn new(params: &RateParams, source_rate: u32) -> Result<Self> {
        check_range_u("source_rate", source_rate as u64, 1, MAX_SAMPLE_RATE as u64)?;
        check_range_u("rate_hz", params.rate_hz as u64, 1, source_rate as u64)?;
        let g = gcd(source_rate as u64, params.rate_hz as u64);
        let plan = Plan {
            target_rate: params.rate_hz,
            hi: source_rate as u64 / g,
            lo: params.rate_hz as u64 / g,
            mode: params.mode,
        };
        if plan.is_clean() && 2 * plan.hi > CLEAN_MAX_BLOCK {
            let min_g = (source_rate as u64).div_ceil(CLEAN_MAX_BLOCK / 2);
            return Err(Error::param(
                "rate_hz",
                params.rate_hz,
                format!("1..={source_rate} sharing a factor of at least {min_g} with the source rate in clean mode"),
            ));
        }
        Ok(plan)
    }

    /// Whether the band-limited path is used (clean mode at a rate that actually changes).
    fn is_clean(&self) -> bool {
        self.mode == RateMode::Clean && self.hi != self.lo
    }

    /// FFT block multiplier `c` of the clean filter: even, `c·lo ≥ CLEAN_LOW_BLOCK` unless `c·hi` would pass
    /// `CLEAN_MAX_BLOCK`.
    fn clean_blocks(&self) -> u64 {
        let want = CLEAN_LOW_BLOCK.div_ceil(self.lo).next_multiple_of(2);
        let cap = (CLEAN_MAX_BLOCK / self.hi) / 2 * 2;
        want.min(cap).max(2)
    }
}

/// Steps `⌈k·num/den⌉` for `k = 0, 1, 2, …` exactly (quotient and remainder, no overflow for 32-bit rates).
///
/// `num/den` is split into `step_q + step_r/den` once, so each step is two additions and a carry instead of a
/// 64-bit division and remainder (the dearest instructions of the hold path, once per reduced sample).
#[derive(Debug, Clone, Copy)]
struct CeilStep {
    den: u64,
    step_q: u64,
    step_r: u64,
    q: u64,
    r: u64,
}

impl CeilStep {
    fn new(num: u64, den: u64) -> Self {
        CeilStep { den, step_q: num / den, step_r: num % den, q: 0, r: 0 }
    }

    #[inline]
    fn value(&self) -> u64 {
        self.q + (self.r != 0) as u64
    }

    #[inline]
    fn advance(&mut self) {
        // r < den and step_r < den, so at most one carry: the same q and r as (r + num) / den and % den.
        self.q += self.step_q;
        self.r += self.step_r;
        if self.r >= self.den {
            self.r -= self.den;
            self.q += 1;
        }
    }
}

/// Writes `v` at `out[*w]` and advances `*w` if there is room; drops it otherwise.
#[inline]
fn put(out: &mut [f32], w: &mut usize, v: f32) {
    if let Some(slot) = out.get_mut(*w) {
        *slot = v;
        *w += 1;
    }
}

/// Zero-order-hold reducer state.
#[derive(Debug, Clone)]
struct HoldReduce {
    hi: u64,
    lo: u64,
    /// Source index of the next reduced sample.
    next: CeilStep,
    /// Reduced samples produced since reset.
    produced: u64,
    /// Source samples consumed since reset.
    fed: u64,
    last: f32,
}

impl HoldReduce {
    fn new(hi: u64, lo: u64) -> Self {
        HoldReduce { hi, lo, next: CeilStep::new(hi, lo), produced: 0, fed: 0, last: 0.0 }
    }

    fn process(&mut self, input: &[f32], output: &mut [f32]) -> usize {
        let mut w = 0;
        let end = self.fed + input.len() as u64;
        while self.next.value() < end {
            put(output, &mut w, input[(self.next.value() - self.fed) as usize]);
            self.next.advance();
            self.produced += 1;
        }
        self.fed = end;
        if let Some(&l) = input.last() {
            self.last = l;
        }
        w
    }

    fn flush(&mut self, output: &mut [f32]) -> usize {
        let need = ceil_div(self.fed as u128 * self.lo as u128, self.hi as u128) as u64;
        let mut w = 0;
        while self.produced < need {
            put(output, &mut w, self.last);
            self.next.advance();
            self.produced += 1;
        }
        w
    }

    fn max_output(&self, n: usize) -> usize {
        // At most ⌈n·lo/hi⌉ instants fall in n source samples; flush emits at most one (the spacing is ≥ 1 sample).
        to_usize(ceil_div(n as u128 * self.lo as u128, self.hi as u128)).max(1)
    }
}

/// Zero-order-hold expander state.
#[derive(Debug, Clone)]
struct HoldExpand {
    hi: u64,
    lo: u64,
    /// Start of the span of the next reduced sample.
    start: CeilStep,
}

impl HoldExpand {
    fn new(hi: u64, lo: u64) -> Self {
        HoldExpand { hi, lo, start: CeilStep::new(hi, lo) }
    }

    fn process(&mut self, input: &[f32], output: &mut [f32]) -> usize {
        let mut w = 0;
        for &v in input {
            let s = self.start.value();
            self.start.advance();
            let span = (self.start.value() - s) as usize;
            let room = output.len() - w;
            output[w..w + span.min(room)].fill(v);
            w += span.min(room);
        }
        w
    }

    fn max_output(&self, n: usize) -> usize {
        // ⌈(k+n)·hi/lo⌉ − ⌈k·hi/lo⌉ ≤ ⌈n·hi/lo⌉.
        to_usize(ceil_div(n as u128 * self.hi as u128, self.lo as u128))
    }
}

/// A band-limited converter from `in_rate` to `out_rate` around rubato's [`Fft`], fed in blocks of any size.
struct Band {
    resampler: Fft<f32>,
    chunk_in: usize,
    chunk_out: usize,
    delay: usize,
    /// Reduced ratio `out_rate/in_rate = num/den`.
    num: u64,
    den: u64,
    pending: Vec<f32>,
    fill: usize,
    out_buf: Vec<f32>,
    fed: u64,
    produced: u64,
}

impl std::fmt::Debug for Band {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Band")
            .field("chunk_in", &self.chunk_in)
            .field("chunk_out", &self.chunk_out)
            .field("delay", &self.delay)
            .field("cutoff", &self.resampler.cutoff())
            .finish()
    }
}

impl Band {
    /// `in_units`, `out_units`: the two rates divided by their gcd; `c`: the block multiplier (even).
    fn new(in_rate: u32, out_rate: u32, in_units: u64, out_units: u64, c: u64) -> Result<Self> {
        let chunk = (c * in_units) as usize;
        let resampler = Fft::<f32>::new_custom(
            in_rate as usize,
            out_rate as usize,
            chunk,
            1,
            1,
            WindowFunction::BlackmanHarris2,
            FixedSync::Both,
        )
        .map_err(|e| Error::param("rate_hz", out_rate.min(in_rate), format!("a rate rubato accepts ({e})")))?;
        let chunk_in = resampler.input_frames_next();
        let chunk_out = resampler.output_frames_next();
        let delay = resampler.output_delay();
        Ok(Band {
            resampler,
            chunk_in,
            chunk_out,
            delay,
            num: out_units,
            den: in_units,
            pending: vec![0.0; chunk_in],
            fill: 0,
            out_buf: vec![0.0; chunk_out],
            fed: 0,
            produced: 0,
        })
    }

    /// Converts the full `pending` chunk into `out_buf`.
    fn run_chunk(&mut self) {
        let ok = match (
            SequentialSlice::new(&self.pending[..], 1, self.chunk_in),
            SequentialSlice::new_mut(&mut self.out_buf[..], 1, self.chunk_out),
        ) {
            (Ok(i), Ok(mut o)) => self.resampler.process_into_buffer(&i, &mut o, None).is_ok(),
            _ => false,
        };
        if !ok {
            // Unreachable with the sizes fixed at construction; silence rather than a panic.
            self.out_buf.fill(0.0);
        }
        self.fill = 0;
    }

    /// Copies up to `n` converted samples into `output[*w..]`.
    fn emit(&mut self, n: usize, output: &mut [f32], w: &mut usize) {
        let room = output.len() - *w;
        let k = n.min(room);
        output[*w..*w + k].copy_from_slice(&self.out_buf[..k]);
        *w += k;
        self.produced += n as u64;
    }

    fn process(&mut self, mut input: &[f32], output: &mut [f32]) -> usize {
        let mut w = 0;
        self.fed += input.len() as u64;
        while !input.is_empty() {
            let take = (self.chunk_in - self.fill).min(input.len());
            for (p, &x) in self.pending[self.fill..self.fill + take].iter_mut().zip(&input[..take]) {
                *p = sanitize(x);
            }
            self.fill += take;
            input = &input[take..];
            if self.fill == self.chunk_in {
                self.run_chunk();
                self.emit(self.chunk_out, output, &mut w);
            }
        }
        w
    }

    /// Total output of the stream so far once flushed: the delay plus `⌈fed·out/in⌉`.
    fn needed(&self) -> u64 {
        self.delay as u64 + ceil_div(self.fed as u128 * self.num as u128, self.den as u128) as u64
    }

    fn flush(&mut self, output: &mut [f32]) -> usize {
        let mut w = 0;
        while self.produced < self.needed() {
            self.pending[self.fill..].fill(0.0);
            self.run_chunk();
            let n = (self.needed() - self.produced).min(self.chunk_out as u64) as usize;
            self.emit(n, output, &mut w);
        }
        w
    }

    fn max_output(&self, n: usize) -> usize {
        let by_process = (n.saturating_add(self.chunk_in - 1) / self.chunk_in).saturating_mul(self.chunk_out);
        by_process.max(self.delay + self.chunk_out)
    }

    fn reset(&mut self) {
        self.resampler.reset();
        self.pending.fill(0.0);
        self.out_buf.fill(0.0);
        self.fill = 0;
        self.fed = 0;
        self.produced = 0;
    }
}

#[derive(Debug)]
enum ReduceEngine {
    Hold(HoldReduce),
    Clean(Box<Band>),
}

/// The sample-rate reduction stage for one channel: source rate in, target rate out.
///
/// Feed it blocks of any size with [`process`](Self::process), then call [`flush`](Self::flush) once at the end of
/// the stream. The output does not depend on how the input is cut into blocks.
#[derive(Debug)]
pub struct RateReducer {
    params: RateParams,
    source_rate: u32,
    max_block: usize,
    engine: ReduceEngine,
}

impl RateReducer {
    /// Validates `params` against `source_rate` (1 to 768,000 Hz) and builds the stage. `max_block` (at least 1) is
    /// the largest block the caller means to pass; size the output with [`max_output`](Self::max_output)`(max_block)`.
    /// Larger blocks are still processed correctly.
    pub fn new(params: &RateParams, source_rate: u32, max_block: usize) -> Result<Self> {
        let plan = Plan::new(params, source_rate)?;
        if max_block == 0 {
            return Err(Error::param("max_block", max_block, "1 or more"));
        }
        let engine = if plan.is_clean() {
            let c = plan.clean_blocks();
            ReduceEngine::Clean(Box::new(Band::new(source_rate, plan.target_rate, plan.hi, plan.lo, c)?))
        } else {
            ReduceEngine::Hold(HoldReduce::new(plan.hi, plan.lo))
        };
        Ok(RateReducer { params: params.clone(), source_rate, max_block, engine })
    }

    /// Reduces `input` (at the source rate) and writes the reduced samples this block completes to `output`,
    /// returning how many. `output` should hold [`max_output`](Self::max_output)`(input.len())` samples; samples that
    /// do not fit are dropped (never a panic). Never allocates.
    pub fn process(&mut self, input: &[f32], output: &mut [f32]) -> usize {
        match &mut self.engine {
            ReduceEngine::Hold(h) => h.process(input, output),
            ReduceEngine::Clean(b) => b.process(input, output),
        }
    }

    /// Ends the stream: writes what the filter still holds, so that the stream's total output is exactly
    /// [`delay`](Self::delay)` + reduced_len(total input)`. In hold mode that is at most one sample (the last source
    /// sample, for a final instant after it). Call [`reset`](Self::reset) before starting another stream.
    pub fn flush(&mut self, output: &mut [f32]) -> usize {
        match &mut self.engine {
            ReduceEngine::Hold(h) => h.flush(output),
            ReduceEngine::Clean(b) => b.flush(output),
        }
    }

    /// An output length that is enough for [`process`](Self::process) with `input_len` samples and for
    /// [`flush`](Self::flush).
    pub fn max_output(&self, input_len: usize) -> usize {
        match &self.engine {
            ReduceEngine::Hold(h) => h.max_output(input_len),
            ReduceEngine::Clean(b) => b.max_output(input_len),
        }
    }

    /// Latency in output (target-rate) samples: 0 in hold mode, half an FFT block in clean mode.
    pub fn delay(&self) -> usize {
        match &self.engine {
            ReduceEngine::Hold(_) => 0,
            ReduceEngine::Clean(b) => b.delay,
        }
    }

    /// Returns to the freshly built state.
    pub fn reset(&mut self) {
        match &mut self.engine {
            ReduceEngine::Hold(h) => *h = HoldReduce::new(h.hi, h.lo),
            ReduceEngine::Clean(b) => b.reset(),
        }
    }

    /// The rate of the output in Hz.
    pub fn target_rate(&self) -> u32 {
        self.params.rate_hz
    }

    /// The rate of the input in Hz.
    pub fn source_rate(&self) -> u32 {
        self.source_rate
    }

    /// The `max_block` given at construction.
    pub fn max_block(&self) -> usize {
        self.max_block
    }

    /// The parameters this stage was built from.
    pub fn params(&self) -> &RateParams {
        &self.params
    }

    /// Clean mode's anti-aliasing cutoff in Hz (`None` in hold mode or at equal rates).
    pub fn cutoff_hz(&self) -> Option<f64> {
        match &self.engine {
            ReduceEngine::Hold(_) => None,
            ReduceEngine::Clean(b) => Some(b.resampler.cutoff() as f64 * self.source_rate as f64 / 2.0),
        }
    }
}

#[derive(Debug)]
enum ExpandEngine {
    Hold(HoldExpand),
    Clean(Box<Band>),
}

/// The inverse direction for one channel: target rate in, source rate out (for audition). Hold mode is a
/// sample-and-hold (each reduced sample held for its span), clean mode band-limited interpolation.
///
/// Same streaming contract as [`RateReducer`].
#[derive(Debug)]
pub struct RateExpander {
    params: RateParams,
    source_rate: u32,
    max_block: usize,
    engine: ExpandEngine,
}

impl RateExpander {
    /// Validates `params` against `source_rate` and builds the expander from `params.rate_hz` back to
    /// `source_rate`. `max_block`: as for [`RateReducer::new`] (counted in reduced samples).
    pub fn new(params: &RateParams, source_rate: u32, max_block: usize) -> Result<Self> {
        let plan = Plan::new(params, source_rate)?;
        if max_block == 0 {
            return Err(Error::param("max_block", max_block, "1 or more"));
        }
        let engine = if plan.is_clean() {
            let c = plan.clean_blocks();
            ExpandEngine::Clean(Box::new(Band::new(plan.target_rate, source_rate, plan.lo, plan.hi, c)?))
        } else {
            ExpandEngine::Hold(HoldExpand::new(plan.hi, plan.lo))
        };
        Ok(RateExpander { params: params.clone(), source_rate, max_block, engine })
    }

    /// Expands `input` (reduced samples) and writes the source-rate samples this block completes to `output`,
    /// returning how many. `output` should hold [`max_output`](Self::max_output)`(input.len())` samples; samples that
    /// do not fit are dropped. Never allocates.
    pub fn process(&mut self, input: &[f32], output: &mut [f32]) -> usize {
        match &mut self.engine {
            ExpandEngine::Hold(h) => h.process(input, output),
            ExpandEngine::Clean(b) => b.process(input, output),
        }
    }

    /// Ends the stream: writes what the filter still holds (nothing in hold mode), so that the total output is
    /// [`delay`](Self::delay)` + ⌈n·source_rate/rate_hz⌉` for `n` reduced samples in.
    pub fn flush(&mut self, output: &mut [f32]) -> usize {
        match &mut self.engine {
            ExpandEngine::Hold(_) => 0,
            ExpandEngine::Clean(b) => b.flush(output),
        }
    }

    /// An output length that is enough for [`process`](Self::process) with `input_len` samples and for
    /// [`flush`](Self::flush).
    pub fn max_output(&self, input_len: usize) -> usize {
        match &self.engine {
            ExpandEngine::Hold(h) => h.max_output(input_len),
            ExpandEngine::Clean(b) => b.max_output(input_len),
        }
    }

    /// Latency in output (source-rate) samples: 0 in hold mode, half an FFT block in clean mode.
    pub fn delay(&self) -> usize {
        match &self.engine {
            ExpandEngine::Hold(_) => 0,
            ExpandEngine::Clean(b) => b.delay,
        }
    }

    /// Returns to the freshly built state.
    pub fn reset(&mut self) {
        match &mut self.engine {
            ExpandEngine::Hold(h) => *h = HoldExpand::new(h.hi, h.lo),
            ExpandEngine::Clean(b) => b.reset(),
        }
    }

    /// The rate of the input in Hz.
    pub fn target_rate(&self) -> u32 {
        self.params.rate_hz
    }

    /// The rate of the output in Hz.
    pub fn source_rate(&self) -> u32 {
        self.source_rate
    }

    /// The `max_block` given at construction.
    pub fn max_block(&self) -> usize {
        self.max_block
    }

    /// The parameters this stage was built from.
    pub fn params(&self) -> &RateParams {
        &self.params
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::spectrum::peak_bin;
    use crate::analysis::{power_db, SpectrumAnalyzer, Window};
    use crate::rng::Pcg32;

    fn noise(n: usize, seed: u64) -> Vec<f32> {
        let mut g = Pcg32::from_seed(seed, 7);
        (0..n).map(|_| (1.8 * g.uniform_centered()) as f32).collect()
    }

    fn sine(n: usize, f: f64, fs: u32, a: f64) -> Vec<f32> {
        (0..n).map(|i| (a * (2.0 * std::f64::consts::PI * f * i as f64 / fs as f64).sin()) as f32).collect()
    }

    /// Mean power of `x` in dB relative to a sine of amplitude `a` (so a sine of amplitude `a` reads 0 dB).
    fn level_re(x: &[f32], a: f64) -> f64 {
        let p = x.iter().map(|&v| (v as f64) * (v as f64)).sum::<f64>() / x.len() as f64;
        power_db(p / (a * a / 2.0))
    }

    /// Block sizes from 0 to `max` (zero-length blocks included), seeded.
    fn blocks(seed: u64, max: u32) -> impl FnMut() -> usize {
        let mut g = Pcg32::from_seed(seed, 3);
        move || (g.next_u32() % (max + 1)) as usize
    }

    /// Streams `x` through `process` (in blocks from `next`) and `flush`, with outputs sized by `max_output`.
    fn stream(
        x: &[f32],
        mut next: impl FnMut() -> usize,
        mut process: impl FnMut(&[f32], &mut [f32]) -> usize,
        mut flush: impl FnMut(&mut [f32]) -> usize,
        max_output: impl Fn(usize) -> usize,
    ) -> Vec<f32> {
        let mut out = Vec::new();
        let mut buf = vec![f32::NAN; max_output(x.len())];
        let mut i = 0;
        while i < x.len() {
            let n = next().min(x.len() - i);
            // Exactly the advertised size: anything more would be dropped and show up as a difference.
            let w = process(&x[i..i + n], &mut buf[..max_output(n)]);
            out.extend_from_slice(&buf[..w]);
            i += n;
        }
        let w = flush(&mut buf[..max_output(0)]);
        out.extend_from_slice(&buf[..w]);
        out
    }

    fn stream_reduce(r: &mut RateReducer, x: &[f32], next: impl FnMut() -> usize) -> Vec<f32> {
        let r = std::cell::RefCell::new(r);
        stream(x, next, |i, o| r.borrow_mut().process(i, o), |o| r.borrow_mut().flush(o), |n| r.borrow().max_output(n))
    }

    fn stream_expand(e: &mut RateExpander, x: &[f32], next: impl FnMut() -> usize) -> Vec<f32> {
        let e = std::cell::RefCell::new(e);
        stream(x, next, |i, o| e.borrow_mut().process(i, o), |o| e.borrow_mut().flush(o), |n| e.borrow().max_output(n))
    }

    /// `⌈a/b⌉` in plain u128, straight from the definition (the naive reference for the stepped indices).
    #[allow(clippy::manual_div_ceil)] // spelled out on purpose: the reference does not share the code under test
    fn ceil_naive(a: u128, b: u128) -> u128 {
        (a + b - 1) / b
    }

    // Spec of the task (and of any 4:1 decimator): 44,100 → 11,025 Hz by zero-order hold is exactly every 4th sample.
    #[test]
    fn hold_44100_to_11025_is_every_fourth_sample() {
        let x = noise(10_001, 1);
        let y = reduce(&RateParams::hold(11_025), 44_100, &x).unwrap();
        let every_fourth: Vec<f32> = x.iter().copied().step_by(4).collect();
        assert_eq!(y, every_fourth);
        let rt = round_trip(&RateParams::hold(11_025), 44_100, &x).unwrap();
        assert_eq!(rt.len(), x.len());
        for (j, &v) in rt.iter().enumerate() {
            assert_eq!(v, x[j / 4 * 4], "sample {j}");
        }
    }

    // The documented rule (module docs): reduced k ← source ⌈k·fs_in/fs_out⌉ (last sample past the end), expansion
    // holds k over [⌈k·fs_in/fs_out⌉, ⌈(k+1)·fs_in/fs_out⌉), computed naively with the unreduced rates.
    #[test]
    fn hold_48000_to_7300_indices_match_the_formula() {
        let (fi, fo) = (48_000u128, 7_300u128);
        let n = 48_017usize;
        let x: Vec<f32> = (0..n).map(|i| i as f32).collect(); // exact: i < 2^24
        let y = reduce(&RateParams::hold(7_300), 48_000, &x).unwrap();
        assert_eq!(y.len(), ceil_naive(n as u128 * fo, fi) as usize);
        for (k, &v) in y.iter().enumerate() {
            let idx = ceil_naive(k as u128 * fi, fo).min(n as u128 - 1);
            assert_eq!(v, idx as f32, "reduced sample {k}");
        }
        // Steps of 6 or 7 source samples (48000/7300 = 6.575…).
        assert!(y.windows(2).all(|w| w[1] - w[0] == 6.0 || w[1] - w[0] == 7.0 || w[1] == (n - 1) as f32));
        let e = expand(&RateParams::hold(7_300), 48_000, &y, n).unwrap();
        for (j, &v) in e.iter().enumerate() {
            let k = (j as u128 * fo / fi) as usize;
            assert!(ceil_naive(k as u128 * fi, fo) <= j as u128 && (j as u128) < ceil_naive((k as u128 + 1) * fi, fo));
            assert_eq!(v, y[k], "expanded sample {j}");
        }
    }

    // Spec of the task: state carries across blocks, so any block sizes give the output of one big block.
    #[test]
    fn output_does_not_depend_on_block_sizes() {
        let cases =
            [(44_100, 11_025), (48_000, 7_300), (48_000, 8_000), (44_100, 44_100), (8_000, 3), (22_050, 22_049)];
        for mode in [RateMode::Hold, RateMode::Clean] {
            for (seed, &(fi, fo)) in cases.iter().enumerate() {
                let p = RateParams { rate_hz: fo, mode };
                let x = noise(30_000, seed as u64);
                let mut r = RateReducer::new(&p, fi, 4096).unwrap();
                let whole = stream_reduce(&mut r, &x, || usize::MAX);
                assert_eq!(whole.len(), r.delay() + reduced_len(fi, fo, x.len()), "{p:?} {fi}");
                for s in 0..3 {
                    r.reset();
                    let pieces = stream_reduce(&mut r, &x, blocks(s, [1, 700, 5000][s as usize]));
                    assert!(whole == pieces, "{p:?} at {fi} Hz, block pattern {s}: reducer output differs");
                }
                let red = reduce(&p, fi, &x).unwrap();
                let mut e = RateExpander::new(&p, fi, 4096).unwrap();
                let whole = stream_expand(&mut e, &red, || usize::MAX);
                assert_eq!(
                    whole.len() as u128,
                    e.delay() as u128 + ceil_naive(red.len() as u128 * fi as u128, fo as u128)
                );
                for s in 0..3 {
                    e.reset();
                    let pieces = stream_expand(&mut e, &red, blocks(s + 10, [1, 300, 3000][s as usize]));
                    assert!(whole == pieces, "{p:?} at {fi} Hz, block pattern {s}: expander output differs");
                }
            }
        }
    }

    // Spec of the task: at equal rates everything is an exact identity, in both modes.
    #[test]
    fn equal_rates_are_an_exact_identity() {
        let x = noise(9_999, 5);
        for p in [RateParams::hold(44_100), RateParams::clean(44_100)] {
            assert_eq!(reduce(&p, 44_100, &x).unwrap(), x);
            assert_eq!(expand(&p, 44_100, &x, x.len()).unwrap(), x);
            assert_eq!(round_trip(&p, 44_100, &x).unwrap(), x);
            let mut r = RateReducer::new(&p, 44_100, 512).unwrap();
            let mut e = RateExpander::new(&p, 44_100, 512).unwrap();
            assert_eq!((r.delay(), e.delay(), r.cutoff_hz()), (0, 0, None));
            assert_eq!(stream_reduce(&mut r, &x, blocks(1, 512)), x);
            assert_eq!(stream_expand(&mut e, &x, blocks(2, 512)), x);
        }
    }

    // rubato's own test (check_output in rubato's lib.rs): a ramp in gives the same ramp out, shifted by
    // output_delay(). A linear-phase filter with unit DC gain passes a ramp unchanged, so this checks the reported
    // delay to well under a sample.
    #[test]
    fn clean_ramp_comes_out_shifted_by_the_reported_delay() {
        for (fi, fo) in [(48_000u32, 8_000u32), (44_100, 11_025), (48_000, 7_300), (44_100, 8_000), (48_000, 44_100)] {
            let p = RateParams::clean(fo);
            let n = 40_000usize;
            let slope = 0.9 / n as f64; // per source sample
            let x: Vec<f32> = (0..n).map(|i| (i as f64 * slope) as f32).collect();
            let mut r = RateReducer::new(&p, fi, 1000).unwrap();
            let d = r.delay();
            let y = stream_reduce(&mut r, &x, || 1000);
            let ratio = fi as f64 / fo as f64;
            let mut worst = 0.0f64;
            // Away from the kink at the start and the cut at the end (one filter length, 2·d, each side).
            for (m, &v) in y.iter().enumerate().skip(3 * d).take(y.len().saturating_sub(6 * d)) {
                let want = (m - d) as f64 * ratio * slope;
                worst = worst.max((v as f64 - want).abs());
            }
            assert!(worst < 2e-5, "{fi}->{fo}: reducer ramp off by {worst} (delay {d})");
            // The expander: a ramp at the low rate comes back as the ramp at the source rate.
            let slope = 0.9 / 8_000.0; // per reduced sample
            let x: Vec<f32> = (0..8_000).map(|i| (i as f64 * slope) as f32).collect();
            let mut e = RateExpander::new(&p, fi, 1000).unwrap();
            let d = e.delay();
            let y = stream_expand(&mut e, &x, || 777);
            let mut worst = 0.0f64;
            for (j, &v) in y.iter().enumerate().skip(3 * d).take(y.len().saturating_sub(6 * d)) {
                let want = (j - d) as f64 / ratio * slope;
                worst = worst.max((v as f64 - want).abs());
            }
            assert!(worst < 2e-5, "{fi}->{fo}: expander ramp off by {worst} (delay {d})");
        }
    }

    // Delays at common ratios, as documented in the module's latency table.
    #[test]
    fn delays_match_the_documented_table() {
        for (fi, fo, dr, de) in [
            (44_100, 22_050, 256, 512),
            (44_100, 11_025, 256, 1_024),
            (48_000, 8_000, 256, 1_536),
            (48_000, 7_300, 292, 1_920),
            (44_100, 8_000, 320, 1_764),
        ] {
            let p = RateParams::clean(fo);
            assert_eq!(RateReducer::new(&p, fi, 64).unwrap().delay(), dr, "{fi}->{fo}");
            assert_eq!(RateExpander::new(&p, fi, 64).unwrap().delay(), de, "{fi}->{fo}");
            assert_eq!(RateReducer::new(&RateParams::hold(fo), fi, 64).unwrap().delay(), 0);
        }
        let c = RateReducer::new(&RateParams::clean(8_000), 48_000, 64).unwrap().cutoff_hz().unwrap();
        assert!((c - 3_893.5).abs() < 1.0, "{c}");
    }

    // Edge values (project style notes: empty and one-sample buffers always tested).
    #[test]
    fn empty_and_one_sample_inputs() {
        for p in [RateParams::hold(8_000), RateParams::clean(8_000), RateParams::hold(7_300), RateParams::clean(7_300)]
        {
            assert!(reduce(&p, 48_000, &[]).unwrap().is_empty());
            assert!(expand(&p, 48_000, &[], 0).unwrap().is_empty());
            assert_eq!(expand(&p, 48_000, &[], 3).unwrap(), [0.0; 3]);
            assert!(round_trip(&p, 48_000, &[]).unwrap().is_empty());
            let one = reduce(&p, 48_000, &[0.25]).unwrap();
            assert_eq!(one.len(), 1);
            assert!(one[0].is_finite());
            let rt = round_trip(&p, 48_000, &[0.25]).unwrap();
            assert_eq!(rt.len(), 1);
            assert!(rt[0].is_finite());
            if p.mode == RateMode::Hold {
                assert_eq!((one[0], rt[0]), (0.25, 0.25));
                assert_eq!(expand(&p, 48_000, &[0.5], 9).unwrap(), [0.5; 9]);
            }
            let mut r = RateReducer::new(&p, 48_000, 1).unwrap();
            let mut out = vec![0.0; r.max_output(1)];
            assert_eq!(r.process(&[], &mut out), 0);
            // An empty stream flushes exactly the delay's worth (silence) in clean mode, nothing in hold mode.
            assert_eq!(r.flush(&mut out), r.delay());
            assert!(out[..r.delay()].iter().all(|&v| v == 0.0));
            let mut e = RateExpander::new(&p, 48_000, 1).unwrap();
            let mut out = vec![0.0; e.max_output(1)];
            assert_eq!(e.process(&[], &mut out), 0);
            // Output too small: samples are dropped, nothing panics.
            assert_eq!(e.process(&[0.5, 0.5], &mut []), 0);
            assert_eq!(r.process(&[0.5; 100], &mut []), 0);
        }
    }

    // Project convention (error.rs): errors name the parameter and the allowed range.
    #[test]
    fn bad_parameters_name_themselves() {
        fn name_of(e: Error) -> String {
            match e {
                Error::Param { name, .. } => name,
                other => panic!("not a parameter error: {other}"),
            }
        }
        for (p, fs, name) in [
            (RateParams::hold(0), 48_000, "rate_hz"),
            (RateParams::clean(0), 48_000, "rate_hz"),
            (RateParams::hold(48_001), 48_000, "rate_hz"),
            (RateParams::clean(96_000), 48_000, "rate_hz"),
            (RateParams::clean(191_999), 192_000, "rate_hz"),
            (RateParams::hold(8_000), 0, "source_rate"),
            (RateParams::hold(8_000), 800_000, "source_rate"),
        ] {
            assert_eq!(name_of(RateReducer::new(&p, fs, 64).unwrap_err()), name, "{p:?} at {fs}");
            assert_eq!(name_of(RateExpander::new(&p, fs, 64).unwrap_err()), name, "{p:?} at {fs}");
            assert_eq!(name_of(reduce(&p, fs, &[0.0]).unwrap_err()), name);
            assert_eq!(name_of(expand(&p, fs, &[0.0], 1).unwrap_err()), name);
            assert_eq!(name_of(round_trip(&p, fs, &[0.0]).unwrap_err()), name);
            assert_eq!(name_of(p.validate(fs).unwrap_err()), name);
        }
        let e = RateReducer::new(&RateParams::hold(48_001), 48_000, 64).unwrap_err();
        assert!(e.to_string().contains("rate_hz") && e.to_string().contains("1..=48000"), "{e}");
        assert_eq!(name_of(RateReducer::new(&RateParams::hold(8_000), 48_000, 0).unwrap_err()), "max_block");
        assert_eq!(name_of(RateExpander::new(&RateParams::hold(8_000), 48_000, 0).unwrap_err()), "max_block");
        // The gcd rule of clean mode: 192,000 → 191,998 shares a factor 2 and is accepted.
        assert!(RateReducer::new(&RateParams::clean(191_998), 192_000, 64).is_ok());
        assert!(RateReducer::new(&RateParams::hold(191_999), 192_000, 64).is_ok());
    }

    // Handbook (sampling theorem, aliasing): a tone at f above the new Nyquist frequency folds to |f − k·fs|; 5 kHz
    // sampled at 8 kHz appears at |5 − 8| = 3 kHz.
    #[test]
    fn held_5_khz_tone_folds_to_3_khz() {
        let x = sine(96_000, 5_000.0, 48_000, 0.5);
        let y = reduce(&RateParams::hold(8_000), 48_000, &x).unwrap();
        let mut a = SpectrumAnalyzer::new(4096, Window::BlackmanHarris).unwrap();
        let s = a.analyze(&[&y]);
        let (k, v) = peak_bin(&s);
        assert_eq!(a.bin_hz(k, 8_000), 3_000.0);
        // Held samples are exact samples of the tone: the alias keeps the full level (−6.02 dBFS for amplitude ½).
        assert!((v as f64 - power_db(0.25)).abs() < 0.05, "{v}");
        // The same seen at 48 kHz after the sample-and-hold: below 4 kHz the strongest component is at 3 kHz.
        let rt = round_trip(&RateParams::hold(8_000), 48_000, &x).unwrap();
        let mut a = SpectrumAnalyzer::new(8192, Window::BlackmanHarris).unwrap();
        let s = a.analyze(&[&rt]);
        let below_4k = (4_000 * 8192 / 48_000) as usize;
        let (k, _) = peak_bin(&s[..below_4k]);
        assert_eq!(a.bin_hz(k, 48_000), 3_000.0);
    }

    // Handbook (sampling theorem): a band-limited reduction must remove what lies above the new Nyquist frequency
    // before sampling, so the 5 kHz tone must not come out (as its 3 kHz alias or anything else), while a 1 kHz tone
    // passes. Thresholds from the task: alias ≥ 60 dB down, passband within 0.5 dB.
    #[test]
    fn clean_mode_rejects_the_alias_and_passes_the_passband() {
        let p = RateParams::clean(8_000);
        let edge = 1024; // reduced samples at each end: the onset and end of the tone are not steady state
        let mut a = SpectrumAnalyzer::new(4096, Window::BlackmanHarris).unwrap();
        let input_db = power_db(0.25); // a sine of amplitude ½ reads −6.02 dBFS
        let x = sine(96_000, 5_000.0, 48_000, 0.5);
        let y = reduce(&p, 48_000, &x).unwrap();
        let mid = &y[edge..y.len() - edge];
        let s = a.analyze(&[mid]);
        let worst = s.iter().fold(f32::MIN, |m, &v| m.max(v)) as f64 - input_db;
        assert!(worst < -60.0, "strongest component {worst:.1} dB re input");
        let at_3k = s[1536] as f64 - input_db;
        assert!(at_3k < -60.0, "alias at 3 kHz {at_3k:.1} dB");
        assert!(level_re(mid, 0.5) < -60.0);
        let x = sine(96_000, 1_000.0, 48_000, 0.5);
        let y = reduce(&p, 48_000, &x).unwrap();
        let s = a.analyze(&[&y[edge..y.len() - edge]]);
        let (k, v) = peak_bin(&s);
        assert_eq!(a.bin_hz(k, 8_000), 1_000.0);
        assert!((v as f64 - input_db).abs() < 0.5, "1 kHz at {v} dBFS");
        // And the round trip at 48 kHz: 1 kHz comes back at the same level.
        let rt = round_trip(&p, 48_000, &x).unwrap();
        let g = level_re(&rt[6_000..rt.len() - 6_000], 0.5);
        assert!(g.abs() < 0.01, "round-trip gain {g} dB");
    }

    // The same two properties at several ratios, measured as total power (the output of a stopband tone is all
    // alias and error): passband up to 0.85 × the new Nyquist frequency within 0.1 dB, tones from 1.1 × it up
    // rejected by at least 60 dB.
    #[test]
    fn clean_mode_passband_and_stopband_at_several_ratios() {
        for (fi, fo) in [(48_000u32, 8_000u32), (44_100, 11_025), (48_000, 7_300), (44_100, 22_050), (48_000, 44_100)] {
            let p = RateParams::clean(fo);
            let nyq = fo as f64 / 2.0;
            let n = fi as usize; // one second
            let edge = fo as usize / 10;
            for rel in [0.1, 0.5, 0.85] {
                let y = reduce(&p, fi, &sine(n, rel * nyq, fi, 0.5)).unwrap();
                let g = level_re(&y[edge..y.len() - edge], 0.5);
                assert!(g.abs() < 0.1, "{fi}->{fo}: {} Hz passes at {g:.3} dB", rel * nyq);
            }
            for rel in [1.1, 1.5, 2.5] {
                let f = rel * nyq;
                if f >= fi as f64 / 2.0 {
                    continue;
                }
                let y = reduce(&p, fi, &sine(n, f, fi, 0.5)).unwrap();
                let g = level_re(&y[edge..y.len() - edge], 0.5);
                assert!(g < -60.0, "{fi}->{fo}: {f} Hz leaks at {g:.1} dB");
            }
        }
    }

    // Hold mode at a fractional ratio: the round trip is an exact sample-and-hold of the source.
    #[test]
    fn hold_round_trip_is_an_exact_sample_and_hold() {
        let x = noise(20_000, 9);
        let rt = round_trip(&RateParams::hold(7_300), 48_000, &x).unwrap();
        for (j, &v) in rt.iter().enumerate() {
            let k = j as u128 * 73 / 480;
            assert_eq!(v, x[ceil_naive(k * 480, 73) as usize], "sample {j}");
        }
    }

    #[test]
    fn non_finite_input_never_poisons_clean_mode() {
        let mut x = sine(20_000, 440.0, 48_000, 0.5);
        x[102] = f32::NAN;
        x[5_000] = f32::INFINITY;
        x[9_000] = f32::NEG_INFINITY;
        let y = reduce(&RateParams::clean(8_000), 48_000, &x).unwrap();
        assert!(y.iter().all(|v| v.is_finite()));
        let rt = round_trip(&RateParams::clean(8_000), 48_000, &x).unwrap();
        assert!(rt.iter().all(|v| v.is_finite()));
        // Hold mode copies samples verbatim, NaN included.
        let y = reduce(&RateParams::hold(8_000), 48_000, &x).unwrap();
        assert_eq!(y.len(), reduced_len(48_000, 8_000, x.len()));
        assert!(y[17].is_nan() && y[1_500] == f32::NEG_INFINITY, "{} {}", y[17], y[1_500]);
        assert_eq!(y.iter().filter(|v| !v.is_finite()).count(), 2);
    }

    #[test]
    fn reset_restarts_the_stream() {
        for p in [RateParams::hold(7_300), RateParams::clean(7_300)] {
            let x = noise(12_345, 4);
            let mut r = RateReducer::new(&p, 48_000, 4096).unwrap();
            let first = stream_reduce(&mut r, &x, || 4096);
            stream_reduce(&mut r, &noise(999, 8), || 100);
            r.reset();
            assert!(first == stream_reduce(&mut r, &x, || 4096), "{p:?}");
            let mut e = RateExpander::new(&p, 48_000, 4096).unwrap();
            let first = stream_expand(&mut e, &x, || 4096);
            stream_expand(&mut e, &noise(999, 8), || 100);
            e.reset();
            assert!(first == stream_expand(&mut e, &x, || 4096), "{p:?}");
        }
    }

    // Extreme ratios stay bounded in memory and produce the right lengths.
    #[test]
    fn extreme_ratios() {
        for p in [RateParams::hold(1), RateParams::clean(1), RateParams::clean(10), RateParams::clean(47_999)] {
            let x = sine(48_000 + 5, 3.0, 48_000, 0.5);
            let y = reduce(&p, 48_000, &x).unwrap();
            assert_eq!(y.len(), reduced_len(48_000, p.rate_hz, x.len()));
            assert!(y.iter().all(|v| v.is_finite()));
            let rt = round_trip(&p, 48_000, &x).unwrap();
            assert_eq!(rt.len(), x.len());
        }
        let y = reduce(&RateParams::hold(1), 768_000, &[0.5; 10]).unwrap();
        assert_eq!(y, [0.5]);
        assert_eq!(reduced_len(768_000, 1, usize::MAX), usize::MAX.div_ceil(768_000));
        assert_eq!(reduced_len(0, 1, 10), 0);
    }

    #[test]
    fn stages_can_move_between_threads() {
        fn send<T: Send>() {}
        send::<RateReducer>();
        send::<RateExpander>();
    }

    #[test]
    fn params_serialise_in_kebab_case() {
        let p: RateParams = serde_json::from_str(r#"{"rate_hz": 8000, "mode": "clean"}"#).unwrap();
        assert_eq!(p, RateParams::clean(8_000));
        assert_eq!(serde_json::to_string(&RateParams::default()).unwrap(), r#"{"rate_hz":11025,"mode":"hold"}"#);
        let d: RateParams = serde_json::from_str("{}").unwrap();
        assert_eq!(d, RateParams { rate_hz: 11_025, mode: RateMode::Hold });
        assert!(serde_json::from_str::<RateParams>(r#"{"rate": 8000}"#).is_err());
        assert!(serde_json::from_str::<RateParams>(r#"{"mode": "Clean"}"#).is_err());
    }
}
