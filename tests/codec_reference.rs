//! Outside checks of the hand-written codecs (Microsoft ADPCM, G.721, Dialogic VOX ADPCM) and their files. The
//! reference is libsndfile 1.2 through Python `soundfile` (subtypes `MS_ADPCM`, `G721_32`, `VOX_ADPCM`), named beside
//! each check:
//!
//! 1. libsndfile writes a file from a test signal; our decoder must give libsndfile's own decode of it, sample for
//!    sample (or, where libsndfile departs from the published algorithm, the departure is stated and bounded);
//! 2. we export the same signal; libsndfile must decode it to exactly what our round-trip stage plays;
//! 3. our encoder's SNR on the signal is compared with libsndfile's encoder's (ours must not be more than 1 dB worse).

#![allow(clippy::needless_range_loop)] // channels index several parallel vectors

mod common;

use common::libsndfile::{libsndfile_reads, libsndfile_writes, py, same, snr_db};

use stairstep::codec::{g721, ms_adpcm, vox};
use stairstep::io::{wav, BitOrder, ExportFormat, ExportMeta, SampleLoop, WavEncoding};
use stairstep::stages::codec::{CodecName, CodecParams, CodecRoundTrip};
use stairstep::stages::delta::{DeltaModulator, DeltaParams};
use stairstep::stages::Stage;
use stairstep::{Clip, Preset};

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

/// Our MS ADPCM decoder gives libsndfile's decode of libsndfile's files exactly (mono 8 kHz, stereo 44.1 kHz: two
/// block sizes). Source: libsndfile `MS_ADPCM`.
#[test]
fn ms_adpcm_decoder_equals_libsndfile() {
    for (ch, rate) in [(1usize, 8000u32), (2, 44100)] {
        let x = signal(7001, ch);
        let (file, y) = libsndfile_writes(&x, rate, "WAV", "MS_ADPCM");
        let (fmt, data) = common::wav_chunks(&file);
        let ba = u16::from_le_bytes([fmt[12], fmt[13]]) as usize;
        let (ours, _) = ms_adpcm::decode_blocks(&data, ch, ba, u64::MAX).unwrap();
        for c in 0..ch {
            let ours: Vec<i64> = ours[c].iter().map(|&s| s as i64).collect();
            assert!(ours.len() >= 7001);
            same(&ours[..7001], &y[c][..7001], &format!("MS ADPCM ch {ch}"));
        }
        // The whole reader: header, `fact` length (libsndfile itself reports whole blocks), no warnings.
        let (clip, m) = wav::read_with_meta(&file).unwrap();
        assert!(m.warnings.is_empty(), "{:?}", m.warnings);
        assert_eq!((clip.frames(), clip.sample_rate, m.format.describe().as_str()), (7001, rate, "Microsoft ADPCM"));
        for c in 0..ch {
            let ours: Vec<i64> = clip.channels[c].iter().map(|&v| (v * 32768.0) as i64).collect();
            same(&ours, &y[c][..7001], "MS ADPCM through the reader");
        }
    }
}

/// G.721: our decoder with libsndfile's FMULT gives libsndfile's decode exactly; with the Recommendation's FMULT
/// it stays within a bound. Source: libsndfile `G721_32`.
#[test]
fn g721_decoder_equals_libsndfile() {
    let x = signal(8000, 1);
    let (file, y) = libsndfile_writes(&x, 8000, "WAV", "G721_32");
    let (_, data) = common::wav_chunks(&file);
    let ours: Vec<i64> = g721::decode_stream(&data, g721::Arith::Libsndfile, 8000).iter().map(|&s| s as i64).collect();
    same(&ours, &y[0][..8000], "G.721");
    let (clip, m) = wav::read_with_meta(&file).unwrap();
    assert!(m.warnings.is_empty(), "{:?}", m.warnings);
    assert_eq!((clip.frames(), m.format.describe().as_str()), (8000, "G.721 ADPCM"));
    let back: Vec<i64> = clip.channels[0].iter().map(|&v| (v * 32768.0) as i64).collect();
    same(&back, &y[0][..8000], "G.721 through the reader");
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

fn clip_of(x: &[Vec<i16>], rate: u32) -> Clip {
    Clip::new(rate, x.iter().map(|c| c.iter().map(|&s| s as f32 / 32768.0).collect()).collect()).unwrap()
}

/// The codec stage run over each channel, block by uneven block (as a stream would), as 16-bit values.
fn stage_output(params: &CodecParams, x: &[Vec<i16>]) -> Vec<Vec<i64>> {
    x.iter()
        .map(|c| {
            let mut st = CodecRoundTrip::new(params).unwrap();
            let mut buf: Vec<f32> = c.iter().map(|&s| s as f32 / 32768.0).collect();
            for part in buf.chunks_mut(333) {
                st.process(part);
            }
            buf.iter().map(|&v| (v * 32768.0) as i64).collect()
        })
        .collect()
}

/// One codec, one signal: our export's size is exact; libsndfile decodes it to exactly what the stage plays (and so
/// does our reader, for WAV); our SNR against libsndfile's encoder on the same input. Returns (ours, libsndfile's).
fn export_check(codec: CodecName, format: ExportFormat, x: &[Vec<i16>], rate: u32, lsf: (&str, &str)) -> (f64, f64) {
    let frames = x[0].len();
    let clip = clip_of(x, rate);
    let spb = match &format {
        ExportFormat::Wav { encoding: WavEncoding::MsAdpcm, block_align } => {
            Some(ms_adpcm::samples_per_block(block_align.map_or(256 * x.len(), |b| b as usize), x.len()).unwrap() as u32)
        }
        _ => None,
    };
    let params = CodecParams { codec, samples_per_block: spb };
    let heard = stage_output(&params, x);
    let meta = ExportMeta { loops: vec![SampleLoop::forward(0, frames as u32 - 1)], unity_note: 60 };
    let file = format.encode_with(&clip, &meta).unwrap();
    assert_eq!(file.len() as u64, format.file_size_with(frames, x.len(), &meta), "{codec:?}: file_size_with");
    let vox_rate = matches!(format, ExportFormat::Vox).then_some(rate);
    // Source: libsndfile decodes our export.
    let theirs = libsndfile_reads(&file, vox_rate);
    for c in 0..x.len() {
        assert!(theirs[c].len() >= frames);
        same(&heard[c], &theirs[c][..frames], &format!("{codec:?} ch {c}: stage vs libsndfile's decode of our export"));
    }
    if vox_rate.is_none() {
        let (back, m) = wav::read_with_meta(&file).unwrap();
        assert!(m.warnings.is_empty(), "{:?}", m.warnings);
        assert_eq!(back.frames(), frames);
        for c in 0..x.len() {
            let ours: Vec<i64> = back.channels[c].iter().map(|&v| (v * 32768.0) as i64).collect();
            same(&heard[c], &ours, &format!("{codec:?}: our reader"));
        }
    }
    // Source: libsndfile's own encoder on the same 16-bit input, decoded by libsndfile.
    let (_, theirs_y) = libsndfile_writes(x, rate, lsf.0, lsf.1);
    let snr = |ys: &[Vec<i64>]| (0..x.len()).map(|c| snr_db(&x[c], &ys[c][..frames])).sum::<f64>() / x.len() as f64;
    (snr(&heard), snr(&theirs_y))
}

/// The codec table: each export decodes in libsndfile exactly as the stage plays it, and our encoder is within 1 dB
/// of libsndfile's or better on the same signal. Sources: libsndfile `MS_ADPCM`, `G721_32`, `VOX_ADPCM`.
#[test]
fn exports_play_in_libsndfile_as_heard_and_snr_table() {
    let mut rows = Vec::new();
    let mono = signal(16_000, 1);
    let stereo = signal(16_000, 2);
    type Case<'a> = (&'a str, CodecName, ExportFormat, &'a Vec<Vec<i16>>, u32, (&'a str, &'a str));
    let cases: Vec<Case> = vec![
        (
            "ms-adpcm mono 8 kHz",
            CodecName::MsAdpcm,
            ExportFormat::wav(WavEncoding::MsAdpcm),
            &mono,
            8000,
            ("WAV", "MS_ADPCM"),
        ),
        (
            "ms-adpcm stereo 44.1 kHz, block 2048",
            CodecName::MsAdpcm,
            ExportFormat::Wav { encoding: WavEncoding::MsAdpcm, block_align: Some(2048) },
            &stereo,
            44_100,
            ("WAV", "MS_ADPCM"),
        ),
        ("g721 8 kHz", CodecName::G721, ExportFormat::wav(WavEncoding::G721), &mono, 8000, ("WAV", "G721_32")),
        ("vox-adpcm 8 kHz", CodecName::VoxAdpcm, ExportFormat::Vox, &mono, 8000, ("RAW", "VOX_ADPCM")),
    ];
    for (name, codec, format, x, rate, lsf) in cases {
        let (ours, theirs) = export_check(codec, format, x, rate, lsf);
        rows.push(format!("{name}: ours {ours:.2} dB, libsndfile {theirs:.2} dB"));
        assert!(ours >= theirs - 1.0, "{name}: ours {ours:.2} dB vs libsndfile {theirs:.2} dB");
    }
    eprintln!("SNR on the same signal (ours vs libsndfile's encoder):\n{}", rows.join("\n"));
}

/// Odd lengths and partial blocks: sizes stay exact and libsndfile still plays what the stage plays.
#[test]
fn partial_blocks_and_odd_lengths() {
    for frames in [1usize, 2, 3, 119, 121, 499, 501, 1001] {
        let x = signal(frames.max(2), 1);
        let x = vec![x[0][..frames].to_vec()];
        for (codec, format) in [
            (CodecName::MsAdpcm, ExportFormat::Wav { encoding: WavEncoding::MsAdpcm, block_align: Some(64) }),
            (CodecName::G721, ExportFormat::wav(WavEncoding::G721)),
            (CodecName::VoxAdpcm, ExportFormat::Vox),
        ] {
            let clip = clip_of(&x, 8000);
            let file = format.encode(&clip).unwrap();
            assert_eq!(file.len() as u64, format.file_size(frames, 1), "{codec:?} {frames}");
            let spb = (codec == CodecName::MsAdpcm).then(|| ms_adpcm::samples_per_block(64, 1).unwrap() as u32);
            let heard = stage_output(&CodecParams { codec, samples_per_block: spb }, &x);
            let vox = matches!(format, ExportFormat::Vox).then_some(8000);
            // Source: libsndfile.
            let theirs = libsndfile_reads(&file, vox);
            same(&heard[0], &theirs[0][..frames], &format!("{codec:?} {frames}"));
        }
    }
}

/// G.721 is refused away from 8000 Hz, in the chain and in the export, with a message naming the rate stage; after
/// a rate stage to 8000 Hz it renders, and the export plays in libsndfile as the render's export signal.
#[test]
fn g721_needs_8000_hz() {
    let input = clip_of(&signal(4410, 1), 44_100);
    let bad = Preset::from_json(
        r#"{"format":"stairstep-preset","version":1,"stages":[{"kind":"codec","codec":"g721"}],
        "export":{"type":"wav","encoding":"g721"}}"#,
    )
    .unwrap();
    let e = match stairstep::render::render(&bad, &input) {
        Ok(_) => panic!("g721 at 44.1 kHz should be refused"),
        Err(e) => e.to_string(),
    };
    assert!(e.contains("rate stage") && e.contains("8000") && e.contains("stages[0]"), "{e}");
    let e = ExportFormat::wav(WavEncoding::G721).encode(&input).unwrap_err().to_string();
    assert!(e.contains("rate stage") && e.contains("44100"), "{e}");
    let good = Preset::from_json(
        r#"{"format":"stairstep-preset","version":1,
        "stages":[{"kind":"rate","rate_hz":8000,"mode":"clean"},{"kind":"codec","codec":"g721"}],
        "export":{"type":"wav","encoding":"g721"}}"#,
    )
    .unwrap();
    // Every channel's stages see the rate at their place in the chain (the second channel's too).
    let stereo = clip_of(&signal(4410, 2), 44_100);
    assert_eq!(stairstep::render::render(&good, &stereo).unwrap().export.channel_count(), 2);
    let r = stairstep::render::render(&good, &input).unwrap();
    assert_eq!(r.export.sample_rate, 8000);
    let file = good.export.encode(&r.export).unwrap();
    // Source: libsndfile.
    let theirs = libsndfile_reads(&file, None);
    let heard: Vec<i64> = r.export.channels[0].iter().map(|&v| (v * 32768.0) as i64).collect();
    same(&heard, &theirs[0][..heard.len()], "g721 render");
}

/// The delta-modulation export holds the delta stage's bits: unpacked by numpy and integrated with the textbook
/// decoder (y ← clip(leak·y ± step, −1, 1)), they give back exactly what the stage played. Sources: numpy
/// `unpackbits`; the delta-modulation decoder as any signal-processing textbook states it.
#[test]
fn delta_bits_export_is_the_stage_bit_stream() {
    let x = signal(5001, 2);
    for (step, leak, order) in [(0.02, 1.0, BitOrder::MsbFirst), (0.005, 0.97, BitOrder::LsbFirst)] {
        let mut heard = clip_of(&x, 8000);
        for c in heard.channels.iter_mut() {
            let mut st = DeltaModulator::new(&DeltaParams { step, leak }).unwrap();
            st.process(c);
        }
        let format = ExportFormat::DeltaBits { step, leak, bit_order: order };
        let file = format.encode(&heard).unwrap();
        assert_eq!(file.len() as u64, format.file_size(5001, 2));
        let little = if order == BitOrder::LsbFirst { "little" } else { "big" };
        let v = py(
            &format!(
                "bits = np.unpackbits(np.frombuffer(b, dtype=np.uint8), bitorder='{little}')[:5001 * 2].reshape(-1, 2)\n\
                 out = []\n\
                 for c in range(2):\n    y = 0.0; ys = []\n    for bit in bits[:, c]:\n        \
                 y = min(leak * y + step, 1.0) if bit else max(leak * y - step, -1.0); ys.append(y)\n    out.append(ys)\n\
                 print(json.dumps(out))"
            )
            .replace("leak", &format!("{leak:?}"))
            .replace("step", &format!("{step:?}")),
            &file,
        );
        for c in 0..2 {
            let theirs: Vec<f32> = v[c].as_array().unwrap().iter().map(|y| y.as_f64().unwrap() as f32).collect();
            assert_eq!(theirs, heard.channels[c], "ch {c} step {step}");
        }
    }
}

/// A drum-like test sound: kicks (a pitch drop under a fast decay) and noisy clicks at irregular spacing, some near
/// full scale, each decaying into a long quiet tail of a few LSB; the second channel has its hits elsewhere.
fn drums(frames: usize, channels: usize, rate: u32) -> Vec<Vec<i16>> {
    let mut rng = stairstep::rng::Pcg32::new(77, 3);
    (0..channels)
        .map(|_| {
            let mut out = vec![0i16; frames];
            let mut start = 0usize;
            while start < frames {
                let loud = 0.2 + 0.8 * (rng.next_u32() >> 8) as f64 / (1u32 << 24) as f64;
                let len = (rate as usize / 20) * (1 + (rng.next_u32() % 12) as usize);
                let mut phase = 0.0f64;
                for i in 0..len.min(frames - start) {
                    let t = i as f64 / rate as f64;
                    let f = 45.0 + 180.0 * (-t * 30.0).exp();
                    phase += 2.0 * std::f64::consts::PI * f / rate as f64;
                    let click =
                        if i < rate as usize / 200 { (rng.next_u32() >> 16) as f64 / 32768.0 - 1.0 } else { 0.0 };
                    let body = phase.sin() * (-t * 9.0).exp() + 0.6 * click * (-t * 400.0).exp();
                    // The tail: a few LSB of noise once the body has died away.
                    let tail = ((rng.next_u32() >> 29) as f64 - 3.5) * (t * 4.0).min(1.0);
                    out[start + i] = (33_000.0 * loud * body + tail).round().clamp(-32768.0, 32767.0) as i16;
                }
                start += len;
            }
            out
        })
        .collect()
}

/// Microsoft ADPCM: the codec stage, run in a chain whose export is the same codec (as the budget and the page's
/// audition do), plays exactly what the exported file decodes to, on long sounds (hundreds of blocks; mono and
/// stereo; four block sizes; loud transients and quiet tails; the drum-hit demo), through our reader and through
/// libsndfile. Re-encoding the stage's output must also give the bytes of encoding the input directly (the encoder
/// is idempotent), so the appended stage does not change the file. Source: libsndfile `MS_ADPCM`.
#[test]
fn ms_adpcm_stage_equals_its_export_on_long_sounds() {
    let mut cases: Vec<(String, Clip, u32)> = Vec::new();
    for (ch, ba) in [(1usize, 64u32), (1, 256), (1, 1024), (2, 128), (2, 512), (2, 2048)] {
        let spb = ms_adpcm::samples_per_block(ba as usize, ch).unwrap();
        let blocks = if spb > 1000 { 120 } else { 400 };
        let rate = if ch == 1 { 22_050 } else { 44_100 };
        cases.push((format!("{ch} ch, block {ba}"), clip_of(&drums(blocks * spb + spb / 3, ch, rate), rate), ba));
    }
    cases.push(("drum-hit demo".into(), stairstep::demo::demo("drum-hit").unwrap(), 256));
    for (name, clip, ba) in cases {
        let ch = clip.channel_count();
        let spb = ms_adpcm::samples_per_block(ba as usize, ch).unwrap();
        let preset = Preset::from_json(&format!(
            r#"{{"format":"stairstep-preset","version":1,
            "stages":[{{"kind":"codec","codec":"ms-adpcm","samples_per_block":{spb}}}],
            "export":{{"type":"wav","encoding":"ms-adpcm","block_align":{ba}}}}}"#
        ))
        .unwrap();
        let r = stairstep::render::render(&preset, &clip).unwrap();
        let file = r.encode(&preset.export).unwrap();
        assert_eq!(file, preset.export.encode(&clip).unwrap(), "{name}: the stage changed the exported bytes");
        let heard: Vec<Vec<i64>> =
            r.export.channels.iter().map(|c| c.iter().map(|&v| (v * 32768.0) as i64).collect()).collect();
        let (back, m) = wav::read_with_meta(&file).unwrap();
        assert!(m.warnings.is_empty(), "{:?}", m.warnings);
        // Source: libsndfile decodes the exported file.
        let theirs = libsndfile_reads(&file, None);
        for c in 0..ch {
            let ours: Vec<i64> = back.channels[c].iter().map(|&v| (v * 32768.0) as i64).collect();
            same(&heard[c], &ours, &format!("{name} ch {c}: stage vs our reader"));
            same(&heard[c], &theirs[c][..clip.frames()], &format!("{name} ch {c}: stage vs libsndfile"));
        }
    }
}
