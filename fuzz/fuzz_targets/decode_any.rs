//! Reads arbitrary bytes as any supported sound file through `io::decode::read_any` (WAV through the project's
//! reader, FLAC/AIFF/Ogg Vorbis/MP3/CAF through symphonia). It must never crash, and the decoded length is bounded by
//! the input's size (the limit passed in); libFuzzer's -malloc_limit_mb catches allocations beyond that. A panic
//! inside symphonia is caught by `read_any` and becomes an error, which is correct behaviour for the CLI; the target
//! counts such inputs and prints the first few, so they can be reported upstream.
//!
//! Run from `fuzz/` (needs nightly and `cargo install cargo-fuzz`), seeding with small files of each format (e.g.
//! written with Python `soundfile`, see tests/formats_reference.rs, plus the WAV fixtures):
//!
//! ```sh
//! mkdir -p corpus/decode_any && cp ../tests/fixtures/*.wav corpus/decode_any/
//! cargo +nightly fuzz run decode_any corpus/decode_any -- -max_total_time=600 -malloc_limit_mb=256 -max_len=16384
//! ```
#![no_main]

use libfuzzer_sys::fuzz_target;
use stairstep::io::decode::{read_any, Limits};
use std::sync::atomic::{AtomicU64, Ordering};

static CAUGHT_PANICS: AtomicU64 = AtomicU64::new(0);

fuzz_target!(|data: &[u8]| {
    // At most 64 decoded samples per input byte (and 2^16 for tiny inputs): 16 KiB of input, 4 MiB of f32.
    let limits = Limits { max_samples: (data.len() as u64 * 64).max(1 << 16) };
    match read_any(data, None, limits) {
        Ok(d) => {
            let (ch, frames) = (d.clip.channel_count(), d.clip.frames() as u64);
            assert!((1..=64).contains(&ch));
            assert!(d.clip.sample_rate >= 1 && d.clip.sample_rate <= 768_000);
            assert!(frames * ch as u64 <= limits.max_samples);
            assert!(d.clip.channels.iter().all(|c| c.len() as u64 == frames));
            if let Some((s, e)) = d.file_loop {
                assert!(s < e && e <= frames);
            }
        }
        Err(e) => {
            let e = e.to_string();
            if e.contains("decoder gave up") {
                let n = CAUGHT_PANICS.fetch_add(1, Ordering::Relaxed);
                if n < 5 {
                    eprintln!("caught decoder panic #{}: {e}", n + 1);
                }
            }
        }
    }
});
