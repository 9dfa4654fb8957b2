//! Builds a preset from the fuzz bytes, renders a short clip through it with `render::render`, and encodes the export
//! with the preset's own export format. Nothing may panic; a preset that is refused is refused with an `Error` that
//! names what is wrong; memory must stay bounded (run with `-rss_limit_mb` and `-malloc_limit_mb`).
//!
//! The first byte chooses how the rest becomes a preset:
//! - even: the rest is JSON text as it comes (valid or not, UTF-8 or not), parsed with `Preset::from_json`; the clip
//!   is one of a few fixed shapes chosen by the input's length;
//! - odd: the rest drives a small decoder that writes a preset of the right shape as JSON: every stage kind and field
//!   of `stages::schema()` (the table `stairstep stages --json` prints), values taken from the minimum, the maximum,
//!   the default, just outside the range, and anything between; many stages, bypass and mix combinations, every
//!   preparation step, every export type. Then a clip: 1 or 2 channels, 0 to 4,096 frames, rates from 1 Hz to
//!   768 kHz (8 and 192 kHz often), with silence, tones, noise, full-scale squares, NaN and ±Inf.
//!
//! Run from `fuzz/` (see `fuzz/README.md`):
//!
//! ```sh
//! cargo +nightly fuzz run preset_render corpus/preset_render -- -rss_limit_mb=2048 -malloc_limit_mb=512 -max_len=4096
//! ```
//!
//! Every crash it finds becomes a case in `tests/preset_fuzz.rs`.
#![no_main]

use libfuzzer_sys::arbitrary::{Result as ArbResult, Unstructured};
use libfuzzer_sys::fuzz_target;
use serde_json::{json, Map, Value};
use stairstep::audio::Clip;
use stairstep::error::Error;
use stairstep::preset::Preset;
use stairstep::render::render;
use stairstep::stages::rate::reduced_len;

fuzz_target!(|data: &[u8]| {
    let Some((&mode, rest)) = data.split_first() else { return };
    if mode % 2 == 0 {
        let text = String::from_utf8_lossy(rest);
        let clip = fixed_clip(rest.len());
        check(&text, &clip);
    } else {
        let mut u = Unstructured::new(rest);
        let Ok(preset) = preset_json(&mut u) else { return };
        let Ok(clip) = clip(&mut u) else { return };
        check(&preset.to_string(), &clip);
    }
});

/// Parses, renders and encodes; checks what must hold whatever the preset.
fn check(text: &str, clip: &Clip) {
    let preset = match Preset::from_json(text) {
        Ok(p) => p,
        Err(e) => return clear(&e),
    };
    // A preset that was accepted writes itself back and reads again as the same preset.
    assert_eq!(Preset::from_json(&preset.to_json()).as_ref(), Ok(&preset));
    let r = match render(&preset, clip) {
        Ok(r) => r,
        Err(e) => return clear(&e),
    };
    let input = r.input(clip);
    assert_eq!(r.audition.frames(), input.frames());
    assert_eq!(r.audition.channel_count(), input.channel_count());
    assert_eq!(r.export.channel_count(), input.channel_count());
    assert_eq!(r.export.frames(), reduced_len(input.sample_rate, r.export.sample_rate, input.frames()));
    assert_eq!(r.report.export_frames, r.export.frames());
    match r.encode(&preset.export) {
        Ok(bytes) => assert_eq!(bytes.len() as u64, r.encoded_size(&preset.export)),
        Err(e) => clear(&e),
    }
}

/// A refusal must say what is wrong: a parameter error names the parameter and what is allowed.
fn clear(e: &Error) {
    let text = e.to_string();
    assert!(!text.is_empty());
    if let Error::Param { name, allowed, .. } = e {
        assert!(!name.is_empty() && !allowed.is_empty(), "{text}");
    }
}

/// The clip of the JSON-text path: the shape depends only on the input's length.
fn fixed_clip(len: usize) -> Clip {
    const SHAPES: [(u32, usize, usize); 4] = [(44_100, 2, 1_000), (8_000, 1, 700), (192_000, 2, 2_000), (48_000, 1, 3)];
    let (rate, channels, frames) = SHAPES[len % SHAPES.len()];
    let chans = (0..channels)
        .map(|c| (0..frames).map(|i| (0.8 * ((i * (c + 3)) as f64 * 0.05).sin()) as f32).collect())
        .collect();
    Clip::new(rate, chans).expect("a valid clip")
}

fn clip(u: &mut Unstructured) -> ArbResult<Clip> {
    const RATES: [u32; 12] = [8_000, 192_000, 44_100, 48_000, 11_025, 22_050, 96_000, 768_000, 1, 3, 7_999, 16_000];
    let rate = if u.ratio(1, 8)? { u.int_in_range(1..=768_000)? } else { *u.choose(&RATES)? };
    let channels = if u.arbitrary()? { 2 } else { 1 };
    let frames = match u.int_in_range(0..=3)? {
        0 => u.int_in_range(0..=16)?,
        1 => u.int_in_range(0..=600)?,
        _ => u.int_in_range(0..=4096)?,
    };
    let kind: u8 = u.int_in_range(0..=6)?;
    let amp = *u.choose(&[1.0f32, 0.5, 1e-6, 0.0, 2.0])?;
    let mut state: u32 = u.arbitrary()?;
    let mut noise = move || {
        state = state.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
        (state >> 8) as f32 / (1 << 23) as f32 - 1.0
    };
    let mut chans = Vec::with_capacity(channels);
    for c in 0..channels {
        let ch: Vec<f32> = (0..frames)
            .map(|i| match kind {
                0 => 0.0,
                1 => amp * ((i as f32) * 0.031 * (c + 1) as f32).sin(),
                2 => amp * noise(),
                3 => amp * if (i / 17) % 2 == 0 { 1.0 } else { -1.0 },
                4 => [f32::NAN, f32::INFINITY, f32::NEG_INFINITY, 0.5, -1.0][(i + c) % 5],
                5 => amp * if i == 0 { 1.0 } else { 0.0 },
                _ => f32::from_bits(noise().to_bits() ^ (i as u32).rotate_left(13)),
            })
            .collect();
        chans.push(ch);
    }
    let Ok(clip) = Clip::new(rate, chans) else {
        panic!("clip of {channels} channels at {rate} Hz refused");
    };
    Ok(clip)
}

/// A number for a field with `min..=max`: the ends, the default, just outside, zero, huge, or anything between.
fn number(u: &mut Unstructured, min: f64, max: f64, default: &Value, int: bool) -> ArbResult<Value> {
    let v = match u.int_in_range(0..=11)? {
        0 => min,
        1 => max,
        2 => return Ok(default.clone()),
        3 => min - if int { 1.0 } else { 1e-9 },
        4 => max + if int { 1.0 } else { 1e-9 },
        5 => 0.0,
        6 => *u.choose(&[16_777_216.0, 4_294_967_296.0, -1.0, 1e308, -1e308, 0.5, 1.5])?,
        _ => {
            let t = u.int_in_range(0..=1000u32)? as f64 / 1000.0;
            min + t * (max - min)
        }
    };
    Ok(if int && v.fract() == 0.0 && v.abs() < 1e19 {
        if v < 0.0 {
            json!(v as i64)
        } else {
            json!(v as u64)
        }
    } else {
        json!(v)
    })
}

fn in_range(u: &mut Unstructured, min: f64, max: f64, int: bool) -> ArbResult<Value> {
    number(u, min, max, &Value::Null, int)
}

/// A value for one schema field.
fn field_value(u: &mut Unstructured, field: &Value) -> ArbResult<Value> {
    let default = field.get("default").cloned().unwrap_or(Value::Null);
    let kind = field["type"].as_str().unwrap_or("");
    if u.ratio(1, 40)? {
        // A value of the wrong type.
        return Ok(u.choose(&[json!("x"), json!(null), json!([]), json!(-3), json!(true), json!(0.25)])?.clone());
    }
    Ok(match kind {
        "int" | "float" => {
            let min = field["min"].as_f64().unwrap_or(0.0);
            let max = field["max"].as_f64().unwrap_or(1.0);
            number(u, min, max, &default, kind == "int")?
        }
        "enum" => {
            let options = field["options"].as_array().cloned().unwrap_or_default();
            if options.is_empty() || u.ratio(1, 30)? {
                json!("no-such-option")
            } else {
                u.choose(&options)?.clone()
            }
        }
        "bool" => json!(u.arbitrary::<bool>()?),
        _ => default,
    })
}

fn stage(u: &mut Unstructured, schema: &[Value]) -> ArbResult<Value> {
    let mut obj = Map::new();
    if u.ratio(1, 50)? {
        obj.insert("kind".into(), json!("no-such-kind"));
        return Ok(Value::Object(obj));
    }
    let kind = u.choose(schema)?;
    obj.insert("kind".into(), kind["kind"].clone());
    for field in kind["fields"].as_array().into_iter().flatten() {
        if u.ratio(3, 4)? {
            let key = field["key"].as_str().unwrap_or("?").to_string();
            obj.insert(key, field_value(u, field)?);
        }
    }
    if u.ratio(1, 4)? {
        obj.insert("bypass".into(), json!(u.arbitrary::<bool>()?));
    }
    if u.ratio(1, 4)? {
        obj.insert("mix".into(), in_range(u, 0.0, 1.0, false)?);
    }
    if u.ratio(1, 60)? {
        obj.insert("no_such_field".into(), json!(1));
    }
    Ok(Value::Object(obj))
}

fn fade(u: &mut Unstructured) -> ArbResult<Value> {
    Ok(json!({
        "ms": in_range(u, 0.0, 60_000.0, false)?,
        "curve": u.choose(&["linear", "equal-power", "exponential"])?,
    }))
}

fn prep(u: &mut Unstructured) -> ArbResult<Value> {
    let mut p = Map::new();
    if u.arbitrary()? {
        let laws = ["sum-3db", "sum-6db", "average", "left", "right"];
        let channels = match u.int_in_range(0..=2)? {
            0 => json!("keep"),
            1 => json!("duplicate"),
            _ => json!({ "mono": u.choose(&laws)? }),
        };
        p.insert("channels".into(), channels);
    }
    if u.ratio(1, 3)? {
        let trim = json!({
            "threshold_dbfs": in_range(u, -120.0, 0.0, false)?,
            "margin_ms": in_range(u, 0.0, 1_000.0, false)?,
        });
        p.insert("trim".into(), trim);
    }
    if u.ratio(1, 3)? {
        p.insert("fade_in".into(), fade(u)?);
    }
    if u.ratio(1, 3)? {
        p.insert("fade_out".into(), fade(u)?);
    }
    if u.ratio(1, 3)? {
        let n = if u.arbitrary()? {
            json!({ "kind": "peak", "target_dbfs": in_range(u, -60.0, 0.0, false)? })
        } else {
            json!({ "kind": "loudness", "target_lufs": in_range(u, -70.0, 0.0, false)? })
        };
        p.insert("normalize".into(), n);
    }
    if u.ratio(1, 3)? {
        // A point: source frames, or seconds from the start or the end, or a fraction of the length.
        let point = |u: &mut Unstructured| -> ArbResult<Value> {
            Ok(match u.int_in_range(0..=3)? {
                0 => in_range(u, 0.0, 4_096.0, true)?,
                1 => json!({ "seconds": in_range(u, 0.0, 0.2, false)? }),
                2 => json!({ "seconds_from_end": in_range(u, 0.0, 0.2, false)? }),
                _ => json!({ "fraction": in_range(u, 0.0, 1.0, false)? }),
            })
        };
        let region = if u.ratio(1, 8)? {
            json!({ "from": "file", "crossfade_ms": in_range(u, 0.0, 1_000.0, false)?,
                    "if_missing": if u.arbitrary()? { "warn" } else { "error" } })
        } else {
            let (start, end) = (point(u)?, point(u)?);
            json!({ "start": start, "end": end, "crossfade_ms": in_range(u, 0.0, 1_000.0, false)? })
        };
        p.insert("loop_region".into(), region);
    }
    Ok(Value::Object(p))
}

fn export(u: &mut Unstructured) -> ArbResult<Value> {
    Ok(match u.int_in_range(0..=2)? {
        0 => {
            let encodings =
                ["pcm-u8", "pcm-s16", "pcm-s24", "pcm-s32", "float32", "mulaw", "alaw", "ima-adpcm", "pcm-s8"];
            let mut e = json!({ "type": "wav", "encoding": u.choose(&encodings)? });
            if u.ratio(1, 3)? {
                e["block_align"] = in_range(u, 8.0, 65_532.0, true)?;
            }
            e
        }
        1 => json!({
            "type": "raw",
            "bits": u.choose(&[1, 2, 4, 8, 16, 0, 3, 32])?,
            "signed": u.arbitrary::<bool>()?,
            "endian": u.choose(&["little", "big"])?,
            "bit_order": u.choose(&["msb-first", "lsb-first"])?,
        }),
        _ => json!({
            "type": "c-array",
            "element": u.choose(&["int8", "uint8", "int16"])?,
            "name": u.choose(&["sound", "coin_2", "_x", "2x", "int", "", "a-b", "\u{e9}t\u{e9}"])?,
        }),
    })
}

fn preset_json(u: &mut Unstructured) -> ArbResult<Value> {
    let schema = serde_json::to_value(stairstep::stages::schema()).expect("the schema serialises");
    let kinds = schema.as_array().cloned().unwrap_or_default();
    let count = match u.int_in_range(0..=7)? {
        0 => 0,
        1..=5 => u.int_in_range(1..=4)?,
        6 => u.int_in_range(5..=16)?,
        _ => u.int_in_range(17..=96)?,
    };
    let mut stages = Vec::with_capacity(count);
    for _ in 0..count {
        stages.push(stage(u, &kinds)?);
    }
    let mut p = json!({
        "format": "stairstep-preset",
        "version": 1,
        "name": "fuzz",
        "seed": u.arbitrary::<u64>()?,
        "stages": stages,
    });
    if u.ratio(1, 3)? {
        p["mix"] = in_range(u, 0.0, 1.0, false)?;
    }
    if u.ratio(1, 2)? {
        p["prep"] = prep(u)?;
    }
    if u.ratio(3, 4)? {
        p["export"] = export(u)?;
    }
    if u.ratio(1, 100)? {
        p["version"] = json!(*u.choose(&[0, 2, -1])?);
    }
    Ok(p)
}
