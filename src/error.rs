//! The library's error type: a kind and a message written for the user.
//!
//! Messages say what was wrong and what to do, in the user's terms (the file,
//! the channel, the frequency). The binary prints them once, after `error:`.

use std::fmt;
use std::path::Path;

/// What sort of failure this is; the binary maps it to an exit status.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ErrorKind {
    /// A parameter that cannot work (a band above Nyquist, a level above 0 dBFS).
    InvalidParameter,
    /// An input file or signal that cannot be analysed.
    InvalidInput,
    /// Refused to touch something that already exists.
    AlreadyExists,
    /// Reading or writing a file failed.
    Io,
    /// The sound device failed.
    Device,
}

/// An error with a message meant for the person at the terminal.
#[derive(Debug)]
pub struct Error {
    kind: ErrorKind,
    message: String,
}

/// Result with the library's error.
pub type Result<T> = std::result::Result<T, Error>;

impl Error {
    /// An error of `kind` with a ready message.
    pub fn new(kind: ErrorKind, message: impl Into<String>) -> Self {
        Error {
            kind,
            message: message.into(),
        }
    }

    /// A parameter that cannot work.
    #[cold]
    #[inline(never)]
    pub fn parameter(message: impl Into<String>) -> Self {
        Self::new(ErrorKind::InvalidParameter, message)
    }

    /// An input that cannot be analysed.
    #[cold]
    #[inline(never)]
    pub fn input(message: impl Into<String>) -> Self {
        Self::new(ErrorKind::InvalidInput, message)
    }

    /// A file operation on `path` failed with `err`; `doing` says what we tried.
    #[cold]
    #[inline(never)]
    pub fn io(doing: &str, path: &Path, err: &std::io::Error) -> Self {
        Self::new(
            ErrorKind::Io,
            format!("could not {doing} {}: {err}", path.display()),
        )
    }

    /// What sort of failure this is.
    pub fn kind(&self) -> ErrorKind {
        self.kind
    }

    /// The message alone.
    pub fn message(&self) -> &str {
        &self.message
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for Error {}
