//! The error type shared by every stage.
//!
//! Every variant carries the context a user needs to act on it: the file, the line where the
//! input was read, the option that was wrong, or the section of a packed file that failed a
//! check. Messages are lower case and never end in a period, so they compose with prefixes.

use std::fmt;
use std::io;
use std::path::PathBuf;

/// Result alias used throughout the library.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Everything that can go wrong in baler.
#[derive(Debug)]
#[non_exhaustive]
pub enum Error {
    /// An operating-system error while reading or writing `path`.
    Io {
        /// The file (or `-` for a standard stream) being accessed.
        path: PathBuf,
        /// What was being done, e.g. "reading" or "creating".
        action: &'static str,
        /// The underlying error.
        source: io::Error,
    },
    /// A text input (TSV table, corpus, alignment) is malformed at a known line.
    Input {
        /// The file name as given by the user (or `-`).
        file: String,
        /// 1-based line number; 0 when the problem concerns the whole file.
        line: u64,
        /// What is wrong, in words.
        reason: String,
    },
    /// A packed table failed a structural or checksum check.
    Corrupt {
        /// The packed file.
        path: PathBuf,
        /// Which check failed and where.
        reason: String,
    },
    /// A command-line or library option has an unusable value.
    InvalidArgument {
        /// The option, spelled as on the command line (e.g. `--bits`).
        option: String,
        /// Why the value is unusable.
        reason: String,
    },
    /// An operation's preconditions are not met by otherwise valid input
    /// (e.g. a significance filter on a table without sentence-level counts).
    Unsupported(String),
}

impl Error {
    /// Shorthand for an [`Error::Input`].
    pub fn input(file: impl Into<String>, line: u64, reason: impl Into<String>) -> Error {
        Error::Input {
            file: file.into(),
            line,
            reason: reason.into(),
        }
    }

    /// Shorthand for an [`Error::Io`].
    pub fn io(path: impl Into<PathBuf>, action: &'static str, source: io::Error) -> Error {
        Error::Io {
            path: path.into(),
            action,
            source,
        }
    }

    /// Shorthand for an [`Error::Corrupt`].
    pub fn corrupt(path: impl Into<PathBuf>, reason: impl Into<String>) -> Error {
        Error::Corrupt {
            path: path.into(),
            reason: reason.into(),
        }
    }

    /// Shorthand for an [`Error::InvalidArgument`].
    pub fn invalid(option: impl Into<String>, reason: impl Into<String>) -> Error {
        Error::InvalidArgument {
            option: option.into(),
            reason: reason.into(),
        }
    }

    /// True when the error is a closed pipe on output (e.g. `baler dump t.bale | head`),
    /// which command-line tools treat as success.
    pub fn is_broken_pipe(&self) -> bool {
        matches!(self, Error::Io { source, .. } if source.kind() == io::ErrorKind::BrokenPipe)
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::Io {
                path,
                action,
                source,
            } => {
                write!(f, "{} {}: {}", action, path.display(), source)
            }
            Error::Input {
                file,
                line: 0,
                reason,
            } => write!(f, "{file}: {reason}"),
            Error::Input { file, line, reason } => write!(f, "{file}:{line}: {reason}"),
            Error::Corrupt { path, reason } => {
                write!(
                    f,
                    "{}: damaged or not a baler table: {}",
                    path.display(),
                    reason
                )
            }
            Error::InvalidArgument { option, reason } => write!(f, "invalid {option}: {reason}"),
            Error::Unsupported(reason) => f.write_str(reason),
        }
    }
}

impl std::error::Error for Error {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        match self {
            Error::Io { source, .. } => Some(source),
            _ => None,
        }
    }
}
