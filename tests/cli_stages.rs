//! `stairstep stages`: the CLI's description of the stage kinds comes from the core's schema, and every field it
//! lists is one a preset accepts, at both ends of the range it states.

mod common;

use serde_json::Value;
use std::process::Command;

#[test]
fn stages_json_describes_fields_that_presets_accept() {
    let out = Command::new(common::bin()).args(["stages", "--json"]).output().expect("run stairstep");
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let kinds: Vec<Value> = serde_json::from_slice(&out.stdout).expect("JSON");
    assert!(kinds.len() >= 7);
    for k in &kinds {
        let kind = k["kind"].as_str().unwrap();
        for f in k["fields"].as_array().unwrap() {
            let key = f["key"].as_str().unwrap();
            let mut values = vec![f["default"].clone()];
            if f["type"] == "int" {
                values.push(Value::from(f["max"].as_f64().unwrap() as i64));
            }
            for v in values.into_iter().filter(|v| !v.is_null()) {
                let mut stage = serde_json::json!({ "kind": kind });
                stage[key] = v.clone();
                if let Some(w) = f.get("when") {
                    stage[w["field"].as_str().unwrap()] = w["is"][0].clone();
                }
                if kind == "minifloat" && key == "bias" {
                    stage["exponent_bits"] = Value::from(8);
                }
                let preset = serde_json::json!({ "format": "stairstep-preset", "version": 1, "stages": [stage] });
                let r = stairstep::Preset::from_json(&preset.to_string());
                assert!(r.is_ok(), "{kind}.{key} = {v}: {:?}", r.err());
            }
        }
    }
}

#[test]
fn stages_text_names_an_unknown_kind() {
    let out = Command::new(common::bin()).args(["stages", "flanger"]).output().expect("run stairstep");
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("flanger") && err.contains("quantize"), "{err}");
}
