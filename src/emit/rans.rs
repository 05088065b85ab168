//! The emitted rANS encoder and decoder (tables from `method/rans.rs`): a 32-bit state in
//! `[2^16, 2^32)` that moves in 16-bit words, encoded without division (a reciprocal per
//! symbol), decoded by a slot table or a search over the cumulative slots.

use super::framing::{Failure, FramingTokens};
use super::input::{self, InputTokens};
use super::rows::{push_number, rows_of, RowSets};
use crate::method::rans::Rans;
use crate::plan::CodecPlan;
use crate::spec::Lookup;
use proc_macro2::{Literal, TokenStream};
use quote::quote;

pub fn body(
    plan: &CodecPlan,
    rans: &Rans,
    framing: &FramingTokens,
    input: &InputTokens,
    rows: &mut RowSets,
) -> TokenStream {
    let kind = plan.spec.kind.as_ref();
    let lanes = plan.spec.lanes as usize;
    let state_bytes = Literal::usize_unsuffixed(4 * lanes);
    let window = Literal::usize_unsuffixed(2 * lanes);
    let put_len = Literal::usize_unsuffixed(plan.put_rows().0);
    let FramingTokens {
        header_max,
        header_len,
        header,
        start,
        ..
    } = framing;
    let InputTokens {
        row,
        declare,
        check,
        refuse,
        ..
    } = input;
    let field = if matches!(plan.input, crate::kind::InputMap::Rows(_)) {
        quote! {
            /// 1 for a value outside the alphabet (its other fields are harmless).
            absent: u8,
        }
    } else {
        quote!()
    };
    let finish = framing.write_header();
    let truncated = framing.error(Failure::Truncated);
    let corrupt = framing.error(Failure::Corrupt);
    // Compact and bare streams run to the end of the stream.
    let exact_end = if framing.to_the_end() {
        let trailing = framing.error(Failure::TrailingBytes);
        quote! {
            if at < payload.len() {
                return Err(#trailing);
            }
        }
    } else {
        TokenStream::new()
    };
    // Bytes the stream took: a compact or bare one runs to the end of `stream`.
    let used = if framing.to_the_end() {
        quote!(stream.len())
    } else {
        quote!(header + at)
    };
    let prefix_vis = if framing.to_the_end() {
        TokenStream::new()
    } else {
        quote!(pub)
    };
    let word = super::tail_word();
    let absent = matches!(plan.input, crate::kind::InputMap::Rows(_));
    // A context codec's table sets (one without contexts).
    let all: Vec<&Rans> = plan
        .sets
        .iter()
        .filter_map(|s| match &s.tables {
            crate::method::Tables::Rans(r) => Some(r),
            crate::method::Tables::Tans(_) => None,
        })
        .collect();
    let many = all.len() > 1;
    // Each set's rows in turn, nested when there are several.
    let nest = |per_set: Vec<Vec<String>>| -> Vec<String> {
        if !many {
            return per_set.into_iter().flatten().collect();
        }
        let mut out = Vec::new();
        for (j, lines) in per_set.into_iter().enumerate() {
            out.push(format!("// table set {j}"));
            out.push("[".to_string());
            out.extend(lines.into_iter().map(|l| format!("    {l}")));
            out.push("],".to_string());
        }
        out
    };
    let put_rows = rows.add(nest(
        all.iter()
            .map(|rans| {
                input::put_rows(kind, &plan.input, 1, |line, row| {
                    let p = rans.put(row.unwrap_or(0));
                    line.push_str("Put { reciprocal: ");
                    push_number(line, u64::from(p.reciprocal));
                    line.push_str(", ceiling: ");
                    push_number(line, u64::from(p.ceiling));
                    line.push_str(", start: ");
                    push_number(line, u64::from(p.start));
                    line.push_str(", gap: ");
                    push_number(line, u64::from(p.gap));
                    line.push_str(", shift: ");
                    push_number(line, u64::from(p.shift));
                    if absent {
                        line.push_str(if row.is_some() {
                            ", absent: 0"
                        } else {
                            ", absent: 1"
                        });
                    }
                    line.push_str(" }, ");
                })
            })
            .collect(),
    ));
    let puts_type = if many {
        quote!([[Put; #put_len]; SETS])
    } else {
        quote!([Put; #put_len])
    };
    let min_cost = all.iter().map(|r| r.min_cost_1024()).min().unwrap_or(0);
    let all_symbols = kind.all_symbols();
    let count_check = match min_cost {
        0 => quote!(),
        cost => {
            let cost = Literal::u64_unsuffixed(cost);
            quote! {
                // Each symbol costs at least `MIN_COST / 1024` bits of state and each word
                // read gives back at most 17: a count the payload cannot hold is refused
                // before any decoding.
                const MIN_COST: u64 = #cost;
                let words = (payload.len() - 4 * LANES) as u64 / 2;
                let room = words.saturating_mul(17).saturating_add(16 * LANES as u64);
                if (count as u64).saturating_mul(MIN_COST) >> 10 > room {
                    return Err(#truncated);
                }
            }
        }
    };
    let lookup = match plan.spec.lookup {
        Lookup::Table => {
            let slots: Vec<u32> = (0..1u32 << rans.table_bits).collect();
            let mut flat = Vec::new();
            for (j, rans) in all.iter().enumerate() {
                if many {
                    flat.push(format!("// table set {j}"));
                }
                flat.extend(rows_of(&slots, 8, |line, &slot| {
                    let s = rans.symbol_at(slot);
                    line.push_str("Step(");
                    line.push_str(&kind.row_literal(s));
                    line.push_str(", ");
                    push_number(line, u64::from(slot - rans.cum[s]));
                    line.push_str(", ");
                    push_number(line, u64::from(rans.slots[s]));
                    line.push_str("), ");
                }));
            }
            let decode_rows = rows.add(flat);
            let (decode_len, index, set_param) = if many {
                (
                    quote!(SETS * TABLE_LEN),
                    quote!(((set & (SETS - 1)) << TABLE_BITS) | (slot & MASK)),
                    quote!(set: usize,),
                )
            } else {
                (quote!(TABLE_LEN), quote!(slot & MASK), TokenStream::new())
            };
            quote! {
                /// What slot `i` decodes to, `Step(symbol, i - c, f)`: the symbol owning the
                /// slot, the slot's place in the symbol's range and the symbol's slot count
                /// (a `u32`, so that an entry is 8 bytes and its index scales by a shift).
                struct Step(Symbol, u16, u32);

                /// Decode steps by slot (with several table sets, each set's in turn).
                static DECODE: [Step; #decode_len] = #decode_rows;

                /// The symbol owning `slot`, its slots and the slot's offset in its range.
                #[inline(always)]
                fn lookup(#set_param slot: usize) -> (Symbol, u32, u32) {
                    let step = &DECODE[#index];
                    (step.0, step.2, u32::from(step.1))
                }
            }
        }
        Lookup::Search => {
            let cum_rows = rows.add(rows_of(&rans.cum, 16, |line, &c| {
                push_number(line, u64::from(c));
                line.push_str(", ");
            }));
            quote! {
                /// Cumulative slots: symbol `s` owns slots `CUM[s] .. CUM[s + 1]`.
                static CUM: [u16; ALPHABET_LEN + 1] = #cum_rows;

                /// The symbol owning `slot`, its slots and the slot's offset in its range,
                /// by a binary search of fixed length over `CUM` (small tables, slower).
                #[inline(always)]
                fn lookup(slot: usize) -> (Symbol, u32, u32) {
                    let slot = (slot & MASK) as u32;
                    let mut low = 0usize;
                    let mut len = ALPHABET_LEN;
                    while len > 1 {
                        let half = len / 2;
                        let c = CUM.get(low + half).copied().unwrap_or(u16::MAX);
                        low += if u32::from(c) <= slot { half } else { 0 };
                        len -= half;
                    }
                    match (#all_symbols.get(low), CUM.get(low), CUM.get(low + 1)) {
                        (Some(&symbol), Some(&c), Some(&next)) => {
                            (symbol, u32::from(next - c), slot - u32::from(c))
                        }
                        // Unreachable: `low < ALPHABET_LEN`.
                        _ => (#all_symbols[0], 1, 0),
                    }
                }
            }
        }
    };

    // Context codecs: the encoder's set from the symbol `LANES` before, the decoder's from
    // each lane's last symbol.
    let context_items = super::tans::rans_context_items(plan, rows);
    let (rest_set, rounds_loop, round_set, sets_decl, lane_set, lane_next, i_set, i_next) = if many
    {
        (
            quote!([context_set(input, rounds.len() * LANES + lane)]),
            quote!(for (r, round) in rounds.iter().enumerate().rev()),
            quote!([context_set(input, r * LANES + lane)]),
            quote!(let mut sets = [FIRST_SET; LANES];),
            quote!(sets[lane],),
            quote!(sets[lane] = set_of(symbol);),
            quote!(sets[i % LANES],),
            quote!(sets[i % LANES] = set_of(symbol);),
        )
    } else {
        (
            TokenStream::new(),
            quote!(for round in rounds.iter().rev()),
            TokenStream::new(),
            TokenStream::new(),
            TokenStream::new(),
            TokenStream::new(),
            TokenStream::new(),
            TokenStream::new(),
        )
    };
    quote! {
        /// Lower end of the state interval `[LOW, 2^32)`; states move in 16-bit words.
        const LOW: u32 = 1 << 16;

        /// Largest stream [`encode`] writes for `symbols` symbols, whatever they are.
        pub const fn max_encoded_len(symbols: usize) -> usize {
            (#header_max)
                .saturating_add(4 * LANES)
                .saturating_add(symbols.saturating_mul(2))
        }

        /// One encoder step after renormalisation: `C(s, x) = M floor(x / f) + c + x mod f`,
        /// written `x + start + floor(x / f) * gap`, with the quotient by the reciprocal.
        #[inline(always)]
        fn put_symbol(x: u32, put: &Put) -> u32 {
            let wide = u64::from(x);
            let q = (wide + ((wide * u64::from(put.reciprocal)) >> 32)) >> put.shift;
            x.wrapping_add(u32::from(put.start))
                .wrapping_add((q as u32).wrapping_mul(u32::from(put.gap)))
        }

        /// Renormalises `x` for `put` the careful way, storing a word in front of `pos`.
        #[inline(always)]
        fn shed(x: u32, put: &Put, out: &mut [u8], pos: &mut usize) -> Result<u32, Error> {
            if x <= put.ceiling {
                return Ok(x);
            }
            let Some(dst) = out.get_mut(..*pos).and_then(<[u8]>::last_chunk_mut::<2>) else {
                return Err(Error::OutputTooSmall);
            };
            *dst = (x as u16).to_le_bytes();
            *pos -= 2;
            Ok(x >> 16)
        }

        /// Encodes `input` into `out` as one stream; returns its length.
        ///
        /// The stream is written back to front at the end of `out`, then moved to the
        /// front; `out` beyond the returned length is left unspecified.
        #[allow(clippy::modulo_one)]
        pub fn encode(input: &[Symbol], out: &mut [u8]) -> Result<usize, Error> {
            #header_len
            let mut pos = out.len();
            let mut state = [LOW; LANES];
            #declare
            // Symbols go in backwards, so the last, partial round comes first.
            let (rounds, rest) = input.as_chunks::<LANES>();
            for (lane, &symbol) in rest.iter().enumerate().rev() {
                let row = #row;
                let put = &PUTS #rest_set [row];
                #check
                let x = shed(state[lane % LANES], put, out, &mut pos)?;
                state[lane % LANES] = put_symbol(x, put);
            }
            #rounds_loop {
                let window = out.get_mut(..pos).and_then(<[u8]>::last_chunk_mut::<#window>);
                if let Some(window) = window {
                    // Fast path: every store lands in `window`; the word is always stored
                    // and kept only when the state sheds it.
                    let top = pos;
                    for lane in (0..LANES).rev() {
                        let symbol = round[lane];
                        let row = #row;
                        let put = &PUTS #round_set [row];
                        #check
                        let x = state[lane];
                        let shed = u32::from(x > put.ceiling);
                        let at = (2 * LANES - 2).saturating_sub(top.wrapping_sub(pos));
                        if let Some(dst) = window.get_mut(at..).and_then(<[u8]>::first_chunk_mut::<2>) {
                            *dst = (x as u16).to_le_bytes();
                        }
                        pos = pos.wrapping_sub((shed as usize) << 1);
                        // Branch-free: the word goes when the state is over the ceiling.
                        state[lane] = put_symbol(x >> (shed << 4), put);
                    }
                } else {
                    for lane in (0..LANES).rev() {
                        let symbol = round[lane];
                        let row = #row;
                        let put = &PUTS #round_set [row];
                        #check
                        let x = shed(state[lane], put, out, &mut pos)?;
                        state[lane] = put_symbol(x, put);
                    }
                }
            }
            #refuse
            // The final states, lane 0 in front.
            for &x in state.iter().rev() {
                let Some(dst) = out.get_mut(..pos).and_then(<[u8]>::last_chunk_mut::<4>) else {
                    return Err(Error::OutputTooSmall);
                };
                *dst = x.to_le_bytes();
                pos -= 4;
            }
            let len = move_to_front(out, pos, #header, 0)?;
            #finish
            Ok(len)
        }

        /// Decodes the stream at the front of `stream` (more may follow it); returns the
        /// number of symbols and the number of bytes the stream took.
        #[allow(clippy::modulo_one)]
        #prefix_vis fn decode_prefix(stream: &[u8], out: &mut [Symbol]) -> Result<(usize, usize), Error> {
            #start
            let Some(head) = payload.first_chunk::<#state_bytes>() else {
                return Err(#truncated);
            };
            #count_check
            let mut state = [0u32; LANES];
            for (x, bytes) in state.iter_mut().zip(head.as_chunks::<4>().0) {
                *x = u32::from_le_bytes(*bytes);
            }
            if state.iter().any(|&x| x < LOW) {
                return Err(#corrupt);
            }
            let mut at = 4 * LANES;
            #sets_decl
            let (rounds, _) = out.as_chunks_mut::<LANES>();
            let mut done = 0;
            for round in rounds.iter_mut() {
                let Some(window) = payload.get(at..).and_then(<[u8]>::first_chunk::<#window>) else {
                    break;
                };
                // Fast path: every read lands in `window`; the word is always read and
                // taken only when the state needs it.
                let first = at;
                for lane in 0..LANES {
                    let x = state[lane];
                    let (symbol, f, offset) = lookup(#lane_set x as usize);
                    round[lane] = symbol;
                    #lane_next
                    let x = f.wrapping_mul(x >> TABLE_BITS).wrapping_add(offset);
                    let w = window_half(window, at.wrapping_sub(first));
                    // Branch-free refill: shift in the word when the state fell below LOW.
                    let need = u32::from(x < LOW);
                    state[lane] = (x << (need << 4)) | (w & need.wrapping_neg());
                    at += (need as usize) << 1;
                }
                done += LANES;
            }
            for (i, slot) in out.iter_mut().enumerate().skip(done) {
                let x = &mut state[i % LANES];
                let (symbol, f, offset) = lookup(#i_set *x as usize);
                *slot = symbol;
                #i_next
                let y = f.wrapping_mul(*x >> TABLE_BITS).wrapping_add(offset);
                *x = if y < LOW {
                    at += 2;
                    (y << 16) | (word(payload, at - 2) as u32 & 0xffff)
                } else {
                    y
                };
            }
            if at > payload.len() {
                return Err(#truncated);
            }
            if state.iter().any(|&x| x != LOW) {
                return Err(#corrupt);
            }
            #exact_end
            Ok((count, #used))
        }

        #word

        /// Two bytes of `window` from `at` on, little-endian. The rounds never read past
        /// `N - 2`; the `min` only lets the compiler see it and drop the bounds check.
        #[inline(always)]
        fn window_half<const N: usize>(window: &[u8; N], at: usize) -> u32 {
            let at = if at < N - 2 { at } else { N - 2 };
            u32::from(u16::from_le_bytes([window[at], window[at + 1]]))
        }

        #lookup

        /// How to put a symbol into the state: write a word first when `x > ceiling`, then
        /// `x + start + floor(x / f) * gap`, where `gap = M - f` and
        /// `floor(x / f) = (x + (x * reciprocal >> 32)) >> shift`.
        struct Put {
            reciprocal: u32,
            ceiling: u32,
            start: u16,
            gap: u16,
            shift: u8,
            #field
        }

        /// Encoding records, indexed by input value (with several table sets, by set first).
        static PUTS: #puts_type = #put_rows;

        #context_items
    }
}
