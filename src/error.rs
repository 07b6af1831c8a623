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
    /// A file could not be written because its disk (or the user's quota,
    /// or the largest file allowed) is full.
    DiskFull,
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
        if let Some(what) = no_room(err) {
            return Self::new(
                ErrorKind::DiskFull,
                format!("could not {doing} {}: {what} ({err})", path.display()),
            );
        }
        Self::new(
            ErrorKind::Io,
            format!("could not {doing} {}: {err}", path.display()),
        )
    }

    /// The same error with `more` added to its message (what was done
    /// about it, what to do).
    pub fn with_advice(self, more: &str) -> Self {
        Self::new(self.kind, format!("{}; {more}", self.message))
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

/// What `err` says when there was no room: the disk full, a quota
/// reached, or a file above the largest size allowed (`ulimit -f`).
fn no_room(err: &std::io::Error) -> Option<&'static str> {
    use std::io::ErrorKind as K;
    match err.kind() {
        K::StorageFull => Some("the disk is full"),
        K::QuotaExceeded => Some("the disk quota is used up"),
        K::FileTooLarge => Some("the file would be larger than this system allows"),
        _ => None,
    }
}

/// Whether an error known only as text (from a crate that does not keep
/// the `std::io::Error`) says there was no room: the system's numbers for
/// a full disk (ENOSPC 28 on Linux and macOS, ERROR_DISK_FULL 112 and
/// ERROR_HANDLE_DISK_FULL 39 on Windows), a file too large (EFBIG 27) and
/// a quota reached (EDQUOT 122 on Linux, 69 on macOS), as Rust's
/// `std::io::Error` prints them: "(os error N)".
pub fn text_says_full(text: &str) -> bool {
    let codes: &[u32] = if cfg!(windows) {
        &[39, 112]
    } else if cfg!(target_os = "macos") {
        &[27, 28, 69]
    } else {
        &[27, 28, 122]
    };
    codes
        .iter()
        .any(|c| text.contains(&format!("(os error {c})")))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_full_disk_is_told_apart_from_other_failures() {
        // the kinds std gives ENOSPC, EFBIG and EDQUOT (Linux numbers)
        for code in [28, 27, 122] {
            let e = std::io::Error::from_raw_os_error(code);
            let err = Error::io("write", Path::new("x.wav"), &e);
            #[cfg(target_os = "linux")]
            {
                assert_eq!(err.kind(), ErrorKind::DiskFull, "{code}: {err}");
                assert!(text_says_full(&format!("wrapped: {e}")), "{e}");
            }
            assert!(err.message().contains("x.wav"));
        }
        let other = std::io::Error::from_raw_os_error(13); // EACCES
        assert_eq!(
            Error::io("write", Path::new("x"), &other).kind(),
            ErrorKind::Io
        );
        assert!(!text_says_full(&other.to_string()));
    }
}
