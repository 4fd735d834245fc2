//! Link profile: the JSON document (`*.profile.json`) that says how a signal was
//! built, and its resolution into plain data with every default filled in.
//!
//! Takes in: JSON text (or a [`Profile`] value built in code). Gives out: a
//! [`ResolvedProfile`] (plain `Serialize` data that the report embeds and the
//! analysis turns into the config structs of `sync`, `channel` and `equalise`),
//! or one [`ProfileError`] that names the key path (e.g.
//! `training.sequence.pattern`) and the allowed values.
//!
//! Units and conventions: rates in Hz (`_hz`), lengths in symbols (`_symbols`)
//! unless named otherwise, `samples_per_symbol` is an integer oversampling
//! factor, the RRC roll-off is the excess-bandwidth factor β ∈ (0, 1] and the
//! pulse span is in symbols (the pulse has `span_symbols × samples_per_symbol + 1`
//! taps, as `signal::rrc_taps` builds it). Channel-fit tap counts follow the
//! crate's tap convention (pre-cursor taps `h[−P..−1]`, post-cursor `h[1..Q]`).
//!
//! Frame layout: a burst is `[payload before][training][payload after]`; the
//! payload `position` is `after` (preamble frame), `before` (postamble frame) or
//! `both` (midamble frame). A known payload restarts its regeneration rule
//! (e.g. PRBS from its seed) in every burst, and a `both` payload runs the rule
//! through the part before the training and then on through the part after it.
//!
//! Parsing is strict: every object rejects unknown keys (`deny_unknown_fields`)
//! and every error is reported with the key path (tracked by
//! `serde_path_to_error`) and, for JSON errors, the line and column.

mod example;
mod resolve;
mod schema;
mod symbols;

pub use crate::capture::SampleFormat;
pub use crate::signal::{Modulation, PrbsPattern};
pub use example::{example_profile, ExampleOptions};
pub use resolve::check_training_fits;
pub use symbols::PayloadSymbols;

pub use resolve::{
    ResolvedCapture, ResolvedChannelFit, ResolvedEqualiser, ResolvedLimits, ResolvedMlse,
    ResolvedPayload, ResolvedPayloadRule, ResolvedProfile, ResolvedPulse, ResolvedSearch,
    ResolvedSequence, ResolvedTraining,
};
pub use schema::{
    CaptureSection, ChannelFitSection, Delay, EqualiserKind, EqualiserSection, LimitsSection,
    MlseSection, PayloadPosition, PayloadRule, PayloadSection, Profile, PulseSection, PulseShape,
    SearchSection, Sequence, TapCount, Tracking, TrainingSection,
};

use std::path::{Path, PathBuf};

/// Everything that can be wrong with a link profile. Every variant names the
/// key (a dotted path such as `payload.length_symbols`) it is about.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ProfileError {
    /// The profile file could not be read.
    #[error("cannot read profile {path}: {source}")]
    Io {
        /// The profile file.
        path: PathBuf,
        /// The operating-system error.
        source: std::io::Error,
    },
    /// The JSON did not parse into a profile: a syntax error, an unknown key, an
    /// unknown value of a named set, or a value of the wrong type.
    #[error("{key}: {message} (line {line}, column {column})")]
    Parse {
        /// Dotted key path where the error was found (`.` for the document).
        key: String,
        /// serde's message (for unknown keys and values it lists the allowed ones).
        message: String,
        /// 1-based line in the JSON text.
        line: usize,
        /// 1-based column in the JSON text.
        column: usize,
    },
    /// A value is out of range or otherwise not allowed.
    #[error("{key}: expected {expected}, found {found}")]
    InvalidValue {
        /// Dotted key path.
        key: String,
        /// What is allowed.
        expected: String,
        /// What the profile gave.
        found: String,
    },
    /// A key that is required in this context is absent.
    #[error("{key}: missing; {hint}")]
    Missing {
        /// Dotted key path.
        key: String,
        /// What to add.
        hint: String,
    },
    /// Two keys contradict each other or one is given where it has no meaning.
    #[error("{key}: {problem}")]
    Conflict {
        /// Dotted key path.
        key: String,
        /// What is wrong and what to do.
        problem: String,
    },
    /// The training block is too short for the number of taps the channel fit
    /// estimates.
    #[error(
        "{key}: the training block has {training_symbols} symbols but the channel fit \
         uses {taps} taps (channel_fit.pre_cursor_taps {pre} + channel_fit.post_cursor_taps \
         {post} + 1), which needs at least {needed} training symbols (2 x taps); lengthen \
         the training block or fit fewer taps"
    )]
    TrainingTooShort {
        /// Dotted key path of the training length.
        key: String,
        /// Symbols in the training block.
        training_symbols: usize,
        /// Taps the channel fit estimates.
        taps: usize,
        /// Pre-cursor taps.
        pre: usize,
        /// Post-cursor taps.
        post: usize,
        /// Training symbols needed.
        needed: usize,
    },
    /// A symbols file named by the profile could not be read or parsed.
    #[error("{key}: symbols file {path}: {message}")]
    SymbolsFile {
        /// Dotted key path of the `path` key.
        key: String,
        /// The file.
        path: PathBuf,
        /// What went wrong.
        message: String,
    },
    /// An error in a profile file, with the file named.
    #[error("{path}: {source}")]
    InFile {
        /// The profile file.
        path: PathBuf,
        /// The error.
        source: Box<ProfileError>,
    },
}

impl ProfileError {
    /// The dotted key path the error is about, if any (not for I/O errors).
    pub fn key(&self) -> Option<&str> {
        match self {
            ProfileError::Io { .. } => None,
            ProfileError::Parse { key, .. }
            | ProfileError::InvalidValue { key, .. }
            | ProfileError::Missing { key, .. }
            | ProfileError::Conflict { key, .. }
            | ProfileError::TrainingTooShort { key, .. }
            | ProfileError::SymbolsFile { key, .. } => Some(key),
            ProfileError::InFile { source, .. } => source.key(),
        }
    }
}

/// Parse profile JSON text strictly (unknown keys are errors). Relative file
/// paths inside stay as written.
pub fn parse_profile(text: &str) -> Result<Profile, ProfileError> {
    let mut de = serde_json::Deserializer::from_str(text);
    let parsed: Result<Profile, _> = serde_path_to_error::deserialize(&mut de);
    let profile = parsed.map_err(|e| {
        let key = e.path().to_string();
        let inner = e.into_inner();
        let mut message = strip_position(&inner.to_string());
        if message == "expected value" {
            message.push_str(" (numbers must be finite: JSON has no NaN or Infinity)");
        }
        ProfileError::Parse {
            key,
            message,
            line: inner.line(),
            column: inner.column(),
        }
    })?;
    de.end().map_err(|e| ProfileError::Parse {
        key: ".".to_string(),
        message: strip_position(&e.to_string()),
        line: e.line(),
        column: e.column(),
    })?;
    Ok(profile)
}

/// serde_json appends " at line L column C"; the error carries those fields
/// separately, so drop the suffix to avoid saying it twice.
fn strip_position(message: &str) -> String {
    match message.rfind(" at line ") {
        Some(i) => message[..i].to_string(),
        None => message.to_string(),
    }
}

/// Read, parse and resolve a profile file. Relative symbols-file paths are
/// taken relative to the profile's directory. Every error names the file.
/// Symbols files must lie inside the profile's folder
/// ([`check_symbols_files_inside`]); use [`load_profile_with`] to allow others.
pub fn load_profile(path: &Path) -> Result<ResolvedProfile, ProfileError> {
    load_profile_with(path, false)
}

/// [`load_profile`], with `allow_outside_symbols` the explicit opt-in
/// (`--allow-outside-symbols`) for symbols files outside the profile's folder.
pub fn load_profile_with(
    path: &Path,
    allow_outside_symbols: bool,
) -> Result<ResolvedProfile, ProfileError> {
    let text = crate::limits::read_small_text(path, crate::limits::MAX_PROFILE_BYTES).map_err(
        |source| ProfileError::Io {
            path: path.to_path_buf(),
            source,
        },
    )?;
    let in_file = |e: ProfileError| ProfileError::InFile {
        path: path.to_path_buf(),
        source: Box::new(e),
    };
    let mut profile = parse_profile(&text).map_err(in_file)?;
    let base = path.parent().unwrap_or_else(|| Path::new(""));
    profile.rebase_paths(base);
    let resolved = profile.resolve().map_err(in_file)?;
    if !allow_outside_symbols {
        check_symbols_files_inside(&resolved, base).map_err(in_file)?;
    }
    Ok(resolved)
}

/// The symbols files a resolved profile reads: `(key, path)` pairs.
pub fn symbols_files(profile: &ResolvedProfile) -> Vec<(&'static str, PathBuf)> {
    let mut out = Vec::new();
    if let resolve::ResolvedSequence::SymbolsFile { path } = &profile.training.sequence {
        out.push(("training.sequence.path", PathBuf::from(path)));
    }
    if let Some(resolve::ResolvedPayloadRule::SymbolsFile { path }) = &profile.payload.known {
        out.push(("payload.known.path", PathBuf::from(path)));
    }
    out
}

/// Refuse a symbols file that does not lie inside `folder` (after following
/// links and `..`): a profile — also one inside a report, or the
/// `CAPTURE.profile.json` loaded by default — cannot make the tool read, and
/// quote from, a file elsewhere without the user's explicit opt-in.
///
/// # Errors
/// [`ProfileError::SymbolsFile`] naming the key.
pub fn check_symbols_files_inside(
    profile: &ResolvedProfile,
    folder: &Path,
) -> Result<(), ProfileError> {
    let folder = if folder.as_os_str().is_empty() {
        Path::new(".")
    } else {
        folder
    };
    let root = std::fs::canonicalize(folder).map_err(|source| ProfileError::Io {
        path: folder.to_path_buf(),
        source,
    })?;
    for (key, p) in symbols_files(profile) {
        let inside = std::fs::canonicalize(&p).is_ok_and(|c| c.starts_with(&root));
        if !inside {
            return Err(ProfileError::SymbolsFile {
                key: key.to_string(),
                path: p,
                message: format!(
                    "is not inside the profile's folder {} (or does not exist); pass \
                     --allow-outside-symbols to read a symbols file elsewhere",
                    crate::text::escaped_path(folder)
                ),
            });
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests;
