//! The only I/O of the pipeline: the spec's text and the training files. Only regular files
//! are read (a FIFO or a device would block or never end); a spec may name any path, as a
//! build script may read anything (README, "What a spec may read").

use crate::error::{Error, Location, Result};
use crate::spec::{CodecSpec, Source};
use std::path::Path;

/// The spec file's text; a byte that is not UTF-8 is reported at its line and column.
pub fn spec_text(path: &Path) -> Result<String> {
    let bytes = regular_file(path).map_err(|message| Error {
        path: Some(path.to_path_buf()),
        ..Error::io_message(message)
    })?;
    String::from_utf8(bytes).map_err(|e| {
        let at = e.utf8_error().valid_up_to();
        let bytes = e.as_bytes();
        Error::input(
            Some(Location::in_bytes(path, bytes, at)),
            format!(
                "the spec is not UTF-8: byte 0x{:02x} cannot start or continue a character",
                bytes[at]
            ),
        )
    })
}

/// The bytes of every sample file of `codec`, in the order of its sources.
pub fn samples(codec: &CodecSpec) -> Result<Vec<Vec<u8>>> {
    let mut out = Vec::new();
    for source in &codec.sources {
        if let Source::Sample {
            declared,
            path,
            location,
        } = source
        {
            let bytes = regular_file(path).map_err(|message| {
                Error::input(
                    Some(location.clone()),
                    format!("cannot read sample \"{declared}\": {message}"),
                )
                .in_codec(&codec.name)
            })?;
            out.push(bytes);
        }
    }
    Ok(out)
}

/// Reads `path` if it is a regular file (after following links).
fn regular_file(path: &Path) -> std::result::Result<Vec<u8>, String> {
    let meta = std::fs::metadata(path).map_err(|e| e.to_string())?;
    if !meta.is_file() {
        return Err("not a regular file (precast reads only regular files)".to_string());
    }
    std::fs::read(path).map_err(|e| e.to_string())
}
