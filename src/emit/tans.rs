//! The emitted tANS encoder and decoder (tables from `method/tans.rs`).
//!
//! Both run in rounds: a fixed number of symbols (a multiple of `LANES`), unrolled by the
//! compiler, with one bounds check per round that takes a fixed-size window of the stream;
//! near the ends of the buffers a plain loop with checked, zero-filled reads takes over.

use super::framing::{self, FramingTokens};
use super::input::{self, InputTokens};
use super::rows::{push_number, rows_of, RowSets};
use crate::method::tans::Tans;
use crate::plan::CodecPlan;
use crate::spec::Framing;
use proc_macro2::{Literal, TokenStream};
use quote::quote;

/// Round sizes: one 64-bit load holds at least 57 unread bits; flushing keeps fewer than 64
/// pending. A round is a whole number of symbols per lane: as many as one load (one store)
/// covers, or one per lane when that is more.
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
    fn new(tans: &Tans, lanes: usize) -> Rounds {
        let max_bits = usize::from(tans.decode.iter().map(|e| e.bits).max().unwrap_or(0)).max(1);
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

pub fn body(
    plan: &CodecPlan,
    tans: &Tans,
    framing: &FramingTokens,
    input: &InputTokens,
    rows: &mut RowSets,
) -> TokenStream {
    let kind = plan.spec.kind.as_ref();
    let r = Rounds::new(tans, plan.spec.lanes as usize);
    let [max_bits, per_load, per_flush, decode_round, encode_round, decode_window, encode_window] =
        [
            r.max_bits,
            r.per_load,
            r.per_flush,
            r.decode_round,
            r.encode_round,
            r.decode_window,
            r.encode_window,
        ]
        .map(Literal::usize_unsuffixed);
    let FramingTokens {
        header_max,
        header_len,
        start,
        ..
    } = framing;
    let InputTokens {
        row,
        declare,
        check,
        refuse,
        field,
        ..
    } = input;

    let stored_mask = tans.stored_mask();
    let decode_rows = rows.add(rows_of(&tans.decode, 8, |line, e| {
        line.push_str("Step(");
        line.push_str(&kind.row_literal(usize::from(e.symbol)));
        line.push_str(", ");
        push_number(line, u64::from(e.bits));
        line.push_str(", ");
        push_number(line, u64::from(e.base));
        if stored_mask {
            line.push_str(", ");
            push_number(line, (1u64 << e.bits) - 1);
        }
        line.push_str("), ");
    }));
    let put_rows = rows.add(input::put_rows(kind, &plan.input, |line, s| {
        let p = tans.puts[s];
        line.push_str("spend: ");
        push_number(line, u64::from(p.spend));
        line.push_str(", run: ");
        push_number(line, u64::from(p.run));
    }));
    let next_rows = rows.add(rows_of(&tans.next_state, 16, |line, &v| {
        push_number(line, u64::from(v));
        line.push_str(", ");
    }));
    let (step_struct, step_mask) = if stored_mask {
        (
            quote! {
                /// One decode step, `Step(symbol, bits, base, mask)`: at table position `i` the
                /// decoder emits `symbol`, reads `bits` bits `b` (`mask` is `2^bits - 1`, stored
                /// to keep a shift off the critical path), and goes to position `base + b`.
                struct Step(Symbol, u8, u16, u32);
            },
            quote!(u64::from(step.3)),
        )
    } else {
        (
            quote! {
                /// One decode step, `Step(symbol, bits, base)`: at table position `i` the
                /// decoder emits `symbol`, reads `bits` bits `b`, and goes to position `base + b`.
                struct Step(Symbol, u8, u16);
            },
            quote!(!(u64::MAX << step.1)),
        )
    };
    let put_len = Literal::usize_unsuffixed(plan.put_rows().0);
    let count_check = match tans.zero_run() {
        Some(run) => {
            let run = Literal::usize_unsuffixed(run);
            quote! {
                // An honest stream reads a bit at least every `ZERO_RUN + 1` symbols of a
                // lane: a count its payload cannot hold is refused before any decoding.
                const ZERO_RUN: usize = #run;
                let room = payload
                    .len()
                    .saturating_mul(8)
                    .saturating_sub(pad + LANES * TABLE_BITS as usize);
                if (count / (ZERO_RUN + 1)).saturating_sub(LANES) > room {
                    return Err(Error::Truncated);
                }
            }
        }
        None => quote!(),
    };
    let word = super::tail_word();
    let spend = if tans.narrow_spend() {
        quote!(u16)
    } else {
        quote!(u32)
    };
    let finish = match plan.spec.framing {
        Framing::Tagged => framing::write_header(Framing::Tagged, quote!(pad as u8)),
        Framing::Bare => quote! {
            // Bare: move the padding from the front to the end of the payload.
            if pad != 0 {
                let mut i = 0;
                while i < len {
                    let next = if i + 1 < len { out.get(i + 1).copied().unwrap_or(0) } else { 0 };
                    if let Some(b) = out.get_mut(i) {
                        *b = (*b >> pad) | (next << (8 - pad));
                    }
                    i += 1;
                }
            }
        },
    };
    let end_check = match plan.spec.framing {
        // The padding count must make the stream end on a byte boundary: one stream, one
        // encoding.
        Framing::Tagged => quote! {
            if !at.is_multiple_of(8) {
                return Err(Error::Corrupt);
            }
        },
        Framing::Bare => quote! {
            if bits_at(payload, at) & !(u64::MAX << ((8 - at % 8) % 8)) != 0 {
                return Err(Error::Corrupt);
            }
        },
    };

    quote! {
        /// Most bits any one symbol costs.
        pub const MAX_SYMBOL_BITS: u32 = #max_bits;
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

        /// Largest stream [`encode`] writes for `symbols` symbols, whatever they are.
        pub const fn max_encoded_len(symbols: usize) -> usize {
            let bits = symbols
                .saturating_mul(MAX_SYMBOL_BITS as usize)
                .saturating_add(LANES * TABLE_BITS as usize + 7);
            (#header_max).saturating_add(bits / 8)
        }

        /// One encoder step: shifts the low `k` bits of `x` in under the pending bits (the
        /// stream is built back to front, so they come first) and returns the next state and `k`.
        #[inline(always)]
        #[allow(clippy::useless_conversion)]
        fn put_symbol(x: u32, put: &Put, acc: &mut u64) -> (u32, u32) {
            let bits = x.wrapping_add(u32::from(put.spend)) >> (TABLE_BITS + 1);
            let high = x >> bits;
            // The low bits as `x` minus its high part: no mask to build.
            *acc = (*acc << bits) | u64::from(x ^ (high << bits));
            let next = NEXT_STATE[(high as usize + usize::from(put.run)) & MASK];
            (u32::from(next), bits)
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
            dst.copy_from_slice(top);
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
            let header = #header_len;
            let end = out.len();
            let mut pos = end;
            let mut state = [TABLE_LEN as u32; LANES];
            // Bits not yet stored, the low `pending` of `acc`; fewer than 8 between stores.
            let mut acc: u64 = 0;
            let mut pending: u32 = 0;
            #declare
            // Symbols go in backwards, so the last, partial round comes first.
            let (rounds, rest) = input.as_chunks::<ENCODE_ROUND>();
            for (i, &symbol) in rest.iter().enumerate().rev() {
                let put = &PUTS[#row];
                #check
                let (next, bits) = put_symbol(state[i % LANES], put, &mut acc);
                state[i % LANES] = next;
                pending += bits;
                store(out, &mut pos, acc, &mut pending)?;
            }
            for round in rounds.iter().rev() {
                let window = out.get_mut(..pos).and_then(<[u8]>::last_chunk_mut::<ENCODE_WINDOW>);
                if let Some(window) = window {
                    // Fast path: every store lands in `window`, no other check needed.
                    let top = pos;
                    for i in (0..ENCODE_ROUND).rev() {
                        let symbol = round[i];
                        let put = &PUTS[#row];
                        #check
                        let (next, bits) = put_symbol(state[i % LANES], put, &mut acc);
                        state[i % LANES] = next;
                        pending += bits;
                        if i % PER_FLUSH == 0 {
                            let at = (ENCODE_WINDOW - 8).saturating_sub(top.wrapping_sub(pos));
                            window[at..at + 8].copy_from_slice(&aligned(acc, pending).to_le_bytes());
                            pos -= (pending >> 3) as usize;
                            pending &= 7;
                        }
                    }
                } else {
                    for i in (0..ENCODE_ROUND).rev() {
                        let symbol = round[i];
                        let put = &PUTS[#row];
                        #check
                        let (next, bits) = put_symbol(state[i % LANES], put, &mut acc);
                        state[i % LANES] = next;
                        pending += bits;
                        store(out, &mut pos, acc, &mut pending)?;
                    }
                }
            }
            #refuse
            // The final states, lane 0 in front, then zero padding to a whole byte.
            for &x in state.iter().rev() {
                acc = (acc << TABLE_BITS) | (u64::from(x) - TABLE_LEN as u64);
                pending += TABLE_BITS;
                store(out, &mut pos, acc, &mut pending)?;
            }
            let pad = (8 - pending % 8) % 8;
            acc <<= pad;
            pending += pad;
            store(out, &mut pos, acc, &mut pending)?;
            if pos < header {
                return Err(Error::OutputTooSmall);
            }
            out.copy_within(pos..end, header);
            let len = header + (end - pos);
            #finish
            Ok(len)
        }

        /// Decodes the stream at the front of `stream` (more may follow it); returns the
        /// number of symbols and the number of bytes the stream took.
        #[allow(clippy::modulo_one)]
        pub fn decode_prefix(stream: &[u8], out: &mut [Symbol]) -> Result<(usize, usize), Error> {
            #start
            let payload = stream.get(header..).unwrap_or(&[]);
            #count_check
            if bits_at(payload, 0) & !(u64::MAX << pad) != 0 {
                return Err(Error::Corrupt);
            }
            let mut at = pad;
            let mut state = [0usize; LANES];
            for x in state.iter_mut() {
                *x = bits_at(payload, at) as usize & MASK;
                at += TABLE_BITS as usize;
            }
            let (rounds, _) = out.as_chunks_mut::<DECODE_ROUND>();
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
                    let step = &DECODE[*x & MASK];
                    *slot = step.0;
                    let bits = u32::from(step.1);
                    *x = usize::from(step.2) + (buf & #step_mask) as usize;
                    buf >>= bits;
                    at += bits as usize;
                }
                done += DECODE_ROUND;
            }
            for (i, slot) in out.iter_mut().enumerate().skip(done) {
                let x = &mut state[i % LANES];
                let step = &DECODE[*x & MASK];
                *slot = step.0;
                let bits = u32::from(step.1);
                *x = usize::from(step.2) + (bits_at(payload, at) & !(u64::MAX << bits)) as usize;
                at += bits as usize;
            }
            if at.div_ceil(8) > payload.len() {
                return Err(Error::Truncated);
            }
            if state.iter().any(|&x| x != 0) {
                return Err(Error::Corrupt);
            }
            #end_check
            Ok((count, header + at.div_ceil(8)))
        }

        /// Eight bytes of `window` from `at` on, little-endian. The rounds never read past
        /// `N - 8`; the `min` only lets the compiler see it and drop the bounds check.
        #[inline(always)]
        fn window_word<const N: usize>(window: &[u8; N], at: usize) -> u64 {
            let at = if at < N - 8 { at } else { N - 8 };
            let mut w = [0u8; 8];
            w.copy_from_slice(&window[at..at + 8]);
            u64::from_le_bytes(w)
        }

        #word

        /// The stream bits from bit `at` on, least significant first (57 or more valid).
        #[inline(always)]
        fn bits_at(data: &[u8], at: usize) -> u64 {
            word(data, at >> 3) >> (at & 7)
        }

        #step_struct

        /// How to put a symbol into the state: from state `x` the encoder writes
        /// `k = (x + spend) >> (TABLE_BITS + 1)` bits, then goes to state
        /// `NEXT_STATE[((x >> k) + run) % TABLE_LEN]`.
        struct Put {
            spend: #spend,
            run: u16,
            #field
        }

        /// Decode steps by table position (the spread of symbols over the table).
        static DECODE: [Step; TABLE_LEN] = #decode_rows;

        /// Encoding records, indexed by input value.
        static PUTS: [Put; #put_len] = #put_rows;

        /// For each symbol in alphabet order, the states of its copies in the table, left
        /// to right (a state is `TABLE_LEN` + position).
        static NEXT_STATE: [u16; TABLE_LEN] = #next_rows;
    }
}
