//! Reads arbitrary bytes as WAV. The reader must never panic and never allocate beyond what the input's size
//! suggests (libFuzzer's -malloc_limit_mb catches that). When a file is accepted, it is written back in its own
//! encoding (16-bit PCM when there is none) with its loops, and the result must read again with the same shape.
//!
//! Run from `fuzz/` (needs nightly and `cargo install cargo-fuzz`), seeding with the fixtures:
//!
//! ```sh
//! mkdir -p corpus/wav_read && cp ../tests/fixtures/*.wav corpus/wav_read/
//! cargo +nightly fuzz run wav_read corpus/wav_read -- -max_total_time=600 -malloc_limit_mb=64 -max_len=16384
//! ```
//!
//! Every crash it finds becomes a case in `tests/wav_malformed.rs` (bytes inline).
#![no_main]

use libfuzzer_sys::fuzz_target;
use stairstep::io::wav::{read_with_meta, write_with};
use stairstep::io::WavEncoding;

fuzz_target!(|data: &[u8]| {
    let Ok((clip, meta)) = read_with_meta(data) else { return };
    assert_eq!(clip.channel_count(), meta.format.channels as usize);
    let enc = meta.format.encoding().unwrap_or(WavEncoding::PcmS16);
    let block_align = (enc == WavEncoding::ImaAdpcm).then_some(meta.format.block_align as usize);
    let bytes = write_with(&clip, enc, block_align, &meta.export_meta()).expect("a clip that was read can be written");
    let (again, meta2) = read_with_meta(&bytes).expect("a file that was written can be read");
    assert_eq!(again.channel_count(), clip.channel_count());
    assert_eq!(again.frames(), clip.frames());
    assert_eq!(again.sample_rate, clip.sample_rate);
    assert_eq!(meta2.loops, meta.loops);
    assert!(meta2.warnings.is_empty(), "{:?}", meta2.warnings);
});
