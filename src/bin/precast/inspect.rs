//! `precast inspect`: a captured stream read with the reference decoder (`verify.rs`), with
//! every failure at a byte offset.

use precast::plan::CodecPlan;
use precast::spec::Framing;
use precast::verify::{check_byte, Reference, StreamError};
use std::fmt::Write as _;
use std::io::Read;
use std::path::Path;

/// Largest stream read: inspection is for captured frames and files, not corpora.
const MAX_STREAM: u64 = 64 << 20;

/// Most symbols decoded: a header may claim any count, and the time must stay bounded.
const MAX_SYMBOLS: usize = 1 << 24;

pub fn run(
    spec: &Path,
    codec: &str,
    hex: bool,
    count: Option<usize>,
    file: &Path,
) -> Result<(), String> {
    let planned = precast::plan_spec(spec).map_err(|e| e.to_string())?;
    let plans = &planned.plans;
    let Some(plan) = plans.iter().find(|p| p.spec.name == codec) else {
        let names: Vec<String> = plans.iter().map(|p| format!("`{}`", p.spec.name)).collect();
        return Err(format!(
            "{}: no codec `{codec}` (codecs: {})",
            spec.display(),
            names.join(", ")
        ));
    };
    let raw = read(file)?;
    let stream = if hex {
        parse_hex(&raw).map_err(|m| format!("{}: {m}", file.display()))?
    } else {
        raw
    };
    let mut out = String::new();
    let result = inspect(plan, plans, &stream, count, &mut out);
    print!("{out}");
    result.map_err(|m| format!("{}: {m}", file.display()))
}

fn read(file: &Path) -> Result<Vec<u8>, String> {
    let fail = |e: String| format!("{}: {e}", file.display());
    let meta = std::fs::metadata(file).map_err(|e| fail(e.to_string()))?;
    if !meta.is_file() {
        return Err(fail("not a regular file".into()));
    }
    let mut bytes = Vec::new();
    std::fs::File::open(file)
        .map_err(|e| fail(e.to_string()))?
        .take(MAX_STREAM + 1)
        .read_to_end(&mut bytes)
        .map_err(|e| fail(e.to_string()))?;
    if bytes.len() as u64 > MAX_STREAM {
        return Err(fail(format!("larger than {} MiB", MAX_STREAM >> 20)));
    }
    Ok(bytes)
}

/// Hex text to bytes: pairs of hex digits, ASCII whitespace anywhere between pairs.
fn parse_hex(text: &[u8]) -> Result<Vec<u8>, String> {
    let mut out = Vec::with_capacity(text.len() / 2);
    let mut high: Option<(u8, usize)> = None;
    for (i, &c) in text.iter().enumerate() {
        if c.is_ascii_whitespace() {
            if let Some((_, at)) = high {
                return Err(format!("hex text: a lone digit at byte {at} of the text"));
            }
            continue;
        }
        let Some(v) = (c as char).to_digit(16) else {
            return Err(format!(
                "hex text: byte {i} of the text (0x{c:02x}) is not a hex digit"
            ));
        };
        match high.take() {
            None => high = Some((v as u8, i)),
            Some((h, _)) => out.push(h << 4 | v as u8),
        }
    }
    if let Some((_, at)) = high {
        return Err(format!("hex text: a lone digit at byte {at} of the text"));
    }
    Ok(out)
}

fn framing_name(f: Framing) -> &'static str {
    match f {
        Framing::Tagged => "tagged",
        Framing::Compact => "compact",
        Framing::Bare => "bare",
    }
}

/// Writes what the stream holds into `out`; the error says what was expected, where.
fn inspect(
    plan: &CodecPlan,
    plans: &[CodecPlan],
    stream: &[u8],
    count: Option<usize>,
    out: &mut String,
) -> Result<(), String> {
    let name = &plan.spec.name;
    let framing = plan.spec.framing;
    let _ = writeln!(
        out,
        "stream: {} bytes; codec `{name}`: {}, {}, {} lane(s), {} framing, fingerprint 0x{:04x}",
        stream.len(),
        plan.spec.kind.name(),
        plan.report.method,
        plan.spec.lanes,
        framing_name(framing),
        plan.fingerprint
    );
    // The header: (bytes it takes, symbol count).
    let (header, symbols) = match framing {
        Framing::Bare => {
            let n = count.ok_or("bare streams do not carry their symbol count: give --count N")?;
            let _ = writeln!(out, "header: none (bare); symbol count {n} (from --count)");
            let _ = writeln!(
                out,
                "fingerprint check: none (bare streams carry no fingerprint)"
            );
            (0, n)
        }
        Framing::Tagged | Framing::Compact => {
            if count.is_some() {
                return Err(format!(
                    "--count is for bare streams; a {} stream carries its count",
                    framing_name(framing)
                ));
            }
            let id_len = if framing == Framing::Tagged { 2 } else { 1 };
            if stream.len() < id_len {
                return Err(format!(
                    "byte offset {}: the stream ends; expected the {}",
                    stream.len(),
                    if id_len == 2 {
                        "2-byte fingerprint"
                    } else {
                        "check byte"
                    }
                ));
            }
            let check = |p: &CodecPlan| -> bool {
                if id_len == 2 {
                    u16::from_le_bytes([stream[0], stream[1]]) == p.fingerprint
                } else {
                    stream[0] == check_byte(p.fingerprint)
                }
            };
            let found = if id_len == 2 {
                format!(
                    "fingerprint 0x{:04x} (bytes 0..2, little-endian)",
                    u16::from_le_bytes([stream[0], stream[1]])
                )
            } else {
                format!("check byte 0x{:02x} (byte 0)", stream[0])
            };
            let _ = writeln!(out, "header: {found}");
            if check(plan) {
                let _ = writeln!(out, "fingerprint check: matches codec `{name}`");
            } else {
                let others: Vec<String> = plans
                    .iter()
                    .filter(|p| p.spec.name != *name && p.spec.framing == framing && check(p))
                    .map(|p| format!("`{}`", p.spec.name))
                    .collect();
                let whose = if others.is_empty() {
                    "matches no codec of this spec (another spec, format version or damage)"
                        .to_string()
                } else {
                    format!(
                        "matches codec {} of this spec, not `{name}`",
                        others.join(" or ")
                    )
                };
                let _ = writeln!(out, "fingerprint check: {whose}");
                return Err(format!(
                    "byte offset 0: expected {} of codec `{name}`; the stream's {}",
                    if id_len == 2 {
                        format!("fingerprint 0x{:04x}", plan.fingerprint)
                    } else {
                        format!("check byte 0x{:02x}", check_byte(plan.fingerprint))
                    },
                    if id_len == 2 {
                        "fingerprint"
                    } else {
                        "check byte"
                    }
                    .to_string()
                        + " "
                        + &whose
                ));
            }
            let (n, end) = leb128(stream, id_len)?;
            let _ = writeln!(out, "symbol count: {n} (LEB128, bytes {id_len}..{end})");
            (end, n)
        }
    };
    if symbols > MAX_SYMBOLS {
        return Err(format!(
            "byte offset {}: a count of {symbols} symbols; inspect decodes at most {MAX_SYMBOLS}",
            if header > 0 { 1 } else { 0 }
        ));
    }
    let [set, ..] = plan.sets.as_slice() else {
        return Err("internal: a codec without tables".into());
    };
    let kind = plan.spec.kind.as_ref();
    let mut coder = Reference::framed(&set.tables, plan.fingerprint, framing, plan.spec.lanes);
    // Integers codecs: each symbol (a bin) is followed by its offset bits.
    if let Some(ints) = kind.integers() {
        coder = coder.with_widths(ints.bins.iter().map(|b| b.width).collect());
    }
    let _ = writeln!(
        out,
        "payload: bytes {header}..{} ({} bytes)",
        stream.len(),
        stream.len().saturating_sub(header)
    );
    let (decoded, offsets, used) = coder.decode_offsets(stream, symbols).map_err(|e| {
        let end = stream.len();
        match e {
            StreamError::Truncated => format!(
                "byte offset {end}: the stream ends; the {symbols} symbols need more payload"
            ),
            StreamError::Corrupt => format!(
                "byte offset {end}: the payload (bytes {header}..{end}) fails its end checks (set padding bits, or rANS final states other than the starting one): it is damaged or cut"
            ),
            StreamError::TrailingBytes => format!(
                "byte offset {header}: the payload holds more than {symbols} symbols (whole bytes left over at its end)"
            ),
            StreamError::CountMismatch => format!(
                "byte offset {end}: the bare payload (bytes 0..{end}) does not hold exactly {symbols} symbols, or is damaged"
            ),
            StreamError::BadLength | StreamError::TooLong | StreamError::WrongCodec => {
                format!("byte offset 0: header refused ({e:?})")
            }
        }
    })?;
    let _ = writeln!(out, "symbols ({}):", decoded.len());
    if let Some(ints) = kind.integers() {
        // Values: the bin's first place plus the offset, then (delta codecs) added to the
        // previous value, the first to the reference.
        let mut prev = ints.domain.reference();
        let values: Vec<String> = decoded
            .iter()
            .zip(&offsets)
            .map(|(&s, &o)| {
                let start = ints.bins.get(usize::from(s)).map_or(0, |b| b.start);
                let v = ints.domain.value(start.saturating_add(o), prev);
                prev = v;
                v.to_string()
            })
            .collect();
        let _ = writeln!(out, "{}", values.join(" "));
    } else if kind.name() == "bytes" {
        let values = kind.identity();
        let bytes: Vec<u8> = decoded
            .iter()
            .map(|&s| values.get(usize::from(s)).copied().unwrap_or(0))
            .collect();
        let _ = writeln!(out, "\"{}\"", bytes.escape_ascii());
    } else if let Some(chars) = kind.chars() {
        // The text, escaped as Rust writes a string (control characters stay visible).
        let text: String = decoded
            .iter()
            .map(|&s| {
                chars
                    .chars()
                    .get(usize::from(s))
                    .copied()
                    .unwrap_or('\u{fffd}')
            })
            .collect();
        let _ = writeln!(out, "\"{}\"", text.escape_debug());
    } else {
        let labels: Vec<String> = decoded
            .iter()
            .map(|&s| kind.label(usize::from(s)))
            .collect();
        let _ = writeln!(out, "{}", labels.join(" "));
    }
    if used < stream.len() {
        return Err(format!(
            "byte offset {used}: the stream ends here; {} more byte(s) follow it",
            stream.len() - used
        ));
    }
    Ok(())
}

/// The LEB128 count at `stream[at..]`, and where it ends; located errors.
fn leb128(stream: &[u8], at: usize) -> Result<(usize, usize), String> {
    let mut value: u64 = 0;
    for (i, shift) in (0..10).map(|i| (i, 7 * i)) {
        let pos = at + i;
        let Some(&b) = stream.get(pos) else {
            return Err(format!(
                "byte offset {pos}: the stream ends inside the symbol count (LEB128)"
            ));
        };
        if shift == 63 && b > 1 {
            return Err(format!(
                "byte offset {pos}: the symbol count does not fit in 64 bits"
            ));
        }
        value |= u64::from(b & 0x7f) << shift;
        if b & 0x80 == 0 {
            if b == 0 && i > 0 {
                return Err(format!(
                    "byte offset {pos}: the symbol count has a needless zero byte (the format wants the shortest LEB128)"
                ));
            }
            let n = usize::try_from(value)
                .map_err(|_| format!("byte offset {at}: a count of {value} symbols"))?;
            return Ok((n, pos + 1));
        }
    }
    Err(format!(
        "byte offset {}: the symbol count is longer than 10 bytes",
        at + 9
    ))
}
