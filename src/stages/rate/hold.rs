//! Hold mode: exact integer stepping of the zero-order hold (the index rule in the parent module's docs).

use super::{ceil_div, to_usize};

/// Steps `⌈k·num/den⌉` for `k = 0, 1, 2, …` exactly (quotient and remainder, no overflow for 32-bit rates).
///
/// `num/den` is split into `step_q + step_r/den` once, so each step is two additions and a carry instead of a
/// 64-bit division and remainder (the dearest instructions of the hold path, once per reduced sample).
#[derive(Debug, Clone, Copy)]
pub(super) struct CeilStep {
    pub(super) den: u64,
    pub(super) step_q: u64,
    pub(super) step_r: u64,
    pub(super) q: u64,
    pub(super) r: u64,
}

impl CeilStep {
    pub(super) fn new(num: u64, den: u64) -> Self {
        CeilStep { den, step_q: num / den, step_r: num % den, q: 0, r: 0 }
    }

    #[inline]
    pub(super) fn value(&self) -> u64 {
        self.q + (self.r != 0) as u64
    }

    #[inline]
    pub(super) fn advance(&mut self) {
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
pub(super) struct HoldReduce {
    pub(super) hi: u64,
    pub(super) lo: u64,
    /// Source index of the next reduced sample.
    pub(super) next: CeilStep,
    /// Reduced samples produced since reset.
    pub(super) produced: u64,
    /// Source samples consumed since reset.
    pub(super) fed: u64,
    pub(super) last: f32,
}

impl HoldReduce {
    pub(super) fn new(hi: u64, lo: u64) -> Self {
        HoldReduce { hi, lo, next: CeilStep::new(hi, lo), produced: 0, fed: 0, last: 0.0 }
    }

    pub(super) fn process(&mut self, input: &[f32], output: &mut [f32]) -> usize {
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

    pub(super) fn flush(&mut self, output: &mut [f32]) -> usize {
        let need = ceil_div(self.fed as u128 * self.lo as u128, self.hi as u128) as u64;
        let mut w = 0;
        while self.produced < need {
            put(output, &mut w, self.last);
            self.next.advance();
            self.produced += 1;
        }
        w
    }

    pub(super) fn max_output(&self, n: usize) -> usize {
        // At most ⌈n·lo/hi⌉ instants fall in n source samples; flush emits at most one (the spacing is ≥ 1 sample).
        to_usize(ceil_div(n as u128 * self.lo as u128, self.hi as u128)).max(1)
    }
}

/// Zero-order-hold expander state.
#[derive(Debug, Clone)]
pub(super) struct HoldExpand {
    pub(super) hi: u64,
    pub(super) lo: u64,
    /// Start of the span of the next reduced sample.
    pub(super) start: CeilStep,
}

impl HoldExpand {
    pub(super) fn new(hi: u64, lo: u64) -> Self {
        HoldExpand { hi, lo, start: CeilStep::new(hi, lo) }
    }

    pub(super) fn process(&mut self, input: &[f32], output: &mut [f32]) -> usize {
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

    pub(super) fn max_output(&self, n: usize) -> usize {
        // ⌈(k+n)·hi/lo⌉ − ⌈k·hi/lo⌉ ≤ ⌈n·hi/lo⌉.
        to_usize(ceil_div(n as u128 * self.hi as u128, self.lo as u128))
    }
}
