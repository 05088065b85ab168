//! How long generation takes where it really runs: in an unoptimised build script. Run it
//! in the dev profile, as cargo builds build scripts by default:
//!
//!     cargo run --example generation_time
//!
//! It renders a spec of 16 codecs at table_bits 12 (8 bytes codecs over 40 to 96 symbols,
//! 8 tokens codecs of 4 to 24 tokens) several times and prints the median, and beside it the
//! time to merely read and parse the spec, as a same-run baseline.

use std::fmt::Write as _;
use std::time::Instant;

fn spec() -> String {
    let mut s = String::from("[defaults]\ntable_bits = 12\n");
    for i in 0..8u64 {
        let n = 40 + 8 * i;
        let _ = write!(s, "\n[codec.bytes_{i}]\nkind = \"bytes\"\nsymbols = [");
        let syms: Vec<String> = (0..n).map(|b| (b + 32).to_string()).collect();
        s.push_str(&syms.join(", "));
        s.push_str("]\ncounts = { ");
        // Zipf-like counts: a typical skewed alphabet.
        let counts: Vec<String> = (0..n)
            .map(|b| format!("{} = {}", b + 32, 100_000 / (b + 1 + i)))
            .collect();
        s.push_str(&counts.join(", "));
        s.push_str(" }\n");
    }
    for i in 0..8u64 {
        let n = 4 + 3 * i;
        let _ = write!(s, "\n[codec.tokens_{i}]\nkind = \"tokens\"\nsymbols = [");
        let syms: Vec<String> = (0..n).map(|t| format!("\"t{t}\"")).collect();
        s.push_str(&syms.join(", "));
        s.push_str("]\ncounts = { ");
        let counts: Vec<String> = (0..n)
            .map(|t| format!("t{t} = {}", 1 + (5_000 >> (t % 12))))
            .collect();
        s.push_str(&counts.join(", "));
        s.push_str(" }\n");
    }
    s
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() {
    let text = spec();
    let path = std::path::Path::new("generation_time.toml");
    let runs = 7;
    let mut render = Vec::new();
    let mut parse = Vec::new();
    let mut bytes = 0;
    for _ in 0..runs {
        let t = Instant::now();
        let _ = precast::spec::parse(&text, path).expect("spec parses");
        parse.push(t.elapsed().as_secs_f64());
        let t = Instant::now();
        let out = precast::render_str(&text, path).expect("spec renders");
        render.push(t.elapsed().as_secs_f64());
        bytes = out.source.len();
    }
    let profile = if cfg!(debug_assertions) {
        "unoptimised"
    } else {
        "optimised"
    };
    println!(
        "16 codecs at table_bits 12 ({profile}): render {:.3} s median of {runs}, spec parse alone {:.4} s, {} KiB of source",
        median(render),
        median(parse),
        bytes / 1024
    );
}
