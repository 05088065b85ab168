//! How a value handed to the generated `encode` finds its row of the encoding table (the
//! kind's [`InputMap`]), for both methods: the row index, and for kinds whose input can fall
//! outside the alphabet, the check that refuses such input without a branch per symbol.

use crate::emit::rows::push_number;
use crate::kind::{InputMap, Kind};
use proc_macro2::TokenStream;
use quote::quote;

/// The input pieces a method's encoder splices in.
pub struct InputTokens {
    /// The row of `symbol` in `PUTS`.
    pub row: TokenStream,
    /// Before the loops.
    pub declare: TokenStream,
    /// Per symbol, with `put` the symbol's record.
    pub check: TokenStream,
    /// After the loops: refuses the input if any symbol was absent.
    pub refuse: TokenStream,
    /// The `absent` field of `Put`, if any.
    pub field: TokenStream,
    /// Variants of the generated `Error` and their `Display` arms.
    pub error_variant: TokenStream,
    pub error_display: TokenStream,
}

pub fn tokens(input: &InputMap) -> InputTokens {
    match input {
        InputMap::Index => InputTokens {
            row: quote!(symbol as usize),
            declare: quote!(),
            check: quote!(),
            refuse: quote!(),
            field: quote!(),
            error_variant: quote!(),
            error_display: quote!(),
        },
        InputMap::Rows(rows) => {
            // Values past the rows land on one more row, an absent one (`put_rows`).
            let row = if rows.len() >= 256 {
                quote!(usize::from(symbol))
            } else {
                let last = proc_macro2::Literal::usize_unsuffixed(rows.len());
                quote!(usize::from(symbol).min(#last))
            };
            InputTokens {
                row: row.clone(),
                declare: quote!(let mut absent: u8 = 0;),
                check: quote!(absent |= put.absent;),
                refuse: quote! {
                    if absent != 0 {
                        let position = input
                            .iter()
                            .position(|&symbol| PUTS[#row].absent != 0)
                            .unwrap_or(0);
                        return Err(Error::UnknownSymbol { position });
                    }
                },
                field: quote! {
                    /// 1 for a value outside the alphabet (its other fields are harmless).
                    absent: u8,
                },
                error_variant: quote! {
                    /// `input[position]` is not in the alphabet.
                    UnknownSymbol {
                        /// Index of the first such symbol in the input.
                        position: usize,
                    },
                },
                error_display: quote! {
                    Error::UnknownSymbol { position } => {
                        ::core::write!(f, "the symbol at position {} is not in the alphabet", position)
                    }
                },
            }
        }
    }
}

/// Rows of the encoding table for `input`, with the sentinel row of [`tokens`].
pub fn row_count(input: &InputMap, symbols: usize) -> usize {
    match input {
        InputMap::Index => symbols,
        InputMap::Rows(rows) if rows.len() >= 256 => rows.len(),
        InputMap::Rows(rows) => rows.len() + 1,
    }
}

/// Rows of the encoding table: `fields(s)` writes the fields of symbol `s` after `Put { `.
/// Raw-value inputs get one row per value (absent values a harmless copy of symbol 0,
/// flagged); enum inputs one row per symbol.
pub fn put_rows(
    kind: &dyn Kind,
    input: &InputMap,
    fields: impl Fn(&mut String, usize),
) -> Vec<String> {
    match input {
        InputMap::Index => (0..kind.alphabet_len())
            .map(|s| {
                let mut row = String::from("Put { ");
                fields(&mut row, s);
                row.push_str(" }, // ");
                row.push_str(&kind.label(s));
                row
            })
            .collect(),
        InputMap::Rows(rows) => rows
            .iter()
            .chain((rows.len() < 256).then_some(&None))
            .enumerate()
            .map(|(value, symbol)| {
                let mut row = String::from("Put { ");
                fields(&mut row, symbol.map_or(0, usize::from));
                row.push_str(if symbol.is_some() {
                    ", absent: 0 }, // "
                } else {
                    ", absent: 1 }, // "
                });
                push_number(&mut row, value as u64);
                match symbol {
                    Some(s) => {
                        row.push_str(": ");
                        row.push_str(&kind.row_literal(usize::from(*s)));
                    }
                    None if value == rows.len() => row.push_str(" and above: not in the alphabet"),
                    None => row.push_str(": not in the alphabet"),
                }
                row
            })
            .collect(),
    }
}
