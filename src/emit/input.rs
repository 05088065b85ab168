//! How a value handed to the generated `encode` finds its row of the encoding table (the
//! kind's [`InputMap`]), for both methods: the row index, and for kinds whose input can fall
//! outside the alphabet, the check that refuses such input without a branch per symbol.

use crate::emit::rows::push_number;
use crate::kind::{InputMap, Kind};
use proc_macro2::TokenStream;
use quote::quote;

/// The input pieces a method's encoder splices in.
pub struct InputTokens {
    /// The row of `symbol` in the encoding tables.
    pub row: TokenStream,
    /// Before the loops.
    pub declare: TokenStream,
    /// Per symbol, with `row` bound to the symbol's row.
    pub check: TokenStream,
    /// After the loops: refuses the input if any symbol was absent.
    pub refuse: TokenStream,
    /// Variants of the generated `Error` and their `Display` arms.
    pub error_variant: TokenStream,
    pub error_display: TokenStream,
}

/// The input tokens; `absent(row)` is the method's expression for a row's absent flag, a
/// `u32` that is not zero for a value outside the alphabet.
pub fn tokens(input: &InputMap, absent: impl Fn(TokenStream) -> TokenStream) -> InputTokens {
    match input {
        // Every value has a symbol (all 256 bytes, or an escape's): nothing to refuse.
        InputMap::Rows(rows) if !rows.contains(&None) => InputTokens {
            row: clamped_row(rows.len()),
            declare: quote!(),
            check: quote!(),
            refuse: quote!(),
            error_variant: quote!(),
            error_display: quote!(),
        },
        InputMap::Index => InputTokens {
            row: quote!(symbol as usize),
            declare: quote!(),
            check: quote!(),
            refuse: quote!(),
            error_variant: quote!(),
            error_display: quote!(),
        },
        InputMap::Rows(rows) => {
            // Values past the rows land on the last row (an absent one: `InputMap::Rows`).
            let row = clamped_row(rows.len());
            let here = absent(quote!(row));
            let there = absent(row.clone());
            InputTokens {
                row,
                declare: quote!(let mut absent: u32 = 0;),
                check: quote!(absent |= #here;),
                refuse: quote! {
                    if absent != 0 {
                        let position = input
                            .iter()
                            .position(|&symbol| #there != 0)
                            .unwrap_or(0);
                        return Err(Error::UnknownSymbol { position });
                    }
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

/// The row of a raw input value `symbol`: values past the last of `rows` rows land on it.
pub fn clamped_row(rows: usize) -> TokenStream {
    if rows >= 256 {
        quote!(usize::from(symbol))
    } else {
        let last = proc_macro2::Literal::usize_unsuffixed(rows.saturating_sub(1));
        quote!(usize::from(symbol).min(#last))
    }
}

/// Rows of the encoding table for `input`.
pub fn row_count(input: &InputMap, symbols: usize) -> usize {
    match input {
        InputMap::Index => symbols,
        InputMap::Rows(rows) => rows.len(),
    }
}

/// The encoding rows of one table, `per_line` cells a line: `cell(line, row)` writes the
/// cell of a row, where `row` is the symbol of an input value or `None` for a value outside
/// the alphabet: the kind's rows for raw-value inputs, one row per symbol for enum inputs.
pub fn put_rows(
    kind: &dyn Kind,
    input: &InputMap,
    per_line: usize,
    cell: impl Fn(&mut String, Option<usize>),
) -> Vec<String> {
    let rows: Vec<Option<usize>> = match input {
        InputMap::Index => (0..kind.alphabet_len()).map(Some).collect(),
        InputMap::Rows(rows) => rows.iter().map(|r| r.map(usize::from)).collect(),
    };
    rows.chunks(per_line)
        .enumerate()
        .map(|(line, chunk)| {
            let mut text = String::new();
            for &r in chunk {
                cell(&mut text, r);
            }
            text.push_str("// ");
            let first = line * per_line;
            match input {
                InputMap::Index => text.push_str(&kind.label(first)),
                InputMap::Rows(_) => push_number(&mut text, first as u64),
            }
            if chunk.len() > 1 {
                text.push_str(" ..");
            }
            text
        })
        .collect()
}
