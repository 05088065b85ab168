//! Table rows, written by hand rather than as tokens (one fixed layout, and far faster than
//! handing thousands of literals to the parser), and spliced into the formatted source.
//!
//! Each table's initialiser is emitted as the marker `__precast_rows!(N)`. No user input can
//! produce that text: codec names and token names are identifiers and cannot hold `!(`, and
//! no other spec text reaches the output. The splice also checks that each marker stands
//! where a table's initialiser does (after `=`, closing the item with `;`) and that
//! every set of rows is used exactly once.

use crate::error::{Error, Result};
use proc_macro2::TokenStream;
use quote::quote;
use std::fmt::Write as _;

const MARKER: &str = "__precast_rows!(";

/// The rows of one table.
pub struct Rows(pub Vec<String>);

/// Collects row sets and hands out their markers.
#[derive(Default)]
pub struct RowSets {
    sets: Vec<Rows>,
}

impl RowSets {
    /// Keeps `rows` and returns the marker expression that stands for them.
    pub fn add(&mut self, rows: Vec<String>) -> TokenStream {
        let n = proc_macro2::Literal::usize_unsuffixed(self.sets.len());
        self.sets.push(Rows(rows));
        quote!(__precast_rows!(#n))
    }

    /// Replaces every marker in `text` by its rows, in one pass.
    pub fn splice(self, text: &str) -> Result<String> {
        let extra: usize = self
            .sets
            .iter()
            .map(|r| r.0.iter().map(|l| l.len() + 16).sum::<usize>())
            .sum();
        let mut used = vec![false; self.sets.len()];
        let mut out = String::with_capacity(text.len() + extra);
        let mut rest = text;
        while let Some(at) = rest.find(MARKER) {
            let after = &rest[at + MARKER.len()..];
            let digits = after.bytes().take_while(u8::is_ascii_digit).count();
            let n: Option<usize> = after[..digits].parse().ok();
            let line_start = rest[..at].rfind('\n').map_or(0, |i| i + 1);
            let line = &rest[line_start..at];
            let closes = after[digits..].starts_with(");\n");
            let initialiser = rest[..at].trim_end().ends_with('=');
            let (Some(n), true, true) = (n, initialiser, closes) else {
                return Err(Error::internal(format!(
                    "a table marker stands outside a table initialiser: {:?}",
                    &rest[line_start..(at + MARKER.len() + digits + 3).min(rest.len())]
                )));
            };
            let Some(rows) = self.sets.get(n) else {
                return Err(Error::internal(format!("table marker {n} has no rows")));
            };
            if std::mem::replace(&mut used[n], true) {
                return Err(Error::internal(format!("table marker {n} appears twice")));
            }
            let indent = &line[..line.len() - line.trim_start_matches(' ').len()];
            out.push_str(&rest[..at]);
            out.push_str("[\n");
            for row in &rows.0 {
                let _ = writeln!(out, "{indent}    {row}");
            }
            out.push_str(indent);
            out.push(']');
            rest = &after[digits + 1..];
        }
        out.push_str(rest);
        if let Some(n) = used.iter().position(|u| !u) {
            return Err(Error::internal(format!(
                "table marker {n} is missing from the output"
            )));
        }
        Ok(out)
    }
}

/// Rows of `per_line` cells each, every row ending in a comment with its first index.
pub fn rows_of<T>(
    items: &[T],
    per_line: usize,
    mut cell: impl FnMut(&mut String, &T),
) -> Vec<String> {
    items
        .chunks(per_line)
        .enumerate()
        .map(|(line, chunk)| {
            let mut row = String::with_capacity(chunk.len() * 24 + 8);
            for item in chunk {
                cell(&mut row, item);
            }
            row.push_str("// ");
            push_number(&mut row, (line * per_line) as u64);
            row
        })
        .collect()
}

/// Decimal digits of `v`, without the formatting machinery (this runs per table entry in
/// unoptimised build scripts).
pub fn push_number(out: &mut String, mut v: u64) {
    let mut digits = [0u8; 20];
    let mut n = 0;
    loop {
        digits[n] = b'0' + (v % 10) as u8;
        n += 1;
        v /= 10;
        if v == 0 {
            break;
        }
    }
    while n > 0 {
        n -= 1;
        out.push(char::from(digits[n]));
    }
}
