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
    /// A file an earlier step of baler wrote and a later step reads (a count run, a tally, a
    /// phrase index of the extraction's map/reduce steps) fails its header, checksum or record
    /// checks.
    DamagedIntermediate {
        /// The file.
        path: PathBuf,
        /// What it should hold, e.g. "count run".
        what: String,
        /// Which check failed.
        reason: String,
    },
    /// A temporary file this run wrote itself (a sort run, a spooled input) no longer reads
    /// back as written: the disk or another process changed it.
    DamagedTemporary {
        /// What the file held, e.g. "sort run".
        what: &'static str,
        /// Why it cannot be read.
        reason: String,
    },
    /// The stage this one feeds stopped taking records (its own error is what to report; the
    /// pipeline replaces this one with it).
    ConsumerStopped,
    /// An internal invariant does not hold: a bug in baler.
    Internal(&'static str),
    /// Drawing a plot failed (the plotting library's message).
    Plot(String),
    /// A worker thread of the run panicked: a bug in baler.
    WorkerPanicked {
        /// Which worker, e.g. "packer".
        worker: &'static str,
    },
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

    /// Shorthand for an [`Error::DamagedIntermediate`].
    pub fn damaged_intermediate(
        path: impl Into<PathBuf>,
        what: impl Into<String>,
        reason: impl Into<String>,
    ) -> Error {
        Error::DamagedIntermediate {
            path: path.into(),
            what: what.into(),
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
            } if path.as_os_str() == "-" => {
                let stream = if action.starts_with("reading") || action.starts_with("opening") {
                    "standard input"
                } else {
                    "standard output"
                };
                write!(f, "{action} {stream}: {source}")
            }
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
            Error::DamagedIntermediate { path, what, reason } => write!(
                f,
                "{}: damaged or not a baler {what}: {reason}",
                path.display()
            ),
            Error::DamagedTemporary { what, reason } => {
                write!(f, "a temporary {what} of this run is damaged: {reason}")
            }
            Error::Internal(what) => write!(f, "internal error (please report it): {what}"),
            Error::Plot(reason) => write!(f, "drawing the plot failed: {reason}"),
            Error::ConsumerStopped => f.write_str("the next stage stopped taking records"),
            Error::WorkerPanicked { worker } => {
                write!(
                    f,
                    "the {worker} thread panicked (a bug in baler; please report it)"
                )
            }
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
