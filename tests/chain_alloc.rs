//! The chain allocates nothing per block after warm-up: every stage kind, a rate stage in both modes, checked with a
//! counting global allocator (this test binary's own; the library itself forbids unsafe code).

use stairstep::chain::{Chain, ChainOutput};
use stairstep::stages::BLOCK;
use stairstep::Preset;
mod common;

use common::alloc::allocations;

#[global_allocator]
static GLOBAL: common::alloc::Counting = common::alloc::Counting;

#[test]
fn process_block_does_not_allocate_after_warm_up() {
    assert!(allocations(|| drop(std::hint::black_box(vec![1u8; 10]))) >= 1);
    let n = 48_000 * 3;
    let x: Vec<f32> = (0..n).map(|i| ((i as f32) * 0.013).sin() * 0.8).collect();
    for (mode, rate, codecs) in [
        ("hold", 11025, r#"{"kind":"codec","codec":"ms-adpcm"},{"kind":"codec","codec":"vox-adpcm"},{"kind":"delta"}"#),
        (
            "clean",
            8000,
            r#"{"kind":"codec","codec":"g721"},{"kind":"codec","codec":"ms-adpcm","samples_per_block":64},
            {"kind":"codec","codec":"gsm610"}"#,
        ),
    ] {
        let json = format!(
            r#"{{"format":"stairstep-preset","version":1,"stages":[
            {{"kind":"gain","gain_db":3,"overflow":"fold"}},{{"kind":"compand","bits":9}},
            {{"kind":"rate","rate_hz":{rate},"mode":"{mode}"}},{{"kind":"minifloat"}},{{"kind":"g711"}},{{"kind":"adpcm"}},
            {codecs},{{"kind":"quantize","bits":6,"dither":"tpdf","shaping":"ewt9"}}]}}"#
        );
        let p = Preset::from_json(&json).unwrap();
        let mut chain = Chain::new(&p, 2, 48_000, n).unwrap();
        let mut out = ChainOutput::new(2);
        // The caller's output buffers are sized once, like a streaming writer's.
        for c in out.export.iter_mut().chain(out.audition.iter_mut()) {
            c.reserve(4 * BLOCK);
        }
        let mut start = 0;
        let mut counted = 0;
        let mut blocks = 0;
        while start < n {
            let end = (start + BLOCK).min(n);
            let block = [&x[start..end], &x[start..end]];
            let a = allocations(|| chain.process_block(&block, &mut out));
            // The first blocks fill the clean filter's queues; after that nothing may allocate.
            if blocks >= 1 {
                counted += a;
            }
            out.clear();
            start = end;
            blocks += 1;
        }
        assert_eq!(counted, 0, "{mode}: allocations in steady state");
    }
}
