//! The one error type of the generator: where the problem is and what it is.

use std::fmt;
use std::path::{Path, PathBuf};

/// Where in a file a problem sits; line and column count from 1, columns in characters.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Location {
    pub path: PathBuf,
    pub line: usize,
    pub column: usize,
}

impl Location {
    /// Turns a byte offset into `text` into a line and column.
    pub fn at(path: &Path, text: &str, offset: usize) -> Location {
        let offset = offset.min(text.len());
        let mut start = offset;
        while !text.is_char_boundary(start) {
            start -= 1;
        }
        let before = &text[..start];
        let line = before.matches('\n').count() + 1;
        let line_start = before.rfind('\n').map_or(0, |i| i + 1);
        let column = before[line_start..].chars().count() + 1;
        Location {
            path: path.to_path_buf(),
            line,
            column,
        }
    }

    /// Line and column in a byte buffer that may not be UTF-8 (sample files).
    pub fn in_bytes(path: &Path, bytes: &[u8], offset: usize) -> Location {
        let offset = offset.min(bytes.len());
        let before = &bytes[..offset];
        let line = before.iter().filter(|&&b| b == b'\n').count() + 1;
        let line_start = before
            .iter()
            .rposition(|&b| b == b'\n')
            .map_or(0, |i| i + 1);
        let column = String::from_utf8_lossy(&before[line_start..])
            .chars()
            .count()
            + 1;
        Location {
            path: path.to_path_buf(),
            line,
            column,
        }
    }
}

/// What went wrong.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum ErrorKind {
    /// The spec or a sample is wrong: the user can fix it.
    Input,
    /// A file could not be read or written.
    Io,
    /// The generator broke one of its own invariants: a bug in precast.
    Internal,
}

/// An error from any stage of the generator.
///
/// `Display` gives `PATH:LINE:COL: codec NAME: message` with whatever parts are known, the form
/// editors and CI logs turn into links.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Error {
    pub kind: ErrorKind,
    pub location: Option<Location>,
    /// The file concerned when no line is known (I/O errors).
    pub path: Option<PathBuf>,
    pub codec: Option<String>,
    pub message: String,
    /// Further errors found in the same pass (a spec reports all of its mistakes at once);
    /// `Display` prints them one a line after this one.
    pub further: Vec<Error>,
}

impl Error {
    pub(crate) fn input(location: Option<Location>, message: impl Into<String>) -> Error {
        Error {
            kind: ErrorKind::Input,
            location,
            path: None,
            codec: None,
            message: message.into(),
            further: Vec::new(),
        }
    }

    pub(crate) fn io(path: &Path, err: &std::io::Error) -> Error {
        Error {
            kind: ErrorKind::Io,
            location: None,
            path: Some(path.to_path_buf()),
            codec: None,
            message: format!("cannot access file: {err}"),
            further: Vec::new(),
        }
    }

    pub(crate) fn io_message(message: String) -> Error {
        Error {
            kind: ErrorKind::Io,
            location: None,
            path: None,
            codec: None,
            message: format!("cannot access file: {message}"),
            further: Vec::new(),
        }
    }

    pub(crate) fn internal(message: impl Into<String>) -> Error {
        Error {
            kind: ErrorKind::Internal,
            location: None,
            path: None,
            codec: None,
            message: format!(
                "internal error (a bug in precast, please report it): {}",
                message.into()
            ),
            further: Vec::new(),
        }
    }

    /// One error standing for all of `errors` (in order), or `None` when there are none.
    pub(crate) fn gather(errors: Vec<Error>) -> Option<Error> {
        let mut all = errors.into_iter();
        let mut first = all.next()?;
        first.further.extend(all);
        Some(first)
    }

    /// This error and the further ones found with it, in order.
    pub fn all(&self) -> impl Iterator<Item = &Error> {
        std::iter::once(self).chain(self.further.iter())
    }

    pub(crate) fn in_codec(mut self, codec: &str) -> Error {
        if self.codec.is_none() {
            self.codec = Some(codec.to_string());
        }
        for e in &mut self.further {
            if e.codec.is_none() {
                e.codec = Some(codec.to_string());
            }
        }
        self
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if let Some(loc) = &self.location {
            write!(f, "{}:{}:{}: ", loc.path.display(), loc.line, loc.column)?;
        } else if let Some(path) = &self.path {
            write!(f, "{}: ", path.display())?;
        }
        if let Some(codec) = &self.codec {
            write!(f, "codec `{codec}`: ")?;
        }
        f.write_str(&self.message)?;
        for e in &self.further {
            write!(f, "\n{e}")?;
        }
        Ok(())
    }
}

impl std::error::Error for Error {}

pub type Result<T> = std::result::Result<T, Error>;
