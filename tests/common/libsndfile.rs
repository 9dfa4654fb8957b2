//! libsndfile (through the pinned python-soundfile) as the reference codec of the codec tests: it encodes 16-bit
//! input and decodes files; plus the comparisons those tests share.

use serde_json::Value;

/// Runs Python with `stdin`; the snippet prints one JSON value.
pub fn py(code: &str, stdin: &[u8]) -> Value {
    let prelude = "import sys, io, json, struct, warnings\nwarnings.simplefilter('ignore')\nimport numpy as np\n\
                   import soundfile as sf\nb = sys.stdin.buffer.read()\n";
    let out = super::run_python(&format!("{prelude}{code}"), stdin);
    serde_json::from_slice(&out).unwrap_or_else(|e| panic!("{e}: {}", String::from_utf8_lossy(&out)))
}

pub fn ints(v: &Value) -> Vec<i64> {
    v.as_array().expect("array").iter().map(|x| x.as_i64().expect("int")).collect()
}

pub fn hex(s: &str) -> Vec<u8> {
    (0..s.len()).step_by(2).map(|i| u8::from_str_radix(&s[i..i + 2], 16).unwrap()).collect()
}

pub fn interleaved_le(ch: &[Vec<i16>]) -> Vec<u8> {
    let mut b = Vec::new();
    for i in 0..ch[0].len() {
        for c in ch {
            b.extend_from_slice(&c[i].to_le_bytes());
        }
    }
    b
}

/// libsndfile encodes the interleaved 16-bit input (stdin) as `fmt`/`subtype`; prints the file (hex) and its decode.
pub fn libsndfile_writes(input: &[Vec<i16>], rate: u32, format: &str, subtype: &str) -> (Vec<u8>, Vec<Vec<i64>>) {
    let ch = input.len();
    let v = py(
        &format!(
            "x = np.frombuffer(b, dtype='<i2').reshape(-1, {ch})\n\
             f = io.BytesIO(); f.name = 'x.{ext}'\n\
             sf.write(f, x, {rate}, format='{format}', subtype='{subtype}')\n\
             data = f.getvalue(); f.seek(0)\n\
             kw = dict(samplerate={rate}, channels={ch}, format='RAW', subtype='{subtype}') if '{format}' == 'RAW' else dict()\n\
             y, _ = sf.read(io.BytesIO(data), dtype='int16', always_2d=True, **kw)\n\
             print(json.dumps({{'file': data.hex(), 'y': y.T.tolist()}}))",
            ext = if format == "RAW" { "vox" } else { "wav" },
        ),
        &interleaved_le(input),
    );
    let file = hex(v["file"].as_str().unwrap());
    let y = v["y"].as_array().unwrap().iter().map(ints).collect();
    (file, y)
}

/// libsndfile's decode of a file we wrote (WAV, or raw VOX at `rate`).
pub fn libsndfile_reads(file: &[u8], vox_rate: Option<u32>) -> Vec<Vec<i64>> {
    let kw = match vox_rate {
        Some(r) => format!("samplerate={r}, channels=1, format='RAW', subtype='VOX_ADPCM'"),
        None => String::new(),
    };
    let v = py(
        &format!("y, _ = sf.read(io.BytesIO(b), dtype='int16', always_2d=True, {kw})\nprint(json.dumps(y.T.tolist()))"),
        file,
    );
    v.as_array().unwrap().iter().map(ints).collect()
}

/// Asserts equality, reporting the first difference instead of both whole vectors.
pub fn same(a: &[i64], b: &[i64], what: &str) {
    assert_eq!(a.len(), b.len(), "{what}: lengths");
    if let Some(i) = (0..a.len()).find(|&i| a[i] != b[i]) {
        panic!(
            "{what}: first difference at {i}: {} vs {} (next: {:?} vs {:?})",
            a[i],
            b[i],
            &a[i..(i + 5).min(a.len())],
            &b[i..(i + 5).min(b.len())]
        );
    }
}

pub fn snr_db(x: &[i16], y: &[i64]) -> f64 {
    let (mut s, mut n) = (0f64, 0f64);
    for (a, b) in x.iter().zip(y) {
        s += (*a as f64).powi(2);
        n += (*a as f64 - *b as f64).powi(2);
    }
    10.0 * (s / n.max(1e-9)).log10()
}
