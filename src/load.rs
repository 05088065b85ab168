//! The only I/O of the pipeline: the spec's text and the training files. Only regular files
//! are read (a FIFO or a device would block or never end); a spec may name any path, as a
//! build script may read anything (README, "What a spec may read").

use crate::error::{Error, Location, Result};
use crate::kind::Misfit;
use crate::spec::{CodecSpec, Source};
use crate::verify::Fnv;
use std::collections::BTreeMap;
use std::io::Read;
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

/// Bytes read from a sample at a time: memory follows the symbols, not the file.
const BLOCK: usize = 1 << 20;

/// Symbols of a sample kept for the round trip at generation time; the rest is counted and
/// dropped, so that memory is bounded whatever the sample's size.
pub const KEPT_SYMBOLS: usize = 1 << 22;

/// One sample file, counted.
#[derive(Debug, Clone)]
pub struct Sample {
    /// Occurrences of each symbol in the whole file.
    pub counts: Vec<u64>,
    /// The file's first [`KEPT_SYMBOLS`] symbols.
    pub kept: Vec<u16>,
    /// Symbols in the whole file.
    pub total: u64,
    /// Integers codecs (whose symbols are chosen from these): the first [`KEPT_SYMBOLS`]
    /// places, and the places counted over the whole file.
    pub places: Vec<u32>,
    pub place_counts: BTreeMap<u32, u64>,
}

/// Every sample file of `codec`, in the order of its sources. Each file is read in blocks
/// through the kind's scanner and into `hash` (the spec hash of the output).
pub fn samples(codec: &CodecSpec, hash: &mut Fnv) -> Result<Vec<Sample>> {
    let mut out = Vec::new();
    for source in &codec.sources {
        if let Source::Sample {
            declared,
            path,
            location,
        } = source
        {
            let cannot = |message: String| {
                Error::input(
                    Some(location.clone()),
                    format!("cannot read sample \"{declared}\": {message}"),
                )
                .in_codec(&codec.name)
            };
            let mut file = open_regular(path).map_err(cannot)?;
            if let Some(integers) = codec.kind.integers() {
                let mut scanner = integers.value_scanner();
                let mut sample = Sample {
                    counts: Vec::new(),
                    kept: Vec::new(),
                    total: 0,
                    places: Vec::new(),
                    place_counts: BTreeMap::new(),
                };
                let mut places = Vec::new();
                let mut block = vec![0u8; BLOCK];
                let misfit = loop {
                    places.clear();
                    let (n, result) = match file.read(&mut block) {
                        Ok(0) => (0, scanner.finish(&mut places)),
                        Ok(n) => (n, scanner.feed(&block[..n], &mut places)),
                        Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
                        Err(e) => return Err(cannot(e.to_string())),
                    };
                    hash.write(&block[..n]);
                    for &u in &places {
                        *sample.place_counts.entry(u).or_insert(0) += 1;
                    }
                    sample.total += places.len() as u64;
                    let room = KEPT_SYMBOLS - sample.places.len();
                    sample
                        .places
                        .extend_from_slice(&places[..places.len().min(room)]);
                    match result {
                        Err(m) => break Some(m),
                        Ok(()) if n == 0 => break None,
                        Ok(()) => {}
                    }
                };
                if let Some(Misfit { offset, message }) = misfit {
                    let at = locate(path, offset).map_err(cannot)?;
                    return Err(Error::input(
                        Some(at),
                        format!("{message} (byte offset {offset})"),
                    )
                    .in_codec(&codec.name));
                }
                hash.end_part();
                out.push(sample);
                continue;
            }
            let mut scanner = codec.kind.scanner();
            let mut sample = Sample {
                counts: vec![0; codec.kind.alphabet_len()],
                kept: Vec::new(),
                total: 0,
                places: Vec::new(),
                place_counts: BTreeMap::new(),
            };
            let mut symbols = Vec::new();
            let mut block = vec![0u8; BLOCK];
            let misfit = loop {
                symbols.clear();
                let (n, result) = match file.read(&mut block) {
                    Ok(0) => (0, scanner.finish(&mut symbols)),
                    Ok(n) => (n, scanner.feed(&block[..n], &mut symbols)),
                    Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
                    Err(e) => return Err(cannot(e.to_string())),
                };
                hash.write(&block[..n]);
                for &s in &symbols {
                    sample.counts[usize::from(s)] += 1;
                }
                sample.total += symbols.len() as u64;
                let room = KEPT_SYMBOLS - sample.kept.len();
                sample
                    .kept
                    .extend_from_slice(&symbols[..symbols.len().min(room)]);
                match result {
                    Err(m) => break Some(m),
                    Ok(()) if n == 0 => break None,
                    Ok(()) => {}
                }
            };
            if let Some(Misfit { offset, message }) = misfit {
                let at = locate(path, offset).map_err(cannot)?;
                return Err(
                    Error::input(Some(at), format!("{message} (byte offset {offset})"))
                        .in_codec(&codec.name),
                );
            }
            hash.end_part();
            out.push(sample);
        }
    }
    Ok(out)
}

/// Line and column of byte `offset` of the file at `path`, read again in blocks (only on the
/// way to an error). Columns count characters; a byte that is not UTF-8 counts as one.
fn locate(path: &Path, offset: usize) -> std::result::Result<Location, String> {
    let mut file = open_regular(path)?;
    let mut block = vec![0u8; BLOCK];
    let (mut line, mut column, mut seen) = (1usize, 1usize, 0usize);
    while seen < offset {
        let n = file.read(&mut block).map_err(|e| e.to_string())?;
        if n == 0 {
            break;
        }
        for &b in &block[..n.min(offset - seen)] {
            if b == b'\n' {
                line += 1;
                column = 1;
            } else if b & 0xc0 != 0x80 {
                column += 1;
            }
        }
        seen += n;
    }
    Ok(Location {
        path: path.to_path_buf(),
        line,
        column,
    })
}

/// Opens `path` for reading if it is a regular file (after following links). Checked before
/// opening: opening a FIFO would block.
fn open_regular(path: &Path) -> std::result::Result<std::fs::File, String> {
    let meta = std::fs::metadata(path).map_err(|e| e.to_string())?;
    if !meta.is_file() {
        return Err("not a regular file (precast reads only regular files)".to_string());
    }
    std::fs::File::open(path).map_err(|e| e.to_string())
}

/// Reads `path` whole if it is a regular file.
fn regular_file(path: &Path) -> std::result::Result<Vec<u8>, String> {
    let mut bytes = Vec::new();
    open_regular(path)?
        .read_to_end(&mut bytes)
        .map_err(|e| e.to_string())?;
    Ok(bytes)
}
