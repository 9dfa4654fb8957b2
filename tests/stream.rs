//! Streaming reading and writing give exactly what the in-memory reader and writers give.
#![cfg(not(target_arch = "wasm32"))]

use stairstep::io::wav::stream::{StreamReader, StreamWriter};
use stairstep::io::{ExportFormat, ExportMeta, WavEncoding};
use stairstep::Clip;
use std::io::Cursor;

fn clip(frames: usize, channels: usize) -> Clip {
    let mut rng = stairstep::rng::Pcg32::from_seed(1, 2);
    Clip::new(
        22_050,
        (0..channels).map(|_| (0..frames).map(|_| (rng.uniform_centered() * 1.9) as f32).collect()).collect(),
    )
    .unwrap()
}

#[test]
fn streamed_files_equal_in_memory_ones_for_every_byte_aligned_encoding() {
    for enc in [
        WavEncoding::PcmU8,
        WavEncoding::PcmS16,
        WavEncoding::PcmS24,
        WavEncoding::PcmS32,
        WavEncoding::Float32,
        WavEncoding::Mulaw,
        WavEncoding::Alaw,
    ] {
        for (frames, channels) in [(0, 1), (1, 1), (4097, 2), (10_001, 3)] {
            let c = clip(frames, channels);
            let whole = ExportFormat::wav(enc).encode(&c).unwrap();
            let mut w =
                StreamWriter::new(Vec::new(), enc, c.sample_rate, channels, frames, ExportMeta::default()).unwrap();
            let mut start = 0;
            for len in [1usize, 333, 4096].iter().cycle() {
                if start >= frames {
                    break;
                }
                let end = (start + len).min(frames);
                let block: Vec<&[f32]> = c.channels.iter().map(|ch| &ch[start..end]).collect();
                w.write_block(&block).unwrap();
                start = end;
            }
            let streamed = w.finish().unwrap();
            assert_eq!(streamed, whole, "{enc:?} {frames}×{channels}");
            // And back: block reads concatenate to the in-memory read.
            let mut r = StreamReader::open(Cursor::new(whole.clone())).unwrap().expect("streamable");
            assert_eq!(r.frames(), frames);
            let mut got: Vec<Vec<f32>> = vec![Vec::new(); channels];
            loop {
                let b = r.read_block(1000).unwrap();
                if b[0].is_empty() {
                    break;
                }
                for (g, x) in got.iter_mut().zip(b) {
                    g.extend(x);
                }
            }
            assert_eq!(got, stairstep::io::wav::read(&whole).unwrap().channels, "{enc:?} read back");
        }
    }
}

#[test]
fn files_the_stream_reader_leaves_to_the_in_memory_reader() {
    let c = clip(100, 1);
    let adpcm = ExportFormat::wav(WavEncoding::ImaAdpcm).encode(&c).unwrap();
    assert!(StreamReader::open(Cursor::new(adpcm)).unwrap().is_none());
    let looped = ExportFormat::default()
        .encode_with(&c, &ExportMeta { loops: vec![stairstep::io::SampleLoop::forward(10, 50)], ..Default::default() })
        .unwrap();
    assert!(StreamReader::open(Cursor::new(looped)).unwrap().is_none(), "loops are kept by the in-memory path");
    assert!(StreamReader::open(Cursor::new(b"not a wav".to_vec())).unwrap().is_none());
    let w = StreamWriter::new(Vec::new(), WavEncoding::PcmS16, 8000, 1, 10, ExportMeta::default()).unwrap();
    assert!(w.finish().is_err(), "finishing short of the frame count is an error");
}
