//! Outside checks of reading FLAC, AIFF/AIFF-C, CAF (PCM and ALAC), Ogg Vorbis and MP3 (`io::decode`, through
//! symphonia) and of the AIFF/AIFF-C export (`io::aiff`). The source of truth, named beside each check, is
//! libsndfile 1.2 through Python `soundfile` (pinned in tests/python/requirements.txt): it writes the files we
//! read, decodes them for comparison, and reads the files we write — loop markers included, through libsndfile's
//! own `SFC_GET_INSTRUMENT` / `SFC_SET_INSTRUMENT` commands (soundfile has no Python wrapper for them; they are
//! called through soundfile's cffi handle).

#![cfg(not(target_arch = "wasm32"))]

mod common;

use serde_json::Value;
use stairstep::io::decode::{read_any, Limits, WAV_READER};
use stairstep::io::{AiffEncoding, ExportFormat, ExportMeta, SampleLoop};
use stairstep::rng::Pcg32;
use stairstep::sample::pcm_code;
use stairstep::Clip;
use std::path::Path;

/// Python prelude: libsndfile through soundfile, and its instrument (loop) commands through soundfile's cffi handle.
const PRELUDE: &str = r#"
import sys, json, struct, warnings
warnings.simplefilter('ignore')
import numpy as np
import soundfile as sf
from soundfile import _snd, _ffi
SFC_GET_INSTRUMENT, SFC_SET_INSTRUMENT = 0x10D0, 0x10D1
# SF_INSTRUMENT (sndfile.h): int gain; char basenote, detune, velocity_lo, velocity_hi, key_lo, key_hi;
# int loop_count; struct { int mode; uint32 start, end, count; } loops[16]  -> 272 bytes.
INST = '<i6b2xi' + 'iIII' * 16
def get_loops(f):
    buf = _ffi.new('char[272]')
    if not _snd.sf_command(f._file, SFC_GET_INSTRUMENT, buf, 272):
        return None
    v = struct.unpack(INST, bytes(_ffi.buffer(buf)))
    return {'basenote': v[1], 'loops': [list(v[8 + 4 * i: 12 + 4 * i]) for i in range(v[7])]}
def set_loop(f, start, end, basenote):
    v = [0, basenote, 0, 1, 127, 0, 127, 1] + [801, start, end, 0] + [0] * 60
    buf = _ffi.new('char[272]', struct.pack(INST, *v))
    assert _snd.sf_command(f._file, SFC_SET_INSTRUMENT, buf, 272)
args = json.loads(sys.stdin.read())
"#;

fn py(code: &str, args: &Value) -> Vec<u8> {
    common::run_python(&format!("{PRELUDE}{code}"), args.to_string().as_bytes())
}

/// What libsndfile decodes from a file: rate, channels, frames, samples as float32 (interleaved), loops.
struct Reference {
    rate: u32,
    channels: usize,
    frames: usize,
    samples: Vec<f32>,
    loops: Value,
}

/// Reads `path` with libsndfile (float32, its own integer scaling 2^−(bits−1)).
fn libsndfile_read(path: &Path) -> Reference {
    let out = py(
        r#"
with sf.SoundFile(args['path']) as f:
    x = f.read(dtype='float32', always_2d=True)
    head = json.dumps({'rate': f.samplerate, 'channels': f.channels, 'frames': f.frames, 'loops': get_loops(f)})
sys.stdout.buffer.write(head.encode() + b'\n' + x.astype('<f4').tobytes())
"#,
        &serde_json::json!({ "path": path }),
    );
    let nl = out.iter().position(|&b| b == b'\n').expect("header line");
    let head: Value = serde_json::from_slice(&out[..nl]).unwrap();
    let samples = out[nl + 1..].chunks_exact(4).map(|b| f32::from_le_bytes(b.try_into().unwrap())).collect();
    Reference {
        rate: head["rate"].as_u64().unwrap() as u32,
        channels: head["channels"].as_u64().unwrap() as usize,
        frames: head["frames"].as_u64().unwrap() as usize,
        samples,
        loops: head["loops"].clone(),
    }
}

/// Writes `path` with libsndfile: `frames` frames of `channels` channels at `rate`, from numpy's seeded generator —
/// uniform noise over the whole range with both extremes (`noise`), or a chord of sines at 0.3 (for lossy codecs).
fn libsndfile_write(path: &Path, format: &str, subtype: &str, rate: u32, channels: usize, frames: usize, noise: bool) {
    py(
        r#"
n, ch = args['frames'], args['channels']
if args['noise']:
    x = np.random.default_rng(7).uniform(-1.0, 1.0, (n, ch))
    x[0, :] = -1.0
    x[1, :] = 1.0 - 2.0 ** -31
else:
    t = np.arange(n)[:, None] / args['rate']
    x = 0.3 * np.sin(2 * np.pi * np.array([220.0, 330.0])[:ch] * t) + 0.2 * np.sin(2 * np.pi * 1234.5 * t)
sf.write(args['path'], x, args['rate'], format=args['format'], subtype=args['subtype'])
"#,
        &serde_json::json!({ "path": path, "format": format, "subtype": subtype, "rate": rate,
                             "channels": channels, "frames": frames, "noise": noise }),
    );
}

fn decode(path: &Path) -> stairstep::io::decode::Decoded {
    let bytes = std::fs::read(path).unwrap();
    read_any(&bytes, path.extension().and_then(|e| e.to_str()), Limits::default())
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn interleaved(clip: &Clip) -> Vec<f32> {
    (0..clip.frames()).flat_map(|i| clip.channels.iter().map(move |c| c[i])).collect()
}

#[test]
fn lossless_files_written_by_libsndfile_read_exactly() {
    let dir = tempfile::tempdir().unwrap();
    // (file, libsndfile format, subtype, rate, channels, reader expected). ALAC at 20 to 32 bits is written from
    // the tone chord, not full-scale noise: for incompressible noise libsndfile's ALAC encoder writes escape
    // (uncompressed) frames that libsndfile itself does not decode back to what it wrote at those depths, so its
    // decode is no reference there (16-bit noise round-trips and is checked).
    let cases = [
        ("s8.flac", "FLAC", "PCM_S8", 8_000, 1, "symphonia flac/flac"),
        ("s16.flac", "FLAC", "PCM_16", 44_100, 2, "symphonia flac/flac"),
        ("s24.flac", "FLAC", "PCM_24", 96_000, 2, "symphonia flac/flac"),
        ("s8.aiff", "AIFF", "PCM_S8", 11_025, 1, "symphonia aiff/pcm_s8"),
        ("u8.aiff", "AIFF", "PCM_U8", 11_025, 1, "symphonia aiff/"),
        ("s16.aiff", "AIFF", "PCM_16", 44_100, 2, "symphonia aiff/pcm_s16be"),
        ("s24.aiff", "AIFF", "PCM_24", 48_000, 2, "symphonia aiff/pcm_s24be"),
        ("s32.aiff", "AIFF", "PCM_32", 22_050, 1, "symphonia aiff/pcm_s32be"),
        ("f32.aiff", "AIFF", "FLOAT", 44_100, 2, "symphonia aiff/pcm_f32be"),
        ("s16.caf", "CAF", "PCM_16", 44_100, 2, "symphonia caf/pcm_s16be"),
        ("s24.caf", "CAF", "PCM_24", 32_000, 1, "symphonia caf/pcm_s24be"),
        ("alac16.caf", "CAF", "ALAC_16", 44_100, 2, "symphonia caf/alac"),
        ("alac20.caf", "CAF", "ALAC_20", 44_100, 1, "symphonia caf/alac"),
        ("alac24.caf", "CAF", "ALAC_24", 48_000, 2, "symphonia caf/alac"),
        ("alac32.caf", "CAF", "ALAC_32", 48_000, 1, "symphonia caf/alac"),
        ("s24.wav", "WAV", "PCM_24", 44_100, 2, WAV_READER),
    ];
    for (name, format, subtype, rate, channels, reader) in cases {
        let path = dir.path().join(name);
        // 10,007 frames: not a multiple of any codec's block or packet size.
        let noise = !(subtype.starts_with("ALAC") && subtype != "ALAC_16");
        libsndfile_write(&path, format, subtype, rate, channels, 10_007, noise);
        let want = libsndfile_read(&path);
        let got = decode(&path);
        assert!(got.decoder.starts_with(reader), "{name}: read by {}", got.decoder);
        // libsndfile's decode of the file it wrote is the reference: same shape, every sample bit for bit.
        assert_eq!((got.clip.sample_rate, got.clip.channel_count()), (want.rate, want.channels), "{name}");
        assert_eq!(got.clip.frames(), want.frames, "{name}: frames");
        let ours = interleaved(&got.clip);
        let first_diff = ours.iter().zip(&want.samples).position(|(a, b)| a.to_bits() != b.to_bits());
        assert_eq!(first_diff, None, "{name}: first differing sample (interleaved index)");
        assert!(got.warnings.is_empty(), "{name}: {:?}", got.warnings);
    }
}

/// Index lag (ours relative to libsndfile's) that best aligns two mono signals, searched over ±`max`.
fn best_lag(ours: &[f32], theirs: &[f32], max: i64) -> (i64, f64) {
    let mut best = (0, f64::MIN);
    for lag in -max..=max {
        let mut dot = 0.0f64;
        for (i, &t) in theirs.iter().enumerate() {
            let j = i as i64 + lag;
            if j >= 0 && (j as usize) < ours.len() {
                dot += t as f64 * ours[j as usize] as f64;
            }
        }
        if dot > best.1 {
            best = (lag, dot);
        }
    }
    best
}

fn snr_db(reference: &[f32], other: &[f32]) -> f64 {
    let p: f64 = reference.iter().map(|&x| (x as f64).powi(2)).sum();
    let e: f64 = reference.iter().zip(other).map(|(&a, &b)| (a as f64 - b as f64).powi(2)).sum();
    10.0 * (p / e).log10()
}

#[test]
fn lossy_files_match_libsndfile_within_its_decoder_delay() {
    let dir = tempfile::tempdir().unwrap();
    for (name, format, subtype, reader, min_snr_db) in [
        ("tone.ogg", "OGG", "VORBIS", "symphonia ogg/vorbis", 100.0),
        ("tone.mp3", "MP3", "MPEG_LAYER_III", "symphonia mp3/mp3", 100.0),
    ] {
        let path = dir.path().join(name);
        libsndfile_write(&path, format, subtype, 44_100, 2, 88_200, false);
        let want = libsndfile_read(&path);
        let got = decode(&path);
        assert!(got.decoder.starts_with(reader), "{name}: read by {}", got.decoder);
        assert_eq!((got.clip.sample_rate, got.clip.channel_count()), (want.rate, want.channels), "{name}");
        // libsndfile trims the encoder delay and padding (Ogg granule positions; the LAME header of the MP3 it
        // wrote through LAME), and reports the frame count it decodes: both decoders must agree on the length and
        // be aligned to the sample.
        assert_eq!(got.clip.frames(), want.frames, "{name}: frames (libsndfile's count)");
        for c in 0..want.channels {
            let theirs: Vec<f32> = want.samples.iter().skip(c).step_by(want.channels).copied().collect();
            let (lag, _) = best_lag(&got.clip.channels[c], &theirs, 2_000);
            assert_eq!(lag, 0, "{name} channel {c}: our decode is shifted by {lag} frames against libsndfile's");
            // Two independent decoders of the same stream agree to float rounding (measured: 127 dB for MP3 against
            // libsndfile's mpg123, 136 dB for Vorbis against libvorbis), far above the codecs' own error.
            let snr = snr_db(&theirs, &got.clip.channels[c]);
            assert!(snr > min_snr_db, "{name} channel {c}: {snr:.1} dB against libsndfile's decode");
        }
    }
}

/// A stereo clip of uniform noise over the whole range, both extremes included (±1.0: the quantizer's clamp).
fn test_clip(rate: u32) -> Clip {
    let mut rng = Pcg32::new(99, 5);
    let frames = 4_099;
    let chans = (0..2)
        .map(|c| {
            (0..frames)
                .map(|i| {
                    let u = (rng.next_u32() as f64 / 4_294_967_296.0) * 2.0 - 1.0;
                    match (i + c) % 5 {
                        0 => -1.0,
                        1 => 1.0,
                        _ => u as f32,
                    }
                })
                .collect()
        })
        .collect();
    Clip::new(rate, chans).unwrap()
}

#[test]
fn libsndfile_reads_our_aiff_exports_sample_for_sample_with_their_loops() {
    let dir = tempfile::tempdir().unwrap();
    for (enc, bits, rate) in [
        (AiffEncoding::PcmS8, 8, 8_000),
        (AiffEncoding::PcmS16, 16, 44_100),
        (AiffEncoding::PcmS24, 24, 48_000),
        (AiffEncoding::Float32, 0, 22_050),
        (AiffEncoding::PcmS16, 16, 11_025),
    ] {
        let clip = test_clip(rate);
        let format = ExportFormat::Aiff { encoding: enc };
        let meta = ExportMeta { loops: vec![SampleLoop::forward(100, 3_999)], unity_note: 64 };
        let bytes = format.encode_with(&clip, &meta).unwrap();
        assert_eq!(bytes.len() as u64, format.file_size_with(clip.frames(), 2, &meta), "{enc:?}: file_size_with");
        let path = dir.path().join(format!("out-{}-{rate}.{}", enc.name(), format.extension()));
        std::fs::write(&path, &bytes).unwrap();
        let got = libsndfile_read(&path);
        // libsndfile: rate from the 80-bit extended field, channels, frames.
        assert_eq!((got.rate, got.channels, got.frames), (rate, 2, clip.frames()), "{enc:?}");
        // Every sample: what libsndfile decodes equals our quantization of the clip (code / 2^(bits−1); float32 as is).
        let want: Vec<f32> = interleaved(&clip)
            .into_iter()
            .map(|x| if bits == 0 { x } else { (pcm_code(x, bits) as f64 / (1u64 << (bits - 1)) as f64) as f32 })
            .collect();
        let first_diff = got.samples.iter().zip(&want).position(|(a, b)| a.to_bits() != b.to_bits());
        assert_eq!(first_diff, None, "{enc:?}: first differing sample");
        // libsndfile's instrument chunk reading (aiff.c: the sustain loop's MARK positions, mode forward = 801):
        // start at the first looped frame, end at the marker after the last looped frame.
        let loops = &got.loops;
        assert_eq!(loops["basenote"], 64, "{enc:?}: {loops}");
        assert_eq!(loops["loops"][0], serde_json::json!([801, 100, 4_000, 0]), "{enc:?}: {loops}");
        // And our own reader takes the same loop back (frames 100..4000, end exclusive).
        assert_eq!(decode(&path).file_loop, Some((100, 4_000)));
    }
}

#[test]
fn aiff_loop_markers_read_as_libsndfile_reads_them() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("looped.aiff");
    // libsndfile 1.2 accepts SFC_SET_INSTRUMENT for AIFF but writes no MARK/INST, so the file is built by hand from
    // the AIFF 1.3 layout (struct, big-endian): two markers listed end-first with ids 7 and 3, an INST whose sustain
    // loop (forward) goes from marker 3 to marker 7. libsndfile's reading of it is the reference.
    py(
        r#"
def pstr(s):
    b = bytes([len(s)]) + s
    return b + b'\0' * (len(b) % 2)
def chunk(cid, body):
    return cid + struct.pack('>I', len(body)) + body + b'\0' * (len(body) % 2)
n = 5000
rate = b'\x40\x0e\xac\x44' + b'\0' * 6  # 44,100 Hz
comm = struct.pack('>hIh', 1, n, 16) + rate
mark = struct.pack('>H', 2) + struct.pack('>HI', 7, 3000) + pstr(b'end') + struct.pack('>HI', 3, 500) + pstr(b'begin')
inst = bytes([62, 0, 0, 127, 1, 127]) + struct.pack('>h', 0) + struct.pack('>hhh', 1, 3, 7) + struct.pack('>hhh', 0, 0, 0)
ssnd = struct.pack('>II', 0, 0) + b'\0' * (2 * n)
body = b'AIFF' + chunk(b'COMM', comm) + chunk(b'MARK', mark) + chunk(b'INST', inst) + chunk(b'SSND', ssnd)
open(args['path'], 'wb').write(b'FORM' + struct.pack('>I', len(body)) + body)
"#,
        &serde_json::json!({ "path": path }),
    );
    // libsndfile (aiff.c): sustain loop 500..3000, forward (801), base note 62.
    let theirs = libsndfile_read(&path);
    assert_eq!(theirs.loops["loops"][0], serde_json::json!([801, 500, 3000, 0]), "{}", theirs.loops);
    assert_eq!(theirs.loops["basenote"], 62);
    let ours = decode(&path);
    assert_eq!(ours.file_loop, Some((500, 3_000)));
    assert!(ours.decoder.starts_with("symphonia aiff/"), "{}", ours.decoder);
}

fn run(args: &[&str]) -> std::process::Output {
    std::process::Command::new(common::bin()).args(args).output().unwrap()
}

#[test]
fn damaged_files_are_clear_errors_with_exit_3() {
    let dir = tempfile::tempdir().unwrap();
    let mut cases = Vec::new();
    for (name, format, subtype, noise) in [
        ("a.flac", "FLAC", "PCM_16", true),
        ("a.aiff", "AIFF", "PCM_24", true),
        ("a.mp3", "MP3", "MPEG_LAYER_III", false),
        ("a.caf", "CAF", "ALAC_16", true),
    ] {
        let path = dir.path().join(name);
        libsndfile_write(&path, format, subtype, 44_100, 2, 30_000, noise);
        let good = std::fs::read(&path).unwrap();
        // Each file is first checked to be readable as written (so the damage is what fails).
        let out = run(&["analyze", path.to_str().unwrap()]);
        assert!(out.status.success(), "{name}: {}", String::from_utf8_lossy(&out.stderr));
        cases.push((format!("half-{name}"), good[..good.len() / 2].to_vec(), "truncated"));
        // 60 bytes of an MP3 hold no whole frame header: nothing identifies it any more.
        let head_says = if format == "MP3" { "not a sound file" } else { "truncated" };
        cases.push((format!("head-{name}"), good[..60].to_vec(), head_says));
        // Garbled bytes in the coded data: FLAC frames carry CRCs, MP3 and ALAC frames have structure to break.
        // (Garbled PCM in an AIFF is just other samples: nothing can tell, so it is not a case.)
        if format != "AIFF" {
            let mut garbled = good.clone();
            for i in (good.len() / 4..good.len()).step_by(61) {
                garbled[i] ^= 0x5A;
            }
            cases.push((format!("garbled-{name}"), garbled, ""));
        }
    }
    let mut rng = Pcg32::new(3, 3);
    let noise: Vec<u8> = (0..4_000).map(|_| rng.next_u32() as u8).collect();
    for name in ["noise.flac", "noise.aiff", "noise.mp3"] {
        cases.push((name.to_string(), noise.clone(), "not a sound file"));
    }
    for (name, bytes, says) in cases {
        let path = dir.path().join(&name);
        std::fs::write(&path, &bytes).unwrap();
        let out = run(&["analyze", path.to_str().unwrap()]);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(3), "{name}: {err}");
        assert!(err.contains(&name) && err.contains(says), "{name}: {err}");
        assert!(!err.contains("panicked"), "{name}: {err}");
    }
}

/// The page reads AIFF/AIFF-C with the core's own reader (`io::read::read_own`; symphonia would add over 100 kB
/// gzipped to the wasm); the CLI reads them with symphonia. Every encoding libsndfile writes must read to the same
/// floats, bit for bit, with the same rate, shape and loop, so the page's render is the CLI's. libsndfile writes the
/// files (AIFF for integer PCM, AIFF-C `fl32`, `fl64`, `ulaw`, `alaw`, `raw `) and is the reference where
/// symphonia's reading is not checked above.
#[test]
fn the_pages_aiff_reader_reads_what_symphonia_and_libsndfile_read() {
    use stairstep::io::read::{read_own, AIFF_READER};
    let dir = tempfile::tempdir().unwrap();
    let cases = [
        ("PCM_S8", 11_025, 1),
        ("PCM_U8", 8_000, 2),
        ("PCM_16", 44_100, 2),
        ("PCM_24", 48_000, 2),
        ("PCM_32", 22_050, 1),
        ("FLOAT", 44_100, 2),
        ("DOUBLE", 96_000, 1),
        ("ULAW", 8_000, 1),
        ("ALAW", 8_000, 2),
    ];
    for (subtype, rate, channels) in cases {
        let path = dir.path().join(format!("{subtype}.aiff"));
        libsndfile_write(&path, "AIFF", subtype, rate, channels, 10_007, true);
        let bytes = std::fs::read(&path).unwrap();
        let ours = read_own(&bytes, Limits::default()).unwrap_or_else(|e| panic!("{subtype}: {e}"));
        assert_eq!(ours.decoder, AIFF_READER);
        let want = libsndfile_read(&path);
        assert_eq!((ours.clip.sample_rate, ours.clip.channel_count()), (rate, channels), "{subtype}");
        // libsndfile writes an 8-bit mono file's pad byte into `SSND` and counts it in `COMM` (10,008 frames), yet
        // reads back 10,007; symphonia and the page's reader both read the 10,008 that `COMM` declares.
        assert!(ours.clip.frames() - want.frames <= 1, "{subtype}: {} frames", ours.clip.frames());
        let got = interleaved(&ours.clip);
        let differ = got.iter().zip(&want.samples).filter(|(a, b)| a.to_bits() != b.to_bits()).count();
        assert_eq!(differ, 0, "{subtype}: {differ} samples differ from libsndfile's");
        match read_any(&bytes, Some("aiff"), Limits::default()) {
            Ok(sym) => {
                assert_eq!(ours.clip, sym.clip, "{subtype}: the page's reader and the CLI's symphonia differ");
                assert_eq!(ours.file_loop, sym.file_loop, "{subtype}");
            }
            Err(e) => panic!("{subtype}: symphonia cannot read it ({e}), so the CLI would refuse what the page reads"),
        }
    }
    // Our own exports, with a sustain loop: the same loop as the CLI reads.
    let clip = test_clip(32_000);
    for enc in AiffEncoding::ALL {
        let meta = ExportMeta { loops: vec![SampleLoop::forward(1_000, 2_999)], ..Default::default() };
        let bytes = ExportFormat::Aiff { encoding: enc }.encode_with(&clip, &meta).unwrap();
        let ours = read_own(&bytes, Limits::default()).unwrap();
        let sym = read_any(&bytes, Some("aiff"), Limits::default()).unwrap();
        assert_eq!((&ours.clip, ours.file_loop), (&sym.clip, sym.file_loop), "{enc:?}");
        assert_eq!(ours.file_loop, Some((1_000, 3_000)), "{enc:?}");
    }
}
