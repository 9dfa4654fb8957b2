//! `stairstep render` in a build pipeline: warnings reach the user, re-runs skip what is up to date, shards split a
//! batch, a new output never replaces a file that appeared meanwhile, and the messages a script relies on.
#![cfg(not(target_arch = "wasm32"))]

mod common;

use std::collections::BTreeMap;
use std::os::unix::fs::MetadataExt;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};

fn run(args: &[&str], dir: &Path) -> Output {
    Command::new(common::bin()).args(args).current_dir(dir).output().expect("run stairstep")
}

fn ok(out: &Output) {
    assert!(out.status.success(), "{}\n{}", String::from_utf8_lossy(&out.stdout), String::from_utf8_lossy(&out.stderr));
}

fn stderr(out: &Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

/// Streams (no preparation, WAV export).
const PRESET: &str = r#"{"format":"stairstep-preset","version":1,"name":"Pipe","seed":5,
  "stages":[{"kind":"rate","rate_hz":11025},{"kind":"quantize","bits":8,"dither":"tpdf"}],
  "export":{"type":"wav","encoding":"pcm-u8"}}"#;

/// Every file under `dir` (relative path -> bytes), manifests and temporary files included.
fn tree(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    fn walk(base: &Path, dir: &Path, out: &mut BTreeMap<String, Vec<u8>>) {
        for e in std::fs::read_dir(dir).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                walk(base, &p, out);
            } else {
                out.insert(p.strip_prefix(base).unwrap().to_string_lossy().into_owned(), std::fs::read(&p).unwrap());
            }
        }
    }
    let mut out = BTreeMap::new();
    if dir.exists() {
        walk(dir, dir, &mut out);
    }
    out
}

fn without_manifests(t: BTreeMap<String, Vec<u8>>) -> BTreeMap<String, Vec<u8>> {
    t.into_iter().filter(|(k, _)| !k.starts_with(".stairstep-manifest")).collect()
}

/// (modification time in ns, inode) of every file under `dir` but the manifests: a rewrite (even one that renames a
/// new file into place within the same clock tick) changes the inode.
fn stamps(dir: &Path) -> BTreeMap<String, (i128, u64)> {
    without_manifests(tree(dir))
        .into_keys()
        .map(|k| {
            let m = std::fs::metadata(dir.join(&k)).unwrap();
            (k, (m.mtime() as i128 * 1_000_000_000 + m.mtime_nsec() as i128, m.ino()))
        })
        .collect()
}

/// Nine inputs in nested folders (copies of three demos under different names) and the preset.
fn batch(dir: &Path) {
    std::fs::create_dir_all(dir.join("in/sub/deep")).unwrap();
    for (name, demo) in [("tone", "tone"), ("drum", "drum-hit"), ("chime", "chime-loop")] {
        ok(&run(&["demo", demo, "-o", &format!("{name}.wav")], dir));
    }
    for (i, rel) in ["in", "in/sub", "in/sub/deep"].iter().enumerate() {
        for name in ["tone", "drum", "chime"] {
            std::fs::copy(dir.join(format!("{name}.wav")), dir.join(rel).join(format!("{name}-{i}.wav"))).unwrap();
        }
    }
    std::fs::write(dir.join("p.json"), PRESET).unwrap();
}

/// A 2 s mono 16-bit demo cut after 20,000 bytes: its header says 96,000 frames.
fn truncated(dir: &Path) -> PathBuf {
    ok(&run(&["demo", "tone", "-o", "full.wav"], dir));
    let bytes = std::fs::read(dir.join("full.wav")).unwrap();
    let cut = dir.join("cut.wav");
    std::fs::write(&cut, &bytes[..20_000]).unwrap();
    cut
}

#[test]
fn a_truncated_wav_warns_in_text_and_json_and_fails_under_strict_with_nothing_written() {
    let t = tempfile::tempdir().unwrap();
    let cut = truncated(t.path());
    // The frames present, as libsndfile (Python soundfile) reads them from the cut file.
    let present = common::run_python(
        "import sys, io, soundfile as sf\nd, r = sf.read(io.BytesIO(sys.stdin.buffer.read()))\nprint(len(d))",
        &std::fs::read(&cut).unwrap(),
    );
    let present: u64 = String::from_utf8(present).unwrap().trim().parse().unwrap();
    // The header's frames: the WAV `data` size (2 s × 48,000 Hz × 2 bytes) over the block align (2 bytes, mono s16).
    let expected = format!("truncated: header says 96000 frames, {present} present");
    std::fs::write(t.path().join("p.json"), PRESET).unwrap();
    // A preset with preparation (normalisation) takes the in-memory path; the warning must come from both readers.
    let prep = PRESET.replace(r#""seed":5,"#, r#""seed":5,"prep":{"normalize":{"kind":"peak","target_dbfs":-1.0}},"#);
    std::fs::write(t.path().join("prep.json"), &prep).unwrap();
    for preset in ["p.json", "prep.json"] {
        let text = run(&["render", "--preset", preset, "cut.wav", "-o", &format!("text-{preset}.wav")], t.path());
        ok(&text);
        assert!(stderr(&text).contains(&expected), "{preset}: {}", stderr(&text));
        let dir = format!("json-{preset}");
        let json = run(&["render", "--preset", preset, "cut.wav", "--out-dir", &dir, "--json"], t.path());
        ok(&json);
        let v: serde_json::Value = serde_json::from_slice(&json.stdout).unwrap();
        let w = v[0]["warnings"].as_array().unwrap();
        assert!(w.iter().any(|w| w.as_str().unwrap().starts_with(&expected)), "{preset}: {v}");
        let strict = run(&["render", "--preset", preset, "cut.wav", "--out-dir", "strict", "--strict"], t.path());
        assert_eq!(strict.status.code(), Some(3), "{preset}: {}", stderr(&strict));
        assert!(stderr(&strict).contains(&expected) && stderr(&strict).contains("--strict"), "{}", stderr(&strict));
        assert!(without_manifests(tree(&t.path().join("strict"))).is_empty(), "nothing written under --strict");
    }
    // analyze reads the samples present and says the file is truncated.
    let analyze = run(&["analyze", "cut.wav"], t.path());
    ok(&analyze);
    assert!(stderr(&analyze).contains(&expected), "{}", stderr(&analyze));
    // A float WAV (written by libsndfile) with one NaN: the streaming render notices it only at the end of the
    // samples, after most of the output is written; under --strict nothing may be left.
    let nan = common::run_python(
        "import sys, io, numpy as np, soundfile as sf\nx = np.full(48000, 0.25, dtype=np.float32); x[40000] = np.nan\n\
         b = io.BytesIO(); sf.write(b, x, 48000, subtype='FLOAT', format='WAV'); sys.stdout.buffer.write(b.getvalue())",
        b"",
    );
    std::fs::write(t.path().join("nan.wav"), nan).unwrap();
    let warned = run(&["render", "--preset", "p.json", "nan.wav", "-o", "nan-out.wav"], t.path());
    ok(&warned);
    assert!(stderr(&warned).contains("1 input samples were NaN or infinite"), "{}", stderr(&warned));
    std::fs::create_dir(t.path().join("nan-strict")).unwrap();
    let strict = run(&["render", "--preset", "p.json", "nan.wav", "--out-dir", "nan-strict", "--strict"], t.path());
    assert_eq!(strict.status.code(), Some(3), "{}", stderr(&strict));
    assert!(tree(&t.path().join("nan-strict")).is_empty(), "nothing written, no temporary file left");
    // The whole file is fine under --strict.
    ok(&run(&["render", "--preset", "p.json", "full.wav", "-o", "full-out.wav", "--strict"], t.path()));
    // A re-run that skips the truncated file's output still repeats its warning, and --strict still fails it.
    let again = run(&["render", "--preset", "p.json", "cut.wav", "--out-dir", "json-p.json"], t.path());
    ok(&again);
    assert!(stderr(&again).contains("up to date") && stderr(&again).contains(&expected), "{}", stderr(&again));
    let strict = run(&["render", "--preset", "p.json", "cut.wav", "--out-dir", "json-p.json", "--strict"], t.path());
    assert_eq!(strict.status.code(), Some(3));
}

#[test]
fn a_rerun_of_an_unchanged_batch_touches_nothing_and_a_changed_preset_renders_everything_again() {
    let t = tempfile::tempdir().unwrap();
    batch(t.path());
    let args = ["render", "--preset", "p.json", "-r", "in", "--out-dir", "out"];
    ok(&run(&args, t.path()));
    let first = stamps(&t.path().join("out"));
    assert_eq!(first.len(), 9);
    let again = run(&args, t.path());
    ok(&again);
    assert!(stderr(&again).contains("0 rendered, 9 up to date, 0 failed"), "{}", stderr(&again));
    assert_eq!(stamps(&t.path().join("out")), first, "an up-to-date output is left untouched");

    // --dry-run lists and writes nothing.
    std::fs::write(t.path().join("p.json"), PRESET.replace(r#""seed":5"#, r#""seed":6"#)).unwrap();
    std::fs::write(t.path().join("out/stranger.wav"), b"not stairstep's").unwrap();
    std::fs::copy(t.path().join("tone.wav"), t.path().join("in/stranger.wav")).unwrap();
    let before = tree(&t.path().join("out"));
    let dry = run(&[&args[..], &["--dry-run"]].concat(), t.path());
    assert_eq!(dry.status.code(), Some(3), "a refusal would fail the batch: {}", stderr(&dry));
    let listing = String::from_utf8_lossy(&dry.stdout);
    assert_eq!(listing.lines().filter(|l| l.starts_with("replace ") && l.contains("preset changed")).count(), 9);
    assert_eq!(listing.lines().filter(|l| l.starts_with("refuse ") && l.contains("stranger.wav")).count(), 1);
    assert_eq!(tree(&t.path().join("out")), before, "--dry-run writes nothing");

    // A changed preset: every output is stale and rendered again, without --force; the stranger stays.
    let changed = run(&[&args[..], &["--json"]].concat(), t.path());
    assert_eq!(changed.status.code(), Some(3));
    let rows: serde_json::Value = serde_json::from_slice(&changed.stdout).unwrap();
    let rows = rows.as_array().unwrap();
    assert_eq!(rows.iter().filter(|r| r["action"] == "replace" && r["ok"] == true).count(), 9, "{rows:?}");
    assert_eq!(std::fs::read(t.path().join("out/stranger.wav")).unwrap(), b"not stairstep's");
    let now = stamps(&t.path().join("out"));
    for (k, v) in &first {
        assert_ne!(now[k], *v, "{k} was not rendered again");
    }
    // The same bytes as a fresh run of the new preset.
    std::fs::remove_file(t.path().join("in/stranger.wav")).unwrap();
    ok(&run(&["render", "--preset", "p.json", "-r", "in", "--out-dir", "fresh"], t.path()));
    let mut out = without_manifests(tree(&t.path().join("out")));
    out.remove("stranger.wav");
    assert_eq!(out, without_manifests(tree(&t.path().join("fresh"))));

    // An output edited by hand is no longer stairstep's: refused without --force, replaced with it.
    std::fs::write(t.path().join("out/tone-0.wav"), b"edited").unwrap();
    let edited = run(&args, t.path());
    assert_eq!(edited.status.code(), Some(3));
    assert!(stderr(&edited).contains("changed since"), "{}", stderr(&edited));
    assert_eq!(std::fs::read(t.path().join("out/tone-0.wav")).unwrap(), b"edited");
    ok(&run(&[&args[..], &["--force", "--quiet"]].concat(), t.path()));
    assert_eq!(
        std::fs::read(t.path().join("out/tone-0.wav")).unwrap(),
        std::fs::read(t.path().join("fresh/tone-0.wav")).unwrap()
    );
}

#[test]
fn shards_are_disjoint_and_together_equal_one_run_byte_for_byte() {
    let t = tempfile::tempdir().unwrap();
    batch(t.path());
    ok(&run(&["render", "--preset", "p.json", "-r", "in", "--out-dir", "one", "--quiet"], t.path()));
    let mut shards = Vec::new();
    for k in ["1/2", "2/2"] {
        let dir = format!("shard{}", &k[..1]);
        let out = run(&["render", "--preset", "p.json", "-r", "in", "--out-dir", &dir, "--shard", k], t.path());
        ok(&out);
        assert!(stderr(&out).contains(&format!("(shard {k}: ")), "{}", stderr(&out));
        shards.push(without_manifests(tree(&t.path().join(dir))));
    }
    assert!(shards[0].keys().all(|k| !shards[1].contains_key(k)), "shards overlap");
    let mut union = shards[0].clone();
    union.extend(shards[1].clone());
    assert_eq!(union, without_manifests(tree(&t.path().join("one"))));
    assert!(!shards[0].is_empty() && !shards[1].is_empty(), "nine files in one shard: the hash does not spread");
    // Both shards into one folder: each keeps its own manifest, and a whole run afterwards finds all up to date.
    for k in ["1/2", "2/2"] {
        ok(&run(&["render", "--preset", "p.json", "-r", "in", "--out-dir", "both", "--shard", k], t.path()));
    }
    assert!(t.path().join("both/.stairstep-manifest.1-of-2.json").exists());
    let whole = run(&["render", "--preset", "p.json", "-r", "in", "--out-dir", "both"], t.path());
    ok(&whole);
    assert!(stderr(&whole).contains("0 rendered, 9 up to date"), "{}", stderr(&whole));
    // The shard of a file does not depend on the other files or on where the batch lies (only on the output's path).
    let moved =
        run(&["render", "--preset", "p.json", "in/sub", "--out-dir", "s", "--shard", "1/2", "--dry-run"], t.path());
    let listed: Vec<String> =
        String::from_utf8_lossy(&moved.stdout).lines().map(|l| l.rsplit('/').next().unwrap().to_string()).collect();
    for name in &listed {
        assert!(shards[0].contains_key(&format!("sub/{name}")), "{name} changed shard");
    }
    let bad = run(&["render", "--preset", "p.json", "in", "--out-dir", "x", "--shard", "3/2"], t.path());
    assert_eq!(bad.status.code(), Some(2));
}

/// The output appears (another process writes it) after stairstep checked that it was free and while it renders:
/// stairstep must fail rather than replace it.
#[test]
fn a_file_appearing_between_check_and_create_is_not_replaced() {
    let t = tempfile::tempdir().unwrap();
    // 40 s stereo at 48 kHz through a slow chain: long enough to act while it renders.
    let n = 48_000 * 40;
    let ch: Vec<f32> = (0..n).map(|i| ((i as f32) * 0.01).sin() * 0.5).collect();
    let clip = stairstep::Clip::new(48_000, vec![ch.clone(), ch]).unwrap();
    std::fs::write(t.path().join("long.wav"), stairstep::io::ExportFormat::default().encode(&clip).unwrap()).unwrap();
    std::fs::write(
        t.path().join("slow.json"),
        r#"{"format":"stairstep-preset","version":1,"stages":[{"kind":"rate","rate_hz":44100,"mode":"clean"},{"kind":"quantize","bits":12,"dither":"tpdf","shaping":"ewt9"}],"export":{"type":"wav","encoding":"pcm-s24"}}"#,
    )
    .unwrap();
    std::fs::create_dir(t.path().join("out")).unwrap();
    let child = Command::new(common::bin())
        .args(["render", "--preset", "slow.json", "long.wav", "--out-dir", "out"])
        .current_dir(t.path())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    // The temporary file shows that the check is done and the render under way.
    let start = std::time::Instant::now();
    let tmp_seen = loop {
        let tmp = std::fs::read_dir(t.path().join("out"))
            .unwrap()
            .any(|e| e.unwrap().file_name().to_string_lossy().ends_with(".stairstep-tmp"));
        if tmp || start.elapsed().as_secs() > 60 {
            break tmp;
        }
        std::thread::sleep(std::time::Duration::from_millis(5));
    };
    assert!(tmp_seen, "no temporary file appeared");
    std::fs::write(t.path().join("out/long.wav"), b"written by someone else").unwrap();
    let out = child.wait_with_output().unwrap();
    assert_eq!(out.status.code(), Some(4), "{}", stderr(&out));
    assert!(stderr(&out).contains("appeared while"), "{}", stderr(&out));
    assert_eq!(std::fs::read(t.path().join("out/long.wav")).unwrap(), b"written by someone else");
    let left: Vec<String> = tree(&t.path().join("out")).into_keys().filter(|k| k != "long.wav").collect();
    assert!(left.iter().all(|k| k.starts_with(".stairstep-manifest")), "temporary files left: {left:?}");
}

/// `{stem}` in a C array's name: every header of a batch declares its own array, so one translation unit can include
/// them all. The C compiler (cc) is the judge of the identifiers.
#[test]
fn c_arrays_of_a_batch_get_their_own_names_and_compile_together() {
    let t = tempfile::tempdir().unwrap();
    std::fs::create_dir(t.path().join("in")).unwrap();
    for (name, demo) in [("coin", "drum-hit"), ("1up", "tone"), ("jump-high", "chime-loop"), ("int", "tone")] {
        ok(&run(&["demo", demo, "-o", &format!("in/{name}.wav")], t.path()));
    }
    std::fs::write(t.path().join("p.json"), PRESET).unwrap();
    ok(&run(
        &[
            "render",
            "--preset",
            "p.json",
            "in",
            "--out-dir",
            "h",
            "--format",
            r#"{"type":"c-array","element":"uint8","name":"sfx_{stem}"}"#,
            "--quiet",
        ],
        t.path(),
    ));
    let mut unit = String::new();
    for name in ["coin", "1up", "jump-high", "int"] {
        unit.push_str(&format!("#include \"h/{name}.h\"\n"));
    }
    unit.push_str("unsigned sum(void) { return sfx_coin[0] + sfx_1up[0] + sfx_jump_high[0] + sfx_int[0]; }\n");
    std::fs::write(t.path().join("all.c"), unit).unwrap();
    let cc = Command::new("cc")
        .args(["-std=c99", "-Wall", "-Werror", "-Wno-unused-const-variable", "-c", "all.c", "-o", "all.o"])
        .current_dir(t.path())
        .output()
        .expect("a C compiler (cc)");
    assert!(cc.status.success(), "{}", String::from_utf8_lossy(&cc.stderr));
    // A stem that would make a keyword on its own.
    ok(&run(
        &[
            "render",
            "--preset",
            "p.json",
            "in/int.wav",
            "-o",
            "int.h",
            "--format",
            r#"{"type":"c-array","element":"int8","name":"{stem}"}"#,
        ],
        t.path(),
    ));
    std::fs::write(t.path().join("one.c"), "#include \"int.h\"\nint first(void) { return int_[0]; }\n").unwrap();
    let cc =
        Command::new("cc").args(["-std=c99", "-c", "one.c", "-o", "one.o"]).current_dir(t.path()).output().unwrap();
    assert!(cc.status.success(), "{}", String::from_utf8_lossy(&cc.stderr));
}

#[test]
fn messages_a_script_relies_on() {
    let t = tempfile::tempdir().unwrap();
    ok(&run(&["demo", "tone", "-o", "tone.wav"], t.path()));
    std::fs::write(t.path().join("p.json"), PRESET).unwrap();
    // An unknown preset name: a usage error that lists the built-ins.
    let bad = run(&["render", "--preset", "no-such", "tone.wav", "-o", "x.wav"], t.path());
    assert_eq!(bad.status.code(), Some(2));
    assert!(stderr(&bad).contains("not a built-in preset or a file; built-ins: ") && stderr(&bad).contains("handheld"));
    // An unknown --name placeholder: refused before anything is written.
    let name =
        run(&["render", "--preset", "p.json", "tone.wav", "--out-dir", "o", "--name", "{steem}.{ext}"], t.path());
    assert_eq!(name.status.code(), Some(2));
    assert!(stderr(&name).contains("{steem}"), "{}", stderr(&name));
    assert!(!t.path().join("o").exists());
    // A failure is named once, with its reason, also under --quiet.
    std::fs::write(t.path().join("junk.wav"), b"RIFF\x04\x00\x00\x00WAVE").unwrap();
    for extra in [&[][..], &["--quiet"][..]] {
        let one = run(&[&["render", "--preset", "p.json", "junk.wav", "-o", "j.wav"][..], extra].concat(), t.path());
        assert_eq!(one.status.code(), Some(3));
        let err = stderr(&one);
        assert_eq!(err.matches("junk.wav").count(), 1, "{err}");
        assert!(err.contains("fmt"), "{err}");
        let many = run(
            &[&["render", "--preset", "p.json", "junk.wav", "tone.wav", "--out-dir", "m", "--force"][..], extra]
                .concat(),
            t.path(),
        );
        assert_eq!(many.status.code(), Some(3));
        assert_eq!(stderr(&many).matches("junk.wav").count(), 1, "{}", stderr(&many));
    }
    // sweep: a 16-bit PCM file's samples are multiples of 2^-15 (the WAV PCM definition), so the 16-bit grid and finer
    // leave them as they are: "lossless", not a number; the grid is spelt as the option is.
    let sweep = run(&["sweep", "tone.wav"], t.path());
    ok(&sweep);
    let text = String::from_utf8_lossy(&sweep.stdout);
    assert!(text.contains("(mid-tread, nearest, no dither)"), "{text}");
    let bits16 = text.lines().find(|l| l.trim_start().starts_with("16 ")).unwrap();
    assert!(bits16.contains("lossless") && !text.contains("240.00"), "{text}");
    let bits8 = text.lines().find(|l| l.trim_start().starts_with("8 ")).unwrap();
    assert!(!bits8.contains("lossless"), "{bits8}");
}

/// `stairstep serve` from a folder without the page: it serves the page built into the binary, on 127.0.0.1.
#[test]
fn serve_works_from_any_folder() {
    use std::io::{BufRead, BufReader, Read, Write};
    let t = tempfile::tempdir().unwrap();
    let mut child = Command::new(common::bin())
        .args(["serve", "--port", "0"])
        .current_dir(t.path())
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let mut line = String::new();
    BufReader::new(child.stdout.as_mut().unwrap()).read_line(&mut line).unwrap();
    let url = line.split_whitespace().find(|w| w.starts_with("http://")).expect("a URL").to_string();
    let addr = url.trim_start_matches("http://").trim_end_matches('/');
    assert!(addr.starts_with("127.0.0.1:"), "{addr}");
    let mut s = std::net::TcpStream::connect(addr).unwrap();
    s.write_all(b"GET / HTTP/1.1\r\nHost: x\r\n\r\n").unwrap();
    let mut got = Vec::new();
    s.read_to_end(&mut got).unwrap();
    let _ = child.kill();
    let _ = child.wait();
    let body = &got[got.windows(4).position(|w| w == b"\r\n\r\n").unwrap() + 4..];
    assert!(got.starts_with(b"HTTP/1.1 200 OK"));
    assert_eq!(body, std::fs::read(common::root().join("dist/stairstep.html")).unwrap());
}
