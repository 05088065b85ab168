//! The only I/O of the pipeline: the spec's text and the training files. Only regular files
//! are read (a FIFO or a device would block or never end); a spec may name any path, as a
//! build script may read anything (README, "What a spec may read").

use crate::counts::{self, CountKind, Tally};
use crate::error::{Error, Location, Result};
use crate::kind::Misfit;
use crate::spec::{CodecSpec, Source};
use crate::verify::Fnv;
use std::collections::BTreeMap;
use std::io::{Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};

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
    /// Symbols in the whole file (0 for a counts file, which holds no sequence).
    pub total: u64,
    /// FNV-1a of the file's bytes, for reports.
    pub hash: u64,
    /// Integers codecs (whose symbols are chosen from these): the first [`KEPT_SYMBOLS`]
    /// places, and the places counted over the whole file.
    pub places: Vec<u32>,
    pub place_counts: BTreeMap<u32, u64>,
}

/// Every sample file and counts file of `codec`, in the order of its sources. Each file is
/// read in blocks through the kind's scanner and into `hash` (the spec hash of the output).
pub fn samples(codec: &CodecSpec, hash: &mut Fnv) -> Result<Vec<Sample>> {
    let mut out = Vec::new();
    for source in &codec.sources {
        if let Source::CountsFile {
            declared,
            path,
            location,
        } = source
        {
            out.push(counts_file(codec, declared, path, location, hash)?);
        }
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
            let mut sample = Sample {
                counts: vec![0; codec.kind.alphabet_len()],
                kept: Vec::new(),
                total: 0,
                hash: 0,
                places: Vec::new(),
                place_counts: BTreeMap::new(),
            };
            let read = if let Some(integers) = codec.kind.integers() {
                // Integers codecs keep values (places in the range); bins come later.
                let mut scanner = integers.value_scanner();
                let mut places = Vec::new();
                read_blocks(&mut file, hash, |block| {
                    places.clear();
                    let result = match block {
                        Some(b) => scanner.feed(b, &mut places),
                        None => scanner.finish(&mut places),
                    };
                    for &u in &places {
                        *sample.place_counts.entry(u).or_insert(0) += 1;
                    }
                    sample.total += places.len() as u64;
                    let room = KEPT_SYMBOLS - sample.places.len();
                    sample
                        .places
                        .extend_from_slice(&places[..places.len().min(room)]);
                    result
                })
            } else {
                let mut scanner = codec.kind.scanner();
                let mut symbols = Vec::new();
                read_blocks(&mut file, hash, |block| {
                    symbols.clear();
                    let result = match block {
                        Some(b) => scanner.feed(b, &mut symbols),
                        None => scanner.finish(&mut symbols),
                    };
                    for &s in &symbols {
                        sample.counts[usize::from(s)] += 1;
                    }
                    sample.total += symbols.len() as u64;
                    let room = KEPT_SYMBOLS - sample.kept.len();
                    sample
                        .kept
                        .extend_from_slice(&symbols[..symbols.len().min(room)]);
                    result
                })
            };
            match read.map_err(cannot)? {
                Ok(own) => sample.hash = own,
                Err(Misfit { offset, message }) => {
                    let at = locate(path, offset).map_err(cannot)?;
                    return Err(Error::input(
                        Some(at),
                        format!("{message} (byte offset {offset})"),
                    )
                    .in_codec(&codec.name));
                }
            }
            out.push(sample);
        }
    }
    Ok(out)
}

/// Reads `file` in blocks into `hash` (ending its part), handing each block to `feed`, then
/// `None` for the end of the input. Returns the file's own FNV-1a, or the first misfit
/// `feed` found; an I/O failure is the outer error.
fn read_blocks(
    file: &mut std::fs::File,
    hash: &mut Fnv,
    mut feed: impl FnMut(Option<&[u8]>) -> std::result::Result<(), Misfit>,
) -> std::result::Result<std::result::Result<u64, Misfit>, String> {
    let mut own = Fnv::default();
    let mut block = vec![0u8; BLOCK];
    loop {
        let n = match file.read(&mut block) {
            Ok(n) => n,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
            Err(e) => return Err(e.to_string()),
        };
        hash.write(&block[..n]);
        own.write(&block[..n]);
        let result = feed((n > 0).then(|| &block[..n]));
        if let Err(m) = result {
            return Ok(Err(m));
        }
        if n == 0 {
            hash.end_part();
            return Ok(Ok(own.finish()));
        }
    }
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

// ---- Counts files (`counts_file`, `precast count`) ----

/// Largest counts file read: far above any alphabet's (4,096 tokens of 256 bytes).
const MAX_COUNTS_FILE: u64 = 64 << 20;

/// A codec's counts file, as a [`Sample`] of counts only, keyed through the codec's kind.
fn counts_file(
    codec: &CodecSpec,
    declared: &str,
    path: &Path,
    location: &Location,
    hash: &mut Fnv,
) -> Result<Sample> {
    let cannot = |message: String| {
        Error::input(
            Some(location.clone()),
            format!("cannot read counts_file \"{declared}\": {message}"),
        )
        .in_codec(&codec.name)
    };
    let text = read_counts_text(path).map_err(cannot)?;
    hash.write(text.as_bytes());
    hash.end_part();
    let at = |line: usize, column: usize| Location {
        path: path.to_path_buf(),
        line,
        column,
    };
    let tally = counts::parse(&text)
        .map_err(|(l, c, m)| Error::input(Some(at(l, c)), m).in_codec(&codec.name))?;
    let kind = codec.kind.as_ref();
    if tally.kind.name() != kind.name() {
        return Err(cannot(format!(
            "it holds counts of kind {}, the codec is of kind {}",
            tally.kind.name(),
            kind.name()
        )));
    }
    let mut sample = Sample {
        counts: vec![0; kind.alphabet_len()],
        kept: Vec::new(),
        total: 0,
        hash: crate::verify::fnv1a(&[text.as_bytes()]),
        places: Vec::new(),
        place_counts: BTreeMap::new(),
    };
    for (key, count) in tally.entries() {
        let index = kind.count_key(&key).map_err(|m| {
            // Entries are on their own lines: find the key's line for the message.
            let line = text
                .lines()
                .position(|l| l.split_ascii_whitespace().next() == Some(key.as_str()))
                .map_or(1, |i| i + 1);
            Error::input(Some(at(line, 1)), m).in_codec(&codec.name)
        })?;
        sample.counts[index] = sample.counts[index].saturating_add(count);
    }
    Ok(sample)
}

/// A counts file's text (regular file, UTF-8, bounded size), or why not.
fn read_counts_text(path: &Path) -> std::result::Result<String, String> {
    let file = open_regular(path)?;
    let mut bytes = Vec::new();
    file.take(MAX_COUNTS_FILE + 1)
        .read_to_end(&mut bytes)
        .map_err(|e| e.to_string())?;
    if bytes.len() as u64 > MAX_COUNTS_FILE {
        return Err(format!(
            "larger than {} MiB: not a counts file",
            MAX_COUNTS_FILE >> 20
        ));
    }
    String::from_utf8(bytes).map_err(|_| "not UTF-8: not a counts file".to_string())
}

/// Reads a counts file on its own (for `count --merge`).
pub fn read_counts(path: &Path) -> Result<Tally> {
    let text = read_counts_text(path).map_err(|m| Error {
        path: Some(path.to_path_buf()),
        ..Error::io_message(m)
    })?;
    counts::parse(&text).map_err(|(line, column, m)| {
        Error::input(
            Some(Location {
                path: path.to_path_buf(),
                line,
                column,
            }),
            m,
        )
    })
}

/// Bytes of a corpus one worker takes at a time.
const PIECE: u64 = 8 << 20;

/// Counts `files` as `kind` on `threads` workers (at least one). Each file is cut into
/// pieces that workers take in turn, reading a block at a time, so memory stays at a block
/// and a tally per worker whatever the corpus's size. A token belongs to the piece it
/// starts in, so pieces may cut anywhere.
pub fn count_files(files: &[PathBuf], kind: CountKind, threads: usize) -> Result<Tally> {
    let mut pieces = Vec::new();
    for (f, path) in files.iter().enumerate() {
        let located = |m: String| Error {
            path: Some(path.clone()),
            ..Error::io_message(m)
        };
        let len = open_regular(path)
            .and_then(|file| file.metadata().map_err(|e| e.to_string()))
            .map_err(located)?
            .len();
        let mut start = 0;
        while start < len {
            let end = (start + PIECE).min(len);
            pieces.push((f, start, end));
            start = end;
        }
    }
    let next = std::sync::atomic::AtomicUsize::new(0);
    let workers = threads.clamp(1, pieces.len().max(1));
    let results: Vec<Result<Tally>> = std::thread::scope(|scope| {
        let handles: Vec<_> = (0..workers)
            .map(|_| {
                scope.spawn(|| {
                    let mut tally = Tally::new(kind);
                    let mut block = Vec::new();
                    loop {
                        let i = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                        let Some(&(f, start, end)) = pieces.get(i) else {
                            return Ok(tally);
                        };
                        count_range(&files[f], start, end, &mut tally, &mut block)?;
                    }
                })
            })
            .collect();
        handles
            .into_iter()
            .map(|h| {
                h.join()
                    .unwrap_or_else(|_| Err(Error::internal("a counting worker failed")))
            })
            .collect()
    });
    let mut total = Tally::new(kind);
    for r in results {
        total.merge(&r?).map_err(|m| Error::input(None, m))?;
    }
    Ok(total)
}

/// Counts bytes `start..end` of the file at `path` into `tally`, a block at a time; for
/// tokens each block is read with the byte before it and enough after it to end its last
/// token.
fn count_range(
    path: &Path,
    start: u64,
    end: u64,
    tally: &mut Tally,
    block: &mut Vec<u8>,
) -> Result<()> {
    let io = |e: std::io::Error| Error::io(path, &e);
    let mut file = std::fs::File::open(path).map_err(io)?;
    let context = match tally.kind {
        CountKind::Bytes => 0,
        CountKind::Tokens => counts::MAX_TOKEN_BYTES as u64 + 1,
    };
    let mut at = start;
    while at < end {
        let own_end = (at + BLOCK as u64).min(end);
        let from = at.saturating_sub(context.min(1));
        file.seek(SeekFrom::Start(from)).map_err(io)?;
        block.clear();
        (&mut file)
            .take(own_end + context - from)
            .read_to_end(block)
            .map_err(io)?;
        let own = (at - from) as usize..((own_end - from) as usize).min(block.len());
        counts::count_piece(tally, block, own).map_err(|(offset, message)| {
            let offset = from as usize + offset;
            let place = locate(path, offset).ok();
            Error::input(place, format!("{message} (byte offset {offset})"))
        })?;
        at = own_end;
    }
    Ok(())
}
