//! The committed fixtures (tests/fixtures/, written by scripts/make-fixtures.py, mostly through libsndfile) read to
//! the signal the script wrote, with the metadata it put in.

mod common;

use stairstep::io::wav::read_with_meta;
use stairstep::io::{ExportFormat, SampleLoop, WavEncoding};
use stairstep::Clip;

/// The script's integer triangle wave.
fn tri(i: i64, period: i64, amp: i64) -> i64 {
    let p = i % period;
    let half = period / 2;
    if p < half {
        -amp + (2 * amp * p).div_euclid(half)
    } else {
        amp - (2 * amp * (p - half)).div_euclid(half)
    }
}

fn signal(frames: usize, period: i64, amp: i64, scale: f64) -> Vec<f32> {
    (0..frames as i64).map(|i| (tri(i, period, amp) as f64 / scale) as f32).collect()
}

fn load(name: &str) -> (Clip, stairstep::io::wav::WavMeta) {
    let bytes = std::fs::read(common::root().join("tests/fixtures").join(name)).unwrap();
    assert!(bytes.len() < 1024, "{name} is {} bytes", bytes.len());
    read_with_meta(&bytes).unwrap_or_else(|e| panic!("{name}: {e}"))
}

/// The data chunk of a WAV file.
fn data_chunk(bytes: &[u8]) -> &[u8] {
    let mut pos = 12;
    loop {
        let len = u32::from_le_bytes(bytes[pos + 4..pos + 8].try_into().unwrap()) as usize;
        if &bytes[pos..pos + 4] == b"data" {
            return &bytes[pos + 8..pos + 8 + len];
        }
        pos += 8 + len + (len & 1);
    }
}

#[test]
fn pcm_and_float_fixtures_hold_the_script_signal() {
    let cases: [(&str, u32, Vec<Vec<f32>>, &str); 7] = [
        ("u8-mono-11025.wav", 11_025, vec![signal(300, 50, 120, 128.0)], "8-bit PCM"),
        (
            "s16-stereo-22050.wav",
            22_050,
            vec![signal(100, 40, 30_000, 32768.0), signal(100, 26, 12_345, 32768.0)],
            "16-bit PCM",
        ),
        ("s24-mono-48000.wav", 48_000, vec![signal(100, 30, 8_000_000, 8_388_608.0)], "24-bit PCM"),
        ("s32-mono-8000.wav", 8000, vec![signal(60, 20, 2_000_000_000, 2_147_483_648.0)], "32-bit PCM"),
        ("float32-mono-44100.wav", 44_100, vec![signal(100, 32, 16_384, 32768.0)], "32-bit float"),
        ("float64-mono-8000.wav", 8000, vec![signal(50, 10, 1000, 1024.0)], "64-bit float"),
        (
            "extensible-s16-stereo-16000.wav",
            16_000,
            vec![signal(50, 40, 30_000, 32768.0), signal(50, 26, 12_345, 32768.0)],
            "16-bit PCM (extensible)",
        ),
    ];
    for (name, rate, want, desc) in cases {
        let (clip, meta) = load(name);
        assert_eq!(clip.sample_rate, rate, "{name}");
        assert_eq!(clip.channels, want, "{name}");
        assert_eq!(meta.format.describe(), desc, "{name}");
        assert!(meta.warnings.is_empty(), "{name}: {:?}", meta.warnings);
    }
    let (_, meta) = load("extensible-s16-stereo-16000.wav");
    assert_eq!(meta.format.format_tag, 0xFFFE);
    assert_eq!(meta.format.channel_mask, Some(3));
    assert_eq!(meta.format.valid_bits, 16);
    // libsndfile adds a `fact` and a `PEAK` chunk to float files: `fact` is read, `PEAK` skipped.
    let (_, meta) = load("float32-mono-44100.wav");
    assert_eq!(meta.fact_frames, Some(100));
}

/// libsndfile's IMA ADPCM encoder agrees with ours byte for byte, and its G.711 encoders too except where
/// libsndfile knowingly differs from the Sun/`audioop` reference that ours follows: for some negative inputs
/// (A-law: 127 exact multiples of −16; μ-law: 381 values just above a segment boundary, out of all 65,536) it rounds
/// the magnitude instead of taking the one's complement, giving the neighbouring code. Both decode alike.
#[test]
fn libsndfile_encoders_agree_with_ours() {
    for (name, enc, input, block_align) in [
        ("mulaw-mono-8000.wav", WavEncoding::Mulaw, vec![signal(300, 40, 32_000, 32768.0)], None),
        ("alaw-mono-8000.wav", WavEncoding::Alaw, vec![signal(300, 40, 32_000, 32768.0)], None),
        ("ima-adpcm-mono-11025.wav", WavEncoding::ImaAdpcm, vec![signal(600, 64, 20_000, 32768.0)], Some(256)),
        (
            "ima-adpcm-stereo-8000.wav",
            WavEncoding::ImaAdpcm,
            vec![signal(300, 64, 20_000, 32768.0), signal(300, 18, 9000, 32768.0)],
            Some(512),
        ),
    ] {
        let theirs = std::fs::read(common::root().join("tests/fixtures").join(name)).unwrap();
        let (clip, meta) = load(name);
        if enc == WavEncoding::ImaAdpcm {
            // libsndfile's `fact` counts whole blocks (1010 = 2 × 505) for mono, and for stereo it is half that
            // (252 of 505): the reader recognises that and keeps the whole block, with a warning.
            let blocks = input[0].len().div_ceil(505);
            assert_eq!(clip.frames(), blocks * 505, "{name}");
            assert_eq!(clip.channels[0][..input[0].len()].len(), input[0].len());
            if input.len() == 2 {
                assert_eq!(meta.fact_frames, Some(252));
                assert!(meta.warnings[0].contains("known libsndfile bug"), "{:?}", meta.warnings);
            } else {
                assert_eq!(meta.fact_frames, Some(1010));
                assert!(meta.warnings.is_empty(), "{name}: {:?}", meta.warnings);
            }
        } else {
            assert!(meta.warnings.is_empty(), "{name}: {:?}", meta.warnings);
            assert_eq!(clip.frames(), input[0].len(), "{name}");
        }
        assert_eq!(meta.format.encoding(), Some(enc));
        assert_eq!(meta.format.block_align as u32, block_align.unwrap_or(1));
        let src = Clip::new(clip.sample_rate, input).unwrap();
        let ours = ExportFormat::Wav { encoding: enc, block_align }.encode(&src).unwrap();
        let (a, b) = (data_chunk(&ours), data_chunk(&theirs));
        if enc == WavEncoding::ImaAdpcm {
            assert_eq!(a, b, "{name}: data chunk bytes");
            continue;
        }
        assert_eq!(a.len(), b.len());
        let mut differ = 0;
        for (i, (&x, &y)) in a.iter().zip(b).enumerate() {
            if x != y {
                differ += 1;
                assert!(src.channels[0][i] < 0.0 && x.abs_diff(y) == 1, "{name} sample {i}: {x} vs {y}");
            }
        }
        assert!(differ < a.len() / 3, "{name}: {differ} codes differ");
    }
}

#[test]
fn hand_made_fixtures_carry_their_chunks() {
    let (clip, meta) = load("smpl-loop-s16-mono-22050.wav");
    assert_eq!(clip.channels, vec![signal(64, 16, 16_000, 32768.0)]);
    assert_eq!(
        meta.loops,
        vec![SampleLoop::forward(16, 47), SampleLoop { start: 0, end: 63, loop_type: 1, play_count: 3 }]
    );
    assert_eq!(meta.unity_note, Some(60));
    let cues: Vec<(u32, u32, [u8; 4])> = meta.cues.iter().map(|c| (c.id, c.sample_offset, c.chunk_id)).collect();
    assert_eq!(cues, [(1, 8, *b"data"), (2, 40, *b"data")]);
    assert!(meta.warnings.is_empty(), "{:?}", meta.warnings);

    // Odd-sized unknown chunks before and after `fmt `, an odd-sized data chunk, a LIST chunk at the end.
    let (clip, meta) = load("odd-chunks-u8-mono-8000.wav");
    let want: Vec<f32> = (0..33).map(|i| tri(i, 20, 100) as f32 / 128.0).collect();
    assert_eq!(clip.channels, vec![want]);
    assert!(meta.warnings.is_empty(), "{:?}", meta.warnings);
}
