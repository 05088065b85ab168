//! Sizing (`src/sizing.rs`): the method, symbol lookup and table_bits precast chooses when a
//! spec leaves them open. With a flash budget the chosen tables fit it, and no candidate that
//! fits has a lower rate beyond the 0.1 % tie, nor ties and decodes faster or takes fewer
//! bytes; without a budget or table_bits they are the smallest tables within 0.5 % excess;
//! budgets nothing fits are located errors. The candidates and the rule are written out here
//! again from the rules (DEVELOPERS.md, "How sizes are chosen"), independently of the
//! generator's search, and the tables' bytes are held to what the compiler says they take.

// These specs carry advice on purpose; the macro reports advice as `deprecated` warnings.
#![allow(deprecated)]

mod common;

#[allow(dead_code)]
mod chosen {
    precast_macros::codecs!("tests/specs/sizing.toml");
}

use common::{root, Rng};
use precast::model::Model;
use precast::quantize::quantize;
use precast::spec::{CodecSpec, Framing, Lookup, Method, MAX_TABLE_BITS};
use precast::tables::Tables;
use precast::verify::Reference;
use precast::{ErrorKind, Report};
use proptest::prelude::*;
use std::path::Path;
use std::process::Command;

/// Rates this close (relative) to the lowest tie.
const TIE: f64 = 0.001;
/// Excess the chosen default stays within, in percent.
const LIMIT: f64 = 0.5;

// ---------------------------------------------------------------------------------------
// The rule, written out again
// ---------------------------------------------------------------------------------------

/// A size a codec could have, with its bytes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct Size {
    method: Method,
    lookup: Lookup,
    bits: u32,
    bytes: usize,
}

impl Size {
    /// Decoding speed, fastest first: tANS, rANS with its table, rANS by search.
    fn rank(&self) -> u8 {
        match (self.method, self.lookup) {
            (Method::Tans, _) => 0,
            (Method::Rans, Lookup::Table) => 1,
            (Method::Rans, Lookup::Search) => 2,
        }
    }
}

fn smallest_bits(symbols: usize) -> u32 {
    (1..=MAX_TABLE_BITS)
        .find(|&b| 1usize << b >= symbols)
        .unwrap()
}

/// The sizes open to `codec`: the given method, else both (rANS only in tagged framing), and
/// both rANS lookups unless given; table_bits as given or every size from the smallest that
/// holds the alphabet.
fn open_sizes(codec: &CodecSpec) -> Vec<Size> {
    let n = codec.kind.alphabet_len();
    let (rows, absent) = precast::sizing::put_rows(&codec.kind.input(), n);
    let methods = if codec.given.method || codec.given.table_bits {
        vec![codec.method]
    } else if codec.framing == Framing::Tagged {
        vec![Method::Tans, Method::Rans]
    } else {
        vec![Method::Tans]
    };
    let bits: Vec<u32> = if codec.given.table_bits {
        vec![codec.table_bits]
    } else {
        (smallest_bits(n)..=MAX_TABLE_BITS).collect()
    };
    let mut out = Vec::new();
    for method in methods {
        let lookups = match method {
            Method::Tans => vec![Lookup::Table],
            Method::Rans if codec.given.lookup || codec.given.table_bits => vec![codec.lookup],
            Method::Rans => vec![Lookup::Table, Lookup::Search],
        };
        for lookup in lookups {
            for &b in &bits {
                let layout = precast::method::layout(
                    method,
                    lookup,
                    b,
                    n,
                    codec.kind.symbol_bytes(),
                    rows,
                    absent,
                );
                out.push(Size {
                    method,
                    lookup,
                    bits: b,
                    bytes: layout.bytes(),
                });
            }
        }
    }
    out
}

/// Rates of sizes for the training counts, each built once.
struct Rater {
    counts: Vec<u64>,
    p: Vec<f64>,
    known: Vec<(Method, u32, f64)>,
}

impl Rater {
    fn new(counts: &[u64]) -> Rater {
        let model = Model {
            counts: counts.to_vec(),
            sequences: Vec::new(),
            sequence_symbols: 0,
            bound: None,
            place_counts: Default::default(),
        };
        Rater {
            counts: counts.to_vec(),
            p: model.probabilities(),
            known: Vec::new(),
        }
    }

    fn rate(&mut self, s: &Size) -> f64 {
        if let Some(&(_, _, r)) = self
            .known
            .iter()
            .find(|(m, b, _)| *m == s.method && *b == s.bits)
        {
            return r;
        }
        let slots = quantize(&self.counts, s.bits).unwrap();
        let (_, r) = Tables::build(s.method, &slots, &self.counts, &self.p, s.bits).unwrap();
        self.known.push((s.method, s.bits, r));
        r
    }
}

fn excess(rate: f64, entropy: f64) -> f64 {
    100.0 * (rate - entropy) / entropy
}

/// What was built: the chosen size, or the given one when nothing was open.
fn built_size(report: &Report, codec: &CodecSpec) -> (Method, Lookup, u32) {
    match report.sizing.as_ref().and_then(|s| s.choice()) {
        Some(w) => (
            w.candidate.method,
            w.candidate.lookup,
            w.candidate.table_bits,
        ),
        None => (codec.method, codec.lookup, codec.table_bits),
    }
}

/// The generated layout checks (`const _: [(); BYTES] = [(); size_of_val(&TABLE)];`) of a
/// source, summed.
fn asserted_bytes(source: &str) -> usize {
    source
        .lines()
        .filter(|l| l.contains("size_of_val"))
        .map(|l| {
            let n = l.split("[(); ").nth(1).unwrap().split(']').next().unwrap();
            n.parse::<usize>().unwrap()
        })
        .sum()
}

// ---------------------------------------------------------------------------------------
// Random specs
// ---------------------------------------------------------------------------------------

/// One training count: zeros, tiny counts, large ones and a dominant one all occur.
fn count() -> impl Strategy<Value = u64> {
    prop_oneof![
        1 => Just(0u64),
        1 => 1u64..4,
        3 => 0u64..=1_000_000,
        1 => Just(1_000_000_000u64),
    ]
}

#[derive(Debug, Clone)]
struct Case {
    counts: Vec<u64>,
    tagged: bool,
    lanes: u32,
    method: Option<Method>,
    /// With a given rANS: the lookup, if given (true: search).
    search: Option<bool>,
    table_bits: Option<u32>,
    budget: Option<usize>,
    budget_in_defaults: bool,
}

impl Case {
    /// The spec, and the line of its `flash_budget` key.
    fn spec(&self) -> (String, usize) {
        let mut lines: Vec<String> = Vec::new();
        let mut budget_line = 0;
        if let (Some(b), true) = (self.budget, self.budget_in_defaults) {
            lines.push("[defaults]".into());
            lines.push(format!("flash_budget = {b}"));
            budget_line = lines.len();
            lines.push(String::new());
        }
        lines.push("[codec.c]".into());
        lines.push("kind = \"tokens\"".into());
        let names: Vec<String> = (0..self.counts.len())
            .map(|i| format!("\"t{i}\""))
            .collect();
        lines.push(format!("symbols = [{}]", names.join(", ")));
        let counts: Vec<String> = self
            .counts
            .iter()
            .enumerate()
            .map(|(i, c)| format!("t{i} = {c}"))
            .collect();
        lines.push(format!("counts = {{ {} }}", counts.join(", ")));
        if !self.tagged {
            lines.push("framing = \"bare\"".into());
        }
        lines.push(format!("lanes = {}", self.lanes));
        match self.method {
            Some(Method::Tans) => lines.push("method = \"tans\"".into()),
            Some(Method::Rans) => lines.push("method = \"rans\"".into()),
            None => {}
        }
        match self.search {
            Some(true) => lines.push("symbol_lookup = \"search\"".into()),
            Some(false) => lines.push("symbol_lookup = \"table\"".into()),
            None => {}
        }
        if let Some(b) = self.table_bits {
            lines.push(format!("table_bits = {b}"));
        }
        if let (Some(b), false) = (self.budget, self.budget_in_defaults) {
            lines.push(format!("flash_budget = {b}"));
            budget_line = lines.len();
        }
        (lines.join("\n") + "\n", budget_line)
    }
}

/// Random codecs; `budget` draws the flash budget (or none).
fn case(budget: BoxedStrategy<Option<usize>>) -> impl Strategy<Value = Case> {
    (
        prop::collection::vec(count(), 1..=12),
        any::<bool>(),
        prop::sample::select(vec![1u32, 2, 4, 8]),
        prop_oneof![3 => Just(None), 1 => Just(Some(Method::Tans)), 1 => Just(Some(Method::Rans))],
        prop::option::of(any::<bool>()),
        prop_oneof![4 => Just(None), 1 => (1u32..=11).prop_map(Some)],
        budget,
        any::<bool>(),
    )
        .prop_map(
            |(counts, tagged, lanes, method, search, bits, budget, budget_in_defaults)| Case {
                table_bits: bits.map(|b| b.max(smallest_bits(counts.len()))),
                search: search.filter(|_| method == Some(Method::Rans)),
                counts,
                tagged,
                lanes,
                method,
                budget,
                budget_in_defaults,
            },
        )
}

/// Budgets from 16 bytes to 32 KiB, spread over the powers of two.
fn some_budget() -> BoxedStrategy<Option<usize>> {
    (4u32..=14)
        .prop_flat_map(|e| (1usize << e)..(2usize << e))
        .prop_map(Some)
        .boxed()
}

fn parse(text: &str) -> CodecSpec {
    precast::spec::parse(text, Path::new("sizing.toml"))
        .unwrap()
        .codecs
        .remove(0)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(40))]

    /// With a budget: the tables fit (by the layout and by the compiler's checks), and the
    /// choice is the lowest rate among the sizes that fit, up to the tie rule; when nothing
    /// fits, a located error names the smallest tables' bytes.
    #[test]
    fn a_budget_choice_fits_and_has_the_lowest_rate(c in case(some_budget())) {
        let budget = c.budget.unwrap();
        let (text, budget_line) = c.spec();
        let sizes = {
            // Parsing refuses a budget nothing fits; the sizes come from the spec without it.
            let unbounded = text.replace(&format!("flash_budget = {budget}"), "flash_budget = 67108864");
            open_sizes(&parse(&unbounded))
        };
        let fitting: Vec<Size> = sizes.iter().copied().filter(|s| s.bytes <= budget).collect();
        let out = precast::render_str(&text, Path::new("sizing.toml"));
        let out = match out {
            Err(e) => {
                prop_assert!(fitting.is_empty(), "refused though {:?} fit: {}", fitting, e);
                let least = sizes.iter().map(|s| s.bytes).min().unwrap();
                prop_assert_eq!(&e.kind, &ErrorKind::Input);
                let at = e.location.clone().unwrap();
                prop_assert_eq!((at.line, at.column), (budget_line, 16), "{}", e);
                prop_assert_eq!(e.codec.as_deref(), Some("c"));
                prop_assert!(e.message.contains(&format!("take {least} bytes")), "{}", e);
                return Ok(());
            }
            Ok(out) => out,
        };
        prop_assert!(!fitting.is_empty());
        let report = &out.reports[0];
        let codec = parse(&text);
        let (method, lookup, bits) = built_size(report, &codec);
        let chosen = *fitting
            .iter()
            .find(|s| s.method == method && s.bits == bits && (method == Method::Tans || s.lookup == lookup))
            .expect("the choice is one of the sizes that fit");
        prop_assert_eq!(report.table_bits, bits);
        prop_assert_eq!(report.table_bytes, chosen.bytes);
        prop_assert!(report.table_bytes <= budget);
        prop_assert_eq!(asserted_bytes(&out.source), report.table_bytes);

        let mut rater = Rater::new(&c.counts);
        let rates: Vec<f64> = fitting.iter().map(|s| rater.rate(s)).collect();
        let best = rates.iter().copied().fold(f64::INFINITY, f64::min);
        prop_assert_eq!(rater.rate(&chosen), report.exact_rate);
        if report.entropy > 0.0 {
            prop_assert!(report.exact_rate <= best * (1.0 + TIE), "rate {} against {}", report.exact_rate, best);
        }
        for (s, &r) in fitting.iter().zip(&rates) {
            let tied = report.entropy == 0.0 || r <= best * (1.0 + TIE);
            if tied {
                prop_assert!(
                    (s.rank(), s.bytes, s.bits) >= (chosen.rank(), chosen.bytes, chosen.bits),
                    "{:?} (rate {}) ties and beats {:?}", s, r, chosen
                );
            }
        }
    }

    /// Without a budget or table_bits: the fewest bytes of tables within 0.5 % excess when
    /// some size gets there (ties to faster decoding, then the smaller table); else the
    /// lowest rate, ties to fewer bytes; zero entropy, the smallest.
    #[test]
    fn without_a_budget_the_smallest_tables_within_half_a_percent(
        c in case(Just(None).boxed()).prop_map(|mut c| { c.table_bits = None; c })
    ) {
        let (text, _) = c.spec();
        let out = precast::render_str(&text, Path::new("sizing.toml")).unwrap();
        let report = &out.reports[0];
        let codec = parse(&text);
        let sizes = open_sizes(&codec);
        let (method, lookup, bits) = built_size(report, &codec);
        prop_assert_eq!(asserted_bytes(&out.source), report.table_bytes);
        let chosen = *sizes
            .iter()
            .find(|s| s.method == method && s.bits == bits && (method == Method::Tans || s.lookup == lookup))
            .unwrap();
        prop_assert_eq!(report.table_bytes, chosen.bytes);
        let key = |s: &Size| (s.bytes, s.rank(), s.bits);
        if report.entropy == 0.0 {
            prop_assert!(sizes.iter().all(|s| key(s) >= key(&chosen)), "{:?}", chosen);
            return Ok(());
        }
        let mut rater = Rater::new(&c.counts);
        if excess(report.exact_rate, report.entropy) <= LIMIT {
            for s in sizes.iter().filter(|s| key(s) < key(&chosen)) {
                let e = excess(rater.rate(s), report.entropy);
                prop_assert!(e > LIMIT, "{:?} codes within {} % already ({})", s, LIMIT, e);
            }
        } else {
            let rates: Vec<f64> = sizes.iter().map(|s| rater.rate(s)).collect();
            for (s, &r) in sizes.iter().zip(&rates) {
                prop_assert!(excess(r, report.entropy) > LIMIT, "{:?} gets there", s);
            }
            let best = rates.iter().copied().fold(f64::INFINITY, f64::min);
            prop_assert!(report.exact_rate <= best * (1.0 + TIE));
            for (s, &r) in sizes.iter().zip(&rates) {
                if r <= best * (1.0 + TIE) {
                    prop_assert!(s.bytes >= chosen.bytes, "{:?} ties with fewer bytes", s);
                }
            }
        }
    }

    /// Every budget below the smallest tables is refused at the key, in the codec or in
    /// `[defaults]`, naming those tables' bytes; nothing panics.
    #[test]
    fn budgets_below_the_smallest_tables_are_located_errors(
        c in case(Just(None).boxed()),
        budget_in_defaults in any::<bool>(),
        fraction in 0.0f64..1.0,
    ) {
        let mut c = c;
        c.budget_in_defaults = budget_in_defaults;
        c.budget = Some(1 << 26);
        let (text, _) = c.spec();
        let least = open_sizes(&parse(&text)).iter().map(|s| s.bytes).min().unwrap();
        let budget = 1 + ((least - 1) as f64 * fraction) as usize;
        prop_assume!(budget < least);
        c.budget = Some(budget);
        let (text, line) = c.spec();
        let e = precast::render_str(&text, Path::new("sizing.toml")).unwrap_err();
        prop_assert_eq!(&e.kind, &ErrorKind::Input);
        let at = e.location.clone().unwrap();
        prop_assert_eq!((at.line, at.column), (line, 16));
        prop_assert!(e.message.contains(&format!("flash_budget = {budget} is too small")), "{}", e);
        prop_assert!(e.message.contains(&format!("take {least} bytes")), "{}", e);
    }
}

// ---------------------------------------------------------------------------------------
// Generated code
// ---------------------------------------------------------------------------------------

/// Chosen tables of random codecs, rendered into one file and compiled: every table's
/// `size_of_val` check holds, and their sum is what the report counts against the budget.
#[test]
fn chosen_tables_compile_with_their_layout_checks() {
    let mut rng = Rng(17);
    let licence = std::fs::read_to_string(root().join("tests/specs/mit-license.txt")).unwrap();
    let mut text = String::new();
    let mut budgets = Vec::new();
    for i in 0..12 {
        let budget = match i % 3 {
            0 => None,
            _ => Some(64 + rng.below(12_000)),
        };
        text.push_str(&format!("[codec.c{i}]\n"));
        if i % 2 == 0 {
            // A piece of the licence as text, over its own bytes (TOML-escaped).
            let start = rng.below(licence.len() - 200);
            let piece: String = licence[start..start + 40 + rng.below(160)]
                .chars()
                .filter(|c| c.is_ascii_alphanumeric() || *c == ' ')
                .collect();
            let mut symbols: Vec<char> = piece.chars().collect();
            symbols.sort_unstable();
            symbols.dedup();
            let symbols: String = symbols.into_iter().collect();
            text.push_str(&format!(
                "kind = \"bytes\"\nsymbols = \"{symbols}\"\ntext = \"{piece}\"\n"
            ));
        } else {
            let n = 1 + rng.below(20);
            let names: Vec<String> = (0..n).map(|t| format!("\"t{t}\"")).collect();
            let counts: Vec<String> = (0..n)
                .map(|t| format!("t{t} = {}", rng.next() % (1 << (rng.below(30) + 1))))
                .collect();
            text.push_str(&format!(
                "kind = \"tokens\"\nsymbols = [{}]\ncounts = {{ {} }}\n",
                names.join(", "),
                counts.join(", ")
            ));
        }
        if i % 4 == 1 {
            text.push_str("framing = \"bare\"\n");
        }
        if let Some(b) = budget {
            text.push_str(&format!("flash_budget = {b}\n"));
        }
        text.push('\n');
        budgets.push(budget);
    }
    let out = precast::render_str(&text, Path::new("random.toml")).unwrap();
    let mut by_budget = 0;
    for (report, budget) in out.reports.iter().zip(&budgets) {
        assert!(report.sizing.is_some(), "{}: nothing chosen", report.name);
        if let Some(b) = budget {
            assert!(report.table_bytes <= *b, "{}", report.name);
            by_budget += 1;
        }
    }
    assert!(by_budget > 0);
    let reported: usize = out.reports.iter().map(|r| r.table_bytes).sum();
    assert_eq!(asserted_bytes(&out.source), reported);

    let dir = std::env::temp_dir().join(format!("precast-sizing-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("chosen.rs");
    std::fs::write(&file, &out.source).unwrap();
    let rustc = std::env::var_os("RUSTC").unwrap_or_else(|| "rustc".into());
    let result = Command::new(rustc)
        .args([
            "--edition",
            "2021",
            "--crate-type",
            "lib",
            "--emit",
            "metadata",
        ])
        .arg("-o")
        .arg(dir.join("chosen.rmeta"))
        .arg(&file)
        .output()
        .expect("rustc runs");
    let _ = std::fs::remove_dir_all(&dir);
    assert!(
        result.status.success(),
        "{}",
        String::from_utf8_lossy(&result.stderr)
    );
}

/// The codecs of `tests/specs/sizing.toml` (compiled above by the proc macro): their choices
/// follow the rules, and their streams are the reference coder's, byte for byte.
#[test]
fn chosen_codecs_agree_with_the_reference_coder() {
    macro_rules! check {
        ($m:ident) => {
            check_codec(
                stringify!($m),
                &chosen::$m::ALPHABET,
                chosen::$m::TABLE_BITS,
                chosen::$m::max_encoded_len,
                chosen::$m::encode,
                chosen::$m::decode,
            )
        };
    }
    check!(mit_budget);
    check!(mit_bare_budget);
    check!(mit_default);
    check!(five_rans_budget);
    check!(skewed_default);
    check!(single_budget);
}

fn check_codec<E: std::fmt::Debug>(
    name: &str,
    alphabet: &[u8],
    table_bits: u32,
    max_encoded_len: fn(usize) -> usize,
    encode: fn(&[u8], &mut [u8]) -> Result<usize, E>,
    decode: fn(&[u8], &mut [u8]) -> Result<usize, E>,
) {
    let (spec, _) = precast::spec::load(&root().join("tests/specs/sizing.toml")).unwrap();
    let codec = spec.codecs.iter().find(|c| c.name == name).unwrap();
    let built = precast::build_codec(codec).unwrap();
    let report = &built.report;
    assert_eq!(report.table_bits, table_bits, "{name}");
    if let Some(budget) = codec.flash_budget {
        assert!(report.table_bytes <= budget, "{name}");
    }
    if codec.framing == Framing::Bare || codec.given.method {
        assert_eq!(built.tables.method(), codec.method, "{name}");
    }
    if codec.flash_budget.is_none() && report.entropy > 0.0 {
        assert!(report.excess_percent().unwrap() <= LIMIT, "{name}");
    }
    if report.entropy == 0.0 {
        assert_eq!(table_bits, smallest_bits(alphabet.len()), "{name}");
    }
    let reference = Reference::framed(&built.tables, built.fingerprint, codec.framing, codec.lanes);
    let weights: Vec<u64> = built.model.counts.iter().map(|&n| n + 1).collect();
    let mut rng = Rng(11);
    for len in [0usize, 1, 2, 3, 7, 64, 65, 300, 4099] {
        let input: Vec<u8> = (0..len).map(|_| alphabet[rng.weighted(&weights)]).collect();
        let index: Vec<u16> = input
            .iter()
            .map(|b| alphabet.iter().position(|a| a == b).unwrap() as u16)
            .collect();
        let mut buf = vec![0u8; max_encoded_len(len)];
        let n = encode(&input, &mut buf).unwrap();
        assert_eq!(&buf[..n], &reference.encode(&index)[..], "{name} len {len}");
        let mut back = vec![0u8; len];
        assert_eq!(
            decode(&buf[..n], &mut back).unwrap(),
            len,
            "{name} len {len}"
        );
        assert_eq!(back, input, "{name} len {len}");
    }
}

// ---------------------------------------------------------------------------------------
// Edge cases and advice
// ---------------------------------------------------------------------------------------

/// One symbol, or zero entropy: the smallest tables (of the fastest method), with or without
/// a budget, and nothing breaks.
#[test]
fn one_symbol_or_zero_entropy_gets_the_smallest_tables() {
    let cases = [
        ("symbols = [\"only\"]\ncounts = { only = 10 }\n", 1),
        (
            "symbols = [\"only\"]\ncounts = { only = 10 }\nflash_budget = 64\n",
            1,
        ),
        (
            "symbols = [\"seen\", \"unseen\"]\ncounts = { seen = 7 }\n",
            2,
        ),
        (
            "symbols = [\"seen\", \"unseen\"]\ncounts = { seen = 7 }\nflash_budget = 100000\n",
            2,
        ),
        (
            "symbols = [\"a\", \"b\", \"c\"]\ncounts = { a = 0 }\nflash_budget = 4096\n",
            3,
        ),
    ];
    for (body, n) in cases {
        let text = format!("[codec.z]\nkind = \"tokens\"\n{body}");
        let out = precast::render_str(&text, Path::new("z.toml")).unwrap();
        let report = &out.reports[0];
        assert_eq!(report.entropy, 0.0, "{body}");
        assert_eq!(report.excess_percent(), None, "{body}");
        assert_eq!(report.table_bits, smallest_bits(n), "{body}");
        assert_eq!(report.method, "tANS", "{body}");
        assert_eq!(asserted_bytes(&out.source), report.table_bytes, "{body}");
    }
}

/// More tokens than the old fixed default table held (2^11 slots): with no training counts
/// (zero entropy) the smallest table that holds them.
#[test]
fn a_large_alphabet_gets_a_table_that_holds_it() {
    let names: Vec<String> = (0..2049).map(|t| format!("\"t{t}\"")).collect();
    let text = format!(
        "[codec.big]\nkind = \"tokens\"\nsymbols = [{}]\ncounts = {{ t0 = 0 }}\n",
        names.join(", ")
    );
    let out = precast::render_str(&text, Path::new("big.toml")).unwrap();
    assert_eq!(out.reports[0].table_bits, smallest_bits(2049));
}

/// A budget that holds the excess above 0.5 % is warned about, with the smallest budget
/// that brings it under: that budget gets there, one byte less does not.
#[test]
fn a_tight_budget_names_the_budget_that_would_do() {
    // The binary source p = 0.9 (common practice textbook example), in bare framing.
    let spec = |budget: usize| {
        format!(
            "[codec.skewed]\nkind = \"tokens\"\nsymbols = [\"likely\", \"unlikely\"]\ncounts = {{ likely = 90, unlikely = 10 }}\nframing = \"bare\"\nflash_budget = {budget}\n"
        )
    };
    let render = |budget| precast::render_str(&spec(budget), Path::new("s.toml")).unwrap();
    let tight = render(24);
    assert!(tight.reports[0].excess_percent().unwrap() > LIMIT);
    let advice = tight.warnings.join("\n");
    assert!(advice.contains("flash_budget = 24 holds"), "{advice}");
    let wider: usize = advice
        .split("; flash_budget = ")
        .nth(1)
        .and_then(|s| s.split(' ').next())
        .and_then(|s| s.parse().ok())
        .unwrap_or_else(|| panic!("no budget named: {advice}"));
    let enough = render(wider);
    assert!(enough.reports[0].excess_percent().unwrap() <= LIMIT);
    assert!(enough.warnings.is_empty(), "{:?}", enough.warnings);
    assert!(render(wider - 1).reports[0].excess_percent().unwrap() > LIMIT);
}

/// The table_bits hint names the tables' bytes at that size.
#[test]
fn the_table_bits_hint_names_its_bytes() {
    // The binary source p = 0.99 (common practice), at a given small size.
    let spec = |bits: u32| {
        format!(
            "[codec.rare]\nkind = \"tokens\"\nsymbols = [\"common\", \"rare\"]\ncounts = {{ common = 99, rare = 1 }}\ntable_bits = {bits}\n"
        )
    };
    let out = precast::render_str(&spec(5), Path::new("r.toml")).unwrap();
    let advice = out.warnings.join("\n");
    let hint = advice
        .split("; table_bits = ")
        .nth(1)
        .unwrap_or_else(|| panic!("{advice}"));
    let bits: u32 = hint.split(' ').next().unwrap().parse().unwrap();
    let bytes: usize = hint
        .split(" with ")
        .nth(1)
        .and_then(|s| s.split(' ').next())
        .and_then(|s| s.parse().ok())
        .unwrap_or_else(|| panic!("{advice}"));
    let at = precast::render_str(&spec(bits), Path::new("r.toml")).unwrap();
    assert_eq!(at.reports[0].table_bytes, bytes);
    assert!(at.reports[0].excess_percent().unwrap() <= LIMIT);
}

// ---------------------------------------------------------------------------------------
// Real text
// ---------------------------------------------------------------------------------------

/// Debian's word list (package `wamerican`; see tests/real_text.rs), as bytes: without a
/// budget, the smallest table within 0.5 % excess; with a budget of 4 KiB, the lowest rate
/// that fits, up to the tie rule. Where the file is absent the test says so and passes.
#[test]
fn the_word_list_sizes() {
    const WORDS: &str = "/usr/share/dict/american-english";
    let Ok(data) = std::fs::read(WORDS) else {
        eprintln!("skipped: {WORDS} is absent (apt-get install wamerican)");
        return;
    };
    let mut present = [false; 256];
    for &b in &data {
        present[usize::from(b)] = true;
    }
    let symbols: Vec<String> = (0..256)
        .filter(|&b| present[b])
        .map(|b| b.to_string())
        .collect();
    let dir = std::env::temp_dir().join(format!("precast-sizing-words-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("words.toml");
    let body = format!(
        "kind = \"bytes\"\nsymbols = [{}]\nsamples = [\"{WORDS}\"]\n",
        symbols.join(", ")
    );
    let both = format!("[codec.words]\n{body}\n[codec.words_budget]\n{body}flash_budget = 4096\n");
    std::fs::write(&path, &both).unwrap();
    let out = precast::render(&path).unwrap();
    let (spec, _) = precast::spec::load(&path).unwrap();
    let _ = std::fs::remove_dir_all(&dir);

    let free = &out.reports[0];
    let counts: Vec<u64> = free.lines.iter().map(|l| l.1).collect();
    let mut rater = Rater::new(&counts);
    let sizes = open_sizes(&spec.codecs[0]);
    assert!(free.excess_percent().unwrap() <= LIMIT);
    assert!(free.table_bytes <= 4096, "{} bytes", free.table_bytes);
    for s in sizes.iter().filter(|s| s.bytes < free.table_bytes) {
        assert!(excess(rater.rate(s), free.entropy) > LIMIT, "{s:?}");
    }

    let tight = &out.reports[1];
    assert!(tight.table_bytes <= 4096);
    let sizes = open_sizes(&spec.codecs[1]);
    let fitting: Vec<Size> = sizes.into_iter().filter(|s| s.bytes <= 4096).collect();
    let best = fitting
        .iter()
        .map(|s| rater.rate(s))
        .fold(f64::INFINITY, f64::min);
    assert!(tight.exact_rate <= best * (1.0 + TIE));
    eprintln!(
        "word list: default {} at table_bits {} ({} bytes, {:.3} %); budget 4096: {} at table_bits {} ({} bytes, {:.3} %)",
        free.method,
        free.table_bits,
        free.table_bytes,
        free.excess_percent().unwrap(),
        tight.method,
        tight.table_bits,
        tight.table_bytes,
        tight.excess_percent().unwrap()
    );
}
