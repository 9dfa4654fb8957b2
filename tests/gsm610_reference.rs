//! Outside checks of the GSM 06.10 full-rate coder (`src/codec/gsm610.rs`) and its WAV49 files (format tag 0x0031).
//!
//! The reference is libsndfile 1.2 through Python `soundfile` (WAV, subtype `GSM610`), whose GSM coder is documented
//! to be bit-exact to the specification's test sequences. The ETSI test sequences themselves (the specification's
//! input and bit-stream files) are not available offline here, so they are not run.
#![cfg(not(target_arch = "wasm32"))]

mod common;

use common::libsndfile::{same, snr_db};

/// libsndfile writes a GSM 6.10 WAV of `x`; returns the file and its own decode of it.
fn libsndfile_writes(x: &[i16]) -> (Vec<u8>, Vec<i64>) {
    let (file, mut y) = common::libsndfile::libsndfile_writes(&[x.to_vec()], 8000, "WAV", "GSM610");
    (file, y.swap_remove(0))
}

/// libsndfile decodes a WAV file; returns its samples as 16-bit values (one channel).
fn libsndfile_reads(file: &[u8]) -> Vec<i64> {
    common::libsndfile::libsndfile_reads(file, None).swap_remove(0)
}

use stairstep::codec::gsm610;
use stairstep::io::{wav, ExportFormat, ExportMeta, SampleLoop, WavEncoding};
use stairstep::stages::codec::{CodecName, CodecParams, CodecRoundTrip};
use stairstep::stages::Stage;
use stairstep::{Clip, Preset};

/// Speech-like test signal: a voiced buzz with vibrato and a syllable envelope, unvoiced noise bursts, pauses with
/// a little noise, and a few near-full-scale moments.
fn speechy(frames: usize, seed: u64) -> Vec<i16> {
    let mut rng = stairstep::rng::Pcg32::new(seed, 11);
    let mut phase = 0.0f64;
    (0..frames)
        .map(|i| {
            let t = i as f64 / 8000.0;
            let f0 = 110.0 + 40.0 * (2.0 * std::f64::consts::PI * 1.3 * t).sin();
            phase += f0 / 8000.0;
            let syll = (2.0 * std::f64::consts::PI * 3.1 * t).sin();
            let n = (rng.next_u32() >> 16) as f64 / 32768.0 - 1.0;
            let mut v = 0.0;
            for h in 1..12 {
                v += (2.0 * std::f64::consts::PI * phase * h as f64).sin() / (h as f64).powf(1.2);
            }
            let s = match (i / 4000) % 4 {
                0 | 2 => 9000.0 * syll.max(0.0) * v,
                1 => 3000.0 * n * syll.abs(),
                _ => 40.0 * n,
            };
            let loud = if (i / 1000) % 17 == 5 { 3.5 } else { 1.0 };
            (s * loud).round().clamp(-32768.0, 32767.0) as i16
        })
        .collect()
}

fn clip_of(x: &[i16]) -> Clip {
    Clip::new(8000, vec![x.iter().map(|&s| s as f32 / 32768.0).collect()]).unwrap()
}

/// A demo brought to 8000 Hz by the chain's clean rate stage, as 16-bit samples (the first channel).
fn demo_at_8k(name: &str) -> Vec<i16> {
    let clip = stairstep::demo::demo(name).unwrap();
    let p = Preset::from_json(
        r#"{"format":"stairstep-preset","version":1,"stages":[{"kind":"rate","rate_hz":8000,"mode":"clean"}]}"#,
    )
    .unwrap();
    let r = stairstep::render::render(&p, &clip).unwrap();
    r.export.channels[0].iter().map(|&v| stairstep::sample::pcm_code(v, 16) as i16).collect()
}

/// The test inputs: speech-like signals of whole and partial blocks, near-silence, full-scale square waves, and
/// three demos at 8000 Hz.
fn inputs() -> Vec<(String, Vec<i16>)> {
    let mut rng = stairstep::rng::Pcg32::new(5, 5);
    let square: Vec<i16> = (0..4000).map(|i| if (i / 9) % 2 == 0 { i16::MAX } else { i16::MIN }).collect();
    let hiss: Vec<i16> = (0..3333).map(|_| (rng.next_u32() % 7) as i16 - 3).collect();
    vec![
        ("speech-like, 100 blocks".into(), speechy(32_000, 1)),
        ("speech-like, partial last block".into(), speechy(8_123, 2)),
        ("full-scale square".into(), square),
        ("near silence".into(), hiss),
        ("one sample".into(), vec![1234]),
        ("drum-hit demo".into(), demo_at_8k("drum-hit")),
        ("tone demo".into(), demo_at_8k("tone")),
        ("sweep demo".into(), demo_at_8k("sweep")),
    ]
}

/// Our encoder's data bytes equal libsndfile's for the same 16-bit input, and so does our whole exported file
/// (header included); both decoders agree. Source: libsndfile `GSM610` (WAV49).
#[test]
fn encoder_and_file_equal_libsndfile() {
    let mut rows = Vec::new();
    for (name, x) in inputs() {
        let (file, theirs) = libsndfile_writes(&x);
        let (fmt, data) = common::wav_chunks(&file);
        // libsndfile's `fmt `: tag 0x0031, 1 channel, 8000 Hz, 1625 bytes/s, block 65, 0 bits, cbSize 2, 320.
        assert_eq!(fmt, [0x31, 0, 1, 0, 0x40, 0x1f, 0, 0, 0x59, 6, 0, 0, 65, 0, 0, 0, 2, 0, 0x40, 1], "{name}");
        let mut ours = Vec::new();
        gsm610::encode_blocks(&x, &mut ours);
        assert_eq!(ours.len(), data.len(), "{name}: data length");
        if let Some(i) = (0..ours.len()).find(|&i| ours[i] != data[i]) {
            panic!(
                "{name}: first difference at byte {i} (block {}, byte {}): ours {:02x?} libsndfile {:02x?}",
                i / 65,
                i % 65,
                &ours[i..(i + 8).min(ours.len())],
                &data[i..(i + 8).min(data.len())]
            );
        }
        // The whole file: RIFF, `fmt `, `fact`, `data`, byte for byte.
        let export = ExportFormat::wav(WavEncoding::Gsm610).encode(&clip_of(&x)).unwrap();
        assert_eq!(export, file, "{name}: our file vs libsndfile's");
        // Our decoder on libsndfile's file gives libsndfile's decode.
        let (pcm, rest) = gsm610::decode_blocks(&data, x.len() as u64);
        assert_eq!(rest, 0);
        let pcm: Vec<i64> = pcm.iter().map(|&v| v as i64).collect();
        same(&pcm, &theirs[..x.len()], &format!("{name}: our decoder vs libsndfile's"));
        let (clip, m) = wav::read_with_meta(&file).unwrap();
        assert!(m.warnings.is_empty(), "{:?}", m.warnings);
        assert_eq!((clip.frames(), m.format.describe().as_str()), (x.len(), "GSM 6.10"));
        // A second coding of the decoded signal (what exporting the codec stage's output would do) is not
        // transparent: its distance from the first decode is reported beside the codec's SNR.
        let once: Vec<i16> = pcm.iter().map(|&v| v as i16).collect();
        let mut again = Vec::new();
        gsm610::encode_blocks(&once, &mut again);
        let twice: Vec<i64> = gsm610::decode_blocks(&again, x.len() as u64).0.iter().map(|&v| v as i64).collect();
        rows.push(format!(
            "{name}: SNR {:.2} dB (libsndfile's coder: the same bytes); a second coding is {:.2} dB from the first",
            snr_db(&x, &pcm),
            snr_db(&once, &twice)
        ));
    }
    eprintln!("GSM 6.10 on the same 16-bit input:\n{}", rows.join("\n"));
}

/// The codec stage plays, one frame (160 samples) late, exactly what libsndfile and our reader decode from the export
/// of the stage's input; the stage's first frame is silence. Source: libsndfile `GSM610`.
#[test]
fn stage_is_the_export_one_frame_late() {
    for (name, x) in inputs() {
        let mut st = CodecRoundTrip::new(&CodecParams { codec: CodecName::Gsm610, samples_per_block: None }).unwrap();
        let mut buf: Vec<f32> = x.iter().map(|&s| s as f32 / 32768.0).collect();
        for part in buf.chunks_mut(333) {
            st.process(part);
        }
        let heard: Vec<i64> = buf.iter().map(|&v| (v * 32768.0) as i64).collect();
        let file = ExportFormat::wav(WavEncoding::Gsm610).encode(&clip_of(&x)).unwrap();
        let theirs = libsndfile_reads(&file);
        let late = x.len().saturating_sub(gsm610::FRAME);
        assert!(heard[..x.len().min(gsm610::FRAME)].iter().all(|&v| v == 0), "{name}");
        same(&heard[x.len() - late..], &theirs[..late], &format!("{name}: stage vs libsndfile"));
        let back = wav::read(&file).unwrap();
        let ours: Vec<i64> = back.channels[0].iter().map(|&v| (v * 32768.0) as i64).collect();
        same(&heard[x.len() - late..], &ours[..late], &format!("{name}: stage vs our reader"));
    }
}

/// Exact sizes: `file_size_with` equals what the encoder writes (with and without loops) for lengths around the
/// 320-sample block, and what `stairstep render` writes. Pattern of tests/io_export.rs.
#[test]
fn file_sizes_are_exact() {
    let f = ExportFormat::wav(WavEncoding::Gsm610);
    for n in [0usize, 1, 159, 160, 161, 319, 320, 321, 641, 8000] {
        let x = speechy(n, n as u64);
        let clip = clip_of(&x);
        assert_eq!(f.encode(&clip).unwrap().len() as u64, f.file_size(n, 1), "{n}");
        if n > 2 {
            let meta = ExportMeta { loops: vec![SampleLoop::forward(1, n as u32 - 1)], unity_note: 60 };
            let bytes = f.encode_with(&clip, &meta).unwrap();
            assert_eq!(bytes.len() as u64, f.file_size_with(n, 1, &meta), "{n} with a loop");
            assert_eq!(wav::read_with_meta(&bytes).unwrap().1.loops, meta.loops);
        }
    }
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("in.wav");
    let x = speechy(12_345, 9);
    std::fs::write(&input, ExportFormat::wav(WavEncoding::PcmS16).encode(&clip_of(&x)).unwrap()).unwrap();
    let out = dir.path().join("out.wav");
    let preset = dir.path().join("gsm.json");
    std::fs::write(&preset, r#"{"format":"stairstep-preset","version":1,"export":{"type":"wav","encoding":"gsm610"}}"#)
        .unwrap();
    let st = std::process::Command::new(common::bin())
        .arg("render")
        .arg("--preset")
        .arg(&preset)
        .arg(&input)
        .arg("-o")
        .arg(&out)
        .output()
        .unwrap();
    assert!(st.status.success(), "{}", String::from_utf8_lossy(&st.stderr));
    let written = std::fs::read(&out).unwrap();
    assert_eq!(written.len() as u64, f.file_size(12_345, 1));
    let mut data = Vec::new();
    gsm610::encode_blocks(&x, &mut data);
    assert_eq!(common::wav_chunks(&written).1, data, "the CLI's file holds the codec's blocks");
}

/// Other rates and channel counts are refused, naming the rate stage or the mono preparation to add.
#[test]
fn only_8000_hz_mono() {
    let x = speechy(1000, 3);
    let at_16k = Clip::new(16_000, clip_of(&x).channels).unwrap();
    let e = ExportFormat::wav(WavEncoding::Gsm610).encode(&at_16k).unwrap_err().to_string();
    assert!(e.contains("add a rate stage with rate_hz 8000"), "{e}");
    let stereo = Clip::new(8000, vec![clip_of(&x).channels[0].clone(); 2]).unwrap();
    let e = ExportFormat::wav(WavEncoding::Gsm610).encode(&stereo).unwrap_err().to_string();
    assert!(e.contains("`channels`") && e.contains("mono"), "{e}");
    let p =
        Preset::from_json(r#"{"format":"stairstep-preset","version":1,"stages":[{"kind":"codec","codec":"gsm610"}]}"#)
            .unwrap();
    let e = match stairstep::render::render(&p, &Clip::new(44_100, clip_of(&x).channels).unwrap()) {
        Ok(_) => panic!("gsm610 at 44.1 kHz should be refused"),
        Err(e) => e.to_string(),
    };
    assert!(e.contains("stages[0]") && e.contains("add a rate stage with rate_hz 8000"), "{e}");
}

/// Arbitrary bytes never make the decoder or the reader panic: random 65-byte blocks, and random `data` behind a
/// valid GSM 6.10 header (with odd lengths and a `fact` that disagrees).
#[test]
fn arbitrary_blocks_never_panic() {
    let mut rng = stairstep::rng::Pcg32::new(42, 42);
    for round in 0..300 {
        let n = (rng.next_u32() % 2000) as usize;
        let data: Vec<u8> = (0..n).map(|_| rng.next_u32() as u8).collect();
        let (pcm, rest) = gsm610::decode_blocks(&data, u64::MAX);
        assert_eq!((pcm.len(), rest), (n / 65 * 320, n % 65));
        let mut file = ExportFormat::wav(WavEncoding::Gsm610).encode(&clip_of(&speechy(640, round))).unwrap();
        let (_, body) = common::wav_chunks(&file);
        let at = file.len() - body.len();
        file.truncate(at);
        file.extend_from_slice(&data);
        let _ = wav::read_with_meta(&file);
    }
}
