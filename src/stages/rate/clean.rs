//! Clean mode: the band-limited converter around rubato's FFT resampler (see the parent module's docs).

use super::ceil_div;
use crate::error::{Error, Result};
use crate::sample::sanitize;
use rubato::audioadapter_buffers::direct::SequentialSlice;
use rubato::{Fft, FixedSync, Resampler, WindowFunction};

/// A band-limited converter from `in_rate` to `out_rate` around rubato's [`Fft`], fed in blocks of any size.
pub(super) struct Band {
    pub(super) resampler: Fft<f32>,
    pub(super) chunk_in: usize,
    pub(super) chunk_out: usize,
    pub(super) delay: usize,
    /// Reduced ratio `out_rate/in_rate = num/den`.
    pub(super) num: u64,
    pub(super) den: u64,
    pub(super) pending: Vec<f32>,
    pub(super) fill: usize,
    pub(super) out_buf: Vec<f32>,
    pub(super) fed: u64,
    pub(super) produced: u64,
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
    pub(super) fn new(in_rate: u32, out_rate: u32, in_units: u64, out_units: u64, c: u64) -> Result<Self> {
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
    pub(super) fn run_chunk(&mut self) {
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
    pub(super) fn emit(&mut self, n: usize, output: &mut [f32], w: &mut usize) {
        let room = output.len() - *w;
        let k = n.min(room);
        output[*w..*w + k].copy_from_slice(&self.out_buf[..k]);
        *w += k;
        self.produced += n as u64;
    }

    pub(super) fn process(&mut self, mut input: &[f32], output: &mut [f32]) -> usize {
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
    pub(super) fn needed(&self) -> u64 {
        self.delay as u64 + ceil_div(self.fed as u128 * self.num as u128, self.den as u128) as u64
    }

    pub(super) fn flush(&mut self, output: &mut [f32]) -> usize {
        let mut w = 0;
        while self.produced < self.needed() {
            self.pending[self.fill..].fill(0.0);
            self.run_chunk();
            let n = (self.needed() - self.produced).min(self.chunk_out as u64) as usize;
            self.emit(n, output, &mut w);
        }
        w
    }

    pub(super) fn max_output(&self, n: usize) -> usize {
        let by_process = (n.saturating_add(self.chunk_in - 1) / self.chunk_in).saturating_mul(self.chunk_out);
        by_process.max(self.delay + self.chunk_out)
    }

    pub(super) fn reset(&mut self) {
        self.resampler.reset();
        self.pending.fill(0.0);
        self.out_buf.fill(0.0);
        self.fill = 0;
        self.fed = 0;
        self.produced = 0;
    }
}
