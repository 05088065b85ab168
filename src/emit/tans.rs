//! The emitted tANS encoder and decoder (tables from `method/tans.rs`).
//!
//! One generated file serves every target; the bit I/O is chosen by the target's word size:
//!
//! - 64-bit targets (`wide`): rounds of a fixed number of symbols (a multiple of `LANES`),
//!   unrolled by the compiler, with one bounds check per round that takes a fixed-size window
//!   of the stream and loads or stores at fixed points, so that no branch depends on the
//!   data; a short loop takes the last symbols.
//! - 32-bit targets (`narrow`, microcontrollers): one loop for every symbol of any stream,
//!   with a 32-bit bit buffer refilled (decoder) or flushed (encoder) only when it needs to
//!   be; that costs the fewest instructions a symbol on an in-order core, and a short frame
//!   runs the same loop as a long stream.
//!
//! Both write and read the same streams (FORMAT.md).

use super::framing::{Failure, FramingTokens};
use super::input::{self, InputTokens};
use super::rows::{push_number, rows_of, RowSets};
use crate::kind::integers::Integers;
use crate::kind::Escape;
use crate::method::tans::{DecodeEntry, Tans};
use crate::plan::CodecPlan;
use crate::spec::Framing;
use proc_macro2::{Literal, TokenStream};
use quote::quote;

/// Round sizes of the 64-bit path: one 64-bit load holds at least 57 unread bits; flushing
/// keeps fewer than 64 pending. A round is a whole number of symbols per lane: as many as one
/// load (one store) covers, or one per lane when that is more.
struct Rounds {
    max_bits: usize,
    per_load: usize,
    per_flush: usize,
    decode_round: usize,
    encode_round: usize,
    decode_window: usize,
    encode_window: usize,
}

impl Rounds {
    fn new(tans: &Tans, lanes: usize, offset_bits: usize) -> Rounds {
        let max_bits = (usize::from(tans.decode.iter().map(|e| e.bits).max().unwrap_or(0))
            + offset_bits)
            .max(1);
        let per_load = (57 / max_bits).max(1);
        let per_flush = (56 / max_bits).max(1);
        let decode_round = 8usize.max(lanes);
        let encode_round = (per_flush / lanes).max(1) * lanes;
        let last_load = (decode_round - 1) / per_load * per_load;
        Rounds {
            max_bits,
            per_load,
            per_flush,
            decode_round,
            encode_round,
            decode_window: 8 + (last_load * max_bits).div_ceil(8),
            encode_window: 8 + (encode_round * max_bits).div_ceil(8),
        }
    }
}

/// Raw bits after some symbols: an integers codec's bin offsets (and escaped values), or a
/// byte codec's escaped bytes. The emitted `code` (or `bin` of a `place`) gives a value's
/// encoding row, offset and width; the decoder adds the offset read with `WIDTHS` to the
/// symbol's table value.
#[derive(Clone, Copy)]
enum Offsets<'a> {
    Bins(&'a Integers),
    Escape(&'a Escape),
}

impl<'a> Offsets<'a> {
    fn of(plan: &'a CodecPlan) -> Option<Offsets<'a>> {
        let kind = plan.spec.kind.as_ref();
        match (kind.integers(), kind.escape()) {
            (Some(i), _) => Some(Offsets::Bins(i)),
            (None, Some(e)) => Some(Offsets::Escape(e)),
            (None, None) => None,
        }
    }

    fn delta(self) -> bool {
        matches!(self, Offsets::Bins(i) if i.domain.delta)
    }

    fn max_width(self) -> u32 {
        match self {
            Offsets::Bins(i) => i.max_width().max(i.escape.map_or(0, |e| e.raw_bits)),
            Offsets::Escape(e) => e.raw_bits,
        }
    }

    /// The place of value `v` (`before` the value before it, for deltas) where a bin search
    /// finds the row; `None` where the emitted `code(v)` does (escapes).
    fn place(self, v: TokenStream, before: TokenStream) -> Option<TokenStream> {
        match self {
            Offsets::Bins(i) if i.escape.is_none() => Some(if i.domain.delta {
                quote!(place(#v, #before))
            } else {
                quote!(place(#v))
            }),
            Offsets::Bins(_) | Offsets::Escape(_) => None,
        }
    }

    /// `(row, offset, width)` of value `v`; `before` is the value before it (deltas).
    fn code(self, v: TokenStream, before: TokenStream) -> TokenStream {
        match self.place(v.clone(), before) {
            Some(place) => quote!(bin(#place)),
            None => quote!(code(#v)),
        }
    }

    /// [`Offsets::code`] of input index `k`.
    fn code_at(self, v: TokenStream, k: TokenStream) -> TokenStream {
        self.code(v, quote!(previous(input, #k)))
    }

    /// [`Offsets::code_at`] outside the symbol loop (the lanes' last symbols): the bin search
    /// out of line, so that it is not copied into every caller.
    fn code_at_once(self, v: TokenStream, k: TokenStream) -> TokenStream {
        let Some(place) = self.place(v.clone(), quote!(previous(input, #k))) else {
            return self.code_at(v, k);
        };
        // The row comes back from out of line: bounded again for the table read.
        quote!({
            let (row, offset, width) = bin_once(#place);
            (if row < BINS { row } else { 0 }, offset, width)
        })
    }
}

/// The table sets of a codec: one, or a context codec's several. With several, the decoder's
/// state is a position among all sets' (`POSITIONS`): each decode step's base leads into the
/// set its symbol chooses for the lane's next symbol, so that choosing costs the decoder
/// nothing. The encoder reads `PUT[set][row]` and the set's run of `NEXT_STATE`.
struct Sets<'a> {
    all: Vec<&'a Tans>,
    set_of: &'a [u8],
}

impl<'a> Sets<'a> {
    fn of(plan: &'a CodecPlan) -> Sets<'a> {
        let all: Vec<&Tans> = plan
            .sets
            .iter()
            .filter_map(|s| match &s.tables {
                crate::method::Tables::Tans(t) => Some(t),
                crate::method::Tables::Rans(_) => None,
            })
            .collect();
        Sets {
            all,
            set_of: &plan.set_of,
        }
    }

    fn many(&self) -> bool {
        self.all.len() > 1
    }

    /// The decoder's mask of a position.
    fn mask(&self) -> TokenStream {
        if self.many() {
            quote!(POSITION_MASK)
        } else {
            quote!(MASK)
        }
    }

    /// `set,` before the row in `put_symbol`'s arguments, with several sets.
    fn arg(&self) -> TokenStream {
        if self.many() {
            quote!(set,)
        } else {
            TokenStream::new()
        }
    }

    /// The set symbol `s` chooses as its lane's next context.
    fn next_set(&self, s: u16) -> usize {
        self.set_of
            .get(usize::from(s))
            .map_or(0, |&x| usize::from(x))
    }

    /// Every set's decode entries in turn, each base a position among all sets'.
    fn decode(&self) -> Vec<DecodeEntry> {
        let l = self.all.first().map_or(0, |t| t.table_len());
        self.all
            .iter()
            .flat_map(|t| t.decode.iter())
            .map(|e| DecodeEntry {
                base: e.base + (self.next_set(e.symbol) * l) as u32,
                ..*e
            })
            .collect()
    }

    /// The decode graph of all sets, for its longest run of bit-free steps.
    fn joined(&self) -> Option<Tans> {
        let first = self.all.first()?;
        Some(Tans {
            decode: self.decode(),
            ..(*first).clone()
        })
    }
}

/// Share of encoder steps that write no bits from which the 32-bit encoder branches around
/// the bit push for them: a silent step then takes 8 instructions instead of 12 on the
/// Cortex-M4, the others one more (measured with `gauge_status`).
const SILENT_SHARE: f64 = 0.5;

/// The expected share of encoder steps that write no bits: symbol `s` with `q` slots writes
/// none from state `x` when `x < 2q`, and with the states spread about as `1/x` over
/// `[L, 2L)` that happens with probability `log2(2q / L)` (when `q > L/2`).
fn silent_share(plan: &CodecPlan, tans: &Tans) -> f64 {
    let l = tans.table_len() as f64;
    tans.slots
        .iter()
        .zip(&plan.model.probabilities())
        .map(|(&q, &p)| p * crate::quantize::log2(2.0 * f64::from(q) / l).clamp(0.0, 1.0))
        .sum()
}

/// The pieces both paths share.
struct Parts<'a> {
    /// The decoder's start (header, count and padding checks, the lanes' first states) and
    /// end (the end checks), the same on both paths.
    decode_start: TokenStream,
    /// Decodes the lanes' last symbols from their final states.
    decode_tail: TokenStream,
    decode_end: TokenStream,
    framing: &'a FramingTokens,
    input: &'a InputTokens,
    finish: TokenStream,
    /// The encoder's start: `head` (the symbols put into the states), `used` lanes, and the
    /// lanes' starting states from their last symbols.
    encode_start: TokenStream,
    /// Codecs whose symbols carry raw bits (integers, escapes).
    offsets: Option<Offsets<'a>>,
    /// Most bits a state step reads.
    max_state_bits: u8,
    sets: &'a Sets<'a>,
    /// Whether most encoder steps write no bits (a symbol owning most of the table) in a
    /// codec of one table set with joined rows (`PUT`): the 32-bit encoder then branches
    /// around the bit push, the flush test and the copy's shift for them.
    mostly_silent: bool,
}

pub fn body(
    plan: &CodecPlan,
    tans: &Tans,
    framing: &FramingTokens,
    input: &InputTokens,
    rows: &mut RowSets,
) -> TokenStream {
    let offsets = Offsets::of(plan);
    let sets = Sets::of(plan);
    let joined = sets.joined();
    let tans_all = joined.as_ref().filter(|_| sets.many()).unwrap_or(tans);
    let r = Rounds::new(
        tans_all,
        plan.spec.lanes as usize,
        offsets.map_or(0, |o| o.max_width() as usize),
    );
    let max_bits = Literal::usize_unsuffixed(r.max_bits);
    let header_max = &framing.header_max;

    let decode_tables = decode_tables(plan, &sets, tans, rows);
    let put_tables = put_tables(plan, &sets, tans, rows);
    let next_len = if sets.many() {
        quote!(POSITIONS)
    } else {
        quote!(TABLE_LEN)
    };
    let state = if tans.next_bytes() == 1 {
        quote!(u8)
    } else {
        quote!(u16)
    };
    let next_all: Vec<u16> = sets
        .all
        .iter()
        .flat_map(|t| t.next_state.iter().copied())
        .collect();
    let next_rows = rows.add(rows_of(&next_all, 16, |line, &v| {
        push_number(line, u64::from(v));
        line.push_str(", ");
    }));
    let count_check = count_check(tans_all, framing);
    let pm = sets.mask();
    let first_state = if sets.many() {
        quote!((peek(payload, at) as usize & MASK) | FIRST_BASE)
    } else {
        quote!(peek(payload, at) as usize & MASK)
    };
    let start = &framing.start;
    let decode_start = quote! {
        #start
        #count_check
        // Lanes with a symbol: each has its first state in front of the payload.
        let used = if count < LANES { count } else { LANES };
        let mut at = 0usize;
        let mut state = [0usize; LANES];
        for x in state.iter_mut().take(used) {
            *x = #first_state;
            at += TABLE_BITS as usize;
        }
        // A lane's last symbol is its final state's: `tail` is decoded without reading.
        let Some((head, tail)) = out.split_at_mut_checked(count - used) else {
            return Err(Error::OutputTooSmall);
        };
    };
    let decode_tail = match offsets {
        // One lane: one slot at most (a loop here becomes a `memset` call).
        None if plan.spec.lanes == 1 => quote! {
            if let Some(slot) = tail.first_mut() {
                *slot = step(state[0] & #pm).0;
            }
        },
        None => quote! {
            for (i, slot) in tail.iter_mut().enumerate() {
                *slot = step(state[(count - used + i) % LANES] & #pm).0;
            }
        },
        Some(o) => {
            let undelta = if o.delta() {
                quote! {
                    // Places back to values: each after the one before.
                    let before = undelta(head, REFERENCE);
                    undelta(tail, before);
                }
            } else {
                TokenStream::new()
            };
            quote! {
                /// The lanes' last symbols, from their final states (`first` is the first's
                /// index): they read no state bits, and their offsets come last. Out of
                /// line: it runs once a stream. Returns the bit after the offsets.
                #[inline(never)]
                #[allow(clippy::modulo_one)]
                fn tail_values(tail: &mut [Symbol], state: &[usize; LANES], payload: &[u8], at: usize, first: usize) -> usize {
                    let mut at = at;
                    for (i, slot) in tail.iter_mut().enumerate() {
                        let p = state[first.wrapping_add(i) % LANES] & #pm;
                        let width = u32::from(WIDTHS[p]);
                        *slot = step(p).0.wrapping_add(take(payload, &mut at, width) as Symbol);
                    }
                    at
                }
                at = tail_values(tail, &state, payload, at, count - used);
                #undelta
            }
        }
    };
    let decode_end = end_check(framing);
    let parts = Parts {
        decode_start,
        decode_tail,
        decode_end,
        framing,
        input,
        finish: finish(framing),
        encode_start: encode_start(plan, &sets, input),
        offsets,
        max_state_bits: tans_all.decode.iter().map(|e| e.bits).max().unwrap_or(0),
        sets: &sets,
        mostly_silent: offsets.is_none()
            && !sets.many()
            && tans.joined_put()
            && silent_share(plan, tans) >= SILENT_SHARE,
    };
    let start_items = start_items(plan, &sets, input);
    let integer_items = offsets.map(|o| match o {
        Offsets::Bins(i) => integer_items(i, &sets, tans_all, rows),
        Offsets::Escape(e) => escape_items(plan, e, &sets, tans_all, rows),
    });
    let context_items = context_items(plan, &sets, offsets, rows);
    let (prefix_vis, past_end) = if framing.to_the_end() {
        let past_end = quote! {
            /// Bits a decoder may read past the end of the stream, as zeros: the trailing zeros
            /// the encoder leaves out.
            const PAST_END_BITS: usize = 64;
        };
        (TokenStream::new(), past_end)
    } else {
        (quote!(pub), TokenStream::new())
    };
    let wide = wide(&r, &parts);
    let narrow = narrow(&parts);
    let word = super::tail_word();

    quote! {
        /// Most bits any one symbol costs.
        pub const MAX_SYMBOL_BITS: u32 = #max_bits;

        #integer_items

        #context_items

        /// Largest stream [`encode`] writes for `symbols` symbols, whatever they are.
        pub const fn max_encoded_len(symbols: usize) -> usize {
            let bits = symbols
                .saturating_mul(MAX_SYMBOL_BITS as usize)
                .saturating_add(LANES * TABLE_BITS as usize + 7);
            (#header_max).saturating_add(bits / 8)
        }

        #put_tables

        #decode_tables

        #start_items

        #past_end

        #[cfg(target_pointer_width = "64")]
        pub use wide::encode;
        #[cfg(target_pointer_width = "64")]
        #prefix_vis use wide::decode_prefix;
        #[cfg(not(target_pointer_width = "64"))]
        pub use narrow::encode;
        #[cfg(not(target_pointer_width = "64"))]
        #prefix_vis use narrow::decode_prefix;

        #wide

        #narrow

        #word

        /// For each symbol in alphabet order, the states of its copies in the table, left
        /// to right (a state is `TABLE_LEN` + position); with several table sets, one such
        /// table per set in turn.
        static NEXT_STATE: [#state; #next_len] = #next_rows;
    }
}

/// The decoding tables and `step`, which reads one entry. Symbols and steps stay in two
/// tables: each is one load indexed by the position (a joined record costs an address
/// computation more on Cortex-M, measured).
fn decode_tables(
    plan: &CodecPlan,
    sets: &Sets<'_>,
    tans: &Tans,
    rows: &mut RowSets,
) -> TokenStream {
    let kind = plan.spec.kind.as_ref();
    let shift = step_shift(tans.table_bits, sets.all.len());
    let decode = sets.decode();
    let symbol_rows = rows.add(rows_of(&decode, 8, |line, e| {
        line.push_str(&kind.row_literal(usize::from(e.symbol)));
        line.push_str(", ");
    }));
    let positions = if sets.many() {
        quote!(POSITIONS)
    } else {
        quote!(TABLE_LEN)
    };
    let step_rows = rows.add(rows_of(&decode, 16, |line, e| {
        push_number(line, u64::from(e.base) | u64::from(e.bits) << shift);
        line.push_str(", ");
    }));
    let (step, step_shift) = if shift == 12 {
        (quote!(u16), Literal::u32_unsuffixed(12))
    } else {
        (quote!(u32), Literal::u32_unsuffixed(shift))
    };
    quote! {
        /// The decode step at table position `i`: its symbol, the bits to read, and the
        /// position they are added to.
        #[inline(always)]
        #[allow(clippy::useless_conversion)]
        fn step(i: usize) -> (Symbol, u32, usize) {
            let step = u32::from(STEPS[i]);
            let bits = step >> STEP_SHIFT;
            (SYMBOLS[i], bits, (step & !(u32::MAX << STEP_SHIFT)) as usize)
        }

        /// Where a decode step's bit count starts in its `STEPS` entry.
        const STEP_SHIFT: u32 = #step_shift;

        /// The symbol at each table position (the spread of symbols over the table).
        static SYMBOLS: [Symbol; #positions] = #symbol_rows;

        /// The decode step at each table position: after emitting the position's symbol the
        /// decoder reads `step >> STEP_SHIFT` bits `b` and goes to position
        /// `(step & (2^STEP_SHIFT - 1)) + b`.
        static STEPS: [#step; #positions] = #step_rows;
    }
}

/// Where a decode step's bit count starts: above a position of every set.
pub fn step_shift(table_bits: u32, sets: usize) -> u32 {
    match table_bits + sets.max(1).ilog2() {
        0..=12 => 12,
        13..=16 => 16,
        _ => 20,
    }
}

/// The encoding tables and `put_symbol`, which reads one row: `spend | run << 16` in one
/// table when the sum `x + spend` stays below 16 bits, else `SPEND` and `RUN` apart. An
/// input value outside the alphabet has the top bit of its `run` set.
fn put_tables(plan: &CodecPlan, sets: &Sets<'_>, tans: &Tans, rows: &mut RowSets) -> TokenStream {
    let kind = plan.spec.kind.as_ref();
    let put_len = Literal::usize_unsuffixed(plan.put_rows().0);
    // With several sets: a `[rows; SETS]` table, `set` masked so that the index is proven,
    // and the set's part of `NEXT_STATE`.
    let many = sets.many();
    let (sp, set_index, zero) = if many {
        (quote!(set: usize,), quote!([set & (SETS - 1)]), quote!([0]))
    } else {
        (TokenStream::new(), TokenStream::new(), TokenStream::new())
    };
    // A copy's index in `NEXT_STATE`: in the set's part with several sets.
    let next_index = |e: TokenStream| {
        if many {
            quote!(((set & (SETS - 1)) << TABLE_BITS) | (#e))
        } else {
            e
        }
    };
    let joined_index = next_index(quote!((high as usize + usize::from(run)) & MASK));
    let word_index = next_index(quote!((high as usize + (put >> 16) as usize) & MASK));
    let split_index =
        next_index(quote!((high as usize + usize::from(RUN #set_index [row])) & MASK));
    let table = |inner: TokenStream| if many { quote!([#inner; SETS]) } else { inner };
    // Each set's rows in turn (nested when there are several).
    let per_set =
        |rows: &mut RowSets, per_line: usize, cell: &dyn Fn(&Tans, &mut String, Option<usize>)| {
            let mut all: Vec<String> = Vec::new();
            for (j, t) in sets.all.iter().enumerate() {
                let lines =
                    input::put_rows(kind, &plan.input, per_line, |line, row| cell(t, line, row));
                if many {
                    all.push(format!("// table set {j}"));
                    all.push("[".to_string());
                    all.extend(lines.into_iter().map(|l| format!("    {l}")));
                    all.push("],".to_string());
                } else {
                    all.extend(lines);
                }
            }
            rows.add(all)
        };
    if tans.joined_put() {
        // Raw-value inputs read the absent flag from the row as the encoder step reads the
        // rest of it, so that the compiler loads the row once.
        let absent = if matches!(&plan.input, crate::kind::InputMap::Rows(r) if r.contains(&None)) {
            quote! {
                /// Not zero for an input value outside the alphabet: the top bit of `run`.
                #[cfg(target_pointer_width = "64")]
                #[inline(always)]
                fn absent_flag(row: usize) -> u32 {
                    u32::from(PUT #zero [row][3] >> 7)
                }

                /// Not zero for an input value outside the alphabet: the top bit of `run`.
                #[cfg(not(target_pointer_width = "64"))]
                #[inline(always)]
                fn absent_flag(row: usize) -> u32 {
                    u32::from_le_bytes(PUT #zero [row]) >> 31
                }
            }
        } else {
            TokenStream::new()
        };
        let put_rows = per_set(rows, 8, &|tans, line, row| {
            let (spend, run) = row.map_or((0, 0x8000), |s| (tans.puts[s].spend, tans.puts[s].run));
            line.push_str("put(");
            push_number(line, u64::from(spend));
            line.push_str(", ");
            push_number(line, u64::from(run));
            line.push_str("), ");
        });
        let put_type = table(quote!([[u8; 4]; #put_len]));
        return quote! {
            /// One encoder step from state `x` for the symbol of encoding row `row`: the bit
            /// count, the bits above them (`x >> bits`, the copy number whose state comes
            /// next) and the next state. 64-bit targets load the two halves of the row apart.
            #[cfg(target_pointer_width = "64")]
            #[inline(always)]
            fn put_symbol(x: u32, #sp row: usize) -> (u32, u32, u32) {
                let [a, b, c, d] = PUT #set_index [row];
                let (spend, run) = (u16::from_le_bytes([a, b]), u16::from_le_bytes([c, d]));
                let bits = x.wrapping_add(u32::from(spend)) >> (TABLE_BITS + 1);
                let high = x >> bits;
                let next = NEXT_STATE[#joined_index];
                (bits, high, u32::from(next))
            }

            /// One encoder step from state `x` for the symbol of encoding row `row`: the bit
            /// count, the bits above them (`x >> bits`, the copy number whose state comes
            /// next) and the next state. 32-bit targets load the row as one word: `x + spend`
            /// stays under 16 bits, and `run` is a shifted operand.
            #[cfg(not(target_pointer_width = "64"))]
            #[inline(always)]
            fn put_symbol(x: u32, #sp row: usize) -> (u32, u32, u32) {
                let put = u32::from_le_bytes(PUT #set_index [row]);
                let bits = (x.wrapping_add(put) & 0xffff) >> (TABLE_BITS + 1);
                let high = x >> bits;
                let next = NEXT_STATE[#word_index];
                (bits, high, u32::from(next))
            }

            /// Encoding, by input value: `put(spend, run)`. From state `x` the encoder writes
            /// `k = (x + spend) >> (TABLE_BITS + 1)` bits and goes to state
            /// `NEXT_STATE[((x >> k) + run) % TABLE_LEN]`. A `run` with its top bit set marks
            /// a value outside the alphabet.
            static PUT: #put_type = #put_rows;

            #absent

            /// A row of [`PUT`]: `spend` then `run`, 16 bits each, little-endian, so that a
            /// 32-bit core loads it as one word and a 64-bit one as two halves.
            const fn put(spend: u16, run: u16) -> [u8; 4] {
                let [a, b] = spend.to_le_bytes();
                let [c, d] = run.to_le_bytes();
                [a, b, c, d]
            }
        };
    }
    let spend_rows = per_set(rows, 16, &|tans, line, row| {
        push_number(line, row.map_or(0, |s| u64::from(tans.puts[s].spend)));
        line.push_str(", ");
    });
    let run_rows = per_set(rows, 16, &|tans, line, row| {
        push_number(line, row.map_or(0x8000, |s| u64::from(tans.puts[s].run)));
        line.push_str(", ");
    });
    let spend_type = table(quote!([u32; #put_len]));
    let run_type = table(quote!([u16; #put_len]));
    quote! {
        /// One encoder step from state `x` for the symbol of encoding row `row`: the bit
        /// count, the bits above them (`x >> bits`, the copy number whose state comes next)
        /// and the next state.
        #[inline(always)]
        fn put_symbol(x: u32, #sp row: usize) -> (u32, u32, u32) {
            let bits = x.wrapping_add(SPEND #set_index [row]) >> (TABLE_BITS + 1);
            let high = x >> bits;
            let next = NEXT_STATE[#split_index];
            (bits, high, u32::from(next))
        }

        /// Encoding, by input value: from state `x` the encoder writes
        /// `k = (x + SPEND) >> (TABLE_BITS + 1)` bits and goes to state
        /// `NEXT_STATE[((x >> k) + RUN) % TABLE_LEN]`. A `RUN` with its top bit set marks a
        /// value outside the alphabet.
        static SPEND: #spend_type = #spend_rows;

        /// See [`SPEND`].
        static RUN: #run_type = #run_rows;
    }
}

/// A row's absent flag (not zero for an input value outside the alphabet).
pub fn absent(tans: &Tans, many_sets: bool, row: TokenStream) -> TokenStream {
    if tans.joined_put() {
        quote!(absent_flag(#row))
    } else if many_sets {
        quote!(u32::from(RUN[0][#row] >> 15))
    } else {
        quote!(u32::from(RUN[#row] >> 15))
    }
}

/// The end of `encode`, after the payload was moved to the front behind the header: compact
/// and bare streams leave out trailing zero bytes (at most 8, the decoder reads as many past
/// the end); then the header.
fn finish(framing: &FramingTokens) -> TokenStream {
    let write_header = framing.write_header();
    let header = &framing.header;
    let trim = if framing.to_the_end() {
        quote! {
            // The decoder reads zeros past the end: trailing zero bytes are left out.
            let mut len = len;
            let mut cut = 0;
            while cut < PAST_END_BITS / 8 && len > #header && out.get(len.wrapping_sub(1)) == Some(&0) {
                len -= 1;
                cut += 1;
            }
        }
    } else {
        TokenStream::new()
    };
    quote! {
        #trim
        #write_header
    }
}

/// The decoder's end checks (FORMAT.md). Tagged: the stream ends at the byte of the last bit
/// read, in zero padding. Compact and bare: the payload runs to the end of the stream, every
/// byte of it was reached, no more than `PAST_END_BITS` bits were read past it, and the bits
/// after the last one read are zero.
fn end_check(framing: &FramingTokens) -> TokenStream {
    let truncated = framing.error(Failure::Truncated);
    let corrupt = framing.error(Failure::Corrupt);
    let trailing = framing.error(Failure::TrailingBytes);
    if framing.to_the_end() {
        quote! {
            let len = payload.len().saturating_mul(8);
            if at.saturating_add(8) <= len {
                return Err(#trailing);
            }
            if at > len.saturating_add(PAST_END_BITS) {
                return Err(#truncated);
            }
            // The bits after the last one read, all in the last byte: zeros.
            if at < len && payload.get(at / 8).is_some_and(|&b| b >> (at % 8) != 0) {
                return Err(#corrupt);
            }
            Ok((count, stream.len()))
        }
    } else {
        quote! {
            if at > payload.len().saturating_mul(8) {
                return Err(#truncated);
            }
            // The rest of the last byte read is zero padding (one byte: no word near the end).
            if at & 7 != 0 && payload.get(at / 8).is_some_and(|&b| b >> (at & 7) != 0) {
                return Err(#corrupt);
            }
            Ok((count, header + at.div_ceil(8)))
        }
    }
}

/// Refuses a count the payload cannot hold, before decoding (FORMAT.md).
fn count_check(tans: &Tans, framing: &FramingTokens) -> TokenStream {
    let Some(run) = tans.zero_run() else {
        return TokenStream::new();
    };
    let run = Literal::usize_unsuffixed(run);
    let room = if framing.to_the_end() {
        quote!(.saturating_add(PAST_END_BITS))
    } else {
        TokenStream::new()
    };
    let truncated = framing.error(Failure::Truncated);
    quote! {
        // An honest stream reads a bit at least every `ZERO_RUN + 1` symbols of a lane: a
        // count its payload cannot hold is refused before any decoding.
        const ZERO_RUN: usize = #run;
        let room = payload
            .len()
            .saturating_mul(8)
            #room
            .saturating_sub(LANES * TABLE_BITS as usize);
        if (count / (ZERO_RUN + 1)).saturating_sub(LANES) > room {
            return Err(#truncated);
        }
    }
}

/// The encoder's start: the symbols split into `head`, put into the lanes' states one by one,
/// and the last symbol of each lane, which picks the lane's starting state (a copy of it, so
/// that it costs no bits). One-lane compact and bare streams try `SEARCH_STARTS` copies, each
/// judged by a dry run over `TRIAL_SYMBOLS` symbols.
fn encode_start(plan: &CodecPlan, sets: &Sets<'_>, input: &InputTokens) -> TokenStream {
    // A context codec's lane starts in the set of its last symbol's context.
    let (bind_set, sa) = if sets.many() {
        (
            quote!(let set = context_set(input, n - used + i);),
            quote!(set,),
        )
    } else {
        (TokenStream::new(), TokenStream::new())
    };
    let InputTokens {
        row,
        declare,
        check,
        ..
    } = input;
    let check_tail = if check.is_empty() {
        TokenStream::new()
    } else {
        quote! {
            let symbol = last;
            let row = #row;
            #check
        }
    };
    if let Some(o) = Offsets::of(plan) {
        let first = o.code_at_once(quote!(last), quote!(n - used + i));
        let validate = match o {
            Offsets::Bins(ints) => validate(ints),
            Offsets::Escape(_) => TokenStream::new(),
        };
        return quote! {
            let n = input.len();
            #validate
            let used = if n < LANES { n } else { LANES };
            let (Some(head), Some(tail)) = (input.get(..n - used), input.get(n - used..)) else {
                return Err(Error::OutputTooSmall);
            };
            let mut state = [TABLE_LEN as u32; LANES];
            for (i, &last) in tail.iter().enumerate() {
                #bind_set
                state[(n - used + i) % LANES] = first_state(#sa #first.0);
            }
        };
    }
    quote! {
        let n = input.len();
        let used = if n < LANES { n } else { LANES };
        let (Some(head), Some(tail)) = (input.get(..n - used), input.get(n - used..)) else {
            return Err(Error::OutputTooSmall);
        };
        #declare
        let mut state = [TABLE_LEN as u32; LANES];
        for (i, &last) in tail.iter().enumerate() {
            #check_tail
            #bind_set
            state[(n - used + i) % LANES] = start(head, #sa last);
        }
    }
}

/// Whether the encoder tries several starting states: one-lane compact and bare streams,
/// whose trailing zeros are left out.
fn searches(plan: &CodecPlan) -> bool {
    // Codecs with offset bits keep the first start (FORMAT.md).
    plan.spec.framing != Framing::Tagged
        && plan.spec.lanes == 1
        && Offsets::of(plan).is_none()
        && plan.sets.len() == 1
}

/// Refuses input outside the range before any bit is written (no check where the range is
/// the whole type, or values outside it escape).
fn validate(ints: &Integers) -> TokenStream {
    if ints.escape.is_some() {
        return TokenStream::new();
    }
    let d = &ints.domain;
    let below = (d.lo > d.value_type.min()).then(|| quote!(v < LOWEST));
    let above = (d.hi < d.value_type.max()).then(|| quote!(v > HIGHEST));
    let test = match (below, above) {
        (None, None) => return TokenStream::new(),
        (Some(_), Some(_)) => quote!(!(LOWEST..=HIGHEST).contains(&v)),
        (Some(t), None) | (None, Some(t)) => t,
    };
    quote! {
        if let Some(position) = input.iter().position(|&v| #test) {
            return Err(Error::OutOfRange { position });
        }
    }
}

/// The `Error` variant of a range that is not the whole type, and its `Display` arm.
pub fn range_error(ints: &Integers) -> (TokenStream, TokenStream) {
    if validate(ints).is_empty() {
        return (TokenStream::new(), TokenStream::new());
    }
    (
        quote! {
            /// `input[position]` is outside [`LOWEST`] ..= [`HIGHEST`].
            OutOfRange {
                /// Index of the first such value in the input.
                position: usize,
            },
        },
        quote! {
            Error::OutOfRange { position } => {
                ::core::write!(f, "the value at position {} is outside the range", position)
            }
        },
    )
}

/// Integers codecs: the bins' tables, the value/place maps and the bin search.
/// `for` over the lanes' last symbols backwards, binding `symbol` (and `i` for deltas).
fn tail_loop(o: Offsets<'_>) -> TokenStream {
    if o.delta() {
        quote!(for (i, &symbol) in tail.iter().enumerate().rev())
    } else {
        quote!(for &symbol in tail.iter().rev())
    }
}

/// The length of tables with an entry per decode position.
fn positions(sets: &Sets<'_>) -> TokenStream {
    if sets.many() {
        quote!(POSITIONS)
    } else {
        quote!(TABLE_LEN)
    }
}

/// `set: usize,` as a parameter and `set,` as an argument, with several table sets.
fn set_param(sets: &Sets<'_>) -> (TokenStream, TokenStream) {
    if sets.many() {
        (quote!(set: usize,), quote!(set,))
    } else {
        (TokenStream::new(), TokenStream::new())
    }
}

/// A context codec's items: the sets, the first symbol's set, and each encoding row's set
/// as a context.
fn context_items(
    plan: &CodecPlan,
    sets: &Sets<'_>,
    offsets: Option<Offsets<'_>>,
    rows: &mut RowSets,
) -> TokenStream {
    if !sets.many() {
        return TokenStream::new();
    }
    let positions = quote! {
        /// Positions of every set's table, the decoder's state.
        const POSITIONS: usize = SETS * TABLE_LEN;
        const POSITION_MASK: usize = POSITIONS - 1;
        /// Where the first set's positions start.
        const FIRST_BASE: usize = FIRST_SET << TABLE_BITS;
    };
    shared_context_items(plan, sets.all.len(), offsets, rows, positions)
}

/// A rANS context codec's items (no decoder positions: its decoder keeps each lane's set).
pub fn rans_context_items(plan: &CodecPlan, rows: &mut RowSets) -> TokenStream {
    if plan.sets.len() <= 1 {
        return TokenStream::new();
    }
    shared_context_items(plan, plan.sets.len(), None, rows, TokenStream::new())
}

/// The context items of both methods: the sets, the first symbol's set, each encoding
/// row's set as a context, `context_set` and (but with deltas) `set_of`; `extra` adds
/// method items.
fn shared_context_items(
    plan: &CodecPlan,
    sets: usize,
    offsets: Option<Offsets<'_>>,
    rows: &mut RowSets,
    extra: TokenStream,
) -> TokenStream {
    let kind = plan.spec.kind.as_ref();
    let next_set = |s: u16| {
        plan.set_of
            .get(usize::from(s))
            .map_or(0, |&x| usize::from(x))
    };
    let count = Literal::usize_unsuffixed(sets);
    let first = Literal::usize_unsuffixed(next_set(crate::context::FIRST_CONTEXT as u16));
    let put_len = Literal::usize_unsuffixed(plan.put_rows().0);
    let row_sets = rows.add(input::put_rows(kind, &plan.input, 16, |line, row| {
        push_number(line, row.map_or(0, |s| next_set(s as u16) as u64));
        line.push_str(", ");
    }));
    let row = match offsets {
        Some(o) => {
            let code = o.code_at(quote!(symbol), quote!(j));
            quote!(#code.0)
        }
        None => {
            let r = input::tokens(&plan.input, |_| quote!(0u32)).row;
            quote!(#r)
        }
    };
    // The set a context symbol chooses, from the symbol alone; with deltas its row depends
    // on the value before it too, found by its index `j`.
    let (set_of, context_row_set) = if offsets.is_some_and(|o| o.delta()) {
        (
            TokenStream::new(),
            quote!(usize::from(ROW_SET[#row]) & (SETS - 1)),
        )
    } else {
        (
            quote! {
                /// The table set that context symbol `symbol` chooses.
                #[inline(always)]
                fn set_of(symbol: Symbol) -> usize {
                    usize::from(ROW_SET[#row]) & (SETS - 1)
                }
            },
            quote!(set_of(symbol)),
        )
    };
    let first_label = format!(
        " The set of a lane's first symbol: that of the context {}, the alphabet's first symbol.",
        kind.label(crate::context::FIRST_CONTEXT)
    );
    quote! {
        /// Table sets: a symbol's lane's previous symbol chooses which codes it.
        pub const SETS: usize = #count;
        #[doc = #first_label]
        const FIRST_SET: usize = #first;

        #extra

        /// The table set each encoding row's symbol chooses for its lane's next symbol.
        static ROW_SET: [u8; #put_len] = #row_sets;

        /// The table set of input symbol `k`: its lane's previous symbol's choice, or for a
        /// lane's first symbol [`FIRST_SET`].
        #[inline(always)]
        fn context_set(input: &[Symbol], k: usize) -> usize {
            match k.checked_sub(LANES) {
                Some(j) => match input.get(j) {
                    Some(&symbol) => #context_row_set,
                    None => FIRST_SET,
                },
                None => FIRST_SET,
            }
        }

        #set_of
    }
}

/// `WIDTHS`: the raw bits after the symbol at each table position.
fn widths_rows(kind: &dyn crate::kind::Kind, tans: &Tans, rows: &mut RowSets) -> TokenStream {
    let widths = kind.widths();
    rows.add(rows_of(&tans.decode, 16, |line, e| {
        let w = widths.get(usize::from(e.symbol)).copied().unwrap_or(0);
        push_number(line, u64::from(w));
        line.push_str(", ");
    }))
}

/// A byte codec with an escape: which bytes escape, their `code`, and `WIDTHS`.
fn escape_items(
    plan: &CodecPlan,
    e: &Escape,
    sets: &Sets<'_>,
    tans: &Tans,
    rows: &mut RowSets,
) -> TokenStream {
    let kind = plan.spec.kind.as_ref();
    let (sp, sa) = set_param(sets);
    let wl = positions(sets);
    let mut words = [0u32; 8];
    if let crate::kind::InputMap::Rows(r) = kind.input() {
        // Values past the rows land on the last row.
        for v in 0..256usize {
            if r.get(v).or(r.last()) == Some(&Some(e.symbol as u16)) {
                words[v >> 5] |= 1 << (v & 31);
            }
        }
    }
    let words = words.iter().map(|&w| Literal::u32_unsuffixed(w));
    let widths_rows = widths_rows(kind, tans, rows);
    let row = input::clamped_row(plan.put_rows().0);
    let bits = Literal::u32_unsuffixed(e.raw_bits);
    quote! {
        /// Raw bits of an escaped byte.
        const ESCAPE_BITS: u32 = #bits;

        /// One bit per byte value, set for those outside the alphabet: they go as the escape
        /// symbol and their bits.
        static ESCAPED: [u32; 8] = [#(#words),*];

        /// The encoding row of byte `v` (the escape's rows are its), its offset and the
        /// offset's width: `v` in 8 bits after an escape, nothing otherwise.
        #[inline(always)]
        fn code(symbol: Symbol) -> (usize, u32, u32) {
            let v = usize::from(symbol);
            let escaped = (ESCAPED[v >> 5] >> (v & 31)) & 1;
            let row = #row;
            (row, u32::from(symbol) & 0u32.wrapping_sub(escaped), escaped * ESCAPE_BITS)
        }

        /// The lane's starting state for a last symbol of encoding row `row`: the copy of
        /// it the encoder reaches from state `L` (that symbol then costs no state bits).
        #[inline(always)]
        fn first_state(#sp row: usize) -> u32 {
            put_symbol(TABLE_LEN as u32, #sa row).2
        }

        /// The raw bits after the symbol at each table position: the escape's.
        static WIDTHS: [u8; #wl] = #widths_rows;
    }
}

fn integer_items(ints: &Integers, sets: &Sets<'_>, tans: &Tans, rows: &mut RowSets) -> TokenStream {
    let d = &ints.domain;
    let (sp, sa) = set_param(sets);
    let wl = positions(sets);
    let bin_once = if ints.escape.is_none() {
        quote! {
            /// [`bin`] out of line, for the lanes' last symbols.
            #[inline(never)]
            fn bin_once(u: u32) -> (usize, u32, u32) {
                bin(u)
            }
        }
    } else {
        TokenStream::new()
    };
    let escape = match &ints.escape {
        None => TokenStream::new(),
        Some(e) => {
            let t = d.value_type;
            let raw = match (t.bits(), t.min() < 0) {
                (32, false) => quote!(v),
                (32, true) => quote!(v as u32),
                (_, false) => quote!(u32::from(v)),
                (_, true) => {
                    let u = t.unsigned();
                    quote!(u32::from(v as #u))
                }
            };
            let bits = Literal::u32_unsuffixed(e.raw_bits);
            quote! {
                /// The escape's row: a value outside the range goes as it and all its bits.
                const ESCAPE: usize = BINS;

                /// The encoding row of value `v`, its offset and the offset's width: its bin,
                /// or outside the range the escape and `v`'s bits.
                #[inline(always)]
                fn code(v: Symbol) -> (usize, u32, u32) {
                    if (LOWEST..=HIGHEST).contains(&v) {
                        bin(place(v))
                    } else {
                        (ESCAPE, #raw, #bits)
                    }
                }
            }
        }
    };
    let start_rows = rows.add(rows_of(&ints.bins, 8, |line, b| {
        push_number(line, u64::from(b.start));
        line.push_str(", ");
    }));
    let width_rows = rows.add(rows_of(&ints.bins, 16, |line, b| {
        push_number(line, u64::from(b.width));
        line.push_str(", ");
    }));
    let widths_rows = widths_rows(ints, tans, rows);
    let bins = Literal::usize_unsuffixed(ints.bins.len());
    // Differences of values of 16 bits or fewer fit 32-bit arithmetic: 32-bit cores then
    // need no register pairs.
    let w = if d.value_type.bits() <= 16 {
        quote!(i32)
    } else {
        quote!(i64)
    };
    let lo = Literal::i64_unsuffixed(d.lo);
    let size = Literal::i64_unsuffixed(d.size() as i64);
    let coded_lo = Literal::i64_unsuffixed(d.coded_lo());
    let maps = if d.delta {
        let reference = d.value_type.literal(d.reference());
        // A place in a signed type's bits, read back unsigned.
        let unsigned_place = if d.value_type.min() < 0 {
            let unsigned = d.value_type.unsigned();
            quote!(#w::from(u as #unsigned))
        } else {
            quote!(#w::from(u))
        };
        quote! {
            /// The value the first difference is taken from.
            const REFERENCE: Symbol = #reference;
            /// Values in the range: differences wrap modulo it.
            const SIZE: #w = #size;
            /// The smallest difference coded: the places are `difference - CODED_LO`.
            const CODED_LO: #w = #coded_lo;

            /// The place of `v` after `before`: their difference wrapped into
            /// `CODED_LO .. CODED_LO + SIZE`, less `CODED_LO`. Both are in the range.
            #[inline(always)]
            fn place(v: Symbol, before: Symbol) -> u32 {
                let mut t = #w::from(v) - #w::from(before) - CODED_LO;
                if t < 0 {
                    t += SIZE;
                }
                if t >= SIZE {
                    t -= SIZE;
                }
                t as u32
            }

            /// The value before input index `k` (the reference before the first).
            #[inline(always)]
            fn previous(input: &[Symbol], k: usize) -> Symbol {
                match k.checked_sub(1).and_then(|j| input.get(j)) {
                    Some(&v) => v,
                    None => REFERENCE,
                }
            }

            /// Places back to values, each after the one before (`before` before the first);
            /// returns the last. Out of line: it runs once a stream.
            #[inline(never)]
            fn undelta(values: &mut [Symbol], before: Symbol) -> Symbol {
                let mut before = before;
                for slot in values.iter_mut() {
                    before = value(*slot, before);
                    *slot = before;
                }
                before
            }

            /// The value of place `u` (as decoded, in `Symbol`'s bits) after `before`:
            /// `before` plus the difference, wrapped back into the range.
            #[inline(always)]
            fn value(u: Symbol, before: Symbol) -> Symbol {
                let t = #w::from(before) + #unsigned_place + CODED_LO;
                let t = if t > #w::from(HIGHEST) {
                    t - SIZE
                } else if t < #w::from(LOWEST) {
                    t + SIZE
                } else {
                    t
                };
                t as Symbol
            }
        }
    } else {
        quote! {
            /// The smallest value: the places are `v - LO`.
            const LO: #w = #lo;

            /// The place of `v`, a value of the range.
            #[inline(always)]
            fn place(v: Symbol) -> u32 {
                (#w::from(v) - LO) as u32
            }
        }
    };
    quote! {
        #maps

        /// The bin of place `u`: its row, `u`'s offset in it and the offset's width. A
        /// binary search over [`BIN_START`] with a fixed number of halvings.
        #[inline(always)]
        fn bin(u: u32) -> (usize, u32, u32) {
            let mut row = 0usize;
            let mut size = BINS;
            while size > 1 {
                let half = size / 2;
                if BIN_START.get(row + half).is_some_and(|&s| s <= u) {
                    row += half;
                }
                size -= half;
            }
            let start = BIN_START.get(row).copied().unwrap_or(0);
            let width = BIN_WIDTH.get(row).copied().unwrap_or(0);
            (row, u.wrapping_sub(start), u32::from(width))
        }

        #bin_once

        /// The lane's starting state for a last symbol of encoding row `row`: the copy of
        /// it the encoder reaches from state `L` (that symbol then costs no state bits).
        #[inline(always)]
        fn first_state(#sp row: usize) -> u32 {
            put_symbol(TABLE_LEN as u32, #sa row).2
        }

        /// Bins: the symbols before any escape.
        const BINS: usize = #bins;

        #escape

        /// The first place of each bin, in place order.
        static BIN_START: [u32; BINS] = #start_rows;

        /// The offset bits of each bin: it holds `2^width` places.
        static BIN_WIDTH: [u8; BINS] = #width_rows;

        /// The offset bits of the symbol at each table position.
        static WIDTHS: [u8; #wl] = #widths_rows;
    }
}

/// `start`: a lane's starting state from its last symbol; with the search, `trial` too.
fn start_items(plan: &CodecPlan, sets: &Sets<'_>, input: &InputTokens) -> TokenStream {
    if Offsets::of(plan).is_some() {
        return TokenStream::new();
    }
    let (sp, sa) = set_param(sets);
    let position = quote! {
        /// The table position at number `i` of the order the encoder tries starting states
        /// in: bit-reversed counting (0, L/2, L/4, 3L/4, ...), the most aligned first, so
        /// that the next symbol's bits taken from the state are most often zeros.
        #[inline(always)]
        fn position(i: u32) -> usize {
            (i.reverse_bits() >> (32 - TABLE_BITS)) as usize & MASK
        }
    };
    let row = &input.row;
    if !searches(plan) {
        return quote! {
            /// The starting state of a lane whose last symbol is `last`: the copy of it the
            /// encoder reaches from state `L` (that symbol then costs no bits), found without
            /// the decoding table, which an encoder-only image need not hold.
            #[inline(always)]
            fn start(_head: &[Symbol], #sp last: Symbol) -> u32 {
                let symbol = last;
                put_symbol(TABLE_LEN as u32, #sa #row).2
            }
        };
    }
    quote! {
        #position

        /// Starting states tried.
        const SEARCH_STARTS: usize = 16;
        /// Symbols of the dry run that judges a starting state.
        const TRIAL_SYMBOLS: usize = 16;

        /// Streams of more symbols skip the search: what it saves (a byte at most) no longer
        /// counts.
        const SEARCH_SYMBOLS: usize = 256;

        /// The starting state of the lane whose last symbol is `last` (a copy of it, so that
        /// it costs no bits): of its first `SEARCH_STARTS` copies in [`position`] order, the
        /// one with the lowest [`trial`] score (the first on a tie); past `SEARCH_SYMBOLS`,
        /// the copy the encoder reaches from state `L`.
        fn start(head: &[Symbol], last: Symbol) -> u32 {
            if head.len() >= SEARCH_SYMBOLS {
                let symbol = last;
                return put_symbol(TABLE_LEN as u32, #row).2;
            }
            let mut best = (i32::MAX, TABLE_LEN as u32);
            let mut found = 0;
            let mut i = 0;
            while i < TABLE_LEN as u32 && found < SEARCH_STARTS {
                let p = position(i);
                if SYMBOLS[p] == last {
                    let x = (TABLE_LEN + p) as u32;
                    let score = trial(head, x);
                    if score < best.0 {
                        best = (score, x);
                    }
                    found += 1;
                }
                i += 1;
            }
            best.1
        }

        /// A dry run of the encoder from state `x` over the first `TRIAL_SYMBOLS` symbols it
        /// puts in (the last of `head`): the bits they write less the zeros these end the
        /// stream with (left out); with all of `head` in the run and only zeros written, the
        /// zeros of the first state's field too.
        fn trial(head: &[Symbol], mut x: u32) -> i32 {
            let mut bits = 0i32;
            let mut zeros = 0i32;
            let mut clean = true;
            for &symbol in head.iter().rev().take(TRIAL_SYMBOLS) {
                let row = #row;
                let (k, high, next) = put_symbol(x, row);
                if clean {
                    let low = x ^ (high << k);
                    // Read least significant first, a field ends in its high zeros.
                    zeros = zeros.wrapping_add(k.wrapping_sub(32 - low.leading_zeros()) as i32);
                    clean = low == 0;
                }
                bits = bits.wrapping_add(k as i32);
                x = next;
            }
            if clean && head.len() <= TRIAL_SYMBOLS {
                let first = x.wrapping_sub(TABLE_LEN as u32);
                zeros = zeros.wrapping_add(first.leading_zeros().wrapping_sub(32 - TABLE_BITS) as i32);
            }
            bits.wrapping_sub(zeros)
        }
    }
}

/// The 64-bit path: rounds with one bounds check each, loads and stores at fixed points.
fn wide(r: &Rounds, parts: &Parts<'_>) -> TokenStream {
    let [per_load, per_flush, decode_round, encode_round, decode_window, encode_window] = [
        r.per_load,
        r.per_flush,
        r.decode_round,
        r.encode_round,
        r.decode_window,
        r.encode_window,
    ]
    .map(Literal::usize_unsuffixed);
    let FramingTokens {
        header_len, header, ..
    } = parts.framing;
    let InputTokens {
        row, check, refuse, ..
    } = parts.input;
    let (finish, decode_start, decode_end) =
        (&parts.finish, &parts.decode_start, &parts.decode_end);
    let (encode_start, decode_tail) = (&parts.encode_start, &parts.decode_tail);
    // Integers: each symbol's row from its value's bin, and its offset bits pushed first
    // (the stream is built back to front: they follow the state bits when read).
    let many = parts.sets.many();
    let sa = parts.sets.arg();
    let pm = parts.sets.mask();
    let bind = |k: TokenStream| {
        let set = if many {
            quote!(let set = context_set(input, #k);)
        } else {
            TokenStream::new()
        };
        match parts.offsets {
            None => quote! {
                let row = #row;
                #check
                #set
            },
            Some(o) => {
                let code = o.code_at(quote!(symbol), k);
                quote! {
                    let (row, offset, width) = #code;
                    #set
                }
            }
        }
    };
    let bind_rest = bind(quote!(rounds.len() * ENCODE_ROUND + i));
    let bind_round = bind(quote!(r * ENCODE_ROUND + i));
    let delta = parts.offsets.is_some_and(|o| o.delta());
    let round_loop = if delta || many {
        quote!(for (r, round) in rounds.iter().enumerate().rev())
    } else {
        quote!(for round in rounds.iter().rev())
    };
    let push_offset = match parts.offsets {
        None => TokenStream::new(),
        Some(_) => quote! {
            acc = acc.wrapping_shl(width) | u64::from(offset);
            pending += width;
        },
    };
    let (tail_offsets, offset_items) = match parts.offsets {
        None => (TokenStream::new(), TokenStream::new()),
        Some(o) => {
            let code = o.code_at_once(quote!(symbol), quote!(n - used + i));
            let tail_loop = tail_loop(o);
            (
                quote! {
                    // The lanes' last symbols' offsets end the stream.
                    #tail_loop {
                        let (_, offset, width) = #code;
                        #push_offset
                        store(out, &mut pos, acc, &mut pending)?;
                    }
                },
                quote! {
                    /// `width` (at most 32) offset bits at bit `at` of the payload.
                    #[inline(always)]
                    fn take(payload: &[u8], at: &mut usize, width: u32) -> u32 {
                        let bits = (peek(payload, *at) & !u64::MAX.wrapping_shl(width)) as u32;
                        *at = at.wrapping_add(width as usize);
                        bits
                    }
                },
            )
        }
    };
    let (decode_round_step, decode_slow_step) = match parts.offsets {
        None => (
            quote! {
                let (symbol, bits, base) = step(*x & #pm);
                *slot = symbol;
                *x = base + (buf & !(u64::MAX << bits)) as usize;
                buf >>= bits;
                at += bits as usize;
            },
            quote! {
                let (symbol, bits, base) = step(*x & #pm);
                *slot = symbol;
                *x = base + (peek(payload, at) & !(u64::MAX << bits)) as usize;
                at += bits as usize;
            },
        ),
        Some(_) => (
            quote! {
                let p = *x & #pm;
                let (symbol, bits, base) = step(p);
                let width = u32::from(WIDTHS[p]);
                *x = base + (buf & !(u64::MAX << bits)) as usize;
                buf >>= bits;
                let offset = buf & !u64::MAX.wrapping_shl(width);
                buf = buf.wrapping_shr(width);
                *slot = symbol.wrapping_add(offset as Symbol);
                at += (bits + width) as usize;
            },
            quote! {
                let p = *x & #pm;
                let (symbol, bits, base) = step(p);
                *x = base + (peek(payload, at) & !(u64::MAX << bits)) as usize;
                at += bits as usize;
                *slot = symbol.wrapping_add(take(payload, &mut at, u32::from(WIDTHS[p])) as Symbol);
            },
        ),
    };
    quote! {
        /// The 64-bit path: a 64-bit bit buffer, rounds of symbols with one bounds check.
        #[cfg(target_pointer_width = "64")]
        mod wide {
            use super::*;

            /// Symbols decoded from one 64-bit load of the stream (at least 57 bits are unread).
            const PER_LOAD: usize = #per_load;
            /// Symbols encoded between two stores (fewer than 64 bits stay pending).
            const PER_FLUSH: usize = #per_flush;
            /// Symbols in one decoder round (a multiple of `LANES`).
            const DECODE_ROUND: usize = #decode_round;
            /// Symbols in one encoder round (a multiple of `LANES`).
            const ENCODE_ROUND: usize = #encode_round;
            /// Stream bytes one decoder round may touch.
            const DECODE_WINDOW: usize = #decode_window;
            /// Output bytes one encoder round may touch.
            const ENCODE_WINDOW: usize = #encode_window;

            /// Shifts the low `bits` bits of `x` in under the pending bits of `acc` (the
            /// stream is built back to front, so they come first): `high` is `x >> bits`.
            #[inline(always)]
            fn push(acc: u64, x: u32, high: u32, bits: u32) -> u64 {
                (acc << bits) | u64::from(x ^ (high << bits))
            }

            /// The pending bits (the low `pending` of `acc`) moved to the top of a word: its
            /// little-endian bytes end with the whole bytes to store. Above them `acc` holds
            /// bits already stored, which this shifts out.
            #[inline(always)]
            fn aligned(acc: u64, pending: u32) -> u64 {
                acc.wrapping_shl(64u32.wrapping_sub(pending))
            }

            /// Stores the whole bytes of the pending bits in front of `pos`.
            #[inline(always)]
            fn store(out: &mut [u8], pos: &mut usize, acc: u64, pending: &mut u32) -> Result<(), Error> {
                let whole = (*pending >> 3) as usize;
                let bytes = aligned(acc, *pending).to_le_bytes();
                let (Some(start), Some(top)) = (pos.checked_sub(whole), bytes.get(8 - whole..)) else {
                    return Err(Error::OutputTooSmall);
                };
                let Some(dst) = out.get_mut(start..*pos) else {
                    return Err(Error::OutputTooSmall);
                };
                for (d, s) in dst.iter_mut().zip(top) {
                    *d = *s;
                }
                *pos = start;
                *pending &= 7;
                Ok(())
            }

            /// Encodes `input` into `out` as one stream; returns its length.
            ///
            /// The stream is written back to front at the end of `out`, then moved to the
            /// front; `out` beyond the returned length is left unspecified.
            #[allow(clippy::modulo_one)]
            pub fn encode(input: &[Symbol], out: &mut [u8]) -> Result<usize, Error> {
                #header_len
                let mut pos = out.len();
                #encode_start
                // Bits not yet stored, the low `pending` of `acc`; fewer than 8 between stores.
                let mut acc: u64 = 0;
                let mut pending: u32 = 0;
                // Symbols go in backwards, so the last, partial round comes first.
                let (rounds, rest) = head.as_chunks::<ENCODE_ROUND>();
                #tail_offsets
                for (i, &symbol) in rest.iter().enumerate().rev() {
                    #bind_rest
                    let x = state[i % LANES];
                    let (bits, high, next) = put_symbol(x, #sa row);
                    #push_offset
                    acc = push(acc, x, high, bits);
                    state[i % LANES] = next;
                    pending += bits;
                    store(out, &mut pos, acc, &mut pending)?;
                }
                #round_loop {
                    let window = out.get_mut(..pos).and_then(<[u8]>::last_chunk_mut::<ENCODE_WINDOW>);
                    if let Some(window) = window {
                        // Fast path: every store lands in `window`, no other check needed.
                        let top = pos;
                        for i in (0..ENCODE_ROUND).rev() {
                            let symbol = round[i];
                            #bind_round
                            let x = state[i % LANES];
                            let (bits, high, next) = put_symbol(x, #sa row);
                            #push_offset
                            acc = push(acc, x, high, bits);
                            state[i % LANES] = next;
                            pending += bits;
                            if i % PER_FLUSH == 0 {
                                let at = (ENCODE_WINDOW - 8).saturating_sub(top.wrapping_sub(pos));
                                if let Some(dst) = window.get_mut(at..).and_then(<[u8]>::first_chunk_mut::<8>) {
                                    *dst = aligned(acc, pending).to_le_bytes();
                                }
                                pos = pos.wrapping_sub((pending >> 3) as usize);
                                pending &= 7;
                            }
                        }
                    } else {
                        for i in (0..ENCODE_ROUND).rev() {
                            let symbol = round[i];
                            #bind_round
                            let x = state[i % LANES];
                            let (bits, high, next) = put_symbol(x, #sa row);
                            #push_offset
                            acc = push(acc, x, high, bits);
                            state[i % LANES] = next;
                            pending += bits;
                            store(out, &mut pos, acc, &mut pending)?;
                        }
                    }
                }
                #refuse
                // The final states of the used lanes, lane 0 in front, then zero padding to a
                // whole byte, moved to the end when the stream goes to the front.
                for &x in state.iter().take(used).rev() {
                    acc = (acc << TABLE_BITS) | u64::from(x).wrapping_sub(TABLE_LEN as u64);
                    pending += TABLE_BITS;
                    store(out, &mut pos, acc, &mut pending)?;
                }
                let pad = (8 - pending % 8) % 8;
                acc <<= pad;
                pending += pad;
                store(out, &mut pos, acc, &mut pending)?;
                let len = move_to_front(out, pos, #header, pad)?;
                #finish
                Ok(len)
            }

            /// Decodes the stream at the front of `stream` (more may follow it); returns the
            /// number of symbols and the number of bytes the stream took.
            #[allow(clippy::modulo_one)]
            pub fn decode_prefix(stream: &[u8], out: &mut [Symbol]) -> Result<(usize, usize), Error> {
                #decode_start
                let (rounds, _) = head.as_chunks_mut::<DECODE_ROUND>();
                let mut done = 0;
                for round in rounds.iter_mut() {
                    let Some(window) = payload.get(at >> 3..).and_then(<[u8]>::first_chunk::<DECODE_WINDOW>) else {
                        break;
                    };
                    // Fast path: every read lands in `window`, no other check needed.
                    let first = at >> 3;
                    let mut buf = 0u64;
                    for (i, slot) in round.iter_mut().enumerate() {
                        if i % PER_LOAD == 0 {
                            buf = window_word(window, (at >> 3).wrapping_sub(first)) >> (at & 7);
                        }
                        let x = &mut state[i % LANES];
                        #decode_round_step
                    }
                    done += DECODE_ROUND;
                }
                for (i, slot) in head.iter_mut().enumerate().skip(done) {
                    let x = &mut state[i % LANES];
                    #decode_slow_step
                }
                #decode_tail
                #decode_end
            }

            /// Eight bytes of `window` from `at` on, little-endian. The rounds never read past
            /// `N - 8`; the `min` only lets the compiler see it and drop the bounds check.
            #[inline(always)]
            fn window_word<const N: usize>(window: &[u8; N], at: usize) -> u64 {
                let at = if at < N - 8 { at } else { N - 8 };
                match window.get(at..).and_then(<[u8]>::first_chunk::<8>) {
                    Some(w) => u64::from_le_bytes(*w),
                    None => 0,
                }
            }

            /// The stream bits from bit `at` on, least significant first (57 or more valid).
            #[inline(always)]
            fn peek(data: &[u8], at: usize) -> u64 {
                word(data, at >> 3) >> (at & 7)
            }

            #offset_items
        }
    }
}

/// The 32-bit path: one loop for every symbol, a 32-bit buffer refilled or flushed only when
/// it must be.
/// The 32-bit path's `tail_offsets`: the offsets of the lanes' last symbols, which end the
/// stream, each pushed by `push` (binding `acc`, `offset`, `width`, `writer`).
fn tail_offsets_fn(o: Offsets<'_>, push: TokenStream) -> TokenStream {
    let tail_loop = tail_loop(o);
    let code = o.code_at_once(quote!(symbol), quote!(first + i));
    quote! {
        /// The offsets of the lanes' last symbols (from input index `first`), which end the
        /// stream. Out of line: it runs once a stream.
        #[inline(never)]
        fn tail_offsets(writer: &mut Writer<'_>, input: &[Symbol], first: usize, acc: u32) -> u32 {
            let mut acc = acc;
            let tail = input.get(first..).unwrap_or_default();
            #tail_loop {
                let (_, offset, width) = #code;
                #push
            }
            acc
        }
    }
}

fn narrow(parts: &Parts<'_>) -> TokenStream {
    let FramingTokens {
        header_len, header, ..
    } = parts.framing;
    let InputTokens {
        row, check, refuse, ..
    } = parts.input;
    let (finish, decode_start, decode_end) =
        (&parts.finish, &parts.decode_start, &parts.decode_end);
    let (encode_start, decode_tail) = (&parts.encode_start, &parts.decode_tail);
    // The encoder's start notes an absent last symbol in `absent` for raw-value inputs.
    let absent_start = if check.is_empty() {
        quote!(absent: 0)
    } else {
        quote!(absent)
    };
    // Raw-value inputs note a value outside the alphabet as they go.
    let note_absent = if check.is_empty() {
        quote!()
    } else {
        quote! {
            let mut absent = 0u32;
            #check
            self.absent |= absent;
        }
    };
    // What the encoding loop found about values outside the alphabet, for `refuse`.
    let absent_binding = if refuse.is_empty() {
        quote!(let _absent = e.absent;)
    } else {
        quote!(let absent = e.absent;)
    };
    // Integers: a symbol's state step costs at most `MAX_STATE_BITS`; its offset bits go
    // in pieces of at most 16 through the same buffer.
    // With short offsets (a state step and the widest offset together within 24 bits, what a
    // flushed buffer keeps free and a refilled one holds) one flush test and one refill test
    // a symbol cover both; wider ones go in pieces of at most 16 with a test each.
    let short = parts
        .offsets
        .is_some_and(|o| u32::from(parts.max_state_bits) + o.max_width() <= 24);
    let state_bits = match parts.offsets {
        None => quote!(MAX_SYMBOL_BITS),
        Some(_) if short => quote!(MAX_STATE_BITS + MAX_OFFSET_BITS),
        Some(_) => quote!(MAX_STATE_BITS),
    };
    let delta = parts.offsets.is_some_and(|o| o.delta());
    let many = parts.sets.many();
    let sa = parts.sets.arg();
    let pm = parts.sets.mask();
    let (before_param, encode_loop) = if many && !delta {
        (
            quote!(, set: usize),
            quote! {
                // Symbol `LANES + i` has symbol `i` as its context: the pairs walk back
                // together; the lanes' first symbols have `FIRST_SET`.
                let split = if input.len() < LANES { input.len() } else { LANES };
                if let Some((firsts, rest)) = input.split_at_checked(split) {
                    for (&symbol, &context) in rest.iter().zip(input).rev() {
                        e.one(writer, symbol, set_of(context));
                    }
                    for &symbol in firsts.iter().rev() {
                        e.one(writer, symbol, FIRST_SET);
                    }
                }
            },
        )
    } else if delta || many {
        let (before_param, before_arg) = if delta {
            (quote!(, before: Symbol), quote!(, previous(input, k)))
        } else {
            (TokenStream::new(), TokenStream::new())
        };
        let (set_param, set_arg) = if many {
            (quote!(, set: usize), quote!(, context_set(input, k)))
        } else {
            (TokenStream::new(), TokenStream::new())
        };
        (
            quote!(#before_param #set_param),
            quote! {
                // Each value after the one before (its place, deltas), or its lane's
                // previous one (its table set, contexts).
                for k in (0..input.len()).rev() {
                    if let Some(&symbol) = input.get(k) {
                        e.one(writer, symbol #before_arg #set_arg);
                    }
                }
            },
        )
    } else {
        (
            TokenStream::new(),
            quote! {
                // Two symbols a turn of the loop: half the loop's own instructions.
                let (rest, pairs) = input.as_rchunks::<2>();
                for &[a, b] in pairs.iter().rev() {
                    e.one(writer, b);
                    e.one(writer, a);
                }
                for &symbol in rest.iter().rev() {
                    e.one(writer, symbol);
                }
            },
        )
    };
    let (encode_bind, encode_offset, tail_offsets, offset_items, decode_one) = match parts.offsets {
        None => (
            quote! {
                let row = #row;
                #note_absent
            },
            TokenStream::new(),
            TokenStream::new(),
            TokenStream::new(),
            quote! {
                if self.buf < 1 << MAX_SYMBOL_BITS {
                    self.buf = reader.refill(self.buf);
                }
                let lane = self.lane % LANES;
                let (symbol, bits, base) = step(self.state[lane] & #pm);
                *slot = symbol;
                self.state[lane] = base + (self.buf & !(u32::MAX << bits)) as usize;
                self.buf >>= bits;
                self.lane = (lane + 1) % LANES;
            },
        ),
        Some(o) if short => {
            let max_state = Literal::u32_unsuffixed(u32::from(parts.max_state_bits));
            let max_offset = Literal::u32_unsuffixed(o.max_width());
            let here = o.code(quote!(symbol), quote!(before));
            let tail_fn = tail_offsets_fn(
                o,
                quote! {
                    acc = put_offset(acc, offset, width);
                    if acc >> (32 - MOST) != 0 {
                        acc = writer.flush(acc);
                    }
                },
            );
            (
                quote!(let (row, offset, width) = #here;),
                // The last flush left `MOST` bits free: room for these and the state's.
                quote!(self.acc = put_offset(self.acc, offset, width);),
                quote! {
                    acc = tail_offsets(&mut writer, input, n - used, acc);
                },
                quote! {
                    #tail_fn

                    /// Most bits a symbol's state step costs (its offset bits aside).
                    const MAX_STATE_BITS: u32 = #max_state;
                    /// Most offset bits after a symbol.
                    const MAX_OFFSET_BITS: u32 = #max_offset;

                    /// Pushes `width` (at most `MAX_OFFSET_BITS`) offset bits under the
                    /// pending bits of `acc`, which has room for them.
                    #[inline(always)]
                    fn put_offset(acc: u32, offset: u32, width: u32) -> u32 {
                        acc.wrapping_shl(width) | (offset & !u32::MAX.wrapping_shl(width))
                    }

                    /// `width` (at most `MAX_OFFSET_BITS`) offset bits at bit `at` of the
                    /// payload (`peek` holds 25 bits or more).
                    #[inline(always)]
                    fn take(payload: &[u8], at: &mut usize, width: u32) -> u32 {
                        let bits = peek(payload, *at) & !u32::MAX.wrapping_shl(width);
                        *at = at.wrapping_add(width as usize);
                        bits
                    }
                },
                quote! {
                    // One refill covers the state's bits and the offset's.
                    if self.buf < 1 << (MAX_STATE_BITS + MAX_OFFSET_BITS) {
                        self.buf = reader.refill(self.buf);
                    }
                    let lane = self.lane % LANES;
                    let p = self.state[lane] & #pm;
                    let (symbol, bits, base) = step(p);
                    self.state[lane] = base + (self.buf & !(u32::MAX << bits)) as usize;
                    self.buf >>= bits;
                    let width = u32::from(WIDTHS[p]);
                    let offset = self.buf & !u32::MAX.wrapping_shl(width);
                    self.buf = self.buf.wrapping_shr(width);
                    *slot = symbol.wrapping_add(offset as Symbol);
                    self.lane = (lane + 1) % LANES;
                },
            )
        }
        Some(o) => {
            let max_state = Literal::u32_unsuffixed(u32::from(parts.max_state_bits));
            let here = o.code(quote!(symbol), quote!(before));
            let tail_fn = tail_offsets_fn(o, quote!(acc = put_offset(writer, acc, offset, width);));
            (
                quote!(let (row, offset, width) = #here;),
                quote!(self.acc = put_offset(writer, self.acc, offset, width);),
                quote! {
                    acc = tail_offsets(&mut writer, input, n - used, acc);
                },
                quote! {
                    #tail_fn

                    /// Most bits a symbol's state step costs (its offset bits aside).
                    const MAX_STATE_BITS: u32 = #max_state;

                    /// Pushes `width` (at most 32) offset bits under the pending bits of
                    /// `acc`, high piece first, in pieces of at most 16, flushing so that
                    /// each fits and `MOST` bits stay free after.
                    #[inline(always)]
                    fn put_offset(writer: &mut Writer<'_>, acc: u32, offset: u32, width: u32) -> u32 {
                        let low = if width < 16 { width } else { 16 };
                        let high = width.wrapping_sub(low);
                        let mut acc = acc;
                        if acc >> 16 != 0 {
                            acc = writer.flush(acc);
                        }
                        acc = acc.wrapping_shl(high) | (offset.wrapping_shr(low) & !u32::MAX.wrapping_shl(high));
                        if acc >> 16 != 0 {
                            acc = writer.flush(acc);
                        }
                        acc = acc.wrapping_shl(low) | (offset & !u32::MAX.wrapping_shl(low));
                        if acc >> (32 - MOST) != 0 {
                            acc = writer.flush(acc);
                        }
                        acc
                    }

                    /// `width` (at most 32) offset bits at bit `at` of the payload, in two
                    /// reads of at most 16 (`peek` holds 25 bits or more).
                    #[inline(always)]
                    fn take(payload: &[u8], at: &mut usize, width: u32) -> u32 {
                        let low = if width < 16 { width } else { 16 };
                        let high = width.wrapping_sub(low);
                        let a = peek(payload, *at) & !u32::MAX.wrapping_shl(low);
                        *at = at.wrapping_add(low as usize);
                        let b = peek(payload, *at) & !u32::MAX.wrapping_shl(high);
                        *at = at.wrapping_add(high as usize);
                        a | b.wrapping_shl(low)
                    }

                    impl Decoding {
                        /// The next `width` (at most 32) bits of the stream, in pieces
                        /// of at most 16, refilling the buffer as it must.
                        #[inline(always)]
                        fn offset(&mut self, reader: &mut Reader<'_>, width: u32) -> u32 {
                            let low = if width < 16 { width } else { 16 };
                            let high = width.wrapping_sub(low);
                            if self.buf < 1 << 16 {
                                self.buf = reader.refill(self.buf);
                            }
                            let a = self.buf & !u32::MAX.wrapping_shl(low);
                            self.buf = self.buf.wrapping_shr(low);
                            if self.buf < 1 << 16 {
                                self.buf = reader.refill(self.buf);
                            }
                            let b = self.buf & !u32::MAX.wrapping_shl(high);
                            self.buf = self.buf.wrapping_shr(high);
                            a | b.wrapping_shl(low)
                        }
                    }
                },
                quote! {
                    if self.buf < 1 << MAX_STATE_BITS {
                        self.buf = reader.refill(self.buf);
                    }
                    let lane = self.lane % LANES;
                    let p = self.state[lane] & #pm;
                    let (symbol, bits, base) = step(p);
                    self.state[lane] = base + (self.buf & !(u32::MAX << bits)) as usize;
                    self.buf >>= bits;
                    let offset = self.offset(reader, u32::from(WIDTHS[p]));
                    *slot = symbol.wrapping_add(offset as Symbol);
                    self.lane = (lane + 1) % LANES;
                },
            )
        }
    };
    // One encoder step. When most steps push no bits, a branch takes those around the push,
    // the flush test and the shift that finds the copy number.
    let put_step = if parts.mostly_silent {
        quote! {
            let put = u32::from_le_bytes(PUT[row]);
            let bits = (x.wrapping_add(put) & 0xffff) >> (TABLE_BITS + 1);
            let run = (put >> 16) as usize;
            if bits == 0 {
                // No bits: the copy number is the state itself.
                self.state[lane] = u32::from(NEXT_STATE[(x as usize + run) & MASK]);
            } else {
                let high = x >> bits;
                self.state[lane] = u32::from(NEXT_STATE[(high as usize + run) & MASK]);
                // `(acc << bits) | (x & mask)`, as `x ^ (high << bits)` is the low bits.
                self.acc = ((self.acc ^ high) << bits) ^ x;
                if self.acc >> (32 - MOST) != 0 {
                    self.acc = writer.flush(self.acc);
                }
            }
        }
    } else {
        quote! {
            let (bits, high, next) = put_symbol(x, #sa row);
            // `(acc << bits) | (x & mask)`, as `x ^ (high << bits)` is the low bits.
            self.acc = ((self.acc ^ high) << bits) ^ x;
            self.state[lane] = next;
            if self.acc >> (32 - MOST) != 0 {
                self.acc = writer.flush(self.acc);
            }
        }
    };
    // Integers codecs read the lanes' last offsets after the loop: `at` moves on.
    let (acc_decl, at_decl) = if parts.offsets.is_some() {
        (
            quote!(let mut acc: u32 = 1;),
            quote!(let mut at = reader.at(buf);),
        )
    } else {
        (quote!(let acc: u32 = 1;), quote!(let at = reader.at(buf);))
    };
    quote! {
        /// The 32-bit path: a 32-bit bit buffer and one loop for every symbol.
        #[cfg(not(target_pointer_width = "64"))]
        mod narrow {
            use super::*;

            /// Most bits one step pushes: a symbol, or a lane's final state. The encoder's bit
            /// buffer holds a marker bit above its pending bits; at or above
            /// `1 << (32 - MOST)` fewer than `MOST` bits are free, and it is flushed.
            const MOST: u32 = if #state_bits > TABLE_BITS { #state_bits } else { TABLE_BITS };

            /// Where the encoder stores whole bytes, back to front. Kept out of the symbol
            /// loop (its stores are rare), so that the loop's values stay in registers.
            struct Writer<'a> {
                out: &'a mut [u8],
                pos: usize,
                /// Set when `out` turned out too small (the bits are dropped from then on).
                full: bool,
            }

            impl Writer<'_> {
                /// Stores the whole bytes of the pending bits (below the marker bit of `acc`)
                /// in front of `pos`, or notes that `out` is too small; returns the rest under
                /// the marker. Never fails, so that the loop carries no error.
                #[inline(never)]
                fn flush(&mut self, acc: u32) -> u32 {
                    let pending = 31u32.wrapping_sub(acc.leading_zeros());
                    let whole = (pending >> 3) as usize;
                    // The pending bits at the top of a word: its last `whole` bytes are stored.
                    let bytes = acc.wrapping_shl(32u32.wrapping_sub(pending)).to_le_bytes();
                    match self.out.get_mut(..self.pos).and_then(<[u8]>::last_chunk_mut::<4>) {
                        // Four bytes always: those below `pos - whole` are overwritten later.
                        Some(dst) => {
                            *dst = bytes;
                            self.pos -= whole;
                        }
                        None => self.store_tail(bytes, whole),
                    }
                    // Keep the low `pending % 8` bits, with the marker just above them.
                    let drop = 31 - (pending & 7);
                    ((acc << drop) | 1 << 31) >> drop
                }

                /// Stores the last `whole` of `bytes` in front of `pos` byte by byte (the front
                /// of `out`), or notes that `out` is too small. Out of line: the common store
                /// then needs no stack.
                #[inline(never)]
                #[cold]
                fn store_tail(&mut self, bytes: [u8; 4], whole: usize) {
                    let start = self.pos.checked_sub(whole);
                    let dst = start.and_then(|start| self.out.get_mut(start..self.pos));
                    match (dst, bytes.get(4usize.wrapping_sub(whole)..)) {
                        (Some(dst), Some(src)) => {
                            for (d, s) in dst.iter_mut().zip(src) {
                                *d = *s;
                            }
                            self.pos -= whole;
                        }
                        _ => self.full = true,
                    }
                }
            }

            /// The encoder's running values, kept in registers by the symbol loop.
            struct Encoding {
                /// The pending bits under a marker bit.
                acc: u32,
                state: [u32; LANES],
                lane: usize,
                /// Not zero once a value outside the alphabet was seen.
                absent: u32,
            }

            impl Encoding {
                /// Puts `input` into the states, last symbol first. A function of its own, so
                /// that only the loop's values compete for the registers.
                #[inline(never)]
                fn run(&mut self, writer: &mut Writer<'_>, input: &[Symbol]) {
                    let mut e = Encoding { state: self.state, ..*self };
                    #encode_loop
                    *self = e;
                }

                /// Puts one symbol into its lane's state.
                #[inline(always)]
                #[allow(clippy::modulo_one)]
                fn one(&mut self, writer: &mut Writer<'_>, symbol: Symbol #before_param) {
                    let lane = self.lane % LANES;
                    #encode_bind
                    #encode_offset
                    let x = self.state[lane];
                    #put_step
                    self.lane = (lane + LANES - 1) % LANES;
                }
            }

            /// The decoder's running values, kept in registers by the symbol loop.
            struct Decoding {
                /// Unread stream bits under a marker bit: below `1 << MAX_SYMBOL_BITS` the
                /// next symbol may need more than there are, and it is refilled.
                buf: u32,
                state: [usize; LANES],
                lane: usize,
            }

            impl Decoding {
                /// Decodes `out.len()` symbols. A function of its own, so that only the
                /// loop's values compete for the registers.
                #[inline(never)]
                fn run(&mut self, reader: &mut Reader<'_>, out: &mut [Symbol]) {
                    let mut d = Decoding { state: self.state, ..*self };
                    // Two symbols a turn of the loop: half the loop's own instructions.
                    let (pairs, rest) = out.as_chunks_mut::<2>();
                    for [a, b] in pairs {
                        d.one(reader, a);
                        d.one(reader, b);
                    }
                    for slot in rest {
                        d.one(reader, slot);
                    }
                    *self = d;
                }

                /// Decodes one symbol from its lane's state into `slot`.
                #[inline(always)]
                #[allow(clippy::modulo_one)]
                fn one(&mut self, reader: &mut Reader<'_>, slot: &mut Symbol) {
                    #decode_one
                }
            }

            /// Where the decoder reads. Kept out of the symbol loop (refills are rare), so
            /// that the loop's values stay in registers.
            struct Reader<'a> {
                data: &'a [u8],
                /// The stream bit just past the buffer's last loaded bit.
                end: usize,
            }

            impl Reader<'_> {
                /// Bits read so far.
                fn at(&self, buf: u32) -> usize {
                    let unread = 31u32.wrapping_sub(buf.leading_zeros());
                    self.end.wrapping_sub(unread as usize)
                }

                /// Moves past the bits read from `buf` and loads it again: the word from the
                /// byte before the next unread bit, less the 1 to 8 bits before it, so that
                /// 24 to 31 bits and the marker fit.
                #[inline(never)]
                fn refill(&mut self, buf: u32) -> u32 {
                    let before = self.at(buf).wrapping_sub(1);
                    let first = before >> 3;
                    self.end = (before | 7).wrapping_add(25);
                    // Drops the bits before `at`: one, then `before & 7`.
                    ((word(self.data, first) >> 1) | 1 << 31) >> (before & 7)
                }
            }

            /// Encodes `input` into `out` as one stream; returns its length.
            ///
            /// The stream is written back to front at the end of `out`, then moved to the
            /// front; `out` beyond the returned length is left unspecified.
            #[allow(clippy::modulo_one)]
            pub fn encode(input: &[Symbol], out: &mut [u8]) -> Result<usize, Error> {
                #header_len
                let mut writer = Writer {
                    pos: out.len(),
                    out,
                    full: false,
                };
                #encode_start
                // The pending bits under a marker bit: `1` alone is none.
                #acc_decl
                #tail_offsets
                // Symbols go in backwards: the decoder reads the last one's bits first.
                // Symbol `i` belongs to lane `i % LANES`.
                let mut e = Encoding {
                    acc,
                    state,
                    lane: head.len().wrapping_sub(1) % LANES,
                    #absent_start,
                };
                e.run(&mut writer, head);
                if writer.full {
                    return Err(Error::OutputTooSmall);
                }
                let Encoding {
                    mut acc, state, ..
                } = e;
                #absent_binding
                #refuse
                // The final states of the used lanes, lane 0 in front, then zero padding to a
                // whole byte, moved to the end when the stream goes to the front.
                for &x in state.iter().take(used).rev() {
                    acc = (acc << TABLE_BITS) | x.wrapping_sub(TABLE_LEN as u32);
                    if acc >> (32 - MOST) != 0 {
                        acc = writer.flush(acc);
                    }
                }
                // Store the whole bytes first: up to 31 bits may pend, and the marker must stay
                // inside the word when the padding goes under them.
                let acc = writer.flush(acc);
                let pad = (8 - 31u32.wrapping_sub(acc.leading_zeros()) % 8) % 8;
                writer.flush(acc << pad);
                let Writer { out, pos, full } = writer;
                if full {
                    return Err(Error::OutputTooSmall);
                }
                let len = move_to_front(out, pos, #header, pad)?;
                #finish
                Ok(len)
            }

            /// Decodes the stream at the front of `stream` (more may follow it); returns the
            /// number of symbols and the number of bytes the stream took.
            #[allow(clippy::modulo_one)]
            pub fn decode_prefix(stream: &[u8], out: &mut [Symbol]) -> Result<(usize, usize), Error> {
                #decode_start
                // An empty buffer (the marker alone) at `at`.
                let mut reader = Reader { data: payload, end: at };
                let buf = reader.refill(1);
                let mut d = Decoding {
                    buf,
                    state,
                    lane: 0,
                };
                d.run(&mut reader, head);
                let Decoding { buf, state, .. } = d;
                #at_decl
                #decode_tail
                #decode_end
            }

            /// The stream bits from bit `at` on, least significant first (25 or more valid).
            #[inline(always)]
            fn peek(data: &[u8], at: usize) -> u32 {
                word(data, at >> 3) >> (at & 7)
            }

            #offset_items
        }
    }
}
