//! Export formats: exact sizes for every format, lossless PCM round trips, and C arrays compiled with the system C
//! compiler and printed back.
#![cfg(not(target_arch = "wasm32"))]

mod common;

use stairstep::io::wav::{read, read_with_meta};
use stairstep::io::{BitOrder, CElement, Endian, ExportFormat, ExportMeta, SampleLoop, WavEncoding};
use stairstep::rng::Pcg32;
use stairstep::sample::pcm_code;
use stairstep::Clip;
use std::process::Command;

fn noise(channels: usize, frames: usize, seed: u64) -> Clip {
    let mut rng = Pcg32::new(seed, 3);
    let chans = (0..channels)
        .map(|_| (0..frames).map(|_| (rng.next_u32() as f64 / u32::MAX as f64 * 2.4 - 1.2) as f32).collect())
        .collect();
    Clip::new(44_100, chans).unwrap()
}

fn every_format() -> Vec<ExportFormat> {
    let mut v: Vec<ExportFormat> =
        WavEncoding::ALL.iter().map(|&encoding| ExportFormat::Wav { encoding, block_align: None }).collect();
    for ba in [8, 24, 48, 64, 512, 2048] {
        v.push(ExportFormat::Wav { encoding: WavEncoding::ImaAdpcm, block_align: Some(ba) });
    }
    for bits in [1, 2, 4, 8, 16] {
        for (signed, endian, bit_order) in
            [(true, Endian::Little, BitOrder::MsbFirst), (false, Endian::Big, BitOrder::LsbFirst)]
        {
            v.push(ExportFormat::Raw { bits, signed, endian, bit_order });
        }
    }
    for ba in [9, 16, 37, 256, 1024] {
        v.push(ExportFormat::Wav { encoding: WavEncoding::MsAdpcm, block_align: Some(ba) });
    }
    v.push(ExportFormat::Vox);
    v.push(ExportFormat::DeltaBits { step: 0.01, leak: 0.99, bit_order: BitOrder::LsbFirst });
    for element in [CElement::Int8, CElement::Uint8, CElement::Int16] {
        v.push(ExportFormat::CArray { element, name: "s".into() });
        v.push(ExportFormat::CArray { element, name: "a_much_longer_name_for_the_array".into() });
    }
    v
}

/// `file_size` equals the encoded length for every format, channel count and many lengths (0 and 1 frames, ADPCM
/// blocks exactly full, one short, one over), with and without loops.
#[test]
fn file_size_is_exact_for_every_format() {
    let mut checked = 0;
    for f in every_format() {
        for ch in [1usize, 2, 3, 6] {
            let mut lengths = vec![0usize, 1, 2, 3, 7, 8, 9, 15, 16, 17, 100, 1000];
            for spb in [9, 505, 1017, 2041] {
                lengths.extend([spb - 1, spb, spb + 1, 2 * spb + 3]);
            }
            for &n in &lengths {
                let clip = noise(ch, n, n as u64);
                let bytes = match f.encode(&clip) {
                    Ok(b) => b,
                    Err(e) => {
                        // Only an ADPCM block size that does not fit this channel count may fail, or a codec whose
                        // format has a fixed channel count (Microsoft ADPCM: 1 or 2; G.721: 1) or rate (G.721: 8000 Hz,
                        // which `file_size` cannot know).
                        let e = e.to_string();
                        let rate = e.contains("needs 8000 Hz");
                        assert!(e.contains("block_align") || e.contains("`channels`") || rate, "{f:?} {ch}: {e}");
                        if !rate {
                            assert_eq!(f.file_size(n, ch), 0);
                        }
                        continue;
                    }
                };
                assert_eq!(bytes.len() as u64, f.file_size(n, ch), "{f:?}, {ch} channels, {n} frames");
                if n > 2 {
                    let meta = ExportMeta {
                        loops: vec![SampleLoop::forward(1, n as u32 - 1), SampleLoop::forward(0, 0)],
                        unity_note: 61,
                    };
                    let bytes = f.encode_with(&clip, &meta).unwrap();
                    assert_eq!(bytes.len() as u64, f.file_size_with(n, ch, &meta), "{f:?} with loops");
                }
                checked += 1;
            }
        }
    }
    assert!(checked > 3000, "{checked}");
}

/// Import → export → import is lossless for every PCM width and for float, for any channel count; the exported
/// bytes equal the bytes of the first export.
#[test]
fn pcm_and_float_round_trips_are_lossless() {
    for enc in [WavEncoding::PcmU8, WavEncoding::PcmS16, WavEncoding::PcmS24, WavEncoding::PcmS32, WavEncoding::Float32]
    {
        for ch in [1, 2, 5, 64] {
            let f = ExportFormat::Wav { encoding: enc, block_align: None };
            let first = f.encode(&noise(ch, 301, ch as u64)).unwrap();
            let a = read(&first).unwrap();
            let second = f.encode(&a).unwrap();
            assert_eq!(first, second, "{enc:?} {ch}");
            let b = read(&second).unwrap();
            assert_eq!(a, b, "{enc:?} {ch}");
        }
    }
    // G.711 and ADPCM are lossy once; after that the codes survive unchanged.
    for enc in [WavEncoding::Mulaw, WavEncoding::Alaw, WavEncoding::ImaAdpcm] {
        let f = ExportFormat::Wav { encoding: enc, block_align: None };
        let a = read(&f.encode(&noise(2, 700, 9)).unwrap()).unwrap();
        let b = read(&f.encode(&a).unwrap()).unwrap();
        if enc == WavEncoding::ImaAdpcm {
            assert_eq!(a.frames(), b.frames());
        } else {
            assert_eq!(a, b, "{enc:?}");
        }
    }
}

/// The PCM writer maps floats onto codes with `pcm_code`: edges, NaN and ±Inf included.
#[test]
fn pcm_edges() {
    let x = vec![-1.0f32, 1.0, 0.0, f32::NAN, f32::INFINITY, f32::NEG_INFINITY, 1e-9, -1e-9, 0.5, -2.0];
    let clip = Clip::new(8000, vec![x.clone()]).unwrap();
    for (enc, bits) in [(WavEncoding::PcmU8, 8), (WavEncoding::PcmS16, 16), (WavEncoding::PcmS24, 24)] {
        let back = read(&ExportFormat::Wav { encoding: enc, block_align: None }.encode(&clip).unwrap()).unwrap();
        let scale = (1u32 << (bits - 1)) as f32;
        for (i, &v) in x.iter().enumerate() {
            let s = if v.is_nan() { 0.0 } else { v.clamp(-1.0, 1.0) };
            assert_eq!(back.channels[0][i], pcm_code(s, bits) as f32 / scale, "{enc:?} {v}");
        }
    }
    let back = read(&ExportFormat::Wav { encoding: WavEncoding::Float32, block_align: None }.encode(&clip).unwrap());
    assert_eq!(back.unwrap().channels[0][3..6], [0.0, 1.0, -1.0]);
}

fn compile_and_run(header: &[u8], name: &str, print: &str) -> String {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join(format!("{name}.h")), header).unwrap();
    let main = format!(
        "#include <stdio.h>\n#include \"{name}.h\"\n#include \"{name}.h\" /* twice: the include guard works */\n\
         int main(void) {{\n{print}\n    return 0;\n}}\n"
    );
    std::fs::write(dir.path().join("main.c"), main).unwrap();
    let exe = dir.path().join("main");
    let out = Command::new("cc")
        .args(["-std=c99", "-Wall", "-Wextra", "-pedantic", "-Werror", "-o"])
        .arg(&exe)
        .arg(dir.path().join("main.c"))
        .output()
        .expect("run cc");
    assert!(
        out.status.success(),
        "cc failed:\n{}\n{}",
        String::from_utf8_lossy(&out.stderr),
        String::from_utf8_lossy(header)
    );
    let run = Command::new(&exe).output().unwrap();
    assert!(run.status.success());
    String::from_utf8(run.stdout).unwrap()
}

/// C arrays compile as C99 with warnings as errors, and print back the expected values and constants.
#[test]
fn c_arrays_compile_and_hold_the_samples() {
    let clip = noise(2, 37, 5);
    let meta = ExportMeta { loops: vec![SampleLoop::forward(3, 30), SampleLoop::forward(0, 36)], unity_note: 60 };
    for (element, ctype, fmt_spec) in
        [(CElement::Int8, "int8_t", "%d"), (CElement::Uint8, "uint8_t", "%u"), (CElement::Int16, "int16_t", "%d")]
    {
        let name = "coin";
        let f = ExportFormat::CArray { element, name: name.into() };
        let header = f.encode_with(&clip, &meta).unwrap();
        assert_eq!(header.len() as u64, f.file_size_with(37, 2, &meta));
        let print = format!(
            "    unsigned long i;\n    const {ctype} *p = coin;\n\
             printf(\"%lu %lu %lu %lu\\n\", (unsigned long)COIN_LENGTH, (unsigned long)COIN_FRAMES, \
             (unsigned long)COIN_CHANNELS, (unsigned long)COIN_SAMPLE_RATE);\n\
             printf(\"%lu %lu %lu %lu %lu %lu %lu\\n\", (unsigned long)COIN_LOOP_COUNT, (unsigned long)COIN_LOOP_START, \
             (unsigned long)COIN_LOOP_END, (unsigned long)COIN_LOOP0_START, (unsigned long)COIN_LOOP0_END, \
             (unsigned long)COIN_LOOP1_START, (unsigned long)COIN_LOOP1_END);\n\
             printf(\"%lu\\n\", (unsigned long)(sizeof coin / sizeof coin[0]));\n\
             for (i = 0; i < COIN_LENGTH; i++) printf(\"{fmt_spec}\\n\", p[i]);"
        );
        let out = compile_and_run(&header, name, &print);
        let mut lines = out.lines();
        assert_eq!(lines.next(), Some("74 37 2 44100"));
        assert_eq!(lines.next(), Some("2 3 30 3 30 0 36"));
        assert_eq!(lines.next(), Some("74"));
        let got: Vec<i64> = lines.map(|l| l.parse().unwrap()).collect();
        let want: Vec<i64> = clip
            .interleaved()
            .iter()
            .map(|&x| {
                let x = x.clamp(-1.0, 1.0);
                match element {
                    CElement::Int8 => pcm_code(x, 8) as i64,
                    CElement::Uint8 => pcm_code(x, 8) as i64 + 128,
                    CElement::Int16 => pcm_code(x, 16) as i64,
                }
            })
            .collect();
        assert_eq!(got, want, "{ctype}");
    }
    // Edge values and an empty clip.
    let edges = Clip::new(768_000, vec![vec![-1.0, 1.0, 0.0, f32::NAN, -1e-9]]).unwrap();
    let f = ExportFormat::CArray { element: CElement::Int16, name: "edge".into() };
    let out = compile_and_run(
        &f.encode(&edges).unwrap(),
        "edge",
        "    unsigned i;\n    printf(\"%lu %u\\n\", (unsigned long)EDGE_SAMPLE_RATE, (unsigned)EDGE_LOOP_COUNT);\n\
         for (i = 0; i < EDGE_LENGTH; i++) printf(\"%d\\n\", edge[i]);",
    );
    assert_eq!(out, "768000 0\n-32768\n32767\n0\n0\n0\n");
    let empty = Clip::new(8000, vec![vec![]]).unwrap();
    let f = ExportFormat::CArray { element: CElement::Uint8, name: "nothing".into() };
    let out = compile_and_run(
        &f.encode(&empty).unwrap(),
        "nothing",
        "    printf(\"%u %u\\n\", (unsigned)NOTHING_LENGTH, (unsigned)(sizeof nothing));",
    );
    assert_eq!(out, "0 1\n");
}

/// Loops written into a WAV come back from the reader unchanged, with no warnings, for every WAV encoding.
#[test]
fn loops_round_trip_through_wav() {
    let clip = noise(1, 2000, 1);
    let meta = ExportMeta {
        loops: vec![SampleLoop { start: 10, end: 1999, loop_type: 2, play_count: 7 }, SampleLoop::forward(5, 5)],
        unity_note: 0,
    };
    for encoding in WavEncoding::ALL {
        let f = ExportFormat::Wav { encoding, block_align: None };
        // G.721 and GSM 6.10 exist at 8000 Hz only.
        let clip = if matches!(encoding, WavEncoding::G721 | WavEncoding::Gsm610) {
            Clip::new(8000, clip.channels.clone()).unwrap()
        } else {
            clip.clone()
        };
        let (back, m) = read_with_meta(&f.encode_with(&clip, &meta).unwrap()).unwrap();
        assert_eq!(back.frames(), 2000);
        assert!(m.warnings.is_empty(), "{encoding:?}: {:?}", m.warnings);
        assert_eq!(m.export_meta(), meta, "{encoding:?}");
        assert_eq!(m.format.encoding(), Some(encoding));
    }
}

/// Multichannel ADPCM files whose true length happens to look like libsndfile's wrong `fact` (one block, frames =
/// samplesPerBlock / channels) still read back at their true length.
#[test]
fn adpcm_lengths_that_look_like_the_libsndfile_bug_read_back_exactly() {
    for (ch, frames) in [(2, 252), (3, 168), (4, 126), (2, 253), (2, 251)] {
        let clip = noise(ch, frames, 4);
        let bytes = ExportFormat::Wav { encoding: WavEncoding::ImaAdpcm, block_align: None }.encode(&clip).unwrap();
        let (back, meta) = read_with_meta(&bytes).unwrap();
        assert_eq!(back.frames(), frames, "{ch} channels: {:?}", meta.warnings);
        assert!(meta.warnings.is_empty(), "{:?}", meta.warnings);
    }
}

/// Presets carry the new export forms, and a bad one is reported with the field's full path.
#[test]
fn presets_carry_every_export_form() {
    use stairstep::Preset;
    for export in [
        r#"{"type":"wav","encoding":"pcm-s16"}"#,
        r#"{"type":"wav","encoding":"ima-adpcm","block_align":1024}"#,
        r#"{"type":"raw","bits":4,"signed":false,"endian":"little","bit_order":"msb-first"}"#,
        r#"{"type":"c-array","element":"uint8","name":"coin"}"#,
    ] {
        let p =
            Preset::from_json(&format!(r#"{{"format":"stairstep-preset","version":1,"export":{export}}}"#)).unwrap();
        assert_eq!(Preset::from_json(&p.to_json()).unwrap(), p);
    }
    for (export, field) in [
        (r#"{"type":"raw","bits":3}"#, "export.bits"),
        (r#"{"type":"c-array","name":"for"}"#, "export.name"),
        (r#"{"type":"wav","encoding":"alaw","block_align":512}"#, "export.block_align"),
    ] {
        let e = Preset::from_json(&format!(r#"{{"format":"stairstep-preset","version":1,"export":{export}}}"#));
        let e = e.unwrap_err().to_string();
        assert!(e.contains(&format!("`{field}`")), "{e}");
    }
}

/// The extremes of rate and channel count write and read back in every WAV encoding.
#[test]
fn extreme_rates_and_channel_counts() {
    for (rate, ch) in [(1, 1), (768_000, 1), (1, 64), (768_000, 64), (11_025, 7)] {
        let clip = Clip::new(rate, noise(ch, 40, 2).channels).unwrap();
        let meta = ExportMeta { loops: vec![SampleLoop::forward(0, 39)], unity_note: 60 };
        for encoding in WavEncoding::ALL {
            let f = ExportFormat::wav(encoding);
            let fixed = match encoding {
                WavEncoding::MsAdpcm => ch > 2,
                // One channel at 8000 Hz only: none of these extremes.
                WavEncoding::G721 | WavEncoding::Gsm610 => true,
                _ => false,
            };
            if fixed {
                let e = f.encode_with(&clip, &meta).unwrap_err().to_string();
                assert!(e.contains("`channels`") || e.contains("needs 8000 Hz"), "{encoding:?}: {e}");
                continue;
            }
            let bytes = f.encode_with(&clip, &meta).unwrap();
            assert_eq!(bytes.len() as u64, f.file_size_with(40, ch, &meta));
            let (back, m) = read_with_meta(&bytes).unwrap();
            assert_eq!((back.sample_rate, back.channel_count(), back.frames()), (rate, ch, 40), "{encoding:?}");
            assert!(m.warnings.is_empty(), "{encoding:?} {rate} {ch}: {:?}", m.warnings);
            assert_eq!(m.loops, meta.loops);
        }
    }
}
