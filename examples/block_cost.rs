//! The CPU cost of one 128-frame block of the live plug-in's work, natively: the typical chain (gain → hold
//! 11,025 Hz → 8-bit TPDF dither) at 48 kHz, as a fraction of the block's real-time budget (128 / 48,000 s =
//! 2.667 ms). `node scripts/bench-live.mjs` prints this beside the same figure for the wasm `LiveChain` in Chromium.
//!
//! `LiveChain` (src/wasm.rs) is compiled for wasm32 only, so this mirrors its per-block work with the public API:
//! the pre-gain (per-sample curve), `Chain::process_block` on an unbounded chain with a reused `ChainOutput`, the
//! audition and dry FIFOs (copies) and the mix. A counting allocator checks that the timed blocks allocate nothing.
//!
//! ```sh
//! cargo run --release --example block_cost [-- --channels 2 --seconds 60 --json]
//! ```

use stairstep::chain::{Chain, ChainOutput, UNBOUNDED};
use stairstep::stages::BLOCK;
use stairstep::Preset;
use std::alloc::{GlobalAlloc, Layout, System};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::time::Instant;

/// The typical chain, as the bench script also hands it to the wasm build.
const PRESET: &str = r#"{"format":"stairstep-preset","version":1,"name":"typical","seed":1,"stages":[
  {"kind":"gain","gain_db":0,"overflow":"clip"},
  {"kind":"rate","rate_hz":11025,"mode":"hold"},
  {"kind":"quantize","bits":8,"dither":"tpdf"}]}"#;
const RATE: u32 = 48_000;
const FRAMES: usize = 128;

struct Counting;
static ARMED: AtomicBool = AtomicBool::new(false);
static ALLOCATIONS: AtomicUsize = AtomicUsize::new(0);

// SAFETY: forwards every call to the system allocator unchanged; only counts while armed.
unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        if ARMED.load(Ordering::Relaxed) {
            ALLOCATIONS.fetch_add(1, Ordering::Relaxed);
        }
        unsafe { System.alloc(layout) }
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        unsafe { System.dealloc(ptr, layout) }
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        if ARMED.load(Ordering::Relaxed) {
            ALLOCATIONS.fetch_add(1, Ordering::Relaxed);
        }
        unsafe { System.realloc(ptr, layout, new_size) }
    }
}

#[global_allocator]
static GLOBAL: Counting = Counting;

/// A fixed-capacity FIFO like LiveChain's (copies in, copies out).
struct Ring {
    buf: Vec<f32>,
    head: usize,
    len: usize,
}

impl Ring {
    fn push(&mut self, x: &[f32]) {
        let cap = self.buf.len();
        let n = x.len().min(cap - self.len);
        let tail = (self.head + self.len) % cap;
        let first = n.min(cap - tail);
        self.buf[tail..tail + first].copy_from_slice(&x[..first]);
        self.buf[..n - first].copy_from_slice(&x[first..n]);
        self.len += n;
    }

    fn pop(&mut self, out: &mut [f32]) {
        let cap = self.buf.len();
        let n = out.len().min(self.len);
        let first = n.min(cap - self.head);
        out[..first].copy_from_slice(&self.buf[self.head..self.head + first]);
        out[first..n].copy_from_slice(&self.buf[..n - first]);
        out[n..].fill(0.0);
        self.head = (self.head + n) % cap;
        self.len -= n;
    }
}

fn arg(name: &str) -> Option<String> {
    let args: Vec<String> = std::env::args().collect();
    args.iter().position(|a| a == name).and_then(|i| args.get(i + 1).cloned())
}

fn main() {
    let channels: usize = arg("--channels").and_then(|v| v.parse().ok()).unwrap_or(2);
    let seconds: f64 = arg("--seconds").and_then(|v| v.parse().ok()).unwrap_or(60.0);
    let json = std::env::args().any(|a| a == "--json");
    let preset = Preset::from_json(PRESET).expect("the typical preset is valid");
    let mut chain = Chain::new(&preset, channels, RATE, UNBOUNDED).expect("the typical chain builds");
    let mut out = ChainOutput::new(channels);
    out.export.iter_mut().chain(out.audition.iter_mut()).for_each(|v| v.reserve_exact(2 * BLOCK));
    let ring = || Ring { buf: vec![0.0; 3 * BLOCK], head: 0, len: 0 };
    let (mut wet, mut dry): (Vec<Ring>, Vec<Ring>) =
        ((0..channels).map(|_| ring()).collect(), (0..channels).map(|_| ring()).collect());
    let mut gained: Vec<Vec<f32>> = (0..channels).map(|_| Vec::with_capacity(BLOCK)).collect();
    let (mut wet_buf, mut dry_buf, mut output) = (vec![0.0f32; BLOCK], vec![0.0f32; BLOCK], vec![0.0f32; BLOCK]);
    let (gain, mix, out_gain) = (vec![1.0f32; FRAMES], vec![1.0f32; FRAMES], vec![1.0f32; FRAMES]);
    // A busy input: two detuned tones per channel, −3 dBFS.
    let period = RATE as usize;
    let input: Vec<Vec<f32>> = (0..channels)
        .map(|c| {
            (0..period)
                .map(|i| {
                    let t = i as f64 / RATE as f64;
                    (0.35
                        * (libm::sin(2.0 * std::f64::consts::PI * (220.0 + 3.0 * c as f64) * t)
                            + libm::sin(2.0 * std::f64::consts::PI * 1_371.0 * t))) as f32
                })
                .collect()
        })
        .collect();

    let mut pos = 0;
    let mut checksum = 0.0f64;
    let mut block = |checksum: &mut f64| {
        for (g, x) in gained.iter_mut().zip(&input) {
            g.clear();
            g.extend(x[pos..pos + FRAMES].iter().zip(&gain).map(|(&s, &k)| stairstep::sample::sanitize(s) * k));
        }
        out.clear();
        chain.process_block(&gained, &mut out);
        for ch in 0..channels {
            wet[ch].push(&out.audition[ch]);
            dry[ch].push(&input[ch][pos..pos + FRAMES]);
            wet[ch].pop(&mut wet_buf[..FRAMES]);
            dry[ch].pop(&mut dry_buf[..FRAMES]);
            for i in 0..FRAMES {
                output[i] = (dry_buf[i] * (1.0 - mix[i]) + wet_buf[i] * mix[i]) * out_gain[i];
            }
            *checksum += output[FRAMES - 1] as f64;
        }
        pos = (pos + FRAMES) % (period - FRAMES);
    };

    // Warm up (caches, branch predictors, the FIFOs' steady state), then time.
    for _ in 0..2_000 {
        block(&mut checksum);
    }
    let blocks = ((seconds * RATE as f64) / FRAMES as f64).ceil() as usize;
    ARMED.store(true, Ordering::Relaxed);
    let t0 = Instant::now();
    for _ in 0..blocks {
        block(&mut checksum);
    }
    let elapsed = t0.elapsed().as_secs_f64();
    ARMED.store(false, Ordering::Relaxed);
    let allocations = ALLOCATIONS.load(Ordering::Relaxed);
    let per_block_us = elapsed / blocks as f64 * 1e6;
    let budget_us = FRAMES as f64 / RATE as f64 * 1e6;
    if json {
        println!(
            r#"{{"channels":{channels},"blocks":{blocks},"perBlockUs":{per_block_us},"budgetUs":{budget_us},"allocations":{allocations},"checksum":{checksum},"preset":{}}}"#,
            serde_json::to_string(PRESET).expect("a string serialises")
        );
    } else {
        println!(
            "native: {per_block_us:.2} µs per {FRAMES}-frame block ({channels} ch, {blocks} blocks) = {:.3} % of the \
             {:.3} ms budget at {RATE} Hz; allocations in the timed blocks: {allocations}",
            100.0 * per_block_us / budget_us,
            budget_us / 1000.0
        );
    }
}
