//! The rate stage allocates only at construction: `process`, `flush` and `reset` are checked with a counting global
//! allocator (this test binary's own; the library itself forbids unsafe code).

use stairstep::stages::rate::{RateExpander, RateParams, RateReducer};
mod common;

use common::alloc::allocations;

#[global_allocator]
static GLOBAL: common::alloc::Counting = common::alloc::Counting;

#[test]
fn process_flush_and_reset_never_allocate() {
    const BLOCK: usize = 4096;
    // The counter works: a vector allocation is seen.
    assert!(allocations(|| drop(std::hint::black_box(vec![1u8; 10]))) >= 1);
    let x: Vec<f32> = (0..50_000).map(|i| ((i as f32) * 0.01).sin() * 0.5).collect();
    for p in [RateParams::hold(7_300), RateParams::clean(7_300), RateParams::clean(8_000), RateParams::hold(48_000)] {
        let mut r = RateReducer::new(&p, 48_000, BLOCK).unwrap();
        let mut e = RateExpander::new(&p, 48_000, BLOCK).unwrap();
        let mut mid = vec![0.0f32; r.max_output(BLOCK)];
        let mut out = vec![0.0f32; e.max_output(mid.len())];
        let n = allocations(|| {
            for _ in 0..2 {
                for block in x.chunks(BLOCK) {
                    let m = r.process(block, &mut mid);
                    e.process(&mid[..m], &mut out);
                }
                let m = r.flush(&mut mid);
                e.process(&mid[..m], &mut out);
                e.flush(&mut out);
                r.reset();
                e.reset();
            }
        });
        assert_eq!(n, 0, "{p:?}: {n} allocations while processing");
    }
}
