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
use crate::error::{check_range_u, Error, Range, Result};
use crate::stages::BLOCK;
use serde::{Deserialize, Serialize};

mod clean;
mod hold;
#[cfg(test)]
mod tests;

use clean::Band;
use hold::{HoldExpand, HoldReduce};

/// Allowed target rates in Hz (and at most the source rate, checked when a chain is built).
pub const RATE_HZ: Range = Range::new(1.0, MAX_SAMPLE_RATE as f64);

/// Smallest FFT block on the low-rate side of the clean-mode filter, in samples (see the module docs).
pub const CLEAN_LOW_BLOCK: u64 = 512;
/// Largest FFT block on the high-rate side of the clean-mode filter, in samples (bounds its memory to a few MB).
pub const CLEAN_MAX_BLOCK: u64 = 1 << 18;

/// Largest sum over a chain's channels of the clean-mode filter's source-rate FFT block, in samples: each channel's
/// filters and buffers take about 90 bytes per block sample, so this keeps a chain under about 200 MB however many
/// channels a small file declares (8 channels at the largest block, 64 at 32,768 samples, e.g. 48 → 8 kHz).
pub const CLEAN_MAX_CHAIN_BLOCKS: u64 = 1 << 21;

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

/// Samples in the clean-mode filter's FFT block on the source-rate side (`None` in hold mode or at equal rates).
pub fn clean_block_len(params: &RateParams, source_rate: u32) -> Result<Option<u64>> {
    let plan = Plan::new(params, source_rate)?;
    Ok(plan.is_clean().then(|| plan.clean_blocks() * plan.hi))
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
