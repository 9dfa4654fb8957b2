//! Choosing an export by what it costs: every sensible (rate, export) pair for a sound and a chain, measured side by
//! side (exact bytes, quality), the size-quality Pareto front, the best candidate within a byte or bit-rate budget,
//! and the sharing of one budget among the files of a folder.
//!
//! Layer: above [`render`](crate::render) (it renders every candidate); nothing in the core imports it, only the
//! boundaries (CLI, page).
//!
//! # Candidates
//! [`Budget::new`] takes a preset, the sound, and (as `stairstep render` does) the loop found in the input file. The
//! candidate rates are the chain's own rate (the source rate when it has no active rate stage), the source rate (no
//! reduction) and the [`RATE_LADDER`] at or below the source rate; the exports are [`export_choices`] plus the preset's own export. Each
//! candidate is a complete [`Preset`], the given one with:
//!
//! - **its rate**: the chain's active rate stage gets the candidate's `rate_hz` and keeps its mode (hold or clean);
//!   a chain without one gets a `clean` (band-limited) rate stage inserted as its first stage, so every stage runs at
//!   the export rate, as it would on the target device. At the source rate, the chain's rate stage is bypassed (and
//!   none is inserted);
//! - **its export**, and, appended to the chain unless the chain already ends with it, the stage that makes the
//!   audition exactly what the file holds ([`hearing_stage`]): an undithered quantizer at the export's bit depth for
//!   PCM and raw exports, G.711 for μ-law and A-law, the IMA ADPCM round trip for IMA ADPCM. These stages do not change
//!   the bytes written (the quantizer rounds exactly as the writers do, the codecs are idempotent on their own output;
//!   the tests decode every candidate's file and compare), but they make the measured figures, and what the page
//!   plays, those of the file.
//!
//! # Figures
//! For each candidate ([`Candidate`]): `bytes` (exactly what `render` writes:
//! [`ExportFormat::file_size_with`](crate::io::ExportFormat::file_size_with) with the render's loop points), bytes
//! per second and kbit/s of the whole file over the sound's duration, the SQNR (the render's: chain input against the
//! audition), the A-weighted SNR (the A-weighted energy of the chain input over the A-weighted energy of the error,
//! both weighted by IEC 61672-1's frequency weighting A, see [`crate::analysis::weighting`]), the audio bandwidth kept
//! (the clean mode's anti-aliasing cutoff; the export's Nyquist frequency in hold mode or at the source rate) and
//! the samples clipped by the stages.
//!
//! # Picking
//! [`pick`]: the highest score within the limit (ties: fewer bytes, then list order). [`mark_pareto`]: candidates no
//! other candidate beats on both size and score. [`allocate`]: one candidate per file so that the summed score is
//! greatest within a total, by exact search over
//! partial sums (pruned to those no other beats on both size and score), falling back for large folders to a greedy
//! on marginal gain per byte with a certified bound.

use crate::analysis::weighting::a_weighted_energy;
use crate::audio::Clip;
use crate::db::power_db;
use crate::error::{Error, Result};
use crate::io::{AiffEncoding, ExportFormat, WavEncoding};
use crate::preset::{Preset, StageSlot};
use crate::render::render_with_loop;
use crate::stages::adpcm::AdpcmParams;
use crate::stages::codec::{CodecName, CodecParams};
use crate::stages::delta::DeltaParams;
use crate::stages::g711::{G711Params, Law};
use crate::stages::quantize::QuantizeParams;
use crate::stages::rate::{RateMode, RateParams, RateReducer};
use crate::stages::{StageSpec, BLOCK};
use serde::{Deserialize, Serialize};

mod allocate;
pub use allocate::{allocate, allocate_greedy, Allocation, Method, Options, EXACT_MAX_STATES};

/// Candidate rates besides the chain's own, in Hz (those above the source rate are left out).
pub const RATE_LADDER: [u32; 6] = [44_100, 32_000, 22_050, 16_000, 11_025, 8_000];

/// The exports every budget considers (the preset's own is added when it is not among them). To consider a new
/// encoding, add it here and, if the file holds something the chain's audition does not, a case to
/// [`hearing_stage`].
pub fn export_choices() -> Vec<ExportFormat> {
    use crate::io::{BitOrder, Endian};
    let raw = |bits| ExportFormat::Raw { bits, signed: true, endian: Endian::Little, bit_order: BitOrder::MsbFirst };
    vec![
        ExportFormat::wav(WavEncoding::PcmS16),
        ExportFormat::wav(WavEncoding::PcmU8),
        ExportFormat::wav(WavEncoding::Mulaw),
        ExportFormat::wav(WavEncoding::Alaw),
        ExportFormat::wav(WavEncoding::ImaAdpcm),
        ExportFormat::wav(WavEncoding::MsAdpcm),
        ExportFormat::wav(WavEncoding::G721),
        // GSM 6.10 (8000 Hz mono) is left out: no stage can make the audition what its file holds (see
        // `hearing_stage`), so its figures would not be the file's.
        ExportFormat::Vox,
        raw(8),
        raw(4),
    ]
}

/// Whether `export` can hold a sound of `channels` channels at `rate` Hz: G.721 is mono at 8000 Hz, VOX mono,
/// Microsoft ADPCM one or two channels; the others take any.
pub fn applies(export: &ExportFormat, rate: u32, channels: usize) -> bool {
    match export {
        ExportFormat::Wav { encoding: WavEncoding::G721 | WavEncoding::Gsm610, .. } => rate == 8_000 && channels == 1,
        ExportFormat::Wav { encoding: WavEncoding::MsAdpcm, .. } => channels <= 2,
        ExportFormat::Vox => channels == 1,
        _ => true,
    }
}

/// A short name for an export, e.g. `wav pcm-u8`, `raw 4-bit`, `c-array int8`.
pub fn export_label(export: &ExportFormat) -> String {
    match export {
        ExportFormat::Wav { encoding, block_align: None } => format!("wav {}", encoding.name()),
        ExportFormat::Wav { encoding, block_align: Some(b) } => format!("wav {} /{b}", encoding.name()),
        ExportFormat::Raw { bits, signed, .. } => format!("raw {bits}-bit{}", if *signed { "" } else { " unsigned" }),
        ExportFormat::Aiff { encoding } => format!("aiff {}", encoding.name()),
        ExportFormat::Vox => "vox".to_string(),
        ExportFormat::DeltaBits { .. } => "delta-bits".to_string(),
        ExportFormat::CArray { element, .. } => {
            format!(
                "c-array {}",
                serde_json::to_value(element).ok().and_then(|v| v.as_str().map(String::from)).unwrap_or_default()
            )
        }
    }
}

/// The stage that makes a chain's audition exactly what `export` writes, for a chain input of `channels` channels:
/// an undithered quantizer at the export's bit depth (PCM up to 24 bits, raw, C arrays), G.711 (μ-law, A-law), the
/// IMA ADPCM round trip with the export's block size. `None` for 32-bit and float exports (the audition is already
/// what they hold, to within 2⁻³¹ or float rounding), and for GSM 6.10, which no stage can make exact.
pub fn hearing_stage(export: &ExportFormat, channels: usize) -> Result<Option<StageSpec>> {
    use crate::io::CElement;
    let q = |bits| Some(StageSpec::Quantize(QuantizeParams::bits(bits)));
    let codec = |codec, spb: Option<usize>| {
        Some(StageSpec::Codec(CodecParams { codec, samples_per_block: spb.map(|s| s as u32) }))
    };
    Ok(match export {
        ExportFormat::Wav { encoding, block_align } => match encoding {
            WavEncoding::PcmU8 => q(8),
            WavEncoding::PcmS16 => q(16),
            WavEncoding::PcmS24 => q(24),
            WavEncoding::PcmS32 | WavEncoding::Float32 => None,
            WavEncoding::Mulaw => Some(StageSpec::G711(G711Params { law: Law::Mulaw })),
            WavEncoding::Alaw => Some(StageSpec::G711(G711Params { law: Law::Alaw })),
            WavEncoding::ImaAdpcm => Some(StageSpec::Adpcm(match block_align {
                None => AdpcmParams::default(),
                Some(b) => AdpcmParams::for_block_align(*b as usize, channels)?,
            })),
            WavEncoding::MsAdpcm => codec(
                CodecName::MsAdpcm,
                block_align.map(|b| crate::codec::ms_adpcm::samples_per_block(b as usize, channels)).transpose()?,
            ),
            WavEncoding::G721 => codec(CodecName::G721, None),
            // No stage makes the audition what a GSM 6.10 file holds: the codec stage plays it one frame late (a
            // stage cannot look ahead) and re-coding decoded GSM is not transparent, so appending it would put a
            // second, shifted coding into the file. Hence GSM 6.10 is not among `export_choices`.
            WavEncoding::Gsm610 => None,
        },
        ExportFormat::Vox => codec(CodecName::VoxAdpcm, None),
        ExportFormat::Aiff { encoding } => match encoding {
            AiffEncoding::PcmS8 => q(8),
            AiffEncoding::PcmS16 => q(16),
            AiffEncoding::PcmS24 => q(24),
            AiffEncoding::Float32 => None,
        },
        ExportFormat::DeltaBits { step, leak, .. } => Some(StageSpec::Delta(DeltaParams { step: *step, leak: *leak })),
        ExportFormat::Raw { bits, .. } => q(*bits),
        ExportFormat::CArray { element: CElement::Int8 | CElement::Uint8, .. } => q(8),
        ExportFormat::CArray { element: CElement::Int16, .. } => q(16),
    })
}

/// Scores rank capped at 100 dB: beyond it (an exact copy reads +240 dB, 16-bit PCM about 98 dB) there is nothing to
/// hear, so a bigger file that only scores higher above it is not better, and one such file cannot outweigh every
/// other file of a folder in a summed score.
pub const SCORE_CAP_DB: f64 = 100.0;

/// Which figure ranks the candidates.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub enum Score {
    /// The SQNR in dB (`sqnr_db`).
    #[serde(rename = "sqnr_db")]
    Sqnr,
    /// The A-weighted SNR in dB (`a_weighted_snr_db`; the default).
    #[default]
    #[serde(rename = "a_weighted_snr_db")]
    AWeighted,
}

impl Score {
    /// The name of the candidate field it reads.
    pub fn field(self) -> &'static str {
        match self {
            Score::Sqnr => "sqnr_db",
            Score::AWeighted => "a_weighted_snr_db",
        }
    }

    /// The figure of a candidate, as reported.
    pub fn of(self, c: &Candidate) -> f64 {
        match self {
            Score::Sqnr => c.sqnr_db,
            Score::AWeighted => c.a_weighted_snr_db,
        }
    }

    /// The score that ranks a candidate: the figure, capped at [`SCORE_CAP_DB`].
    pub fn rank(self, c: &Candidate) -> f64 {
        self.of(c).min(SCORE_CAP_DB)
    }
}

/// A candidate before it is measured: its rate, its export and the complete preset that renders it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CandidateSpec {
    /// A short unique name, e.g. `11025-hold-wav-pcm-u8`.
    pub id: String,
    /// The export's sample rate in Hz.
    pub rate_hz: u32,
    /// The rate stage's mode, or `None` at the source rate (no rate stage active).
    pub rate_mode: Option<RateMode>,
    /// [`export_label`] of the export.
    pub export_label: String,
    /// True for the preset's own rate and export.
    pub current: bool,
    /// The preset that renders this candidate: `stairstep render --preset` writes exactly `bytes` bytes with it.
    pub preset: Preset,
}

/// A measured candidate. Read back by the page's boundary, which keeps the measured candidates on the JS side.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Candidate {
    /// See [`CandidateSpec::id`].
    pub id: String,
    /// The export's sample rate in Hz.
    pub rate_hz: u32,
    /// `hold`, `clean`, or `null` at the source rate.
    pub rate_mode: Option<RateMode>,
    /// The export, e.g. `wav ima-adpcm`.
    pub export_label: String,
    /// Exact size of the file `render` writes, in bytes.
    pub bytes: u64,
    /// `bytes` over the sound's duration.
    pub bytes_per_second: f64,
    /// `8 · bytes_per_second / 1000`.
    pub kbps: f64,
    /// SQNR in dB: chain input against the audition (+240 for an exact copy).
    pub sqnr_db: f64,
    /// A-weighted SNR in dB: A-weighted energy of the chain input over that of the error (+240 for an exact copy).
    pub a_weighted_snr_db: f64,
    /// Audio bandwidth kept, in Hz: the clean mode's anti-aliasing cutoff, else the export's Nyquist frequency.
    pub bandwidth_hz: f64,
    /// Samples clipped by the stages (all channels).
    pub clipped: u64,
    /// True for the preset's own rate and export.
    pub current: bool,
    /// On the size-quality Pareto front for the score used (set by [`mark_pareto`]).
    pub pareto: bool,
    /// The complete preset that renders this candidate.
    pub preset: Preset,
}

/// A sound and a preset, ready to measure candidates.
pub struct Budget<'a> {
    preset: Preset,
    clip: &'a Clip,
    file_loop: Option<(u64, u64)>,
    input: InputFigures,
}

/// What a budget measures once on the chain input (the sound after the preset's preparation): its shape and its
/// A-weighted energy. A caller that measures candidates one call at a time (the page's worker) keeps it and builds
/// each [`Budget`] with [`Budget::with_input`], so the preparation and the input's FFT run once, not per candidate.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct InputFigures {
    channels: usize,
    source_rate: u32,
    duration_s: f64,
    input_a_energy: f64,
}

impl<'a> Budget<'a> {
    /// Prepares the sound as `preset` does (its preparation and, like `render`, `file_loop` when the preset sets no
    /// loop region).
    pub fn new(preset: &Preset, clip: &'a Clip, file_loop: Option<(u64, u64)>) -> Result<Self> {
        preset.validate()?;
        let bare = Preset { stages: Vec::new(), export: ExportFormat::wav(WavEncoding::Float32), ..preset.clone() };
        let r = render_with_loop(&bare, clip, file_loop)?;
        let input = r.input(clip);
        let input_a_energy = input.channels.iter().map(|c| a_weighted_energy(c, input.sample_rate)).sum();
        let figures = InputFigures {
            channels: input.channel_count(),
            source_rate: input.sample_rate,
            duration_s: input.duration_s(),
            input_a_energy,
        };
        Ok(Budget { preset: preset.clone(), clip, file_loop, input: figures })
    }

    /// The budget of `preset` on `clip` with the input figures a [`Budget::new`] of the same preset (the same
    /// preparation), clip and loop measured ([`Budget::input_figures`]).
    pub fn with_input(
        preset: &Preset,
        clip: &'a Clip,
        file_loop: Option<(u64, u64)>,
        input: InputFigures,
    ) -> Result<Self> {
        preset.validate()?;
        Ok(Budget { preset: preset.clone(), clip, file_loop, input })
    }

    /// The figures measured on the chain input, for [`Budget::with_input`].
    pub fn input_figures(&self) -> InputFigures {
        self.input
    }

    /// The source rate of the chain's input in Hz.
    pub fn source_rate(&self) -> u32 {
        self.input.source_rate
    }

    /// The duration of the chain's input in seconds.
    pub fn duration_s(&self) -> f64 {
        self.input.duration_s
    }

    /// Every candidate: each rate (the chain's own first, then the source rate and the ladder, highest first) with each export (the
    /// preset's own first, then [`export_choices`]).
    pub fn candidates(&self) -> Result<Vec<CandidateSpec>> {
        let rate_at = self.preset.stages.iter().position(|s| !s.bypass && matches!(s.stage, StageSpec::Rate(_)));
        let (own_rate, own_mode) = match rate_at.map(|i| &self.preset.stages[i].stage) {
            Some(StageSpec::Rate(p)) => (p.rate_hz, p.mode),
            _ => (self.input.source_rate, RateMode::Clean),
        };
        let mut rates = vec![own_rate];
        for r in std::iter::once(self.input.source_rate).chain(RATE_LADDER) {
            if r <= self.input.source_rate && !rates.contains(&r) {
                rates.push(r);
            }
        }
        rates[1..].sort_unstable_by(|a, b| b.cmp(a));
        let mut exports = vec![self.preset.export.clone()];
        for e in export_choices() {
            if !exports.contains(&e) {
                exports.push(e);
            }
        }
        let mut out = Vec::with_capacity(rates.len() * exports.len());
        for &rate in &rates {
            for export in exports.iter().filter(|e| applies(e, rate, self.input.channels) || **e == self.preset.export)
            {
                let mut p = self.preset.clone();
                let mode = if rate == self.input.source_rate {
                    if let Some(i) = rate_at {
                        p.stages[i].bypass = true;
                    }
                    None
                } else {
                    match rate_at {
                        Some(i) => p.stages[i].stage = StageSpec::Rate(RateParams { rate_hz: rate, mode: own_mode }),
                        None => p.stages.insert(0, StageSlot::from(StageSpec::Rate(RateParams::clean(rate)))),
                    }
                    Some(own_mode)
                };
                if let Some(stage) = hearing_stage(export, self.input.channels)? {
                    if p.active_stages().last() != Some(&stage) {
                        p.stages.push(StageSlot::from(stage));
                    }
                }
                p.export = export.clone();
                let label = export_label(export);
                let mode_name = match mode {
                    None => "source".to_string(),
                    Some(RateMode::Hold) => "hold".to_string(),
                    Some(RateMode::Clean) => "clean".to_string(),
                };
                p.name = if self.preset.name.is_empty() {
                    format!("{rate} Hz {mode_name}, {label}")
                } else {
                    format!("{}, {rate} Hz {mode_name}, {label}", self.preset.name)
                };
                let id = format!("{rate}-{mode_name}-{}", label.replace([' ', '/'], "-"));
                let current = rate == own_rate && *export == self.preset.export;
                out.push(CandidateSpec { id, rate_hz: rate, rate_mode: mode, export_label: label, current, preset: p });
            }
        }
        Ok(out)
    }

    /// Renders and measures one candidate (independent of the others: run them in parallel as you like).
    pub fn measure(&self, spec: &CandidateSpec) -> Result<Candidate> {
        let r = render_with_loop(&spec.preset, self.clip, self.file_loop)?;
        let bytes = r.encoded_size(&spec.preset.export);
        if bytes == 0 {
            return Err(Error::param("export", export_label(&spec.preset.export), "an export this sound can use"));
        }
        let input = r.input(self.clip);
        let error_a: f64 =
            (0..input.channel_count()).map(|ch| a_weighted_energy(&r.error(self.clip, ch), input.sample_rate)).sum();
        let a_weighted_snr_db =
            if error_a == 0.0 { -crate::db::FLOOR_DB } else { power_db(self.input.input_a_energy / error_a) };
        let bandwidth_hz = match spec.rate_mode {
            Some(mode) => {
                let p = RateParams { rate_hz: spec.rate_hz, mode };
                let reducer = RateReducer::new(&p, self.input.source_rate, BLOCK)?;
                reducer.cutoff_hz().unwrap_or(spec.rate_hz as f64 / 2.0).min(spec.rate_hz as f64 / 2.0)
            }
            None => self.input.source_rate as f64 / 2.0,
        };
        let bytes_per_second = if self.input.duration_s > 0.0 { bytes as f64 / self.input.duration_s } else { 0.0 };
        Ok(Candidate {
            id: spec.id.clone(),
            rate_hz: spec.rate_hz,
            rate_mode: spec.rate_mode,
            export_label: spec.export_label.clone(),
            bytes,
            bytes_per_second,
            kbps: bytes_per_second * 8.0 / 1000.0,
            sqnr_db: r.report.sqnr_db,
            a_weighted_snr_db,
            bandwidth_hz,
            clipped: r.report.clipped,
            current: spec.current,
            pareto: false,
            preset: spec.preset.clone(),
        })
    }

    /// Every candidate measured, one after another (the CLI measures them in parallel with [`measure`](Self::measure)).
    /// Candidates the sound cannot use are left out, with their error.
    pub fn measure_all(&self) -> Result<(Vec<Candidate>, Vec<Skip>)> {
        let mut ok = Vec::new();
        let mut skipped = Vec::new();
        for spec in self.candidates()? {
            match self.measure(&spec) {
                Ok(c) => ok.push(c),
                Err(e) => skipped.push((spec.id, e)),
            }
        }
        Ok((ok, skipped))
    }
}

/// A candidate left out: its id and why.
pub type Skip = (String, Error);

/// A budget for one file.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case", tag = "kind", content = "value")]
pub enum Limit {
    /// No limit: the best candidate.
    None,
    /// At most this many bytes (the whole file).
    MaxBytes(u64),
    /// At most this many kbit/s (the whole file over the sound's duration, [`Candidate::kbps`]).
    MaxKbps(f64),
}

impl Limit {
    /// Whether a candidate is within the limit.
    pub fn admits(self, c: &Candidate) -> bool {
        match self {
            Limit::None => true,
            Limit::MaxBytes(b) => c.bytes <= b,
            Limit::MaxKbps(r) => c.kbps <= r,
        }
    }
}

/// Index of the best candidate within `limit` by `score` ([`Score::rank`]): the highest score; ties go to fewer bytes, then to the
/// earlier candidate. `None` when nothing fits.
pub fn pick(candidates: &[Candidate], score: Score, limit: Limit) -> Option<usize> {
    let mut best: Option<usize> = None;
    for (i, c) in candidates.iter().enumerate() {
        if !limit.admits(c) {
            continue;
        }
        best = match best {
            None => Some(i),
            Some(b) => {
                let (sb, sc) = (score.rank(&candidates[b]), score.rank(c));
                if sc > sb || (sc == sb && c.bytes < candidates[b].bytes) {
                    Some(i)
                } else {
                    Some(b)
                }
            }
        };
    }
    best
}

/// Sets `pareto` on every candidate that no other candidate dominates (at most as many bytes and at least the score,
/// one of them strictly). Of candidates equal on both, the first is on the front.
pub fn mark_pareto(candidates: &mut [Candidate], score: Score) {
    let n = candidates.len();
    for i in 0..n {
        let (bi, si) = (candidates[i].bytes, score.rank(&candidates[i]));
        let dominated = (0..n).any(|j| {
            let (bj, sj) = (candidates[j].bytes, score.rank(&candidates[j]));
            j != i && bj <= bi && sj >= si && (bj < bi || sj > si || j < i)
        });
        candidates[i].pareto = !dominated;
    }
}
