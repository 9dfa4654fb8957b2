//! C source export: a C99 header with the samples as a `static const` array.
//!
//! For `name = "coin"`, `element = int8`, a 3-frame mono clip at 11,025 Hz with one loop:
//!
//! ```c
//! /* coin: 3 frames x 1 channel(s), int8_t, interleaved. Written by Stairstep. */
//! #ifndef COIN_H
//! #define COIN_H
//!
//! #include <stdint.h>
//!
//! #define COIN_SAMPLE_RATE  11025u
//! #define COIN_CHANNELS 1u
//! #define COIN_FRAMES 3u
//! #define COIN_LENGTH 3u
//! #define COIN_LOOP_COUNT 1u
//! #define COIN_LOOP_START 0u
//! #define COIN_LOOP_END 2u
//! #define COIN_LOOP0_START 0u
//! #define COIN_LOOP0_END 2u
//!
//! static const int8_t coin[3] = {
//!        0,  127, -128,
//! };
//!
//! #endif /* COIN_H */
//! ```
//!
//! - `NAME_LENGTH` is the number of elements (frames × channels, interleaved); `NAME_FRAMES` the frames.
//! - Loops (from [`ExportMeta`]): `NAME_LOOP_COUNT`, then for the first loop `NAME_LOOP_START` / `NAME_LOOP_END`
//!   and for every loop k (from 0) `NAME_LOOPk_START` / `NAME_LOOPk_END` — frames, the end inclusive as in a WAV
//!   `smpl` chunk. Without loops only `NAME_LOOP_COUNT 0u` is written.
//! - Values: `int8_t` −128…127 and `int16_t` −32768…32767 are the `pcm_code`s; `uint8_t` is the 8-bit code + 128.
//! - Every number in the array is right-aligned to a fixed width (4, 3 or 6 characters), 16 per line (int16: 12), and
//!   the sample rate to 6 digits, so the file size depends only on frames, channels, name and loops.
//! - An empty clip gives `NAME_LENGTH 0u` and a one-element array `{ 0 }` (ISO C has no empty arrays).

use super::{CElement, ExportMeta};
use crate::audio::Clip;
use crate::error::{Error, Result};
use crate::sample::pcm_code;
use crate::sample::sanitize;
use std::fmt::Write;

const KEYWORDS: [&str; 37] = [
    "auto",
    "break",
    "case",
    "char",
    "const",
    "continue",
    "default",
    "do",
    "double",
    "else",
    "enum",
    "extern",
    "float",
    "for",
    "goto",
    "if",
    "inline",
    "int",
    "long",
    "register",
    "restrict",
    "return",
    "short",
    "signed",
    "sizeof",
    "static",
    "struct",
    "switch",
    "typedef",
    "union",
    "unsigned",
    "void",
    "volatile",
    "while",
    "_Bool",
    "_Complex",
    "_Imaginary",
];

/// The placeholder a name may hold so that a batch gives each header its own array name: `"sfx_{stem}"` names the
/// array of `coin.wav` `sfx_coin` (see [`name_for`]).
pub const STEM: &str = "{stem}";

/// The array name for a sound whose file name without extension is `stem`: `template` with [`STEM`] replaced by the
/// stem made a C identifier (characters other than ASCII letters, digits and `_` become `_`; leading `_` dropped; a
/// leading digit gets a `_` before it; a keyword or a name ending in `_t` gets a `_` after it; at most 63
/// characters). A name without the placeholder is returned as it is. Where no file name is known (the page, a
/// library call), the stem is `sound`.
pub fn name_for(template: &str, stem: &str) -> String {
    if !template.contains(STEM) {
        return template.to_string();
    }
    let clean: String = stem.chars().map(|c| if c.is_ascii_alphanumeric() { c } else { '_' }).collect();
    let clean = clean.trim_start_matches('_');
    let mut name = template.replace(STEM, if clean.is_empty() { "sound" } else { clean });
    if name.starts_with(|c: char| c.is_ascii_digit()) {
        name.insert(0, '_');
    }
    name.truncate(62);
    if KEYWORDS.contains(&name.as_str()) || name.ends_with("_t") {
        name.push('_');
    }
    if check_name(&name).is_ok() {
        name
    } else {
        template.replace(STEM, "sound")
    }
}

/// Checks that `name` can name the array: a C identifier of 1 to 63 characters (`[A-Za-z_][A-Za-z0-9_]*`), not a
/// keyword, not starting with `__` or `_` + capital (reserved), not ending in `_t` (reserved for types). A name with
/// the placeholder [`STEM`] is checked with a stem of `sound` in its place.
pub fn check_name(name: &str) -> Result<()> {
    if name.contains(STEM) {
        let sample = name.replace(STEM, "sound");
        return check_name(&sample)
            .map_err(|_| Error::param("name", format!("{name:?}"), format!("a C identifier once {STEM} is replaced")));
    }
    let bad = |why: &str| Err(Error::param("name", format!("{name:?}"), format!("a C identifier ({why})")));
    let mut chars = name.chars();
    match chars.next() {
        None => return bad("not empty"),
        Some(c) if !(c.is_ascii_alphabetic() || c == '_') => return bad("starting with a letter or _"),
        _ => {}
    }
    if !chars.all(|c| c.is_ascii_alphanumeric() || c == '_') {
        return bad("letters, digits and _ only");
    }
    if name.len() > 63 {
        return bad("at most 63 characters");
    }
    if KEYWORDS.contains(&name) {
        return bad("not a C keyword");
    }
    let b = name.as_bytes();
    if b[0] == b'_' && b.len() > 1 && (b[1] == b'_' || b[1].is_ascii_uppercase()) {
        return bad("not starting with __ or _ and a capital: reserved");
    }
    if name.ends_with("_t") {
        return bad("not ending in _t: reserved for types");
    }
    Ok(())
}

fn ctype(e: CElement) -> &'static str {
    match e {
        CElement::Int8 => "int8_t",
        CElement::Uint8 => "uint8_t",
        CElement::Int16 => "int16_t",
    }
}

/// (width of a number, numbers per line)
fn geometry(e: CElement) -> (usize, usize) {
    match e {
        CElement::Int8 => (4, 16),
        CElement::Uint8 => (3, 16),
        CElement::Int16 => (6, 12),
    }
}

/// Everything before the array body. The sample rate is right-aligned to 6 digits so that the length does not
/// depend on it.
fn head(e: CElement, name: &str, rate: u32, frames: usize, channels: usize, meta: &ExportMeta) -> String {
    let up = name.to_ascii_uppercase();
    let len = frames as u64 * channels as u64;
    let mut s = String::new();
    let _ = writeln!(
        s,
        "/* {name}: {frames} frames x {channels} channel(s), {}, interleaved. Written by Stairstep. */",
        ctype(e)
    );
    let _ = writeln!(s, "#ifndef {up}_H\n#define {up}_H\n\n#include <stdint.h>\n");
    let _ = writeln!(s, "#define {up}_SAMPLE_RATE {rate:>6}u");
    let _ = writeln!(s, "#define {up}_CHANNELS {channels}u");
    let _ = writeln!(s, "#define {up}_FRAMES {frames}u");
    let _ = writeln!(s, "#define {up}_LENGTH {len}u");
    let _ = writeln!(s, "#define {up}_LOOP_COUNT {}u", meta.loops.len());
    if let Some(l) = meta.loops.first() {
        let _ = writeln!(s, "#define {up}_LOOP_START {}u\n#define {up}_LOOP_END {}u", l.start, l.end);
    }
    for (k, l) in meta.loops.iter().enumerate() {
        let _ = writeln!(s, "#define {up}_LOOP{k}_START {}u\n#define {up}_LOOP{k}_END {}u", l.start, l.end);
    }
    let _ = writeln!(s, "\nstatic const {} {name}[{}] = {{", ctype(e), len.max(1));
    s
}

fn tail(name: &str) -> String {
    format!("}};\n\n#endif /* {}_H */\n", name.to_ascii_uppercase())
}

/// Exact output size in bytes (0 for an invalid name).
pub fn file_size(e: CElement, name: &str, frames: usize, channels: usize, meta: &ExportMeta) -> u64 {
    let name = &name_for(name, "sound");
    if check_name(name).is_err() {
        return 0;
    }
    let (w, per_line) = geometry(e);
    let len = (frames as u64).saturating_mul(channels as u64);
    let body = if len == 0 {
        // "    0,\n"
        4 + w as u64 + 2
    } else {
        len.div_ceil(per_line as u64) * 4 + len * (w as u64 + 2)
    };
    (head(e, name, 1, frames, channels, meta).len() + tail(name).len()) as u64 + body
}

/// Writes the header.
pub fn write(clip: &Clip, e: CElement, name: &str, meta: &ExportMeta) -> Result<Vec<u8>> {
    check_name(name)?;
    let name = &name_for(name, "sound");
    super::check_clip(clip)?;
    meta.validate(clip.frames())?;
    let (w, per_line) = geometry(e);
    let size = file_size(e, name, clip.frames(), clip.channel_count(), meta);
    let mut s = String::with_capacity(usize::try_from(size).unwrap_or(0).min(1 << 30));
    s.push_str(&head(e, name, clip.sample_rate, clip.frames(), clip.channel_count(), meta));
    let mut n = 0usize;
    let mut push = |s: &mut String, v: i32| {
        s.push_str(if n.is_multiple_of(per_line) { "    " } else { " " });
        let _ = write!(s, "{v:>w$},");
        n += 1;
        if n.is_multiple_of(per_line) {
            s.push('\n');
        }
    };
    if clip.frames() == 0 {
        push(&mut s, 0);
    }
    for i in 0..clip.frames() {
        for c in &clip.channels {
            let x = sanitize(c[i]);
            push(
                &mut s,
                match e {
                    CElement::Int8 => pcm_code(x, 8),
                    CElement::Uint8 => pcm_code(x, 8) + 128,
                    CElement::Int16 => pcm_code(x, 16),
                },
            );
        }
    }
    if !s.ends_with('\n') {
        s.push('\n');
    }
    s.push_str(&tail(name));
    Ok(s.into_bytes())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::SampleLoop;

    #[test]
    fn matches_the_documented_example() {
        let clip = Clip::new(11_025, vec![vec![0.0, 1.0, -1.0]]).unwrap();
        let meta = ExportMeta { loops: vec![SampleLoop::forward(0, 2)], ..Default::default() };
        let text = String::from_utf8(write(&clip, CElement::Int8, "coin", &meta).unwrap()).unwrap();
        let doc: String = include_str!("c_array.rs")
            .lines()
            .skip_while(|l| !l.starts_with("//! ```c"))
            .skip(1)
            .take_while(|l| !l.starts_with("//! ```"))
            .map(|l| format!("{}\n", l.strip_prefix("//! ").unwrap_or("")))
            .collect();
        assert_eq!(text, doc);
    }

    #[test]
    fn sizes_are_exact() {
        let meta =
            ExportMeta { loops: vec![SampleLoop::forward(0, 0), SampleLoop::forward(0, 0)], ..Default::default() };
        for e in [CElement::Int8, CElement::Uint8, CElement::Int16] {
            for ch in 1..=3 {
                for frames in 0..40 {
                    for rate in [1, 8000, 768_000] {
                        let clip = Clip::new(rate, vec![vec![-1.0; frames]; ch]).unwrap();
                        let m = if frames > 0 { meta.clone() } else { ExportMeta::default() };
                        let b = write(&clip, e, "x_1", &m).unwrap();
                        assert_eq!(b.len() as u64, file_size(e, "x_1", frames, ch, &m), "{e:?} {ch} {frames}");
                    }
                }
            }
        }
    }

    #[test]
    fn names_are_checked() {
        for good in ["coin", "_coin", "Coin2", "a"] {
            assert!(check_name(good).is_ok(), "{good}");
        }
        for bad in ["", "2coin", "co-in", "int", "static", "__x", "_X", "size_t", "ç", &"a".repeat(64)] {
            let e = check_name(bad).unwrap_err();
            assert!(e.to_string().contains("`name`"), "{e}");
        }
    }
}
