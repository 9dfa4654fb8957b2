//! The batch manifest: what Stairstep wrote into an output folder, from what, so that a re-run can skip the outputs
//! that are up to date, re-render the stale ones and still refuse to replace anything it did not write.
//!
//! File: `.stairstep-manifest.json` in the `--out-dir` folder (`.stairstep-manifest.K-of-N.json` for `--shard K/N`,
//! so that shards sharing a folder never write one file). A run reads every `.stairstep-manifest*.json` there and
//! writes only its own one. Entries are keyed by the output's path relative to the folder (`/`-separated):
//!
//! ```json
//! { "format": "stairstep-manifest", "version": 1,
//!   "outputs": { "sub/c.wav": { "input": "assets/sub/c.wav", "input_sha256": "…", "preset_sha256": "…",
//!                               "export": {"type": "wav", "encoding": "pcm-u8"}, "tool": "stairstep 0.1.0",
//!                               "output_sha256": "…", "warnings": ["…"] } } }
//! ```
//!
//! `preset_sha256` is the SHA-256 of the preset's normalised JSON (as `stairstep presets NAME` prints it, with
//! `--format` applied); `export` is the export actually written (a C array's name with `{stem}` filled in);
//! `warnings` (left out when there were none) are the render's, repeated when the output is skipped. An entry
//! describes an output only while the file's SHA-256 equals `output_sha256`: an output edited by hand is no longer
//! Stairstep's and is refused without `--force`, like any file the manifest does not know.
//!
//! One writer: the workers send entries over a channel to one thread, which rewrites the file atomically (temporary
//! file + rename) at most once a second and once at the end, so an interrupted batch keeps what it finished.

use super::{write_atomic, Failure, EXIT_OUTPUT};
use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};
use std::collections::BTreeMap;
use std::io::Read;
use std::path::{Path, PathBuf};
use std::sync::mpsc;
use std::time::{Duration, Instant};

/// The manifest's file name for a whole run.
pub const FILE: &str = ".stairstep-manifest.json";
const FORMAT: &str = "stairstep-manifest";

/// What produced one output.
#[derive(Serialize, Deserialize, Clone, Debug, PartialEq)]
pub struct Entry {
    /// The input as given on the command line (for people; not compared).
    pub input: PathBuf,
    pub input_sha256: String,
    pub preset_sha256: String,
    pub export: serde_json::Value,
    pub tool: String,
    pub output_sha256: String,
    /// The warnings of the render that wrote the output, repeated when it is skipped as up to date.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub warnings: Vec<String>,
}

impl Entry {
    /// Why this entry's output is stale for the wanted one (same output), or `None` when it is up to date.
    pub fn stale_because(&self, want: &Entry) -> Option<&'static str> {
        if self.input_sha256 != want.input_sha256 {
            Some("the input changed")
        } else if self.preset_sha256 != want.preset_sha256 {
            Some("the preset changed")
        } else if self.export != want.export {
            Some("the export changed")
        } else if self.tool != want.tool {
            Some("written by another version of stairstep")
        } else {
            None
        }
    }
}

#[derive(Serialize, Deserialize, Default)]
struct ManifestFile {
    format: String,
    version: u32,
    outputs: BTreeMap<String, Entry>,
}

/// The tool string recorded in entries.
pub fn tool() -> String {
    format!("stairstep {}", env!("CARGO_PKG_VERSION"))
}

/// Lower-case hex SHA-256 of bytes.
pub fn sha256(bytes: &[u8]) -> String {
    hex(&Sha256::digest(bytes))
}

/// Lower-case hex SHA-256 of a file, read in 1 MiB pieces.
pub fn sha256_file(path: &Path) -> std::io::Result<String> {
    let mut f = std::fs::File::open(path)?;
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 20];
    loop {
        let n = f.read(&mut buf)?;
        if n == 0 {
            break;
        }
        h.update(&buf[..n]);
    }
    Ok(hex(&h.finalize()))
}

/// A writer that hashes what passes through it (when `enabled`).
pub struct HashingWriter<W> {
    inner: W,
    hash: Option<Sha256>,
}

impl<W> HashingWriter<W> {
    pub fn new(inner: W, enabled: bool) -> Self {
        HashingWriter { inner, hash: enabled.then(Sha256::new) }
    }
    /// The hex SHA-256 of what was written (`None` when not enabled).
    pub fn hex(self) -> Option<String> {
        self.hash.map(|h| hex(&h.finalize()))
    }
}

impl<W: std::io::Write> std::io::Write for HashingWriter<W> {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        let n = self.inner.write(buf)?;
        if let Some(h) = &mut self.hash {
            h.update(&buf[..n]);
        }
        Ok(n)
    }
    fn flush(&mut self) -> std::io::Result<()> {
        self.inner.flush()
    }
}

fn hex(b: &[u8]) -> String {
    b.iter().map(|x| format!("{x:02x}")).collect()
}

/// The first 8 bytes of the SHA-256 of `s`, as a number (for `--shard`).
pub fn hash64(s: &str) -> u64 {
    let d = Sha256::digest(s.as_bytes());
    u64::from_be_bytes([d[0], d[1], d[2], d[3], d[4], d[5], d[6], d[7]])
}

/// Every manifest in an output folder, read once before the batch.
pub struct Known {
    /// Entries per output key, from all manifests in the folder (a key may have several).
    entries: BTreeMap<String, Vec<Entry>>,
    /// This run's own manifest as it was (kept and updated).
    own: BTreeMap<String, Entry>,
    own_path: PathBuf,
    /// Manifests that could not be read (their entries are not trusted).
    pub problems: Vec<String>,
}

impl Known {
    /// Reads the manifests in `dir`; this run's own file is `own_name`.
    pub fn load(dir: &Path, own_name: &str) -> Known {
        let mut k = Known {
            entries: BTreeMap::new(),
            own: BTreeMap::new(),
            own_path: dir.join(own_name),
            problems: Vec::new(),
        };
        let Ok(rd) = std::fs::read_dir(dir) else { return k };
        let mut names: Vec<String> = rd
            .filter_map(|e| e.ok()?.file_name().into_string().ok())
            .filter(|n| n.starts_with(".stairstep-manifest") && n.ends_with(".json"))
            .collect();
        names.sort();
        for name in names {
            let path = dir.join(&name);
            let parsed = std::fs::read(&path)
                .map_err(|e| e.to_string())
                .and_then(|b| serde_json::from_slice::<ManifestFile>(&b).map_err(|e| e.to_string()))
                .and_then(|m| if m.format == FORMAT { Ok(m) } else { Err(format!("not a {FORMAT}")) });
            match parsed {
                Ok(m) => {
                    for (key, e) in &m.outputs {
                        k.entries.entry(key.clone()).or_default().push(e.clone());
                    }
                    if name == own_name {
                        k.own = m.outputs;
                    }
                }
                Err(e) => k.problems.push(format!("{}: {e}: ignored", path.display())),
            }
        }
        k
    }

    /// Whether any manifest has an entry for `key`.
    pub fn has_key(&self, key: &str) -> bool {
        self.entries.contains_key(key)
    }

    /// The entry that describes the file now at `key`, whose SHA-256 is `output_sha256`.
    pub fn describing(&self, key: &str, output_sha256: &str) -> Option<&Entry> {
        self.entries.get(key)?.iter().find(|e| e.output_sha256 == output_sha256)
    }

    /// Starts the one writer of this run's manifest; send `(key, entry)` for each output written or found up to date,
    /// then drop the sender and [`Writer::finish`].
    pub fn writer(&self) -> Writer {
        let (tx, rx) = mpsc::channel::<(String, Entry)>();
        let (mut own, path) = (self.own.clone(), self.own_path.clone());
        let handle = std::thread::spawn(move || -> Result<(), Failure> {
            let mut dirty = false;
            let mut last = Instant::now();
            loop {
                match rx.recv_timeout(Duration::from_millis(250)) {
                    Ok((key, e)) => {
                        dirty |= own.get(&key) != Some(&e);
                        own.insert(key, e);
                    }
                    Err(mpsc::RecvTimeoutError::Timeout) => {}
                    Err(mpsc::RecvTimeoutError::Disconnected) => break,
                }
                if dirty && last.elapsed() >= Duration::from_secs(1) {
                    save(&path, &own)?;
                    dirty = false;
                    last = Instant::now();
                }
            }
            if dirty {
                save(&path, &own)?;
            }
            Ok(())
        });
        Writer { tx: Some(tx), handle }
    }
}

fn save(path: &Path, outputs: &BTreeMap<String, Entry>) -> Result<(), Failure> {
    let m = ManifestFile { format: FORMAT.into(), version: 1, outputs: outputs.clone() };
    let mut text = serde_json::to_string_pretty(&m).map_err(|e| Failure::new(EXIT_OUTPUT, e.to_string()))?;
    text.push('\n');
    write_atomic(path, text.as_bytes(), true).map_err(|f| Failure::new(EXIT_OUTPUT, format!("manifest: {}", f.message)))
}

/// The manifest's writer thread.
pub struct Writer {
    tx: Option<mpsc::Sender<(String, Entry)>>,
    handle: std::thread::JoinHandle<Result<(), Failure>>,
}

impl Writer {
    /// A sender for a worker.
    pub fn sender(&self) -> mpsc::Sender<(String, Entry)> {
        self.tx.clone().expect("open until finish")
    }

    /// Closes the channel, waits for the last write.
    pub fn finish(mut self) -> Result<(), Failure> {
        self.tx.take();
        self.handle.join().unwrap_or_else(|_| Err(Failure::new(EXIT_OUTPUT, "manifest writer stopped")))
    }
}
