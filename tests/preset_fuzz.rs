//! Presets built from the `preset_render` fuzz target's inputs (see `fuzz/README.md`), replayed: each is refused with
//! an error that names the parameter, or renders, never a panic and never an allocation out of proportion to the
//! input.

use stairstep::render::render;
use stairstep::{Clip, Error, Preset};

fn preset(stages: &str) -> Preset {
    Preset::from_json(&format!(r#"{{"format":"stairstep-preset","version":1,"stages":{stages}}}"#)).unwrap()
}

/// A clean-mode rate stage at 1 Hz from 131,072 Hz has the largest filter block (2^18 samples at the source rate,
/// about 23 MB per channel). A one-frame file declaring 64 channels used to make the chain take 1.5 GB and 13 s;
/// the block times the channels is now bounded, and the refusal names the stage's rate.
#[test]
fn clean_rate_filter_memory_is_bounded_by_the_channel_count() {
    let p = preset(r#"[{"kind":"gain","gain_db":-1},{"kind":"rate","rate_hz":1,"mode":"clean"}]"#);
    let wide = Clip::new(131_072, vec![vec![0.25]; 64]).unwrap();
    let e = render(&p, &wide).unwrap_err();
    assert!(matches!(&e, Error::Param { name, .. } if name == "stages[1].rate_hz"), "{e}");
    assert!(e.to_string().contains("64 channels"), "{e}");
    // 8 channels at the largest block are within the bound and render: one export frame per channel.
    let r = render(&p, &Clip::new(131_072, vec![vec![0.25]; 8]).unwrap()).unwrap();
    assert_eq!((r.export.channel_count(), r.export.frames(), r.export.sample_rate), (8, 1, 1));
    // Hold mode keeps no filter: 64 channels at 1 Hz render.
    let hold = preset(r#"[{"kind":"rate","rate_hz":1,"mode":"hold"}]"#);
    let r = render(&hold, &wide).unwrap();
    assert_eq!(r.export.channels, vec![vec![0.25]; 64]);
    // A usual ratio stays allowed for 64 channels (48 → 8 kHz: a 3,072-sample block).
    let usual = preset(r#"[{"kind":"rate","rate_hz":8000,"mode":"clean"}]"#);
    let r = render(&usual, &Clip::new(48_000, vec![vec![0.0; 600]; 64]).unwrap()).unwrap();
    assert_eq!(r.export.frames(), 100);
}
