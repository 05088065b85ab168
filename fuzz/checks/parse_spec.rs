//! Arbitrary text as a spec: parsing and rendering may refuse it, never panic, and never
//! fail as an internal error (a bug in precast, whatever the spec says).

use precast::spec::Source;
use std::path::Path;

// Above 2^10 slots rendering gets slow enough to starve the fuzzer of executions.
const MAX_RENDER_TABLE_BITS: u32 = 10;
// A chosen size is held to its budget: at most this many bytes keeps tANS tables (at
// least 5 bytes a slot at 2^10) below 2^10 slots; rANS by search is cheap at any size.
const MAX_RENDER_BUDGET: usize = 4096;

/// Parses `data` as a spec, and renders it when that is pure and quick (see the module docs).
pub fn check_parse_spec(data: &[u8]) {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let path = Path::new("fuzz.toml");
    let spec = match precast::spec::parse(text, path) {
        Ok(spec) => spec,
        Err(e) => {
            assert_ne!(e.kind, precast::ErrorKind::Internal, "{e}");
            return;
        }
    };
    // Samples would read files relative to the working directory: keep it pure.
    let renderable = spec.codecs.iter().all(|c| {
        let quick = if c.given.table_bits {
            c.table_bits <= MAX_RENDER_TABLE_BITS
        } else {
            c.flash_budget.is_some_and(|b| b <= MAX_RENDER_BUDGET)
        };
        quick && !c.sources.iter().any(|s| matches!(s, Source::Sample { .. }))
    });
    if renderable {
        if let Err(e) = precast::render_str(text, path) {
            assert_ne!(e.kind, precast::ErrorKind::Internal, "{e}");
        }
    }
}
