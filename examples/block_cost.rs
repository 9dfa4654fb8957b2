//! The CPU cost of one 128-frame block of the live plug-in's work, natively: the typical chain (gain → hold
//! 11,025 Hz → 8-bit TPDF dither) at 48 kHz, as a fraction of the block's real-time budget (128 / 48,000 s =
//! 2.667 ms). `node scripts/bench-live.mjs` prints this beside the same figure for the wasm `LiveChain` in Chromium.
//!
//! It runs the core's `stairstep::live::LiveChain` (src/live/), the same code the wasm `LiveChain` wraps: the
//! pre-gain, mix and output-gain ramps, `Chain::process_block` on an unbounded chain, the audition and dry FIFOs and
//! the mix. A counting allocator checks that the timed blocks allocate nothing.
//!
//! ```sh
//! cargo run --release --example block_cost [-- --channels 2 --seconds 60 --json]
//! ```

use stairstep::live::LiveChain;
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

fn arg(name: &str) -> Option<String> {
    let args: Vec<String> = std::env::args().collect();
    args.iter().position(|a| a == name).and_then(|i| args.get(i + 1).cloned())
}

fn main() {
    let channels: usize = arg("--channels").and_then(|v| v.parse().ok()).unwrap_or(2);
    let seconds: f64 = arg("--seconds").and_then(|v| v.parse().ok()).unwrap_or(60.0);
    let json = std::env::args().any(|a| a == "--json");
    let preset = Preset::from_json(PRESET).expect("the typical preset is valid");
    let mut live = LiveChain::new(&preset, channels, RATE).expect("the typical chain builds");
    let (mut block_in, mut output) = (vec![vec![0.0f32; FRAMES]; channels], vec![vec![0.0f32; FRAMES]; channels]);
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
        // As the worklet does: copy each channel's block into the chain's input buffer.
        for (b, x) in block_in.iter_mut().zip(&input) {
            b.copy_from_slice(&x[pos..pos + FRAMES]);
        }
        live.process(&block_in, &mut output, FRAMES).expect("buffers of the chain's shape");
        *checksum += output.iter().map(|o| o[FRAMES - 1] as f64).sum::<f64>();
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
