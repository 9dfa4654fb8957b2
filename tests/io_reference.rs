//! Outside checks of the readers and writers: every claim is verified by a library this project did not write.
//! The source of truth is named beside each check:
//!
//! - libsndfile 1.2 through Python `soundfile` (reads every format, including IMA ADPCM);
//! - `scipy.io.wavfile` (PCM and IEEE float only);
//! - CPython's `audioop` (G.711 reference: `lin2ulaw`, `ulaw2lin`, `lin2alaw`, `alaw2lin`);
//! - CPython's `chunk` module and `struct` (RIFF chunk walking, the `smpl` chunk);
//! - numpy's `frombuffer` / `unpackbits` (raw layouts).

mod common;

use serde_json::Value;
use stairstep::codec::ima_adpcm as adpcm;
use stairstep::io::wav::{self, read, read_with_meta};
use stairstep::io::{BitOrder, Endian, ExportFormat, ExportMeta, SampleLoop, WavEncoding};
use stairstep::rng::Pcg32;
use stairstep::sample::pcm_code;
use stairstep::stages::adpcm::{AdpcmParams, AdpcmRoundTrip};
use stairstep::stages::Stage;
use stairstep::Clip;

/// Runs Python with the file on stdin; the snippet prints one JSON value.
fn py(code: &str, stdin: &[u8]) -> Value {
    let prelude = "import sys, io, json, struct, warnings\nwarnings.simplefilter('ignore')\nimport numpy as np\n\
                   import soundfile as sf\nb = sys.stdin.buffer.read()\n";
    let out = common::run_python(&format!("{prelude}{code}"), stdin);
    serde_json::from_slice(&out).unwrap_or_else(|e| panic!("{e}: {}", String::from_utf8_lossy(&out)))
}

fn ints(v: &Value) -> Vec<i64> {
    v.as_array().expect("array").iter().map(|x| x.as_i64().expect("int")).collect()
}

/// A clip of random `bits`-bit codes (so every encoding represents it exactly), full range, edges included.
fn code_clip(bits: u32, channels: usize, frames: usize, seed: u64) -> (Clip, Vec<Vec<i64>>) {
    let mut rng = Pcg32::new(seed, 11);
    let half = 1i64 << (bits - 1);
    let codes: Vec<Vec<i64>> = (0..channels)
        .map(|c| {
            (0..frames)
                .map(|i| match (i + c) % 7 {
                    0 => -half,
                    1 => half - 1,
                    2 => 0,
                    _ => (rng.next_u32() as i64 % (2 * half)) - half,
                })
                .collect()
        })
        .collect();
    let scale = 1.0 / half as f64;
    let chans: Vec<Vec<f32>> = codes.iter().map(|c| c.iter().map(|&k| (k as f64 * scale) as f32).collect()).collect();
    // 32-bit codes do not all survive f32: what the writer must write is the code of the f32 value.
    let codes = chans.iter().map(|c| c.iter().map(|&x| pcm_code(x, bits) as i64).collect()).collect();
    (Clip::new(22_050, chans).unwrap(), codes)
}

fn interleave(codes: &[Vec<i64>]) -> Vec<i64> {
    (0..codes[0].len()).flat_map(|i| codes.iter().map(move |c| c[i])).collect()
}

fn wav(enc: WavEncoding) -> ExportFormat {
    ExportFormat::Wav { encoding: enc, block_align: None }
}

/// libsndfile and scipy read every PCM and float export back to exactly the samples written.
#[test]
fn pcm_and_float_exports_read_back_exactly_by_libsndfile_and_scipy() {
    for (enc, bits) in
        [(WavEncoding::PcmU8, 8), (WavEncoding::PcmS16, 16), (WavEncoding::PcmS24, 24), (WavEncoding::PcmS32, 32)]
    {
        for ch in [1, 2, 3] {
            let frames = 257;
            let (clip, codes) = code_clip(bits, ch, frames, bits as u64 * 10 + ch as u64);
            let bytes = wav(enc).encode(&clip).unwrap();
            assert_eq!(bytes.len() as u64, wav(enc).file_size(frames, ch));
            // libsndfile: int32 output is the code left-justified in 32 bits.
            let v = py(
                "d, r = sf.read(io.BytesIO(b), dtype='int32', always_2d=True)\n\
                 info = sf.info(io.BytesIO(b))\n\
                 print(json.dumps([r, d.shape[1], info.subtype, d.reshape(-1).tolist()]))",
                &bytes,
            );
            assert_eq!(v[0], 22_050);
            assert_eq!(v[1], ch);
            let want_subtype = if bits == 8 { "PCM_U8".to_string() } else { format!("PCM_{bits}") };
            assert_eq!(v[2], want_subtype.as_str());
            let shift = 32 - bits;
            let want: Vec<i64> = interleave(&codes).iter().map(|&k| k << shift).collect();
            assert_eq!(ints(&v[3]), want, "libsndfile {enc:?} {ch} ch");
            // scipy.io.wavfile: u8 unsigned, 24-bit left-justified in int32, others as stored.
            let v = py(
                "from scipy.io import wavfile\nr, d = wavfile.read(io.BytesIO(b))\n\
                 print(json.dumps([r, str(d.dtype), d.reshape(-1).astype(np.int64).tolist()]))",
                &bytes,
            );
            assert_eq!(v[0], 22_050);
            let want: Vec<i64> = interleave(&codes)
                .iter()
                .map(|&k| match bits {
                    8 => k + 128,
                    24 => k << 8,
                    _ => k,
                })
                .collect();
            assert_eq!(ints(&v[2]), want, "scipy {enc:?} {ch} ch ({})", v[1]);
        }
    }
    // Float: arbitrary values (not just a grid) survive bit for bit.
    let mut rng = Pcg32::new(5, 5);
    let chans: Vec<Vec<f32>> =
        (0..2).map(|_| (0..300).map(|_| (rng.next_u32() as f32 / u32::MAX as f32) * 2.2 - 1.1).collect()).collect();
    let clip = Clip::new(44_100, chans).unwrap();
    let bytes = wav(WavEncoding::Float32).encode(&clip).unwrap();
    let want: Vec<u32> = clip.interleaved().iter().map(|x| x.to_bits()).collect();
    let v = py(
        "d, r = sf.read(io.BytesIO(b), dtype='float32')\nprint(json.dumps(d.reshape(-1).view(np.uint32).tolist()))",
        &bytes,
    );
    assert_eq!(ints(&v).iter().map(|&x| x as u32).collect::<Vec<_>>(), want, "libsndfile float32");
    let v = py(
        "from scipy.io import wavfile\nr, d = wavfile.read(io.BytesIO(b))\n\
         print(json.dumps([str(d.dtype), d.reshape(-1).view(np.uint32).tolist()]))",
        &bytes,
    );
    assert_eq!(v[0], "float32");
    assert_eq!(ints(&v[1]).iter().map(|&x| x as u32).collect::<Vec<_>>(), want, "scipy float32");
}

/// Every 16-bit value μ-law/A-law encoded by the WAV writer equals `audioop.lin2ulaw` / `lin2alaw`; every one of the
/// 256 codes decoded by the reader equals `audioop.ulaw2lin` / `alaw2lin`; libsndfile decodes the exports the same.
#[test]
fn g711_is_bit_exact_with_audioop_and_libsndfile() {
    let all: Vec<f32> = (i16::MIN..=i16::MAX).map(|k| k as f32 / 32768.0).collect();
    let all_bytes: Vec<u8> = (i16::MIN..=i16::MAX).flat_map(|k| k.to_le_bytes()).collect();
    let clip = Clip::new(8000, vec![all]).unwrap();
    for (enc, tag, enc_fn, dec_fn, subtype) in [
        (WavEncoding::Mulaw, 7u16, "lin2ulaw", "ulaw2lin", "ULAW"),
        (WavEncoding::Alaw, 6u16, "lin2alaw", "alaw2lin", "ALAW"),
    ] {
        let bytes = wav(enc).encode(&clip).unwrap();
        assert_eq!(bytes.len() as u64, wav(enc).file_size(65_536, 1));
        // Layout: 18-byte fmt (cbSize 0), fact, data.
        assert_eq!(&bytes[12..20], b"fmt \x12\0\0\0");
        assert_eq!(u16::from_le_bytes([bytes[20], bytes[21]]), tag);
        assert_eq!(&bytes[36..38], &[0, 0]);
        assert_eq!(&bytes[38..50], b"fact\x04\0\0\0\0\0\x01\0");
        assert_eq!(&bytes[50..54], b"data");
        let codes = &bytes[58..];
        assert_eq!(codes.len(), 65_536);
        // audioop encodes the same 65,536 samples to the same codes.
        let want = common::run_python(
            &format!(
                "import sys, audioop, warnings\nwarnings.simplefilter('ignore')\n\
                 sys.stdout.buffer.write(audioop.{enc_fn}(sys.stdin.buffer.read(), 2))"
            ),
            &all_bytes,
        );
        assert_eq!(codes, &want[..], "{enc_fn}");
        // libsndfile decodes our file as audioop decodes the codes.
        let v = py(
            &format!(
                "import audioop\nd, r = sf.read(io.BytesIO(b), dtype='int16')\ninfo = sf.info(io.BytesIO(b))\n\
                 codes = b[58:]\nref = np.frombuffer(audioop.{dec_fn}(codes, 2), '<i2')\n\
                 print(json.dumps([info.subtype, bool((d == ref).all()), int(len(d))]))"
            ),
            &bytes,
        );
        assert_eq!(v, serde_json::json!([subtype, true, 65_536]), "libsndfile {subtype}");
        // All 256 codes through the reader.
        let mut file = b"RIFF\0\0\0\0WAVEfmt \x12\0\0\0".to_vec();
        file.extend_from_slice(&tag.to_le_bytes());
        file.extend_from_slice(&[1, 0, 0x40, 0x1F, 0, 0, 0x40, 0x1F, 0, 0, 1, 0, 8, 0, 0, 0]);
        file.extend_from_slice(b"data\0\x01\0\0");
        file.extend(0..=255u8);
        let riff = (file.len() - 8) as u32;
        file[4..8].copy_from_slice(&riff.to_le_bytes());
        let ours: Vec<i64> = read(&file).unwrap().channels[0].iter().map(|&x| (x * 32768.0) as i64).collect();
        let v = py(
            &format!(
                "import audioop\nprint(json.dumps(np.frombuffer(audioop.{dec_fn}(bytes(range(256)), 2), '<i2').tolist()))"
            ),
            &[],
        );
        assert_eq!(ours, ints(&v), "{dec_fn} over all 256 codes");
    }
}

/// A clip whose ADPCM encoding exercises the whole step table: silence, a slow sine, a loud square and noise.
fn busy_clip(channels: usize, frames: usize, rate: u32) -> Clip {
    let mut rng = Pcg32::new(99, channels as u64);
    let chans = (0..channels)
        .map(|c| {
            (0..frames)
                .map(|i| {
                    let t = i as f32 / frames as f32;
                    match (i * 4 / frames.max(1) + c) % 4 {
                        0 => 0.0,
                        1 => 0.7 * (i as f32 * 0.05 * (c + 1) as f32).sin(),
                        2 => {
                            if (i / 40) % 2 == 0 {
                                0.99
                            } else {
                                -1.0
                            }
                        }
                        _ => (rng.next_u32() as f32 / u32::MAX as f32 - 0.5) * t,
                    }
                })
                .collect()
        })
        .collect();
    Clip::new(rate, chans).unwrap()
}

/// libsndfile decodes our IMA ADPCM exports (mono and stereo, several block sizes, partial last blocks) to exactly
/// the samples our decoder gives, and those are exactly what the `AdpcmRoundTrip` stage outputs.
#[test]
fn ima_adpcm_exports_decode_identically_in_libsndfile() {
    for (ch, block_align, frames) in [
        (1, None, 1),
        (1, None, 505),
        (1, None, 1234),
        (1, Some(512), 3000),
        (1, Some(1024), 2500),
        (1, Some(36), 100),
        (2, None, 1000),
        (2, Some(2048), 4000),
        (2, Some(72), 333),
    ] {
        let clip = busy_clip(ch, frames, 22_050);
        let f = ExportFormat::Wav { encoding: WavEncoding::ImaAdpcm, block_align };
        let bytes = f.encode(&clip).unwrap();
        assert_eq!(bytes.len() as u64, f.file_size(frames, ch), "{ch} {block_align:?} {frames}");
        let (ours, meta) = read_with_meta(&bytes).unwrap();
        assert!(meta.warnings.is_empty(), "{:?}", meta.warnings);
        assert_eq!(meta.fact_frames, Some(frames as u32));
        assert_eq!(ours.frames(), frames);
        let v = py(
            "f = sf.SoundFile(io.BytesIO(b))\nsub, n = f.subtype, f.frames\nd = f.read(dtype='int16', always_2d=True)\n\
             print(json.dumps([sub, n, d.shape[1], d.reshape(-1).tolist()]))",
            &bytes,
        );
        assert_eq!(v[0], "IMA_ADPCM");
        assert_eq!(v[2], ch);
        let theirs = ints(&v[3]);
        // libsndfile reports the whole blocks (it ignores `fact`): compare the frames that are real.
        let n = v[1].as_u64().unwrap() as usize;
        let ba = block_align.map_or(256 * ch, |b| b as usize);
        let spb = adpcm::samples_per_block(ba, ch).unwrap();
        assert_eq!(n, frames.div_ceil(spb) * spb, "libsndfile frame count");
        let ours_i: Vec<i64> = interleave(
            &ours.channels.iter().map(|c| c.iter().map(|&x| (x * 32768.0) as i64).collect()).collect::<Vec<_>>(),
        );
        assert_eq!(&theirs[..frames * ch], &ours_i[..], "{ch} ch, block_align {ba}, {frames} frames");
        // The stage reproduces the export, channel by channel.
        for (c, chan) in clip.channels.iter().enumerate() {
            let mut st = AdpcmRoundTrip::new(&AdpcmParams::for_block_align(ba, ch).unwrap()).unwrap();
            let mut buf = chan.clone();
            for part in buf.chunks_mut(4096) {
                st.process(part);
            }
            assert_eq!(buf, ours.channels[c], "stage, channel {c}");
        }
    }
}

/// libsndfile-written IMA ADPCM (mono and stereo fixtures) decodes in our reader exactly as in libsndfile, with the
/// padding of the last block dropped thanks to the `fact` chunk; the same for every other fixture's format.
#[test]
fn fixtures_decode_as_libsndfile_decodes_them() {
    let dir = common::root().join("tests/fixtures");
    let mut names: Vec<_> = std::fs::read_dir(&dir).unwrap().map(|e| e.unwrap().path()).collect();
    names.sort();
    assert!(names.len() >= 12);
    for path in names {
        let bytes = std::fs::read(&path).unwrap();
        let (clip, meta) = read_with_meta(&bytes).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
        // Samples travel as the bits of float64 values: JSON text would not round-trip them exactly.
        let v = py(
            "f = sf.SoundFile(io.BytesIO(b))\nr, sub = f.samplerate, f.subtype\n\
             d = f.read(dtype='float64', always_2d=True)\n\
             print(json.dumps([r, sub, d.shape[1], [str(x) for x in d.reshape(-1).view(np.uint64)]]))",
            &bytes,
        );
        let name = path.file_name().unwrap().to_string_lossy();
        assert_eq!(v[0].as_u64().unwrap() as u32, clip.sample_rate, "{name}");
        assert_eq!(v[2].as_u64().unwrap() as usize, clip.channel_count(), "{name}");
        let theirs: Vec<f64> =
            v[3].as_array().unwrap().iter().map(|x| f64::from_bits(x.as_str().unwrap().parse().unwrap())).collect();
        let ours = clip.interleaved();
        // libsndfile wrote these ADPCM files with a `fact` of whole blocks (mono) or a wrong one (stereo, which the
        // reader detects): either way both readers return whole blocks.
        assert_eq!(theirs.len(), ours.len(), "{name}: {:?}", meta.warnings);
        for (i, (&a, &b)) in ours.iter().zip(&theirs).enumerate() {
            // Both scale integers by 2^-(bits-1). Ours is f32: exact up to 24 bits; 32-bit PCM is rounded to f32.
            let tol = if v[1] == "PCM_32" { b.abs() * f32::EPSILON as f64 } else { 0.0 };
            assert!((a as f64 - b).abs() <= tol, "{name} sample {i}: ours {a}, libsndfile {b}");
        }
    }
}

/// Import → export → import is lossless for every PCM width and float, starting from files libsndfile wrote; and
/// libsndfile reads our re-export to the same samples it wrote.
#[test]
fn libsndfile_files_survive_import_export_import() {
    for (subtype, enc) in [
        ("PCM_U8", WavEncoding::PcmU8),
        ("PCM_16", WavEncoding::PcmS16),
        ("PCM_24", WavEncoding::PcmS24),
        ("PCM_32", WavEncoding::PcmS32),
        ("FLOAT", WavEncoding::Float32),
    ] {
        // Random 32-bit words: PCM_32 keeps only 24 significant bits in an f32 clip, so there libsndfile's view of
        // our re-export may differ from the original by the f32 rounding (at most 2^7 of 2^31); the other widths
        // are exact.
        let tol = if subtype == "PCM_32" { 128 } else { 0 };
        let code = format!(
            "rng = np.random.default_rng(1)\nx = rng.integers(-2**31, 2**31, size=(400, 2), dtype=np.int64)\n\
             x[0] = -2**31; x[1] = 2**31 - 1; x[2] = 0\n\
             d = (x.astype(np.float64) / 2**31).astype(np.float32) if '{subtype}' == 'FLOAT' else x.astype(np.int32)\n\
             out = io.BytesIO(); sf.write(out, d, 32000, subtype='{subtype}', format='WAV')\n\
             sys.stdout.write(out.getvalue().hex())"
        );
        let hex =
            common::run_python(&format!("import sys, io\nimport numpy as np\nimport soundfile as sf\n{code}"), &[]);
        let theirs: Vec<u8> = (0..hex.len() / 2)
            .map(|i| u8::from_str_radix(std::str::from_utf8(&hex[2 * i..2 * i + 2]).unwrap(), 16).unwrap())
            .collect();
        let (a, meta) = read_with_meta(&theirs).unwrap();
        assert_eq!(meta.format.encoding(), Some(enc), "{subtype}");
        let ours = wav(enc).encode(&a).unwrap();
        let b = read(&ours).unwrap();
        assert_eq!(a, b, "{subtype}: import → export → import");
        // libsndfile reads our file to the very samples it wrote.
        let v = py(
            &format!(
                "dt = 'float32' if '{subtype}' == 'FLOAT' else 'int32'\n\
                 mine, _ = sf.read(io.BytesIO(b[:{n}]), dtype=dt)\nback, _ = sf.read(io.BytesIO(b[{n}:]), dtype=dt)\n\
                 ok = mine.shape == back.shape and bool((np.abs(mine.astype(np.float64) - back) <= {tol}).all())\n\
                 print(json.dumps(ok))",
                n = theirs.len()
            ),
            &[theirs.clone(), ours].concat(),
        );
        assert_eq!(v, Value::Bool(true), "{subtype}: libsndfile sees the same samples");
    }
}

/// The `smpl` chunk the writer adds is found by Python's `chunk` module and decodes with `struct` to the loops given.
#[test]
fn smpl_chunk_parses_in_python() {
    let clip = busy_clip(2, 1000, 44_100);
    let meta = ExportMeta {
        loops: vec![SampleLoop::forward(100, 899), SampleLoop { start: 0, end: 999, loop_type: 1, play_count: 4 }],
        unity_note: 72,
    };
    for enc in [WavEncoding::PcmS16, WavEncoding::PcmU8, WavEncoding::ImaAdpcm, WavEncoding::Mulaw] {
        let f = wav(enc);
        let bytes = f.encode_with(&clip, &meta).unwrap();
        assert_eq!(bytes.len() as u64, f.file_size_with(1000, 2, &meta));
        let v = py(
            "import chunk\nf = io.BytesIO(b)\nassert f.read(4) == b'RIFF'\nsize = struct.unpack('<I', f.read(4))[0]\n\
             assert size == len(b) - 8 and f.read(4) == b'WAVE'\nids, smpl = [], None\n\
             while True:\n    try:\n        c = chunk.Chunk(f, bigendian=False)\n    except EOFError:\n        break\n\
             \x20   ids.append(c.getname().decode())\n    body = c.read()\n\
             \x20   if ids[-1] == 'smpl':\n        smpl = body\n    c.skip()\n\
             h = struct.unpack('<9I', smpl[:36])\n\
             loops = [struct.unpack('<6I', smpl[36 + 24 * i:60 + 24 * i]) for i in range(h[7])]\n\
             print(json.dumps([ids, h[2], h[3], [[l[1], l[2], l[3], l[5]] for l in loops], len(smpl)]))",
            &bytes,
        );
        let ids: Vec<&str> = v[0].as_array().unwrap().iter().map(|x| x.as_str().unwrap()).collect();
        let want_ids: &[&str] = match enc {
            WavEncoding::PcmS16 | WavEncoding::PcmU8 => &["fmt ", "data", "smpl"],
            _ => &["fmt ", "fact", "data", "smpl"],
        };
        assert_eq!(ids, want_ids, "{enc:?}");
        assert_eq!(v[1], 1_000_000_000 / 44_100, "sample period in ns");
        assert_eq!(v[2], 72);
        assert_eq!(v[3], serde_json::json!([[0, 100, 899, 0], [1, 0, 999, 4]]));
        assert_eq!(v[4], 36 + 48);
        // And our reader gets them back.
        let (_, m) = read_with_meta(&bytes).unwrap();
        assert_eq!(m.loops, meta.loops);
        assert_eq!(m.export_meta(), meta);
        // libsndfile sees the loops too (its instrument API is not exposed by soundfile, so just check it reads).
        let v = py("d, r = sf.read(io.BytesIO(b))\nprint(json.dumps(len(d)))", &bytes);
        // libsndfile ignores `fact` and returns whole ADPCM blocks (1010 = 2 × 505 frames).
        assert_eq!(v, if enc == WavEncoding::ImaAdpcm { 1010 } else { 1000 }, "{enc:?}");
    }
}

/// Raw layouts decode with numpy as documented.
#[test]
fn raw_layouts_decode_with_numpy() {
    let (clip, codes) = code_clip(16, 2, 301, 77);
    let flat = interleave(&codes);
    for (endian, dt) in [(Endian::Little, "<i2"), (Endian::Big, ">i2")] {
        for signed in [true, false] {
            let f = ExportFormat::Raw { bits: 16, signed, endian, bit_order: BitOrder::MsbFirst };
            let bytes = f.encode(&clip).unwrap();
            assert_eq!(bytes.len() as u64, f.file_size(301, 2));
            let dt = if signed { dt.to_string() } else { dt.replace('i', "u") };
            let v = py(&format!("print(json.dumps(np.frombuffer(b, '{dt}').astype(np.int64).tolist()))"), &bytes);
            let want: Vec<i64> = flat.iter().map(|&k| if signed { k } else { k + 32768 }).collect();
            assert_eq!(ints(&v), want, "16-bit {endian:?} signed={signed}");
        }
    }
    for bits in [1u32, 2, 4, 8] {
        let (clip, codes) = code_clip(bits, 2, 203, bits as u64);
        let flat = interleave(&codes);
        for order in [BitOrder::MsbFirst, BitOrder::LsbFirst] {
            for signed in [true, false] {
                let f = ExportFormat::Raw { bits, signed, endian: Endian::Little, bit_order: order };
                let bytes = f.encode(&clip).unwrap();
                assert_eq!(bytes.len() as u64, f.file_size(203, 2));
                let little = if order == BitOrder::LsbFirst { "little" } else { "big" };
                // Unpack the bits in the chosen order, regroup into `bits`-bit fields (first bit = most
                // significant for msb-first, least significant for lsb-first).
                let v = py(
                    &format!(
                        "bits = {bits}\nu = np.unpackbits(np.frombuffer(b, np.uint8), bitorder='{little}')\n\
                         n = {n}\nf = u[:n * bits].reshape(n, bits).astype(np.int64)\n\
                         w = 2 ** np.arange(bits)[::-1] if '{little}' == 'big' else 2 ** np.arange(bits)\n\
                         v = (f * w).sum(axis=1)\n\
                         v = np.where(v >= 2 ** (bits - 1), v - 2 ** bits, v) if {signed} else v - 2 ** (bits - 1)\n\
                         print(json.dumps(v.tolist()))",
                        n = flat.len(),
                        signed = if signed { "True" } else { "False" },
                    ),
                    &bytes,
                );
                assert_eq!(ints(&v), flat, "{bits} bits {order:?} signed={signed}");
            }
        }
    }
}

/// The reader's truncated-file policy against libsndfile: a cut-off PCM file yields the frames present in both.
#[test]
fn truncated_file_yields_the_frames_present_like_libsndfile() {
    let (clip, _) = code_clip(16, 2, 500, 3);
    let bytes = wav(WavEncoding::PcmS16).encode(&clip).unwrap();
    let cut = &bytes[..44 + 4 * 123 + 3];
    let (ours, meta) = read_with_meta(cut).unwrap();
    assert_eq!(ours.frames(), 123);
    assert!(meta.warnings.iter().any(|w| w.contains("runs past the end of the file")), "{:?}", meta.warnings);
    let v = py("d, r = sf.read(io.BytesIO(b), dtype='int16')\nprint(json.dumps(len(d)))", cut);
    assert_eq!(v, 123);
    let _ = wav::file_size(WavEncoding::PcmS16, 1, 1);
}
