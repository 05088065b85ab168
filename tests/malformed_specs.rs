//! Malformed specs, one table row each. Every row is written to its own scratch folder and
//! refused twice: by `precast::render`, which must return an input error whose lines start
//! with the expected `PATH:LINE:COL: ` (and `codec `NAME`: `) and name the offending key or
//! symbol, and by `precast render`, which must exit with status 1 and print the same lines on
//! standard error.
//!
//! Rows that showed a generator bug when this suite was written live in `generator_bugs`,
//! as regression tests.

// `precast::Error` is large by design (it carries every mistake of a spec); the closures
// handed to `catch_unwind` return it as is.
#![allow(clippy::result_large_err)]

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// Longest a single command-line render may take before it counts as a hang.
const CLI_DEADLINE: Duration = Duration::from_secs(10);

/// The file an expected error line points into.
#[derive(Debug, Clone, Copy)]
enum Place {
    /// The spec itself.
    Spec,
    /// A file next to the spec, by name.
    File(&'static str),
}

/// One expected error line.
#[derive(Debug, Clone)]
struct Want {
    place: Place,
    line: usize,
    column: usize,
    /// `Some(name)`: the line must say `codec `name`: ` right after the location;
    /// `None`: it must not name a codec.
    codec: Option<&'static str>,
    fragment: String,
}

/// Something a case puts next to its spec.
#[derive(Debug, Clone)]
enum Extra {
    File(&'static str, Vec<u8>),
    Folder(&'static str),
    /// A named pipe, made with `mkfifo` (unix only).
    Fifo(&'static str),
}

/// One malformed spec and every error line it must produce, in order.
#[derive(Debug, Clone)]
struct Case {
    name: &'static str,
    spec: Vec<u8>,
    extras: Vec<Extra>,
    wants: Vec<Want>,
}

/// Spec text from its lines: line `i` of the slice is line `i + 1` of the file.
fn lines(lines: &[&str]) -> String {
    let mut text = lines.join("\n");
    text.push('\n');
    text
}

impl Case {
    fn new(name: &'static str, spec_lines: &[&str]) -> Case {
        Case::bytes(name, lines(spec_lines).as_bytes())
    }

    fn owned(name: &'static str, spec: String) -> Case {
        Case::bytes(name, spec.as_bytes())
    }

    fn bytes(name: &'static str, spec: &[u8]) -> Case {
        Case {
            name,
            spec: spec.to_vec(),
            extras: Vec::new(),
            wants: Vec::new(),
        }
    }

    /// An error at `line:column` of the spec, about codec `codec`.
    fn at(self, line: usize, column: usize, codec: &'static str, fragment: &str) -> Case {
        self.want(Place::Spec, line, column, Some(codec), fragment)
    }

    /// An error at `line:column` of the spec that concerns no codec.
    fn top(self, line: usize, column: usize, fragment: &str) -> Case {
        self.want(Place::Spec, line, column, None, fragment)
    }

    /// An error at `line:column` of the sample `file`, about codec `codec`.
    fn in_file(
        self,
        file: &'static str,
        line: usize,
        column: usize,
        codec: &'static str,
        fragment: &str,
    ) -> Case {
        self.want(Place::File(file), line, column, Some(codec), fragment)
    }

    fn want(
        mut self,
        place: Place,
        line: usize,
        column: usize,
        codec: Option<&'static str>,
        fragment: &str,
    ) -> Case {
        self.wants.push(Want {
            place,
            line,
            column,
            codec,
            fragment: fragment.to_string(),
        });
        self
    }

    fn file(mut self, name: &'static str, contents: impl Into<Vec<u8>>) -> Case {
        self.extras.push(Extra::File(name, contents.into()));
        self
    }

    fn folder(mut self, name: &'static str) -> Case {
        self.extras.push(Extra::Folder(name));
        self
    }

    fn fifo(mut self, name: &'static str) -> Case {
        self.extras.push(Extra::Fifo(name));
        self
    }
}

/// This run's folder of scratch folders.
fn scratch_root() -> PathBuf {
    std::env::temp_dir().join(format!("precast-malformed-{}", std::process::id()))
}

/// Removes this run's scratch root if nothing is left in it (a failed case keeps its
/// folder for inspection).
fn tidy() {
    let _ = std::fs::remove_dir(scratch_root());
}

/// A fresh folder for one case (emptied if a previous run left it).
fn scratch(name: &str) -> PathBuf {
    let dir = scratch_root().join(name);
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// Writes the case's spec and extras; returns the folder and the spec's path.
fn set_up(case: &Case) -> Result<(PathBuf, PathBuf), String> {
    let dir = scratch(case.name);
    for extra in &case.extras {
        match extra {
            Extra::File(name, bytes) => {
                let path = dir.join(name);
                if let Some(parent) = path.parent() {
                    std::fs::create_dir_all(parent).map_err(|e| e.to_string())?;
                }
                std::fs::write(&path, bytes).map_err(|e| e.to_string())?;
            }
            Extra::Folder(name) => std::fs::create_dir_all(dir.join(name)).unwrap(),
            Extra::Fifo(name) => {
                let status = Command::new("mkfifo")
                    .arg(dir.join(name))
                    .status()
                    .map_err(|e| format!("mkfifo: {e}"))?;
                if !status.success() {
                    return Err(format!("mkfifo failed: {status}"));
                }
            }
        }
    }
    let spec = dir.join("codecs.toml");
    std::fs::write(&spec, &case.spec).map_err(|e| e.to_string())?;
    Ok((dir, spec))
}

/// Runs `precast render SPEC` with its output in files (no pipe can fill up), killing it
/// after [`CLI_DEADLINE`]; returns the exit code, standard output and standard error.
fn run_cli(dir: &Path, spec: &Path) -> Result<(Option<i32>, Vec<u8>, String), String> {
    let out_path = dir.join("cli-stdout");
    let err_path = dir.join("cli-stderr");
    let mut child = Command::new(env!("CARGO_BIN_EXE_precast"))
        .arg("render")
        .arg(spec)
        .stdin(Stdio::null())
        .stdout(std::fs::File::create(&out_path).unwrap())
        .stderr(std::fs::File::create(&err_path).unwrap())
        .spawn()
        .map_err(|e| format!("cannot run precast: {e}"))?;
    let start = Instant::now();
    let status = loop {
        if let Some(status) = child.try_wait().map_err(|e| e.to_string())? {
            break status;
        }
        if start.elapsed() > CLI_DEADLINE {
            let _ = child.kill();
            let _ = child.wait();
            return Err(format!(
                "`precast render` did not finish within {CLI_DEADLINE:?}"
            ));
        }
        std::thread::sleep(Duration::from_millis(5));
    };
    let stdout = std::fs::read(&out_path).unwrap();
    let stderr = String::from_utf8_lossy(&std::fs::read(&err_path).unwrap()).into_owned();
    Ok((status.code(), stdout, stderr))
}

/// Checks one case both ways; `Err` says what differs.
fn check(case: &Case) -> Result<(), String> {
    let (dir, spec) = set_up(case)?;

    // 1. The library.
    let outcome = std::panic::catch_unwind(|| precast::render(&spec));
    let error = match outcome {
        Err(_) => return Err("precast::render panicked".to_string()),
        Ok(Ok(_)) => return Err("the spec was accepted".to_string()),
        Ok(Err(e)) => e,
    };
    let text = error.to_string();
    if error.kind != precast::ErrorKind::Input {
        return Err(format!("kind {:?}, want Input: {text}", error.kind));
    }
    let shown: Vec<&str> = text.lines().collect();
    let each: Vec<&precast::Error> = error.all().collect();
    if shown.len() != case.wants.len() || each.len() != case.wants.len() {
        return Err(format!(
            "want {} error line(s), got {} line(s) from {} error(s):\n{text}",
            case.wants.len(),
            shown.len(),
            each.len()
        ));
    }
    for (i, ((line, one), want)) in shown.iter().zip(&each).zip(&case.wants).enumerate() {
        let path = match want.place {
            Place::Spec => spec.clone(),
            Place::File(name) => dir.join(name),
        };
        let mut prefix = format!("{}:{}:{}: ", path.display(), want.line, want.column);
        if let Some(codec) = want.codec {
            prefix.push_str(&format!("codec `{codec}`: "));
        }
        if !line.starts_with(&prefix) {
            return Err(format!(
                "line {} should start with {prefix:?}:\n{text}",
                i + 1
            ));
        }
        if want.codec.is_none() && line[prefix.len()..].starts_with("codec `") {
            return Err(format!("line {} names a codec, want none:\n{text}", i + 1));
        }
        if !line[prefix.len()..].contains(&want.fragment) {
            return Err(format!(
                "line {} should contain {:?}:\n{text}",
                i + 1,
                want.fragment
            ));
        }
        if one.kind != precast::ErrorKind::Input {
            return Err(format!(
                "line {} is {:?}, want Input:\n{text}",
                i + 1,
                one.kind
            ));
        }
        // Each error shows as its own line (the first also carries the others after it).
        let own = one.to_string();
        if own.lines().next() != Some(*line) {
            return Err(format!(
                "error {} displays as {own:?}, not as line {}:\n{text}",
                i + 1,
                i + 1
            ));
        }
    }

    // 2. The command line.
    let (code, stdout, stderr) = run_cli(&dir, &spec)?;
    if code != Some(1) {
        return Err(format!(
            "`precast render` exited with {code:?}, want 1; stderr:\n{stderr}"
        ));
    }
    if !stdout.is_empty() {
        return Err(format!(
            "`precast render` printed {} bytes on stdout",
            stdout.len()
        ));
    }
    if stderr.lines().next() != Some(shown[0]) {
        return Err(format!(
            "stderr's first line differs from the library's:\n  cli: {:?}\n  lib: {:?}",
            stderr.lines().next(),
            shown[0]
        ));
    }
    if stderr != format!("{text}\n") {
        return Err(format!(
            "stderr differs from the library's message:\n{stderr}---\n{text}"
        ));
    }
    let _ = std::fs::remove_dir_all(&dir);
    Ok(())
}

/// Checks every case and fails with all differences at once.
fn check_all(cases: &[Case]) {
    let mut names: Vec<&str> = cases.iter().map(|c| c.name).collect();
    names.sort_unstable();
    let before = names.len();
    names.dedup();
    assert_eq!(names.len(), before, "case names must be unique");
    let start = Instant::now();
    let failures: Vec<String> = cases
        .iter()
        .filter_map(|case| {
            check(case)
                .err()
                .map(|why| format!("[{}] {why}", case.name))
        })
        .collect();
    println!("{} case(s) checked in {:.2?}", cases.len(), start.elapsed());
    tidy();
    assert!(
        failures.is_empty(),
        "{} of {} case(s) failed:\n\n{}",
        failures.len(),
        cases.len(),
        failures.join("\n\n")
    );
}

/// Token names `t0`, `t1`, ... as a TOML array.
fn token_list(n: usize) -> String {
    let names: Vec<String> = (0..n).map(|i| format!("\"t{i}\"")).collect();
    format!("[{}]", names.join(", "))
}

// The row tables below keep one case to a line or two; rustfmt would give every argument
// its own line.

/// TOML syntax errors: located where the parser stopped.
#[rustfmt::skip]
fn syntax() -> Vec<Case> {
    vec![
        Case::new("unclosed_table_header", &["[codec.gauge", "kind = \"bytes\"", "text = \"a\""])
            .top(1, 13, "unclosed table, expected `]`"),
        Case::new("unclosed_string", &["[codec.a]", "kind = \"bytes", "text = \"a\""])
            .top(2, 14, "invalid basic string"),
        Case::new("duplicate_key_in_codec", &["[codec.a]", "kind = \"bytes\"", "text = \"a\"", "kind = \"tokens\""])
            .top(4, 1, "duplicate key"),
        Case::new("duplicate_codec_table", &["[codec.a]", "kind = \"bytes\"", "text = \"a\"", "", "[codec.a]", "lanes = 2"])
            .top(5, 8, "duplicate key"),
        Case::new("bad_escape_in_text", &["[codec.a]", "kind = \"bytes\"", "text = \"tab\\qhere\""])
            .top(3, 13, "escaped value"),
        Case::new("unquoted_kind", &["[codec.a]", "kind = bytes", "text = \"a\""])
            .top(2, 8, "must be quoted"),
        Case::new("key_with_a_space", &["[codec.a]", "kind = \"bytes\"", "table bits = 9", "text = \"a\""])
            .top(3, 7, "expected `=`"),
        Case::new("unclosed_inline_table", &["[codec.a]", "kind = \"tokens\"", "symbols = [\"a\"]", "counts = { a = 1"])
            .top(4, 17, "unclosed inline table"),
    ]
}

/// Keys precast does not know, at the top, in `[defaults]` and in a codec.
#[rustfmt::skip]
fn unknown_keys() -> Vec<Case> {
    let codec = ["[codec.a]", "kind = \"bytes\"", "text = \"a\""];
    let after = |first: &[&'static str]| [first, &[""], &codec[..]].concat();
    vec![
        Case::new("top_level_plain_key", &after(&["version = 2"]))
            .top(1, 1, "unknown key `version`: expected one of defaults, codec"),
        Case::new("top_level_table_near_defaults", &after(&["[default]", "table_bits = 9"]))
            .top(1, 2, "unknown key `default`: did you mean `defaults`?"),
        Case::new("defaults_key_near", &after(&["[defaults]", "tabel_bits = 9"]))
            .top(2, 1, "unknown key `tabel_bits`: did you mean `table_bits`?"),
        Case::new("defaults_key_far", &after(&["[defaults]", "compression = \"max\""]))
            .top(2, 1, "unknown key `compression`: expected one of kind, method, table_bits"),
        Case::new("codec_key_near", &[&codec[..], &["frameing = \"bare\""]].concat())
            .at(4, 1, "a", "unknown key `frameing`: did you mean `framing`?"),
        Case::new("codec_key_near_budget", &[&codec[..], &["flash_budjet = 512"]].concat())
            .at(4, 1, "a", "unknown key `flash_budjet`: did you mean `flash_budget`?"),
        Case::new("codec_key_singular_sample", &["[codec.a]", "kind = \"bytes\"", "sample = \"log.txt\""])
            .file("log.txt", "abc")
            .at(1, 1, "a", "no training data")
            .at(3, 1, "a", "unknown key `sample`: did you mean `samples`?"),
        Case::new("codec_key_capitalised", &["[codec.a]", "Kind = \"bytes\"", "text = \"a\""])
            .at(1, 1, "a", "missing key `kind`")
            .at(2, 1, "a", "unknown key `Kind`: did you mean `kind`?"),
        Case::new("codec_key_far", &[&codec[..], &["owner = \"ops\""]].concat())
            .at(4, 1, "a", "unknown key `owner`: expected one of kind, method"),
        Case::new("old_key_beside_the_new_one", &[&codec[..], &["table_bits = 10", "size_bits = 10"]].concat())
            .at(5, 1, "a", "unknown key `size_bits`: the table size is `table_bits`"),
        Case::new("codec_subtable", &[&codec[..], &["[codec.a.options]", "fast = true"]].concat())
            .at(4, 10, "a", "unknown key `options`"),
    ]
}

/// A value of the wrong type (or an unknown name) for each key.
#[rustfmt::skip]
fn wrong_types() -> Vec<Case> {
    let bytes = |name, extra: &str| Case::new(name, &["[codec.a]", "kind = \"bytes\"", "text = \"a\"", extra]);
    vec![
        Case::new("kind_integer", &["[codec.a]", "kind = 1", "text = \"a\""])
            .at(2, 8, "a", "`kind` must be a string, found an integer"),
        Case::new("kind_capitalised", &["[codec.a]", "kind = \"Bytes\"", "text = \"a\""])
            .at(2, 8, "a", "unknown kind \"Bytes\": expected \"bytes\", \"tokens\", \"integers\" or \"chars\""),
        Case::new("kind_empty", &["[codec.a]", "kind = \"\"", "text = \"a\""])
            .at(2, 8, "a", "unknown kind \"\""),
        bytes("method_boolean", "method = true")
            .at(4, 10, "a", "`method` must be one of \"tans\" or \"rans\", found a boolean"),
        bytes("framing_unknown", "framing = \"framed\"")
            .at(4, 11, "a", "unknown framing \"framed\": expected \"tagged\", \"compact\" or \"bare\""),
        bytes("framing_table", "framing = { bare = true }")
            .at(4, 11, "a", "`framing` must be one of \"tagged\", \"compact\" or \"bare\", found a table"),
        Case::new("symbol_lookup_integer", &["[codec.a]", "kind = \"bytes\"", "text = \"a\"", "method = \"rans\"", "symbol_lookup = 0"])
            .at(5, 17, "a", "`symbol_lookup` must be one of \"table\" or \"search\", found an integer"),
        bytes("lanes_float", "lanes = 2.0")
            .at(4, 9, "a", "`lanes` must be an integer, found a float"),
        bytes("table_bits_array", "table_bits = [11]")
            .at(4, 14, "a", "`table_bits` must be an integer, found an array"),
        bytes("table_bits_boolean", "table_bits = false")
            .at(4, 14, "a", "`table_bits` must be an integer, found a boolean"),
        bytes("flash_budget_string", "flash_budget = \"2k\"")
            .at(4, 16, "a", "`flash_budget` must be an integer, found a string"),
        Case::new("bytes_symbols_integer", &["[codec.a]", "kind = \"bytes\"", "symbols = 97", "text = \"a\""])
            .at(3, 11, "a", "`symbols` of a bytes codec is a string or a list of byte values, found an integer"),
        Case::new("tokens_symbols_string", &["[codec.a]", "kind = \"tokens\"", "symbols = \"ok fault\"", "counts = { ok = 1 }"])
            .at(3, 11, "a", "a tokens codec lists its symbols as an array of names"),
        Case::new("tokens_symbols_table", &["[codec.a]", "kind = \"tokens\"", "counts = { ok = 1 }", "[codec.a.symbols]", "ok = 1"])
            .at(4, 1, "a", "`symbols` of a tokens codec is an array of names, found a table"),
        Case::new("bytes_symbol_boolean", &["[codec.a]", "kind = \"bytes\"", "symbols = [97, true]", "text = \"a\""])
            .at(3, 16, "a", "a byte symbol is an integer or a one-byte string, found a boolean"),
        Case::new("token_number", &["[codec.a]", "kind = \"tokens\"", "symbols = [\"ok\", 2]", "counts = { ok = 1 }"])
            .at(3, 18, "a", "token names are strings, found the number 2"),
        Case::new("counts_array", &["[codec.a]", "kind = \"tokens\"", "symbols = [\"ok\"]", "counts = [1]"])
            .at(4, 10, "a", "`counts` must be a table of symbol = count, found an array"),
        Case::new("count_float", &["[codec.a]", "kind = \"tokens\"", "symbols = [\"ok\"]", "counts = { ok = 2.5 }"])
            .at(4, 17, "a", "`counts` must be integer counts, found a float"),
        Case::new("count_boolean", &["[codec.a]", "kind = \"bytes\"", "symbols = \"ab\"", "counts = { 97 = true }"])
            .at(4, 17, "a", "`counts` must be integer counts, found a boolean"),
        Case::new("text_array", &["[codec.a]", "kind = \"bytes\"", "text = [\"a\"]"])
            .at(3, 8, "a", "`text` must be a string, found an array"),
        Case::new("samples_integer", &["[codec.a]", "kind = \"bytes\"", "samples = 7"])
            .at(3, 11, "a", "`samples` must be a path or a list of paths, found an integer"),
        Case::new("samples_nested_list", &["[codec.a]", "kind = \"bytes\"", "samples = [[\"a.txt\"]]"])
            .file("a.txt", "a")
            .at(3, 12, "a", "`samples` must be a path string, found an array"),
        Case::new("defaults_kind_integer", &["[defaults]", "kind = 2", "", "[codec.a]", "symbols = \"ab\"", "text = \"ab\""])
            .at(2, 8, "a", "`kind` must be a string, found an integer"),
        Case::new("defaults_not_a_table", &["defaults = \"tans\"", "", "[codec.a]", "kind = \"bytes\"", "text = \"a\""])
            .top(1, 12, "`defaults` must be a table, found a string"),
        Case::new("codec_a_string", &["codec = \"gauge\""])
            .top(1, 9, "`codec` must be a table, found a string"),
        Case::new("codec_array_of_tables", &["[[codec]]", "kind = \"bytes\"", "text = \"a\""])
            .top(1, 1, "`codec` must be a table, found an array"),
        Case::new("codec_table_of_values", &["[codec]", "kind = \"bytes\"", "text = \"a\""])
            .at(2, 8, "kind", "a codec is a table `[codec.kind]`, found a string")
            .at(3, 8, "text", "a codec is a table `[codec.text]`, found a string"),
    ]
}

/// Integers outside what a key accepts.
#[rustfmt::skip]
fn out_of_range() -> Vec<Case> {
    let bytes = |name, extra: &str| Case::new(name, &["[codec.a]", "kind = \"bytes\"", "text = \"a\"", extra]);
    vec![
        bytes("table_bits_zero", "table_bits = 0")
            .at(4, 14, "a", "table_bits = 0 is out of range: expected 1 to 15"),
        Case::new("table_bits_sixteen_in_defaults", &["[defaults]", "table_bits = 16", "", "[codec.a]", "kind = \"bytes\"", "text = \"a\""])
            .at(2, 14, "a", "table_bits = 16 is out of range: expected 1 to 15"),
        bytes("table_bits_negative", "table_bits = -4")
            .at(4, 14, "a", "table_bits = -4 is out of range"),
        bytes("table_bits_past_u64", "table_bits = 18446744073709551616")
            .at(4, 14, "a", "table_bits = 18446744073709551616 is out of range"),
        bytes("table_bits_hex", "table_bits = 0x20")
            .at(4, 14, "a", "table_bits = 0x20 is out of range"),
        bytes("flash_budget_zero", "flash_budget = 0")
            .at(4, 16, "a", "flash_budget = 0 is out of range: expected 1 to 67108864 bytes (64 MiB)"),
        Case::new("flash_budget_past_64_mib_in_defaults", &["[defaults]", "flash_budget = 67_108_865", "", "[codec.a]", "kind = \"bytes\"", "text = \"a\""])
            .at(2, 16, "a", "flash_budget = 67_108_865 is out of range"),
        // Two codecs inherit the bad value; it is one mistake, reported once.
        Case::new("lanes_three_in_defaults_reported_once", &[
            "[defaults]", "lanes = 3", "",
            "[codec.a]", "kind = \"bytes\"", "text = \"a\"", "",
            "[codec.b]", "kind = \"bytes\"", "text = \"b\"",
        ])
            .at(2, 9, "a", "lanes = 3 is not available: expected 1, 2, 4 or 8"),
        bytes("lanes_zero", "lanes = 0")
            .at(4, 9, "a", "lanes = 0 is not available"),
        Case::new("byte_symbol_256", &["[codec.a]", "kind = \"bytes\"", "symbols = [0, 255, 256]", "text = \"a\""])
            .at(3, 20, "a", "byte value 256 is out of range 0..=255"),
        Case::new("byte_symbol_minus_one", &["[codec.a]", "kind = \"bytes\"", "symbols = [-1, 10]", "text = \"a\""])
            .at(3, 12, "a", "byte value -1 is out of range 0..=255"),
        Case::new("count_past_u64", &["[codec.a]", "kind = \"tokens\"", "symbols = [\"ok\"]", "counts = { ok = 18446744073709551616 }"])
            .at(4, 17, "a", "count 18446744073709551616 for \"ok\" is too large"),
        Case::new("count_negative_for_a_byte", &["[codec.a]", "kind = \"bytes\"", "symbols = \"ab\"", "counts = { 97 = -5 }"])
            .at(4, 17, "a", "count -5 for byte 97 ('a') is negative"),
    ]
}

/// Codec names that cannot be a Rust module.
#[rustfmt::skip]
fn codec_names() -> Vec<Case> {
    let named = |case, header| Case::new(case, &[header, "kind = \"bytes\"", "text = \"a\""]);
    let not_snake = "is not a snake_case Rust identifier";
    vec![
        named("codec_name_camel_case", "[codec.gaugeStatus]")
            .at(1, 1, "gaugeStatus", "codec name \"gaugeStatus\" is not a snake_case Rust identifier"),
        named("codec_name_leading_digit", "[codec.2nd_link]").at(1, 1, "2nd_link", not_snake),
        named("codec_name_keyword", "[codec.type]").at(1, 1, "type", "codec name \"type\" is a Rust keyword"),
        named("codec_name_reserved_crate", "[codec.core]")
            .at(1, 1, "core", "codec name \"core\" is a Rust keyword or reserved name"),
        named("codec_name_empty", "[codec.\"\"]").at(1, 1, "", "codec name \"\" is not"),
        named("codec_name_dash", "[codec.field-notes]").at(1, 1, "field-notes", not_snake),
        named("codec_name_leading_underscore", "[codec._spare]").at(1, 1, "_spare", not_snake),
        Case::new("codec_name_in_a_dotted_key", &["codec.Notes.kind = \"bytes\"", "codec.Notes.text = \"a\""])
            .at(1, 7, "Notes", "codec name \"Notes\""),
    ]
}

/// Token alphabets.
#[rustfmt::skip]
fn tokens() -> Vec<Case> {
    let with = |case, symbols| Case::new(case, &["[codec.a]", "kind = \"tokens\"", symbols, "counts = { ok = 1 }"]);
    let max = precast::kind::MAX_TOKENS;
    vec![
        with("token_with_a_dash", "symbols = [\"ok\", \"sensor-fault\"]")
            .at(3, 18, "a", "token name \"sensor-fault\" must be ASCII letters, digits and _"),
        with("token_with_a_trailing_space", "symbols = [\"ok \", \"fault\"]").at(3, 12, "a", "token name \"ok \""),
        with("token_leading_digit", "symbols = [\"ok\", \"2nd_try\"]").at(3, 18, "a", "token name \"2nd_try\""),
        with("token_empty", "symbols = [\"ok\", \"\"]").at(3, 18, "a", "token name \"\""),
        with("token_only_underscores", "symbols = [\"ok\", \"__\"]").at(3, 18, "a", "token name \"__\""),
        with("token_not_ascii", "symbols = [\"ok\", \"café\"]").at(3, 18, "a", "token name \"café\""),
        with("token_listed_twice", "symbols = [\"ok\", \"fault\", \"ok\"]")
            .at(3, 27, "a", "symbol \"ok\" is listed twice (first as entry 1)"),
        Case::new("tokens_empty_list", &["[codec.a]", "kind = \"tokens\"", "symbols = []", "text = \"\""])
            .at(3, 11, "a", "the alphabet is empty"),
        Case::owned("tokens_past_the_limit", lines(&[
            "[codec.a]", "kind = \"tokens\"", "table_bits = 15",
            &format!("symbols = {}", token_list(max + 1)),
            "counts = { t0 = 1 }",
        ]))
            .at(4, 11, "a", &format!("{} tokens are more than a tokens codec may have ({max})", max + 1)),
    ]
}

/// Byte alphabets.
#[rustfmt::skip]
fn byte_alphabets() -> Vec<Case> {
    let with = |case, symbols| Case::new(case, &["[codec.a]", "kind = \"bytes\"", symbols, "text = \"a\""]);
    vec![
        with("byte_as_number_and_string", "symbols = [97, \"a\"]")
            .at(3, 16, "a", "symbol byte 97 ('a') is listed twice (first as entry 1)"),
        with("byte_symbol_of_two_chars", "symbols = [\"a\", \"bc\"]").at(3, 17, "a", "\"bc\" is not a single byte"),
        with("byte_symbol_not_ascii", "symbols = [\"a\", \"é\"]").at(3, 17, "a", "\"é\" is not a single byte"),
        with("bytes_empty_string", "symbols = \"\"").at(3, 11, "a", "the alphabet is empty"),
        // "é" and "è" are two bytes each in UTF-8 and share the first.
        with("bytes_string_sharing_a_utf8_lead_byte", "symbols = \"éè\"")
            .at(3, 11, "a", "symbol byte 195 (\\xc3) is listed twice (first as entry 1)"),
    ]
}

/// Missing keys and missing or unreadable training data.
#[rustfmt::skip]
fn missing() -> Vec<Case> {
    vec![
        Case::new("missing_kind", &["[codec.a]", "symbols = \"ab\"", "text = \"ab\""])
            .at(1, 1, "a", "missing key `kind` (\"bytes\", \"tokens\", \"integers\" or \"chars\")"),
        Case::new("missing_symbols_with_kind_from_defaults", &["[defaults]", "kind = \"tokens\"", "", "[codec.a]", "counts = { ok = 1 }"])
            .at(4, 1, "a", "missing key `symbols`"),
        Case::new("no_training_data", &["[codec.a]", "kind = \"bytes\"", "symbols = \"ab\"", "lanes = 2"])
            .at(1, 1, "a", "no training data: give at least one of `counts`, `text`, `samples` or `counts_file`"),
        Case::new("samples_empty_list", &["[codec.a]", "kind = \"bytes\"", "samples = []"])
            .at(3, 11, "a", "`samples` is empty"),
        Case::new("sample_path_empty_in_a_list", &["[codec.a]", "kind = \"bytes\"", "samples = [\"a.txt\", \"\"]"])
            .file("a.txt", "abc")
            .at(3, 21, "a", "empty sample path"),
        Case::new("sample_path_empty_string", &["[codec.a]", "kind = \"bytes\"", "samples = \"\""])
            .at(3, 11, "a", "empty sample path"),
        Case::new("sample_in_a_missing_folder", &["[codec.a]", "kind = \"bytes\"", "samples = \"logs/day1.txt\""])
            .at(3, 11, "a", "cannot read sample \"logs/day1.txt\""),
        Case::new("sample_is_the_spec_folder", &["[codec.a]", "kind = \"bytes\"", "samples = [\".\"]"])
            .at(3, 12, "a", "cannot read sample \".\": not a regular file"),
        Case::new("sample_is_a_folder", &["[codec.a]", "kind = \"bytes\"", "text = \"a\"", "samples = \"logs\""])
            .folder("logs")
            .at(4, 11, "a", "cannot read sample \"logs\": not a regular file"),
    ]
}

/// Training data with a symbol outside the alphabet: located in the sample file, or at the
/// inline text in the spec.
#[rustfmt::skip]
fn training_data() -> Vec<Case> {
    let tokens = |case, symbols, samples| Case::new(case, &["[codec.a]", "kind = \"tokens\"", symbols, samples]);
    vec![
        tokens("sample_token_outside_the_alphabet", "symbols = [\"ok\", \"fault\", \"reset\"]", "samples = [\"log.txt\"]")
            .file("log.txt", "ok ok\nok fault\n\tok  resett ok\n")
            .in_file("log.txt", 3, 6, "a", "token \"resett\" is not in the alphabet (byte offset 20)"),
        // Columns count characters: "é" is two bytes and one column.
        Case::new("sample_byte_after_a_multibyte_char", &[
            "[codec.a]", "kind = \"bytes\"",
            "symbols = [\"a\", \"b\", \"c\", \" \", \"\\n\", 0xc3, 0xa9]",
            "samples = \"notes.txt\"",
        ])
            .file("notes.txt", "ab\nécab d")
            .in_file("notes.txt", 2, 6, "a", "byte 100 ('d') is not in the alphabet (byte offset 9)"),
        tokens("second_sample_outside_the_alphabet", "symbols = [\"ok\"]", "samples = [\"one.txt\", \"two.txt\"]")
            .file("one.txt", "ok ok\n")
            .file("two.txt", "OK ok\n")
            .in_file("two.txt", 1, 1, "a", "token \"OK\" is not in the alphabet (byte offset 0)"),
        tokens("sample_word_far_longer_than_any_token", "symbols = [\"ok\"]", "samples = \"long.txt\"")
            .file("long.txt", format!("ok {}\nok\n", "x".repeat(200)))
            .in_file("long.txt", 1, 4, "a", &format!("token \"{}", "x".repeat(40))),
        tokens("sample_with_crlf_lines", "symbols = [\"ok\"]", "samples = \"crlf.txt\"")
            .file("crlf.txt", "ok\r\nok bad\r\n")
            .in_file("crlf.txt", 2, 4, "a", "token \"bad\" is not in the alphabet (byte offset 7)"),
        tokens("inline_text_token_outside_the_alphabet", "symbols = [\"ok\", \"fault\"]", "text = \"ok ok fualt\"")
            .at(4, 8, "a", "token \"fualt\" is not in the alphabet (at byte 6 of the inline text)"),
        // The newline right after ''' is not part of the string.
        Case::new("inline_multiline_literal", &["[codec.a]", "kind = \"bytes\"", "symbols = \"ab\\n\"", "text = '''", "ab", "abz'''"])
            .at(4, 8, "a", "byte 122 ('z') is not in the alphabet (at byte 5 of the inline text)"),
        Case::new("inline_text_from_defaults", &[
            "[defaults]", "kind = \"bytes\"", "text = \"hello\"", "",
            "[codec.a]", "symbols = \"helo\"", "",
            "[codec.b]", "symbols = \"abc\"",
        ])
            .at(3, 8, "b", "byte 104 ('h') is not in the alphabet (at byte 0 of the inline text)"),
    ]
}

/// Alphabets larger than their table, and a rANS-only option with tANS.
#[rustfmt::skip]
fn table_fit() -> Vec<Case> {
    vec![
        Case::new("all_bytes_in_a_small_table", &["[codec.a]", "kind = \"bytes\"", "table_bits = 7", "text = \"a\""])
            .at(3, 14, "a", "256 symbols do not fit in a table of 2^7 slots: raise table_bits to at least 8"),
        Case::new("small_table_from_defaults", &[
            "[defaults]", "table_bits = 2", "",
            "[codec.a]", "kind = \"bytes\"", "symbols = \"abcde\"", "text = \"abc\"",
        ])
            .at(2, 14, "a", "5 symbols do not fit in a table of 2^2 slots: raise table_bits to at least 3"),
        Case::owned("nine_tokens_in_eight_slots", lines(&[
            "[codec.a]", "kind = \"tokens\"", "table_bits = 3", &format!("symbols = {}", token_list(9)), "counts = { t0 = 1 }",
        ]))
            .at(3, 14, "a", "9 symbols do not fit in a table of 2^3 slots: raise table_bits to at least 4"),
        // 256 byte values need table_bits = 8: SYMBOLS 256, STEPS 512, PUT 257 rows of 4
        // (the rows include one for values outside the alphabet), NEXT_STATE 512.
        Case::new("budget_below_the_smallest_tables", &["[codec.a]", "kind = \"bytes\"", "text = \"a\"", "flash_budget = 100"])
            .at(4, 16, "a", "flash_budget = 100 is too small: the smallest tables of this codec take 2304 bytes (tANS, table_bits = 8)"),
        Case::new("table_bits_over_the_budget", &["[codec.a]", "kind = \"bytes\"", "text = \"a\"", "table_bits = 11", "flash_budget = 4000"])
            .at(5, 16, "a", "flash_budget = 4000 is too small for table_bits = 11"),
        // One budget in `[defaults]`, too small for two codecs: two mistakes at one place.
        Case::new("budget_from_defaults_too_small_for_two", &[
            "[defaults]", "flash_budget = 16", "",
            "[codec.a]", "kind = \"bytes\"", "symbols = \"ab\"", "text = \"a\"", "",
            "[codec.b]", "kind = \"tokens\"", "symbols = [\"x\", \"y\", \"z\"]", "counts = { x = 1 }", "framing = \"bare\"",
        ])
            .at(2, 16, "a", "flash_budget = 16 is too small")
            .at(2, 16, "b", "the smallest tables of this codec take 28 bytes (tANS, table_bits = 2)"),
        Case::new("three_symbols_in_a_one_bit_table", &["[codec.a]", "kind = \"bytes\"", "symbols = \"abc\"", "table_bits = 1", "text = \"abc\""])
            .at(4, 14, "a", "3 symbols do not fit in a table of 2^1 slots: raise table_bits to at least 2"),
        Case::new("search_from_defaults_meets_tans", &[
            "[defaults]", "symbol_lookup = \"search\"", "",
            "[codec.a]", "kind = \"bytes\"", "method = \"rans\"", "text = \"ab\"", "",
            "[codec.b]", "kind = \"bytes\"", "text = \"ab\"",
        ])
            .at(2, 17, "b", "symbol_lookup = \"search\" applies to method = \"rans\""),
        Case::new("search_with_an_explicit_tans", &["[codec.a]", "kind = \"bytes\"", "text = \"a\"", "symbol_lookup = \"search\"", "method = \"tans\""])
            .at(4, 17, "a", "symbol_lookup = \"search\" applies to method = \"rans\""),
    ]
}

/// The spec file as a whole: not UTF-8, empty, no codec.
#[rustfmt::skip]
fn whole_file() -> Vec<Case> {
    let mut utf16 = vec![0xff, 0xfe];
    for unit in "[codec.a]\nkind = \"bytes\"\ntext = \"a\"\n".encode_utf16() {
        utf16.extend_from_slice(&unit.to_le_bytes());
    }
    vec![
        Case::bytes("spec_not_utf8_in_a_comment", b"[codec.a]\nkind = \"bytes\" # caf\xe9\ntext = \"a\"\n")
            .top(2, 21, "the spec is not UTF-8: byte 0xe9"),
        Case::bytes("spec_in_utf16", &utf16).top(1, 1, "the spec is not UTF-8: byte 0xff"),
        Case::bytes("spec_cut_inside_a_character", b"[codec.a]\nkind = \"bytes\"\ntext = \"n\xc3\xa9\xc3")
            .top(3, 11, "the spec is not UTF-8: byte 0xc3"),
        Case::bytes("spec_empty_file", b"").top(1, 1, "the spec declares no codec"),
        Case::new("spec_only_comments", &["# codecs for the gauges", "# (none yet)"])
            .top(1, 1, "the spec declares no codec"),
        Case::new("spec_only_defaults_and_an_empty_codec_table", &["[defaults]", "lanes = 2", "", "[codec]"])
            .top(1, 1, "the spec declares no codec"),
    ]
}

/// Several mistakes in several codecs (and outside any): every one, in text order.
#[rustfmt::skip]
fn several() -> Vec<Case> {
    vec![Case::new("mistakes_everywhere", &[
        "edition = 2024",                       // 1
        "[defaults]",                           // 2
        "lanes = 5",                            // 3
        "",                                     // 4
        "[codec.Radio]",                        // 5
        "kind = \"bytes\"",                     // 6
        "text = \"hello\"",                     // 7
        "",                                     // 8
        "[codec.status]",                       // 9
        "kind = \"tokens\"",                    // 10
        "symbols = [\"ok\", \"ok\", \"9v\"]",   // 11
        "counts = { ok = 1 }",                  // 12
        "tabel_bits = 4",                       // 13
        "",                                     // 14
        "[codec.notes]",                        // 15
        "kind = \"bytes\"",                     // 16
        "symbols = [97, 300]",                  // 17
        "samples = []",                         // 18
        "framing = \"none\"",                   // 19
        "",                                     // 20
        "[codec.gauge]",                        // 21
        "kind = \"tokens\"",                    // 22
        "symbols = [\"low\", \"high\"]",        // 23
        "counts = { low = 3, high = -1 }",      // 24
    ])
        .top(1, 1, "unknown key `edition`")
        .at(3, 9, "Radio", "lanes = 5 is not available")
        .at(5, 1, "Radio", "codec name \"Radio\" is not a snake_case Rust identifier")
        .at(11, 18, "status", "symbol \"ok\" is listed twice")
        .at(11, 24, "status", "token name \"9v\"")
        .at(13, 1, "status", "unknown key `tabel_bits`: did you mean `table_bits`?")
        .at(17, 16, "notes", "byte value 300 is out of range")
        .at(18, 11, "notes", "`samples` is empty")
        .at(19, 11, "notes", "unknown framing \"none\"")
        .at(24, 28, "gauge", "count -1 for \"high\" is negative")]
}

fn all_cases() -> Vec<Case> {
    [
        syntax(),
        unknown_keys(),
        wrong_types(),
        out_of_range(),
        codec_names(),
        tokens(),
        byte_alphabets(),
        missing(),
        training_data(),
        table_fit(),
        whole_file(),
        several(),
    ]
    .concat()
}

#[test]
fn every_malformed_spec_is_refused_with_its_location() {
    let cases = all_cases();
    assert!(cases.len() >= 45, "only {} cases", cases.len());
    check_all(&cases);
}

/// A FIFO named as a sample is refused at once, not opened (which would block).
#[cfg(unix)]
#[test]
fn a_fifo_sample_is_refused_at_once() {
    let probe = scratch("fifo_probe");
    match Command::new("mkfifo").arg(probe.join("p")).status() {
        Ok(s) if s.success() => {}
        Ok(s) => {
            println!("skipped: mkfifo failed here ({s})");
            let _ = std::fs::remove_dir_all(&probe);
            tidy();
            return;
        }
        Err(e) => {
            println!("skipped: mkfifo is not available ({e})");
            let _ = std::fs::remove_dir_all(&probe);
            tidy();
            return;
        }
    }
    let _ = std::fs::remove_dir_all(&probe);
    let case = Case::new(
        "sample_is_a_fifo",
        &[
            "[codec.feed]",
            "kind = \"bytes\"",
            "samples = [\"feed.txt\"]",
        ],
    )
    .fifo("feed.txt")
    .at(
        3,
        12,
        "feed",
        "cannot read sample \"feed.txt\": not a regular file",
    );
    let (tx, rx) = std::sync::mpsc::channel();
    std::thread::spawn(move || {
        let _ = tx.send(check(&case));
    });
    match rx.recv_timeout(Duration::from_secs(10)) {
        Ok(Ok(())) => {}
        Ok(Err(why)) => panic!("[sample_is_a_fifo] {why}"),
        Err(_) => panic!("[sample_is_a_fifo] no answer within 10 s: the FIFO was opened"),
    }
    tidy();
}

/// Regression (hardening report): three counts of `i64::MAX` (and other sums past `u64`)
/// must not panic. The spec may render or be refused; rendered, its entropy is finite.
#[test]
fn counts_that_overflow_a_sum_do_not_panic() {
    let max = i64::MAX.to_string();
    let umax = u64::MAX.to_string();
    let sets: [[&str; 3]; 3] = [[&max, &max, &max], [&umax, &umax, &umax], [&umax, "1", "0"]];
    for set in sets {
        let spec = lines(&[
            "[codec.a]",
            "kind = \"tokens\"",
            "symbols = [\"a\", \"b\", \"c\"]",
            &format!(
                "counts = {{ a = {}, b = {}, c = {} }}",
                set[0], set[1], set[2]
            ),
        ]);
        let outcome =
            std::panic::catch_unwind(|| precast::render_str(&spec, Path::new("codecs.toml")));
        match outcome {
            Err(_) => panic!("render panicked on\n{spec}"),
            Ok(Ok(r)) => {
                let report = &r.reports[0];
                assert!(
                    report.entropy.is_finite(),
                    "{spec}: entropy {}",
                    report.entropy
                );
                assert!(
                    report.exact_rate.is_finite(),
                    "{spec}: rate {}",
                    report.exact_rate
                );
                if set[0] == set[1] && set[1] == set[2] {
                    assert!(
                        (report.entropy - 3f64.log2()).abs() < 1e-9,
                        "{spec}: equal counts, entropy {}",
                        report.entropy
                    );
                }
            }
            Ok(Err(e)) => {
                assert_eq!(e.kind, precast::ErrorKind::Input, "{e}");
                assert!(e.location.is_some(), "refused without a location: {e}");
            }
        }

        // The command line must not panic either (a panic exits with 101).
        let dir = scratch(&format!("overflow_{}", set[2]));
        let path = dir.join("codecs.toml");
        std::fs::write(&path, &spec).unwrap();
        let (code, _, stderr) = run_cli(&dir, &path).unwrap();
        assert!(
            matches!(code, Some(0) | Some(1)),
            "`precast render` exited with {code:?} on\n{spec}\n{stderr}"
        );
        assert!(!stderr.contains("panicked"), "{stderr}");
        let _ = std::fs::remove_dir_all(&dir);
    }
    tidy();
}

/// Regression (hardening report): `table_bits = 3` holds 2 to 8 symbols for tANS.
#[test]
fn eight_slots_hold_two_to_eight_symbols() {
    for n in 2..=8usize {
        let uniform: Vec<String> = (0..n).map(|i| format!("t{i} = 10")).collect();
        let skewed: Vec<String> = (0..n)
            .map(|i| format!("t{i} = {}", if i == 0 { 1000 } else { 1 }))
            .collect();
        for counts in [uniform, skewed] {
            let spec = lines(&[
                "[codec.a]",
                "kind = \"tokens\"",
                "method = \"tans\"",
                "table_bits = 3",
                &format!("symbols = {}", token_list(n)),
                &format!("counts = {{ {} }}", counts.join(", ")),
            ]);
            let r = precast::render_str(&spec, Path::new("codecs.toml"))
                .unwrap_or_else(|e| panic!("{n} symbols in 8 slots refused: {e}\n{spec}"));
            let report = &r.reports[0];
            assert_eq!((report.symbols, report.table_bits), (n, 3), "{spec}");
            assert!(
                report.exact_rate.is_finite() && report.exact_rate >= report.entropy - 1e-9,
                "{spec}: rate {} below entropy {}",
                report.exact_rate,
                report.entropy
            );
        }
    }
}

/// Rows that once showed generator bugs (the comment above each says what precast did), kept
/// as regression tests.
#[test]
#[rustfmt::skip]
fn generator_bugs() {
    let huge = "1000000000000000000000000000000000000000000"; // 10^42, past i128
    let cases = vec![
        // The parser's message for a repeated key, "duplicate key", does not say which key.
        Case::new("duplicate_key_is_named", &["[codec.a]", "kind = \"bytes\"", "text = \"a\"", "kind = \"tokens\""])
            .top(4, 1, "`kind`"),
        Case::new("duplicate_table_is_named", &["[codec.a]", "kind = \"bytes\"", "text = \"a\"", "", "[codec.a]", "lanes = 2"])
            .top(5, 8, "`a`"),
        // A count key that names no symbol is located at its value, not at the key.
        Case::new("count_token_outside_the_alphabet_at_its_key", &["[codec.a]", "kind = \"tokens\"", "symbols = [\"ok\", \"fault\"]", "counts = { ok = 1, fualt = 2 }"])
            .at(4, 20, "a", "count for \"fualt\" which is not in the alphabet"),
        Case::new("count_byte_outside_the_alphabet_at_its_key", &["[codec.a]", "kind = \"bytes\"", "symbols = \"ab\"", "counts = { 99 = 1 }"])
            .at(4, 12, "a", "count for byte 99 ('c') which is not in the alphabet"),
        Case::new("count_key_with_a_leading_zero_at_its_key", &["[codec.a]", "kind = \"bytes\"", "symbols = \"ab\"", "counts = { \"097\" = 5 }"])
            .at(4, 12, "a", "count key \"097\" is not a byte value"),
        Case::new("count_key_with_a_sign_at_its_key", &["[codec.a]", "kind = \"bytes\"", "symbols = \"ab\"", "counts = { 98 = 1, \"+97\" = 5 }"])
            .at(4, 20, "a", "count key \"+97\" is not a byte value"),
        // Two tokens that become one variant: located at the start of the list, not at the
        // second token (a repeated token is located at the repeat).
        Case::new("same_variant_at_the_second_token", &["[codec.a]", "kind = \"tokens\"", "symbols = [\"reboot\", \"Reboot\"]", "counts = { reboot = 1 }"])
            .at(3, 22, "a", "tokens \"reboot\" and \"Reboot\" both become the variant `Reboot`"),
        // An integer past i128 gets "must be an integer, found an integer".
        Case::owned("table_bits_past_i128", lines(&["[codec.a]", "kind = \"bytes\"", "text = \"a\"", &format!("table_bits = {huge}")]))
            .at(4, 14, "a", "is out of range"),
        Case::owned("count_past_i128", lines(&["[codec.a]", "kind = \"tokens\"", "symbols = [\"ok\"]", &format!("counts = {{ ok = {huge} }}")]))
            .at(4, 17, "a", "is too large"),
        // A hexadecimal value is echoed without its prefix: 0x100 is shown as "100".
        Case::new("hex_byte_symbol_echoed_as_written", &["[codec.a]", "kind = \"bytes\"", "symbols = [0x61, 0x100]", "text = \"a\""])
            .at(3, 18, "a", "byte value 0x100 is out of range"),
        Case::new("hex_token_number_echoed_as_written", &["[codec.a]", "kind = \"tokens\"", "symbols = [\"ok\", 0x10]", "counts = { ok = 1 }"])
            .at(3, 18, "a", "found the number 0x10"),
    ];
    check_all(&cases);
}
