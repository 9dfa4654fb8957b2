//! Malformed WAV files, built byte by byte: each gives a clear error (checked by message substring) or, where the
//! samples present are still unambiguous, a warning — never a panic. Plus every prefix of every fixture, bit flips,
//! and the fuzzer's findings replayed.

mod common;

use stairstep::io::wav::{read, read_with_meta};

fn le16(v: u16) -> [u8; 2] {
    v.to_le_bytes()
}

fn le32(v: u32) -> [u8; 4] {
    v.to_le_bytes()
}

/// A chunk with its declared size taken from the body (padded when odd).
fn chunk(id: &[u8; 4], body: &[u8]) -> Vec<u8> {
    let mut c = id.to_vec();
    c.extend_from_slice(&le32(body.len() as u32));
    c.extend_from_slice(body);
    if body.len() % 2 == 1 {
        c.push(0);
    }
    c
}

/// A chunk header declaring `size` followed by `body` (which may be shorter: truncation).
fn chunk_sized(id: &[u8; 4], size: u32, body: &[u8]) -> Vec<u8> {
    let mut c = id.to_vec();
    c.extend_from_slice(&le32(size));
    c.extend_from_slice(body);
    c
}

fn riff(chunks: &[Vec<u8>]) -> Vec<u8> {
    let body: Vec<u8> = chunks.concat();
    let mut f = b"RIFF".to_vec();
    f.extend_from_slice(&le32(body.len() as u32 + 4));
    f.extend_from_slice(b"WAVE");
    f.extend_from_slice(&body);
    f
}

/// A 16-byte `fmt ` body.
fn fmt16(tag: u16, ch: u16, rate: u32, block_align: u16, bits: u16) -> Vec<u8> {
    [&le16(tag)[..], &le16(ch), &le32(rate), &le32(rate * block_align as u32), &le16(block_align), &le16(bits)].concat()
}

fn fmt_chunk(tag: u16, ch: u16, rate: u32, block_align: u16, bits: u16) -> Vec<u8> {
    chunk(b"fmt ", &fmt16(tag, ch, rate, block_align, bits))
}

/// IMA ADPCM `fmt ` chunk with cbSize 2 and samplesPerBlock.
fn fmt_adpcm(ch: u16, block_align: u16, bits: u16, spb: u16) -> Vec<u8> {
    let mut b = fmt16(0x11, ch, 8000, block_align, bits);
    b.extend_from_slice(&le16(2));
    b.extend_from_slice(&le16(spb));
    chunk(b"fmt ", &b)
}

/// Extensible `fmt ` chunk.
fn fmt_ext(ch: u16, container: u16, valid: u16, guid: [u8; 16]) -> Vec<u8> {
    let ba = ch * container / 8;
    let mut b = fmt16(0xFFFE, ch, 44_100, ba, container);
    b.extend_from_slice(&le16(22));
    b.extend_from_slice(&le16(valid));
    b.extend_from_slice(&le32(3));
    b.extend_from_slice(&guid);
    chunk(b"fmt ", &b)
}

fn guid(tag: u16) -> [u8; 16] {
    let mut g = [0, 0, 0, 0, 0, 0, 0x10, 0, 0x80, 0, 0, 0xAA, 0, 0x38, 0x9B, 0x71];
    g[..2].copy_from_slice(&le16(tag));
    g
}

fn data16(n: usize) -> Vec<u8> {
    chunk(b"data", &(0..n as i16).flat_map(|i| (i * 100).to_le_bytes()).collect::<Vec<u8>>())
}

fn mono16() -> Vec<u8> {
    fmt_chunk(1, 1, 8000, 2, 16)
}

fn smpl(loops: &[(u32, u32)], declared: u32) -> Vec<u8> {
    let mut b: Vec<u8> = [0, 0, 125_000, 60, 0, 0, 0, declared, 0].iter().flat_map(|&v: &u32| le32(v)).collect();
    for &(s, e) in loops {
        b.extend([0, 0, s, e, 0, 0].iter().flat_map(|&v: &u32| le32(v)));
    }
    chunk(b"smpl", &b)
}

/// Files that must be rejected, with a substring of the message.
fn fatal_cases() -> Vec<(&'static str, Vec<u8>, &'static str)> {
    let mut huge_fmt = riff(&[]);
    huge_fmt.extend(chunk_sized(b"fmt ", 0xFFFF_FFF0, &fmt16(1, 1, 8000, 2, 16)));
    let mut short_fmt = riff(&[]);
    short_fmt.extend(chunk_sized(b"fmt ", 16, &fmt16(1, 1, 8000, 2, 16)[..10]));
    let mut huge_list = riff(&[]);
    huge_list.extend(chunk_sized(b"LIST", 0xFFFF_FFFF, b"INFOxxxx"));
    let mut ext_short = fmt16(0xFFFE, 2, 44_100, 4, 16);
    ext_short.extend_from_slice(&le16(0));
    let mut pcm_magic = b"OggS".to_vec();
    pcm_magic.extend_from_slice(&[0; 40]);
    vec![
        ("empty file", vec![], "the file is empty"),
        ("three bytes", b"RIF".to_vec(), "3 bytes are too few for a RIFF/WAVE header"),
        ("Ogg file", pcm_magic, "starts with `OggS` instead of `RIFF`"),
        ("text file", b"hello, world\n".to_vec(), "starts with `hell` instead of `RIFF`"),
        ("binary junk", vec![0xFF, 0xFE, 0x00, 0x01, 9, 9, 9, 9, 9, 9, 9, 9], r"starts with `\xFF\xFE\x00\x01`"),
        ("big-endian RIFX", b"RIFX\0\0\0\x04WAVE".to_vec(), "big-endian RIFX files are not supported"),
        ("RF64", b"RF64\xFF\xFF\xFF\xFFWAVE".to_vec(), "RF64/BW64 files"),
        ("AVI, not WAVE", b"RIFF\x04\0\0\0AVI ".to_vec(), "RIFF file of form `AVI `, not `WAVE`"),
        ("header only", riff(&[]), "no `fmt ` chunk"),
        ("fmt missing", riff(&[data16(4)]), "no `fmt ` chunk"),
        ("data missing", riff(&[mono16()]), "no `data` chunk"),
        ("data missing after LIST", riff(&[mono16(), chunk(b"LIST", b"INFO")]), "no `data` chunk"),
        ("fmt truncated", short_fmt, "`fmt ` chunk size 16 runs past the end of the file (10 bytes left)"),
        ("fmt size huge", huge_fmt, "`fmt ` chunk size 4294967280 runs past the end of the file (16 bytes left)"),
        (
            "huge chunk hides fmt",
            huge_list,
            "no `fmt ` chunk (reading stopped early: `LIST` chunk size 4294967295 runs past the end",
        ),
        (
            "fmt of 14 bytes",
            riff(&[chunk(b"fmt ", &fmt16(1, 1, 8000, 2, 16)[..14]), data16(4)]),
            "`fmt ` chunk is 14 bytes, shorter than the 16",
        ),
        ("zero channels", riff(&[fmt_chunk(1, 0, 8000, 2, 16), data16(4)]), "`fmt ` chunk declares 0 channels"),
        (
            "65 channels",
            riff(&[fmt_chunk(1, 65, 8000, 130, 16), data16(65)]),
            "`fmt ` chunk declares 65 channels (at most 64 supported)",
        ),
        ("0 Hz", riff(&[fmt_chunk(1, 1, 0, 2, 16), data16(4)]), "`fmt ` chunk declares a sample rate of 0 Hz"),
        (
            "800 kHz",
            riff(&[fmt_chunk(1, 1, 800_000, 2, 16), data16(4)]),
            "sample rate of 800000 Hz (at most 768000 supported)",
        ),
        ("bits 0", riff(&[fmt_chunk(1, 1, 8000, 2, 0), data16(4)]), "`fmt ` chunk declares 0 bits per sample"),
        (
            "block align disagrees",
            riff(&[fmt_chunk(1, 2, 8000, 3, 16), data16(4)]),
            "block align 3 does not match 2 channels × 16 bits (expected 4)",
        ),
        (
            "block align of 12-bit PCM",
            riff(&[fmt_chunk(1, 1, 8000, 1, 12), data16(4)]),
            "block align 1 does not match 1 channel × 12 bits in 2-byte containers (expected 2)",
        ),
        ("40-bit PCM", riff(&[fmt_chunk(1, 1, 8000, 5, 40), data16(5)]), "40-bit PCM is not supported"),
        ("16-bit float", riff(&[fmt_chunk(3, 1, 8000, 2, 16), data16(4)]), "16-bit float is not supported"),
        ("16-bit mu-law", riff(&[fmt_chunk(7, 1, 8000, 2, 16), data16(4)]), "mu-law with 16 bits per sample"),
        ("A-law block align", riff(&[fmt_chunk(6, 2, 8000, 1, 8), data16(4)]), "block align 1 does not match 2"),
        ("MP3", riff(&[fmt_chunk(0x55, 1, 8000, 1, 16), data16(4)]), "unsupported format tag 0x0055 (MPEG Layer 3)"),
        ("MPEG Layer 3", riff(&[fmt_chunk(0x55, 1, 8000, 1, 16), data16(4)]), "unsupported format tag 0x0055"),
        ("MS ADPCM, block too small", riff(&[fmt_chunk(2, 1, 8000, 7, 4), data16(4)]), "Microsoft ADPCM block align 7"),
        ("MS ADPCM, 3 channels", riff(&[fmt_chunk(2, 3, 8000, 768, 4), data16(4)]), "1 or 2"),
        ("G.721 stereo", riff(&[fmt_chunk(0x40, 2, 8000, 60, 4), data16(4)]), "G.721 with 2 channels"),
        (
            "ADPCM block align not a multiple of 4",
            riff(&[fmt_adpcm(1, 250, 4, 497), data16(4)]),
            "IMA ADPCM block align 250 does not fit 1 channel: it must be a multiple of 4 bytes",
        ),
        (
            "ADPCM block align too small for stereo",
            riff(&[fmt_adpcm(2, 8, 4, 1), data16(4)]),
            "IMA ADPCM block align 8 does not fit 2 channels: it must be a multiple of 8 bytes, from 16",
        ),
        (
            "ADPCM block align 0",
            riff(&[fmt_adpcm(1, 0, 4, 505), data16(4)]),
            "IMA ADPCM block align 0 does not fit 1 channel",
        ),
        (
            "ADPCM samples per block disagree",
            riff(&[fmt_adpcm(1, 256, 4, 500), data16(4)]),
            "says 500 samples per block, but a block align of 256 bytes for 1 channel holds 505",
        ),
        ("ADPCM with 3 bits", riff(&[fmt_adpcm(1, 256, 3, 505), data16(4)]), "IMA ADPCM with 3 bits per sample"),
        (
            "extensible, unknown GUID",
            riff(&[fmt_ext(2, 16, 16, *b"0123456789abcdef"), data16(4)]),
            "unknown subformat GUID {33323130-3534-3736-3839-616263646566}",
        ),
        (
            "extensible, MP3 subformat",
            riff(&[fmt_ext(2, 16, 16, guid(0x55)), data16(4)]),
            "extensible subformat 0x0055 (MPEG Layer 3) is not supported",
        ),
        (
            "extensible, too short",
            riff(&[chunk(b"fmt ", &ext_short), data16(4)]),
            "extensible `fmt ` chunk is 18 bytes with cbSize 0; it needs 40 bytes with cbSize 22",
        ),
        (
            "extensible, valid bits above container",
            riff(&[fmt_ext(2, 16, 20, guid(1)), data16(4)]),
            "declares 20 valid bits in 16-bit containers",
        ),
        (
            "extensible, 12-bit container",
            riff(&[fmt_ext(1, 12, 12, guid(1)), data16(4)]),
            "declares 12-bit containers (must be whole bytes)",
        ),
        ("two fmt chunks", riff(&[mono16(), mono16(), data16(4)]), "more than one `fmt ` chunk"),
        ("two data chunks", riff(&[mono16(), data16(4), data16(4)]), "more than one `data` chunk"),
    ]
}

#[test]
fn malformed_files_give_clear_errors() {
    let cases = fatal_cases();
    assert!(cases.len() >= 20);
    for (name, bytes, want) in cases {
        let e = match read_with_meta(&bytes) {
            Ok((clip, meta)) => panic!("{name}: accepted ({} frames, warnings {:?})", clip.frames(), meta.warnings),
            Err(e) => e.to_string(),
        };
        assert!(e.starts_with("unreadable file: "), "{name}: {e}");
        assert!(e.contains(want), "{name}: {e:?} does not contain {want:?}");
    }
}

/// Damage that leaves the samples unambiguous: the file reads, with a warning that says what was wrong.
#[test]
fn recoverable_damage_gives_warnings() {
    let adpcm_block = |index: u8, reserved: u8| {
        let mut b = vec![0x10, 0x00, index, reserved];
        b.extend((0..252).map(|i| i as u8));
        b
    };
    let mut trunc_data = riff(&[mono16()]);
    trunc_data.extend(chunk_sized(b"data", 1_000_000, &[0; 412]));
    let mut placeholder = b"RIFF\xFF\xFF\xFF\xFFWAVE".to_vec();
    placeholder.extend(mono16());
    placeholder.extend(chunk_sized(b"data", 0xFFFF_FFFF, &[1, 0, 2, 0, 3]));
    let mut no_pad = riff(&[mono16()]);
    no_pad.extend(chunk_sized(b"junk", 3, b"abc"));
    no_pad.extend(data16(3));
    let mut small_riff = riff(&[mono16(), data16(10)]);
    small_riff[4..8].copy_from_slice(&le32(4 + 24));
    let mut trailing = riff(&[mono16(), data16(10)]);
    trailing.extend_from_slice(b"xyz");
    let mut smpl_trunc = riff(&[mono16(), data16(10)]);
    smpl_trunc.extend(chunk_sized(b"smpl", 60, &[0; 20]));
    let riff_size = smpl_trunc.len() as u32 - 8;
    smpl_trunc[4..8].copy_from_slice(&le32(riff_size));
    let cases: Vec<(&str, Vec<u8>, usize, &str)> = vec![
        (
            "data chunk past the end",
            trunc_data,
            206,
            "`data` chunk size 1000000 runs past the end of the file (412 bytes left): read the 412 bytes present",
        ),
        ("streaming placeholders", placeholder, 2, "RIFF size is 4294967295 (a placeholder?)"),
        ("odd chunk without its pad byte", no_pad, 3, "`junk` chunk has an odd size (3) but no pad byte"),
        ("RIFF size too small", small_riff, 10, "but chunks continue to byte"),
        ("trailing bytes", trailing, 10, "3 bytes after the end of the RIFF chunk ignored"),
        ("half a frame", riff(&[mono16(), chunk(b"data", &[1, 0, 2])]), 1, "1 bytes that do not make a whole frame"),
        ("short smpl", riff(&[mono16(), data16(10), chunk(b"smpl", &[0; 20])]), 10, "`smpl` chunk is 20 bytes"),
        ("smpl past the end", smpl_trunc, 10, "`smpl` chunk size 60 runs past the end of the file (20 bytes left)"),
        (
            "smpl declares a million loops",
            riff(&[mono16(), data16(10), smpl(&[(1, 5)], 1_000_000)]),
            10,
            "declares 1000000 loops but has room for 1: read 1",
        ),
        (
            "loop beyond the sound",
            riff(&[mono16(), data16(10), smpl(&[(1, 5), (2, 50)], 2)]),
            10,
            "`smpl` loop 1 ends at frame 50 but the sound has 10 frames: dropped",
        ),
        (
            "loop backwards",
            riff(&[mono16(), data16(10), smpl(&[(7, 3)], 1)]),
            10,
            "`smpl` loop 0 starts at frame 7, after its end 3: dropped",
        ),
        (
            "loop end exclusive",
            riff(&[mono16(), data16(10), smpl(&[(2, 10)], 1)]),
            10,
            "ends at frame 10, one past the last: taken as exclusive",
        ),
        (
            "cue declares too many",
            riff(&[mono16(), data16(10), chunk(b"cue ", &[9, 0, 0, 0, 1, 2, 3])]),
            10,
            "`cue ` chunk declares 9 points but has room for 0",
        ),
        ("short fact", riff(&[mono16(), chunk(b"fact", &[1, 2]), data16(10)]), 10, "`fact` chunk is 2 bytes"),
        (
            "ADPCM step index out of range",
            riff(&[fmt_adpcm(1, 256, 4, 505), chunk(b"fact", &le32(505)), chunk(b"data", &adpcm_block(200, 0))]),
            505,
            "1 IMA ADPCM block header with a step index above 88 (clamped to 88)",
        ),
        (
            "ADPCM reserved byte",
            riff(&[fmt_adpcm(1, 256, 4, 505), chunk(b"fact", &le32(505)), chunk(b"data", &adpcm_block(3, 7))]),
            505,
            "non-zero reserved byte",
        ),
        (
            "ADPCM without fact",
            riff(&[fmt_adpcm(1, 256, 4, 505), chunk(b"data", &adpcm_block(3, 0))]),
            505,
            "without a `fact` chunk",
        ),
        (
            "ADPCM fact longer than the data",
            riff(&[fmt_adpcm(1, 256, 4, 505), chunk(b"fact", &le32(5000)), chunk(b"data", &adpcm_block(3, 0))]),
            505,
            "`fact` chunk says 5000 frames but the data holds 505",
        ),
        (
            "ADPCM block cut mid-group",
            riff(&[
                fmt_adpcm(1, 256, 4, 505),
                chunk(b"fact", &le32(505)),
                chunk(b"data", &adpcm_block(3, 0)[..4 + 4 * 3 + 2]),
            ]),
            25,
            "ends with 2 bytes that do not make a whole group",
        ),
        (
            "extensible, 0 valid bits",
            riff(&[fmt_ext(1, 16, 0, guid(1)), data16(10)]),
            10,
            "declares 0 valid bits: taken as 16",
        ),
    ];
    for (name, bytes, frames, want) in cases {
        let (clip, meta) = read_with_meta(&bytes).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert_eq!(clip.frames(), frames, "{name}");
        assert!(meta.warnings.iter().any(|w| w.contains(want)), "{name}: {:?} lacks {want:?}", meta.warnings);
    }
}

/// A malformed `smpl` chunk never stops the samples from loading, and good loops next to bad ones survive.
#[test]
fn good_loops_survive_next_to_bad_ones() {
    let f = riff(&[mono16(), data16(10), smpl(&[(1, 5), (9, 2), (0, 9), (3, 99)], 4)]);
    let (_, meta) = read_with_meta(&f).unwrap();
    let loops: Vec<(u32, u32)> = meta.loops.iter().map(|l| (l.start, l.end)).collect();
    assert_eq!(loops, [(1, 5), (0, 9)]);
    assert_eq!(meta.warnings.len(), 2, "{:?}", meta.warnings);
}

fn fixtures() -> Vec<Vec<u8>> {
    let dir = common::root().join("tests/fixtures");
    let mut paths: Vec<_> = std::fs::read_dir(dir).unwrap().map(|e| e.unwrap().path()).collect();
    paths.sort();
    paths.iter().map(|p| std::fs::read(p).unwrap()).collect()
}

/// Every prefix of every fixture: an error or a (possibly shorter) sound, never a panic.
#[test]
fn every_prefix_of_every_fixture_is_handled() {
    for f in fixtures() {
        let whole = read(&f).unwrap();
        for n in 0..f.len() {
            if let Ok(c) = read(&f[..n]) {
                assert!(c.frames() <= whole.frames());
                assert_eq!(c.channel_count(), whole.channel_count());
            }
        }
    }
}

/// Seeded bit flips and byte overwrites on every fixture never panic.
#[test]
fn corrupted_fixtures_never_panic() {
    let mut rng = stairstep::rng::Pcg32::new(2024, 7);
    for f in fixtures() {
        for _ in 0..3000 {
            let mut g = f.clone();
            for _ in 0..1 + rng.next_u32() % 4 {
                let i = rng.next_u32() as usize % g.len();
                if rng.next_u32().is_multiple_of(2) {
                    g[i] ^= 1 << (rng.next_u32() % 8);
                } else {
                    g[i] = [0, 0xFF, 0x7F, 0x80][rng.next_u32() as usize % 4];
                }
            }
            let _ = read_with_meta(&g);
        }
    }
}
