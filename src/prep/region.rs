//! The preset's loop (`prep.loop_region`): points in source frames, or relative to each sound (seconds from its start
//! or its end, a fraction of its length), or the input file's own loop; and how they become frames of one sound.
//!
//! # JSON
//! ```json
//! "loop_region": { "start": 4410, "end": 48510, "crossfade_ms": 20 }
//! "loop_region": { "start": { "seconds": 0.25 }, "end": { "seconds_from_end": 0.1 }, "crossfade_ms": 20 }
//! "loop_region": { "start": { "fraction": 0.5 }, "end": { "fraction": 1 } }
//! "loop_region": "file"
//! "loop_region": { "from": "file", "crossfade_ms": 20, "if_missing": "warn" }
//! ```
//! A point is a whole number (a frame of the *source*, before the trim: the original form, unchanged) or an object
//! with exactly one of `seconds`, `seconds_from_end` or `fraction`, measured on the sound as the trim leaves it (the
//! whole sound without a trim). Forms mix freely: `start` may be a frame and `end` a time from the end.
//!
//! # Rounding
//! A relative point becomes the frame offset `round(x)` with `x` computed in double precision and halves rounded
//! away from zero (Rust's `f64::round`), at the sound's own (source) rate:
//! - `{"seconds": s}`: frame `round(s · rate)` of the trimmed sound;
//! - `{"seconds_from_end": s}`: frame `length − round(s · rate)` (so `0` is the end itself, the end being exclusive);
//! - `{"fraction": f}`: frame `round(f · length)` (`0` the first frame, `1` the end).
//!
//! Then, as for frames, `start < end`, and the loop must lie inside the (trimmed) sound: a point outside it is an
//! error that names the field, the value, the frame it came to and the sound's length in frames and seconds.
//!
//! # The file's own loop
//! `"file"` (or `{"from": "file", …}`) takes the input file's loop (a WAV `smpl` loop, an AIFF sustain loop between
//! `MARK` markers), with an optional crossfade. A file without one is an **error** for that file (in a CLI batch:
//! named, exit 3, nothing written for it), unless `"if_missing": "warn"`: then the sound is rendered without a loop
//! and the preparation notes it, which the CLI prints as a `warn` line (and `--strict` makes a failure). A preset
//! without `loop_region` keeps a file's loop as it always did (no crossfade), and renders a file without one
//! without a loop.

use crate::error::{Error, Range, Result};
use serde::de::Error as _;
use serde::{Deserialize, Deserializer, Serialize, Serializer};

/// Crossfade length in milliseconds, for both forms.
pub const CROSSFADE_MS: Range = Range::new(0.0, 1000.0);
/// `seconds` and `seconds_from_end` of a loop point: 0 to one day.
pub const LOOP_SECONDS: Range = Range::new(0.0, 86_400.0);
/// `fraction` of a loop point: 0 (the first frame) to 1 (the end).
pub const LOOP_FRACTION: Range = Range::new(0.0, 1.0);

/// Where a loop point lies. JSON: a whole number, or `{"seconds": s}`, `{"seconds_from_end": s}`, `{"fraction": f}`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum LoopPoint {
    /// A frame of the source, before the trim (the original form).
    Frame(u64),
    /// Seconds from the start of the (trimmed) sound, 0 to 86,400.
    Seconds(f64),
    /// Seconds before the end of the (trimmed) sound, 0 to 86,400 (0 is the end: the end is exclusive).
    SecondsFromEnd(f64),
    /// A fraction of the (trimmed) sound's length, 0 to 1.
    Fraction(f64),
}

impl LoopPoint {
    /// The JSON key of a relative point, `None` for a frame.
    fn key(&self) -> Option<&'static str> {
        match self {
            LoopPoint::Frame(_) => None,
            LoopPoint::Seconds(_) => Some("seconds"),
            LoopPoint::SecondsFromEnd(_) => Some("seconds_from_end"),
            LoopPoint::Fraction(_) => Some("fraction"),
        }
    }

    /// Checks the range of a relative point; `name` is e.g. `loop_region.start`.
    fn validate(&self, name: &str) -> Result<()> {
        match *self {
            LoopPoint::Frame(_) => Ok(()),
            LoopPoint::Seconds(s) | LoopPoint::SecondsFromEnd(s) => {
                LOOP_SECONDS.check_f(&format!("{name}.{}", self.key().unwrap_or("")), s, " s")
            }
            LoopPoint::Fraction(f) => LOOP_FRACTION.check_f(&format!("{name}.fraction"), f, ""),
        }
    }

    /// The point as a frame of the source, on a sound whose trim keeps source frames `keep.0..keep.1` at `rate`
    /// (see the [module docs](self) for the rounding). A relative point beyond the sound is an error naming `name`
    /// and the sound's length; a frame is returned as it is (the caller checks it against the sound).
    pub fn resolve(&self, name: &str, rate: u32, keep: (u64, u64), trimmed: bool) -> Result<u64> {
        let (keep_start, keep_end) = keep;
        let len = keep_end - keep_start;
        let offset = |x: f64| -> u64 { x.round() as u64 }; // validated finite and ≥ 0; saturates
        let outside = |frames: u64, how: &str| {
            Error::param(
                name,
                self,
                format!(
                    "a point inside the sound: this is {frames} frames {how}, but the {}sound is {len} frames \
                     ({:.3} s at {rate} Hz) long",
                    if trimmed { "trimmed " } else { "" },
                    len as f64 / rate as f64
                ),
            )
        };
        match *self {
            LoopPoint::Frame(f) => Ok(f),
            LoopPoint::Seconds(s) => {
                let k = offset(s * rate as f64);
                if k > len {
                    return Err(outside(k, "from the start"));
                }
                Ok(keep_start + k)
            }
            LoopPoint::SecondsFromEnd(s) => {
                let k = offset(s * rate as f64);
                if k > len {
                    return Err(outside(k, "before the end"));
                }
                Ok(keep_end - k)
            }
            LoopPoint::Fraction(f) => Ok(keep_start + offset(f * len as f64).min(len)),
        }
    }
}

impl std::fmt::Display for LoopPoint {
    /// As in JSON: `4410`, `{"seconds":0.25}`.
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match (self, self.key()) {
            (LoopPoint::Frame(n), _) => write!(f, "{n}"),
            (LoopPoint::Seconds(x) | LoopPoint::SecondsFromEnd(x) | LoopPoint::Fraction(x), Some(k)) => {
                write!(f, "{{\"{k}\":{x}}}")
            }
            _ => Ok(()),
        }
    }
}

impl Serialize for LoopPoint {
    fn serialize<S: Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        use serde::ser::SerializeMap;
        match (self, self.key()) {
            (LoopPoint::Frame(n), _) => s.serialize_u64(*n),
            (LoopPoint::Seconds(x) | LoopPoint::SecondsFromEnd(x) | LoopPoint::Fraction(x), Some(k)) => {
                let mut m = s.serialize_map(Some(1))?;
                m.serialize_entry(k, x)?;
                m.end()
            }
            _ => unreachable!("a relative point has a key"),
        }
    }
}

const POINT_FORMS: &str =
    r#"a whole number of source frames, or {"seconds": s}, {"seconds_from_end": s} or {"fraction": f}"#;

impl<'de> Deserialize<'de> for LoopPoint {
    fn deserialize<D: Deserializer<'de>>(d: D) -> std::result::Result<Self, D::Error> {
        use serde_json::Value;
        let v = Value::deserialize(d)?;
        let bad = |what: &str| D::Error::custom(format!("loop point {what}: expected {POINT_FORMS}"));
        match &v {
            Value::Number(n) => n.as_u64().map(LoopPoint::Frame).ok_or_else(|| bad(&format!("{n}"))),
            Value::Object(m) if m.len() == 1 => {
                let (k, x) = m.iter().next().expect("one entry");
                let x = x.as_f64().ok_or_else(|| bad(&v.to_string()))?;
                match k.as_str() {
                    "seconds" => Ok(LoopPoint::Seconds(x)),
                    "seconds_from_end" => Ok(LoopPoint::SecondsFromEnd(x)),
                    "fraction" => Ok(LoopPoint::Fraction(x)),
                    _ => Err(bad(&v.to_string())),
                }
            }
            _ => Err(bad(&v.to_string())),
        }
    }
}

/// Loop points, `start` inclusive and `end` exclusive: playback runs to frame `end − 1` and continues at `start`.
/// Each point is a [`LoopPoint`]: a source frame, or a position relative to the (trimmed) sound.
///
/// # Crossfade
/// With `crossfade_ms > 0`, `n = round(crossfade_ms · rate / 1000)` frames (at least 1) at the end of the loop are
/// blended with the `n` frames just before `start`, with equal-power weights:
/// `y[end − n + i] = cos θᵢ · x[end − n + i] + sin θᵢ · x[start − n + i]`, `θᵢ = (π/2)·(i + 1)/n`, `i` in `0..n`, the
/// last weight pair being exactly (0, 1). So the loop's last frame becomes a copy of frame `start − 1`, and the jump
/// from `end − 1` back to `start` is the sound's own step from `start − 1` to `start`: no seam. The first blended frame
/// already carries a little of the pre-start audio, so entering the crossfade is smooth too. Only frames inside the
/// loop change; the frames before `start` are read, not changed, and must exist after the trim (`n ≤ start`) and
/// `n` must not exceed the loop's length. Equal-power weights keep the level of uncorrelated material; on material
/// that is in phase at both places the middle of the crossfade is up to 3 dB louder.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LoopRegion {
    /// First frame of the loop (required).
    pub start: LoopPoint,
    /// Frame after the last frame of the loop (required); `start < end ≤ frames`.
    pub end: LoopPoint,
    /// Crossfade length in milliseconds, 0 to 1,000 ([`CROSSFADE_MS`]); default 0 (none). 10 to 50 ms smooths most
    /// seams.
    #[serde(default)]
    pub crossfade_ms: f64,
}

impl LoopRegion {
    /// A loop in source frames (the original form).
    pub fn frames(start: u64, end: u64, crossfade_ms: f64) -> Self {
        LoopRegion { start: LoopPoint::Frame(start), end: LoopPoint::Frame(end), crossfade_ms }
    }
}

/// What to do when `"from": "file"` meets a file without a loop.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum IfMissing {
    /// The file fails (default): a build that expects loops stops on a sound that has none.
    #[default]
    Error,
    /// Render without a loop and say so in the preparation's notes (a `warn` line in the CLI).
    Warn,
}

/// Where a [`FileLoop`] comes from: only `"file"`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum LoopSource {
    /// The input file's own loop.
    #[default]
    File,
}

/// The input file's own loop. JSON: `"file"`, or `{"from": "file", "crossfade_ms": 20, "if_missing": "warn"}`.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FileLoop {
    /// `"file"`.
    pub from: LoopSource,
    /// Crossfade length in milliseconds, 0 to 1,000 ([`CROSSFADE_MS`]); default 0, as [`LoopRegion::crossfade_ms`].
    #[serde(default)]
    pub crossfade_ms: f64,
    /// A file without a loop: `error` (default) or `warn`.
    #[serde(default)]
    pub if_missing: IfMissing,
}

/// The preset's `prep.loop_region`: given points, or the file's own loop.
#[derive(Debug, Clone, PartialEq)]
pub enum LoopSetting {
    /// Points given in the preset.
    Region(LoopRegion),
    /// The input file's own loop.
    File(FileLoop),
}

impl From<LoopRegion> for LoopSetting {
    fn from(r: LoopRegion) -> Self {
        LoopSetting::Region(r)
    }
}

impl LoopSetting {
    /// The crossfade in milliseconds.
    pub fn crossfade_ms(&self) -> f64 {
        match self {
            LoopSetting::Region(r) => r.crossfade_ms,
            LoopSetting::File(f) => f.crossfade_ms,
        }
    }

    /// Checks every range that does not depend on the sound.
    pub(super) fn validate(&self) -> Result<()> {
        if let LoopSetting::Region(r) = self {
            if let (LoopPoint::Frame(s), LoopPoint::Frame(e)) = (r.start, r.end) {
                super::check_loop_order("loop_region", s, e)?;
            }
            r.start.validate("loop_region.start")?;
            r.end.validate("loop_region.end")?;
        }
        CROSSFADE_MS.check_f("loop_region.crossfade_ms", self.crossfade_ms(), " ms")
    }
}

impl Serialize for LoopSetting {
    fn serialize<S: Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        match self {
            LoopSetting::Region(r) => r.serialize(s),
            LoopSetting::File(f) if *f == FileLoop::default() => s.serialize_str("file"),
            LoopSetting::File(f) => f.serialize(s),
        }
    }
}

impl<'de> Deserialize<'de> for LoopSetting {
    fn deserialize<D: Deserializer<'de>>(d: D) -> std::result::Result<Self, D::Error> {
        use serde_json::Value;
        let v = Value::deserialize(d)?;
        match &v {
            Value::String(s) if s == "file" => Ok(LoopSetting::File(FileLoop::default())),
            Value::Object(m) if m.contains_key("from") => {
                serde_json::from_value(v).map(LoopSetting::File).map_err(D::Error::custom)
            }
            Value::Object(_) => serde_json::from_value(v).map(LoopSetting::Region).map_err(D::Error::custom),
            _ => Err(D::Error::custom(format!(
                r#"loop_region {v}: expected {{"start": …, "end": …, "crossfade_ms": …}}, "file" or {{"from": "file", …}}"#
            ))),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn point(json: &str) -> LoopPoint {
        serde_json::from_str(json).unwrap()
    }

    #[test]
    fn points_parse_and_print_as_written() {
        for (text, p) in [
            ("4410", LoopPoint::Frame(4410)),
            (r#"{"seconds":0.25}"#, LoopPoint::Seconds(0.25)),
            (r#"{"seconds_from_end":0.1}"#, LoopPoint::SecondsFromEnd(0.1)),
            (r#"{"fraction":0.9}"#, LoopPoint::Fraction(0.9)),
        ] {
            assert_eq!(point(text), p);
            assert_eq!(serde_json::to_string(&p).unwrap(), text);
            assert_eq!(p.to_string(), text);
        }
        assert_eq!(point(r#"{"fraction":1}"#), LoopPoint::Fraction(1.0));
        for bad in
            ["-1", "1.5", r#""4410""#, r#"{"seconds":1,"fraction":0.5}"#, r#"{"ms":3}"#, r#"{"seconds":"1"}"#, "{}"]
        {
            let e = serde_json::from_str::<LoopPoint>(bad).unwrap_err().to_string();
            assert!(e.contains("seconds_from_end"), "{bad}: {e}");
        }
    }

    #[test]
    fn settings_parse_and_round_trip() {
        let s: LoopSetting = serde_json::from_str(r#""file""#).unwrap();
        assert_eq!(s, LoopSetting::File(FileLoop::default()));
        assert_eq!(serde_json::to_string(&s).unwrap(), r#""file""#);
        let text = r#"{"from":"file","crossfade_ms":20.0,"if_missing":"warn"}"#;
        let s: LoopSetting = serde_json::from_str(text).unwrap();
        assert_eq!(
            s,
            LoopSetting::File(FileLoop { from: LoopSource::File, crossfade_ms: 20.0, if_missing: IfMissing::Warn })
        );
        assert_eq!(serde_json::to_string(&s).unwrap(), text);
        // The original form serialises exactly as before (the manifest hashes the preset's normalised JSON).
        let s: LoopSetting = serde_json::from_str(r#"{"start":4410,"end":48510,"crossfade_ms":20}"#).unwrap();
        assert_eq!(s, LoopRegion::frames(4410, 48510, 20.0).into());
        assert_eq!(serde_json::to_string(&s).unwrap(), r#"{"start":4410,"end":48510,"crossfade_ms":20.0}"#);
        let text = r#"{"start":{"seconds":0.25},"end":{"seconds_from_end":0.1},"crossfade_ms":0.0}"#;
        let s: LoopSetting = serde_json::from_str(text).unwrap();
        assert_eq!(serde_json::to_string(&s).unwrap(), text);
        for bad in [
            r#""files""#,
            r#"{"from":"disk"}"#,
            r#"{"from":"file","start":3}"#,
            r#"{"from":"file","if_missing":"ignore"}"#,
            r#"{"start":1}"#,
            r#"{"start":1,"end":2,"fade":3}"#,
            "7",
        ] {
            assert!(serde_json::from_str::<LoopSetting>(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn ranges_are_checked_by_name() {
        let region = |s, e| LoopSetting::Region(LoopRegion { start: s, end: e, crossfade_ms: 0.0 });
        let name = |s: &LoopSetting| match s.validate() {
            Err(Error::Param { name, .. }) => name,
            other => panic!("{other:?}"),
        };
        assert_eq!(name(&region(LoopPoint::Seconds(-0.5), LoopPoint::Frame(9))), "loop_region.start.seconds");
        assert_eq!(
            name(&region(LoopPoint::Frame(0), LoopPoint::SecondsFromEnd(1e6))),
            "loop_region.end.seconds_from_end"
        );
        assert_eq!(name(&region(LoopPoint::Frame(0), LoopPoint::Fraction(1.01))), "loop_region.end.fraction");
        assert_eq!(name(&region(LoopPoint::Frame(9), LoopPoint::Frame(3))), "loop_region");
        let f = LoopSetting::File(FileLoop { crossfade_ms: 1000.5, ..Default::default() });
        assert_eq!(name(&f), "loop_region.crossfade_ms");
        assert!(region(LoopPoint::Fraction(0.0), LoopPoint::Fraction(1.0)).validate().is_ok());
        // Order is checked per sound when a point is relative.
        assert!(region(LoopPoint::Frame(9), LoopPoint::Fraction(0.0)).validate().is_ok());
    }

    /// Halves round away from zero at the source rate: 0.5 s at 1001 Hz is 500.5 frames, so 501.
    #[test]
    fn rounding_of_each_form() {
        let (rate, keep) = (1001, (0, 2002));
        let r = |p: LoopPoint| p.resolve("p", rate, keep, false).unwrap();
        assert_eq!(r(LoopPoint::Seconds(0.5)), 501);
        assert_eq!(r(LoopPoint::SecondsFromEnd(0.5)), 2002 - 501);
        assert_eq!(r(LoopPoint::Seconds(0.4995)), 500, "499.9995 rounds to 500");
        assert_eq!(r(LoopPoint::Seconds(0.0)), 0);
        assert_eq!(r(LoopPoint::SecondsFromEnd(0.0)), 2002);
        assert_eq!(r(LoopPoint::Seconds(2.0)), 2002);
        // fraction · length: 0.25 · 2002 = 500.5 → 501; 0.75 · 2002 = 1501.5 → 1502.
        assert_eq!(r(LoopPoint::Fraction(0.25)), 501);
        assert_eq!(r(LoopPoint::Fraction(0.75)), 1502);
        assert_eq!(r(LoopPoint::Fraction(1.0)), 2002);
        assert_eq!(r(LoopPoint::Frame(77)), 77);
        // Relative to the trimmed sound: keep source frames 100..1101 (1001 frames).
        let t = |p: LoopPoint| p.resolve("p", rate, (100, 1101), true).unwrap();
        assert_eq!(t(LoopPoint::Seconds(0.5)), 601);
        assert_eq!(t(LoopPoint::SecondsFromEnd(0.5)), 1101 - 501);
        assert_eq!(t(LoopPoint::Fraction(0.5)), 100 + 501, "500.5 → 501");
        assert_eq!(t(LoopPoint::Frame(77)), 77, "frames stay source frames");
        // At 48 kHz: 0.1 s is 4800 frames exactly as written.
        assert_eq!(LoopPoint::SecondsFromEnd(0.1).resolve("p", 48_000, (0, 96_000), false).unwrap(), 91_200);
    }

    #[test]
    fn a_point_beyond_the_sound_names_the_field_and_the_length() {
        let e = LoopPoint::SecondsFromEnd(2.5).resolve("loop_region.end", 48_000, (0, 96_000), false).unwrap_err();
        let text = e.to_string();
        assert!(matches!(&e, Error::Param { name, .. } if name == "loop_region.end"), "{text}");
        assert!(text.contains(r#"{"seconds_from_end":2.5}"#), "{text}");
        assert!(text.contains("120000 frames before the end"), "{text}");
        assert!(text.contains("96000 frames (2.000 s at 48000 Hz)"), "{text}");
        let e = LoopPoint::Seconds(1.0).resolve("loop_region.start", 1000, (10, 510), true).unwrap_err().to_string();
        assert!(e.contains("1000 frames from the start") && e.contains("trimmed sound is 500 frames (0.500 s"), "{e}");
    }
}
