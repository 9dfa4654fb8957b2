//! What every stage kind's fields are, for people and forms: label, type, unit, allowed range, default, the range a
//! slider should span, and which other field decides whether a field applies. The page builds its chain editor from
//! [`schema`] (through the wasm boundary) and `stairstep stages` prints it, so a range is stated once: the ranges are
//! the constants the stages validate with, and the defaults are the stages' own `Default` parameters, serialised.

use crate::error::Range;
use crate::stages::{adpcm, compand, delta, dither, filter, gain, minifloat, quantize, rate, StageSpec};
use serde::Serialize;
use serde_json::Value;

/// One field of a stage kind.
#[derive(Debug, Clone, Serialize)]
pub struct Field {
    /// The preset's key for it.
    pub key: &'static str,
    /// A short label for people.
    pub label: &'static str,
    /// `"int"`, `"float"`, `"enum"` or `"bool"`.
    #[serde(rename = "type")]
    pub kind: &'static str,
    /// Unit for people (`""` when dimensionless).
    #[serde(skip_serializing_if = "str::is_empty")]
    pub unit: &'static str,
    /// Allowed range (numeric fields).
    #[serde(skip_serializing_if = "Option::is_none", flatten)]
    pub range: Option<Range>,
    /// Step of a slider or spin box (numeric fields).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub step: Option<f64>,
    /// The part of the range a slider should span when it is narrower than what is allowed.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub slider: Option<[f64; 2]>,
    /// The choices (enum fields), as the preset spells them.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub options: Vec<&'static str>,
    /// The value a new stage starts with (the stage's `Default`); `null` for an optional field left out.
    pub default: Value,
    /// What an optional field means when left out (shown as a placeholder).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub placeholder: Option<&'static str>,
    /// The field applies only when another field of the stage has one of these values.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub when: Option<When>,
}

/// A condition on another field of the same stage.
#[derive(Debug, Clone, Serialize)]
pub struct When {
    /// The other field's key.
    pub field: &'static str,
    /// The values for which this field applies.
    pub is: Vec<&'static str>,
}

/// One stage kind.
#[derive(Debug, Clone, Serialize)]
pub struct Kind {
    /// The preset's `kind`.
    pub kind: &'static str,
    /// A label for people.
    pub label: &'static str,
    /// Its fields, in the order a form shows them.
    pub fields: Vec<Field>,
}

fn num(key: &'static str, label: &'static str, kind: &'static str, unit: &'static str, range: Range) -> Field {
    Field {
        key,
        label,
        kind,
        unit,
        range: Some(range),
        step: Some(if kind == "int" { 1.0 } else { 0.1 }),
        slider: None,
        options: Vec::new(),
        default: Value::Null,
        placeholder: None,
        when: None,
    }
}

fn choice(key: &'static str, label: &'static str, options: &[&'static str]) -> Field {
    Field {
        kind: "enum",
        options: options.to_vec(),
        range: None,
        step: None,
        ..num(key, label, "enum", "", Range::new(0.0, 0.0))
    }
}

impl Field {
    fn step(mut self, step: f64) -> Self {
        self.step = Some(step);
        self
    }
    fn slider(mut self, lo: f64, hi: f64) -> Self {
        self.slider = Some([lo, hi]);
        self
    }
    fn optional(mut self, placeholder: &'static str) -> Self {
        self.placeholder = Some(placeholder);
        self
    }
    fn when(mut self, field: &'static str, is: &[&'static str]) -> Self {
        self.when = Some(When { field, is: is.to_vec() });
        self
    }
}

/// Fills each field's default from the stage's own default parameters (serialised as a preset writes them).
fn with_defaults(kind: &'static str, label: &'static str, spec: StageSpec, mut fields: Vec<Field>) -> Kind {
    let value = serde_json::to_value(&spec).expect("stage parameters serialise");
    for f in &mut fields {
        f.default = value.get(f.key).cloned().unwrap_or(Value::Null);
    }
    Kind { kind, label, fields }
}

const LAWS: &[&str] = &["mulaw", "alaw"];

/// Every stage kind with its fields, in the order the page offers them.
pub fn schema() -> Vec<Kind> {
    vec![
        with_defaults(
            "gain",
            "Gain and overflow",
            StageSpec::Gain(Default::default()),
            vec![
                num("gain_db", "Gain", "float", "dB", gain::GAIN_DB),
                choice("overflow", "Beyond ±1", &["clip", "wrap", "fold", "saturate"]),
            ],
        ),
        with_defaults(
            "rate",
            "Sample-rate reduction",
            StageSpec::Rate(Default::default()),
            vec![
                num("rate_hz", "Rate", "int", "Hz", rate::RATE_HZ).slider(1000.0, 48_000.0),
                choice("mode", "Mode", &["hold", "clean"]),
            ],
        ),
        with_defaults(
            "quantize",
            "Uniform quantizer",
            StageSpec::Quantize(Default::default()),
            vec![
                num("bits", "Bits", "int", "bit", quantize::BITS),
                choice("grid", "Grid", &["mid-tread", "mid-rise"]),
                choice("rounding", "Rounding", &["nearest", "truncate"]),
                choice("dither", "Dither", &["none", "rpdf", "tpdf", "highpass-tpdf"]),
                num("dither_peak_lsb", "Dither peak", "float", "LSB", dither::PEAK_LSB).step(0.05).optional("standard"),
                choice("shaping", "Noise shaping", &["none", "first-order", "second-order", "ewt5", "ewt9"]),
            ],
        ),
        with_defaults(
            "g711",
            "G.711 (8-bit μ-law / A-law)",
            StageSpec::G711(Default::default()),
            vec![choice("law", "Law", LAWS)],
        ),
        with_defaults(
            "compand",
            "Companding curve",
            StageSpec::Compand(Default::default()),
            vec![
                choice("law", "Law", LAWS),
                num("mu", "μ", "float", "", compand::MU).step(1.0).when("law", &["mulaw"]),
                num("a", "A", "float", "", compand::A).when("law", &["alaw"]),
                num("bits", "Bits", "int", "bit", compand::BITS),
            ],
        ),
        with_defaults(
            "adpcm",
            "IMA ADPCM round trip (4-bit)",
            StageSpec::Adpcm(Default::default()),
            vec![num("samples_per_block", "Block", "int", "samples", adpcm::SAMPLES_PER_BLOCK)
                .step(8.0)
                .slider(9.0, 4089.0)],
        ),
        with_defaults(
            "codec",
            "Codec round trip (ADPCM, GSM)",
            StageSpec::Codec(Default::default()),
            vec![
                choice("codec", "Codec", &["ima-adpcm", "ms-adpcm", "g721", "vox-adpcm", "gsm610"]),
                // One range for both block codecs: IMA ADPCM's (8k + 1); Microsoft ADPCM takes even counts 4 to 32768.
                num("samples_per_block", "Block", "int", "samples", adpcm::SAMPLES_PER_BLOCK)
                    .step(8.0)
                    .slider(9.0, 4089.0)
                    .optional("the export's")
                    .when("codec", &["ima-adpcm", "ms-adpcm"]),
            ],
        ),
        with_defaults(
            "delta",
            "1-bit delta modulation",
            StageSpec::Delta(Default::default()),
            vec![
                num("step", "Step", "float", "FS", delta::STEP).step(0.001).slider(0.001, 0.1),
                num("leak", "Leak", "float", "", delta::LEAK).step(0.001).slider(0.9, 1.0),
            ],
        ),
        with_defaults(
            "minifloat",
            "Minifloat",
            StageSpec::Minifloat(Default::default()),
            vec![
                num("exponent_bits", "Exponent", "int", "bit", minifloat::EXPONENT_BITS),
                num("mantissa_bits", "Mantissa", "int", "bit", minifloat::MANTISSA_BITS),
                num("bias", "Bias", "int", "", minifloat::BIAS).optional("IEEE"),
                Field {
                    kind: "bool",
                    range: None,
                    step: None,
                    ..num("subnormals", "Subnormals", "bool", "", Range::new(0.0, 0.0))
                },
            ],
        ),
        with_defaults(
            "filter",
            "Filter (biquad)",
            StageSpec::Filter(Default::default()),
            vec![
                choice("shape", "Shape", &["lowpass", "highpass", "bandpass", "lowshelf", "highshelf", "peaking"]),
                num("freq_hz", "Frequency", "float", "Hz", filter::FREQ_HZ).step(1.0).slider(20.0, 20_000.0),
                num("q", "Q", "float", "", filter::Q).step(0.01).slider(0.1, 10.0),
                num("gain_db", "Gain", "float", "dB", filter::GAIN_DB)
                    .when("shape", &["lowshelf", "highshelf", "peaking"]),
                num("sections", "Sections", "int", "", filter::SECTIONS),
            ],
        ),
    ]
}

/// The schema as JSON (what the page reads).
pub fn schema_json() -> String {
    serde_json::to_string(&schema()).expect("the schema serialises")
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every kind the preset knows is described, and every described option and default is one the preset reads.
    #[test]
    fn schema_covers_every_kind_and_its_values_parse() {
        let kinds = schema();
        for k in &kinds {
            for f in &k.fields {
                let mut values: Vec<Value> = f.options.iter().map(|o| Value::from(*o)).collect();
                if let Some(r) = f.range {
                    values.extend([Value::from(r.min), Value::from(r.max)]);
                    if f.kind == "int" {
                        values.extend([Value::from(r.min as i64), Value::from(r.max as i64)]);
                    }
                }
                if !f.default.is_null() {
                    values.push(f.default.clone());
                }
                for v in values {
                    if f.kind == "int" && v.as_f64().is_some_and(|x| x.fract() == 0.0 && v.is_f64()) {
                        continue;
                    }
                    let json = serde_json::json!({ "kind": k.kind, f.key: v });
                    serde_json::from_value::<StageSpec>(json.clone()).unwrap_or_else(|e| panic!("{json}: {e}"));
                }
            }
        }
        let names: Vec<&str> = kinds.iter().map(|k| k.kind).collect();
        assert_eq!(
            names,
            ["gain", "rate", "quantize", "g711", "compand", "adpcm", "codec", "delta", "minifloat", "filter"]
        );
    }

    /// The ranges are the ones validation enforces: the ends pass, one step beyond fails, naming the field.
    #[test]
    fn ranges_are_the_validated_ones() {
        for k in schema() {
            for f in k.fields.iter().filter(|f| f.range.is_some()) {
                let r = f.range.unwrap();
                let mut base = serde_json::to_value(
                    serde_json::from_value::<StageSpec>(serde_json::json!({ "kind": k.kind })).unwrap(),
                )
                .unwrap();
                if let Some(w) = &f.when {
                    base[w.field] = Value::from(w.is[0]);
                }
                let (lo, hi) =
                    if k.kind == "adpcm" || k.kind == "codec" { (r.min + 8.0, r.max) } else { (r.min, r.max) };
                let at = |v: f64| {
                    let mut s = base.clone();
                    s[f.key] = if f.kind == "int" { Value::from(v as i64) } else { Value::from(v) };
                    serde_json::from_value::<StageSpec>(s).ok().map(|spec| crate::stages::validate(&spec))
                };
                for v in [lo, hi] {
                    if k.kind == "minifloat" && f.key == "bias" && v > 7.0 {
                        continue; // the bias's upper end depends on the exponent bits (2^e − 1)
                    }
                    assert!(matches!(at(v), Some(Ok(()))), "{}.{} = {v} should pass", k.kind, f.key);
                }
                let step = f.step.unwrap_or(1.0);
                for v in [r.min - step, r.max + step] {
                    if f.kind == "int" && v < 0.0 && k.kind != "minifloat" {
                        // a negative value is refused already by the preset's unsigned type
                        assert!(at(v).is_none());
                        continue;
                    }
                    match at(v) {
                        Some(Err(e)) => assert!(e.to_string().contains(f.key), "{}.{}: {e}", k.kind, f.key),
                        None => {}
                        Some(Ok(())) => panic!("{}.{} = {v} should fail", k.kind, f.key),
                    }
                }
            }
        }
    }
}
