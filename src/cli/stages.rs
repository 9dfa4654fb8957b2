//! `stairstep stages`: every stage kind with its fields, units, ranges and defaults, read from the core's schema
//! (the same one the page builds its chain editor from).

use super::{Failure, EXIT_USAGE};
use stairstep::stages::schema::{schema, Field, Kind};

/// A field's allowed values and default, as one line of text.
fn describe(f: &Field) -> String {
    let fmt = |v: f64| if v.fract() == 0.0 { format!("{v:.0}") } else { format!("{v}") };
    let unit = if f.unit.is_empty() { String::new() } else { format!(" {}", f.unit) };
    let allowed = match (f.kind, &f.range) {
        ("enum", _) => f.options.join(" | "),
        ("bool", _) => "true | false".to_string(),
        (_, Some(r)) => format!("{} to {}{unit}", fmt(r.min), fmt(r.max)),
        _ => String::new(),
    };
    let default = match (&f.default, f.placeholder) {
        (serde_json::Value::Null, Some(p)) => format!("left out: {p}"),
        (v, _) => format!("default {v}"),
    };
    let when = f.when.as_ref().map_or(String::new(), |w| format!(" (when {} is {})", w.field, w.is.join(" or ")));
    format!("  {:<18} {allowed}; {default}{when}", f.key)
}

/// Prints every kind (or one), or the schema as JSON.
pub fn run(kind: Option<&str>, json: bool) -> Result<(), Failure> {
    let all = schema();
    let chosen: Vec<&Kind> = match kind {
        None => all.iter().collect(),
        Some(k) => vec![all.iter().find(|s| s.kind == k).ok_or_else(|| {
            let kinds: Vec<&str> = all.iter().map(|s| s.kind).collect();
            Failure::new(EXIT_USAGE, format!("no stage kind {k:?}; there are: {}", kinds.join(", ")))
        })?],
    };
    if json {
        println!("{}", serde_json::to_string_pretty(&chosen).expect("the schema serialises"));
        return Ok(());
    }
    for k in chosen {
        println!("{} — {}", k.kind, k.label);
        for f in &k.fields {
            println!("{}", describe(f));
        }
    }
    Ok(())
}
