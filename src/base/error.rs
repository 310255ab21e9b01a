//! Library errors.
//!
//! Every variant carries what a user needs to fix the problem: the file or
//! flag concerned, the value found, what was expected. `main` prints the
//! message once, on one line, and exits with status 2.

use std::path::PathBuf;

/// Errors from the analysis library.
#[derive(Debug, thiserror::Error)]
pub enum TonusError {
    /// The file could not be opened or read at all.
    #[error("cannot read {path}: {reason}; check the path and permissions")]
    Io { path: PathBuf, reason: String },

    /// The file is not a WAV file tonus can decode.
    #[error(
        "{path} is not a readable WAV file ({reason}); export the recording as PCM or float WAV"
    )]
    NotWav { path: PathBuf, reason: String },

    /// The file is none of the audio formats tonus reads.
    #[error(
        "{path} is not a readable WAV, FLAC or AIFF file ({found}); tonus reads WAV (RIFF or RF64: PCM or float), FLAC and AIFF/AIFF-C: export the recording as one of these"
    )]
    UnknownAudio { path: PathBuf, found: String },

    /// The WAV header parsed but the contents cannot be analysed.
    #[error("{path}: {problem}; {hint}")]
    BadRecording {
        path: PathBuf,
        problem: String,
        hint: String,
    },

    /// A quantity on the command line or in a panel file is malformed.
    #[error("{key}: cannot read {value:?} as {expected}; write e.g. {example}")]
    BadQuantity {
        key: String,
        value: String,
        expected: String,
        example: String,
    },

    /// A quantity parsed but is physically impossible or out of range.
    #[error("{key} = {value} is not allowed: {why}")]
    OutOfRange {
        key: String,
        value: String,
        why: String,
    },

    /// The geometry or material description is incomplete or contradictory.
    #[error("panel description: {0}")]
    Panel(String),

    /// A panel or configuration file could not be parsed.
    #[error("{path}: {reason}")]
    ConfigFile { path: PathBuf, reason: String },

    /// Nothing in the recording could be fitted.
    #[error("{0}")]
    NoFit(String),

    /// The data cannot determine the parameters asked for
    /// ([`crate::fitting::identifiability`]).
    #[error("{0}")]
    NotIdentifiable(String),

    /// Writing an output failed.
    #[error("cannot write {path}: {reason}")]
    Write { path: PathBuf, reason: String },
}

/// Convenience alias used across the library.
pub type Result<T> = std::result::Result<T, TonusError>;
