//! The crate's one error type.
//!
//! Every variant carries what a person needs to fix the problem: the parameter's name, the offending value and the
//! allowed range, or what is wrong with a file. The CLI prints these messages and exits non-zero; the wasm boundary
//! turns them into JavaScript exceptions with the same text.

use std::fmt;

/// Result alias used throughout the crate.
pub type Result<T> = std::result::Result<T, Error>;

/// Everything that can go wrong in Stairstep.
#[derive(Debug, Clone, PartialEq)]
pub enum Error {
    /// A parameter is outside its allowed range.
    Param {
        /// Parameter name as the user sees it, e.g. `bits` or `stages[2].bits`.
        name: String,
        /// The offending value, formatted.
        value: String,
        /// The allowed range or set, e.g. `1..=24`.
        allowed: String,
    },
    /// A file could not be understood (malformed or unsupported).
    Format(String),
    /// An input/output error from the operating system.
    Io(String),
    /// A preset could not be parsed.
    Preset(String),
}

impl Error {
    /// Shorthand for [`Error::Param`].
    pub fn param(name: impl Into<String>, value: impl fmt::Display, allowed: impl Into<String>) -> Self {
        Error::Param { name: name.into(), value: value.to_string(), allowed: allowed.into() }
    }

    /// Shorthand for [`Error::Format`].
    pub fn format(msg: impl Into<String>) -> Self {
        Error::Format(msg.into())
    }

    /// Prefixes the parameter name with a path, e.g. `bits` becomes `stages[2].bits`.
    pub fn at(self, prefix: &str) -> Self {
        match self {
            Error::Param { name, value, allowed } => Error::Param { name: format!("{prefix}.{name}"), value, allowed },
            other => other,
        }
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::Param { name, value, allowed } => {
                write!(f, "parameter `{name}` is {value}, allowed: {allowed}")
            }
            Error::Format(m) => write!(f, "unreadable file: {m}"),
            Error::Io(m) => write!(f, "i/o error: {m}"),
            Error::Preset(m) => write!(f, "bad preset: {m}"),
        }
    }
}

impl std::error::Error for Error {}

impl From<std::io::Error> for Error {
    fn from(e: std::io::Error) -> Self {
        Error::Io(e.to_string())
    }
}

/// Checks `lo <= v <= hi` for a float parameter (NaN fails).
pub(crate) fn check_range_f(name: &str, v: f64, lo: f64, hi: f64, unit: &str) -> Result<()> {
    if v.is_finite() && v >= lo && v <= hi {
        Ok(())
    } else {
        Err(Error::param(name, v, format!("{lo} to {hi}{unit}")))
    }
}

/// Checks `lo <= v <= hi` for an integer parameter.
pub(crate) fn check_range_u(name: &str, v: u64, lo: u64, hi: u64) -> Result<()> {
    if v >= lo && v <= hi {
        Ok(())
    } else {
        Err(Error::param(name, v, format!("{lo}..={hi}")))
    }
}

/// The allowed range of a numeric parameter, stated once beside its stage and read by the validation, the page's
/// forms and the CLI's help (see [`crate::stages::schema()`]).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Range {
    /// Smallest allowed value.
    pub min: f64,
    /// Largest allowed value.
    pub max: f64,
}

impl Range {
    /// A range from `min` to `max`, both included.
    pub const fn new(min: f64, max: f64) -> Self {
        Range { min, max }
    }

    /// Checks a real value; the error says `min to max` and the unit (e.g. " dB").
    pub fn check_f(&self, name: &str, v: f64, unit: &str) -> Result<()> {
        check_range_f(name, v, self.min, self.max, unit)
    }

    /// Checks a whole value; the error says `min..=max`.
    pub fn check_u(&self, name: &str, v: u64) -> Result<()> {
        check_range_u(name, v, self.min as u64, self.max as u64)
    }
}
