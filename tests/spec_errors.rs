//! Bad specs and samples give clear errors with file, line, column and codec, never a panic.

use std::path::{Path, PathBuf};

fn err(text: &str) -> String {
    match precast::render_str(text, Path::new("codecs.toml")) {
        Ok(_) => panic!("spec was accepted:\n{text}"),
        Err(e) => {
            assert_eq!(e.kind, precast::ErrorKind::Input, "{e}");
            e.to_string()
        }
    }
}

fn scratch(name: &str) -> PathBuf {
    let dir =
        std::env::temp_dir().join(format!("precast-spec-errors-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

const GOOD: &str = r#"
[codec.gauge_status]
kind = "tokens"
symbols = ["ok", "low_battery"]
counts = { ok = 10, low_battery = 1 }
"#;

#[test]
fn a_good_spec_renders() {
    assert!(precast::render_str(GOOD, Path::new("codecs.toml")).is_ok());
}

#[test]
fn unknown_keys_name_line_and_column() {
    let msg = err(
        "[codec.a]\nkind = \"tokens\"\nsymbols = [\"x\"]\ncounts = { x = 1 }\nsclae_bits = 9\n",
    );
    assert!(msg.starts_with("codecs.toml:5:1:"), "{msg}");
    assert!(msg.contains("sclae_bits"), "{msg}");
    let msg = err("[defaults]\nmethodd = \"tans\"\n");
    assert!(msg.starts_with("codecs.toml:2:1:"), "{msg}");
    let msg = err("[codecs.a]\nkind = \"bytes\"\n");
    assert!(msg.starts_with("codecs.toml:1:"), "{msg}");
}

#[test]
fn semantic_errors_name_the_codec_and_the_value() {
    let cases: &[(&str, &str, &str)] = &[
        ("[codec.a]\nkind = \"words\"\ntext = \"x\"\n", "codecs.toml:2:8: codec `a`:", "unknown kind"),
        ("[codec.a]\nkind = \"bytes\"\nmethod = \"zip\"\ntext = \"x\"\n", "codecs.toml:3:10: codec `a`:", "unknown method"),
        ("[codec.a]\nkind = \"bytes\"\ntable_bits = 16\ntext = \"x\"\n", "codecs.toml:3:14: codec `a`:", "out of range"),
        ("[codec.a]\nkind = \"bytes\"\nsymbols = \"abca\"\ntext = \"a\"\n", "codecs.toml:3:11: codec `a`:", "listed twice"),
        ("[codec.a]\nkind = \"bytes\"\nsymbols = [1, 300]\ntext = \"a\"\n", "codecs.toml:3:15: codec `a`:", "out of range"),
        ("[codec.a]\nkind = \"tokens\"\nsymbols = [\"ok\", \"no way\"]\ncounts = { ok = 1 }\n", "codecs.toml:3:18: codec `a`:", "token name"),
        ("[codec.a]\nkind = \"tokens\"\nsymbols = [\"ok\"]\ncounts = { ok = 1, fault = 2 }\n", "codecs.toml:4:20: codec `a`:", "\"fault\" which is not in the alphabet"),
        ("[codec.a]\nkind = \"tokens\"\nsymbols = [\"ok\"]\ncounts = { ok = -1 }\n", "codecs.toml:4:17: codec `a`:", "negative"),
        ("[codec.a]\nkind = \"tokens\"\nsymbols = [\"ok\"]\n", "codecs.toml:1:1: codec `a`:", "no training data"),
        ("[codec.a]\nkind = \"tokens\"\ncounts = { ok = 1 }\n", "codecs.toml:1:1: codec `a`:", "missing key `symbols`"),
        ("[codec.Bad]\nkind = \"bytes\"\ntext = \"x\"\n", "codecs.toml:1:1: codec `Bad`:", "snake_case"),
        ("[codec.match]\nkind = \"bytes\"\ntext = \"x\"\n", "codecs.toml:1:1: codec `match`:", "keyword"),
        ("[codec.a]\nkind = \"bytes\"\ntable_bits = 3\ntext = \"x\"\n", "codecs.toml:3:14: codec `a`:", "do not fit"),
        ("[codec.a]\nkind = \"tokens\"\nsymbols = [\"low_battery\", \"lowBattery\"]\ncounts = {}\n", "codecs.toml:3:27: codec `a`:", "both become the variant `LowBattery`"),
        ("[codec.a]\nkind = \"bytes\"\nsymbols = \"ab\"\ntext = \"abc\"\n", "codecs.toml:4:8: codec `a`:", "byte 99 ('c') is not in the alphabet (at byte 2 of the inline text)"),
        ("[codec.a]\nkind = \"bytes\"\nsymbols = \"ab\"\ncounts = { a = 3 }\n", "codecs.toml:4:12: codec `a`:", "not a byte value"),
        ("", "codecs.toml:1:1:", "no codec"),
        ("[codec.a\n", "codecs.toml:1:", ""),
    ];
    for (spec, prefix, needle) in cases {
        let msg = err(spec);
        assert!(
            msg.starts_with(prefix),
            "want {prefix:?} at the start of {msg:?}"
        );
        assert!(msg.contains(needle), "want {needle:?} in {msg:?}");
    }
}

#[test]
fn a_sample_symbol_outside_the_alphabet_names_file_line_and_offset() {
    let dir = scratch("sample");
    std::fs::write(dir.join("log.txt"), "ok ok\nok lowbattery ok\n").unwrap();
    std::fs::write(
        dir.join("codecs.toml"),
        "[codec.status]\nkind = \"tokens\"\nsymbols = [\"ok\", \"low_battery\"]\nsamples = [\"log.txt\"]\n",
    )
    .unwrap();
    let e = precast::render(dir.join("codecs.toml")).unwrap_err();
    let msg = e.to_string();
    assert!(msg.contains("log.txt:2:4: codec `status`: token \"lowbattery\" is not in the alphabet (byte offset 9)"), "{msg}");

    std::fs::write(dir.join("notes.bin"), b"ab\nab\xffa").unwrap();
    std::fs::write(
        dir.join("codecs.toml"),
        "[codec.notes]\nkind = \"bytes\"\nsymbols = \"ab\\n\"\nsamples = [\"notes.bin\"]\n",
    )
    .unwrap();
    let msg = precast::render(dir.join("codecs.toml"))
        .unwrap_err()
        .to_string();
    assert!(
        msg.contains(
            "notes.bin:2:3: codec `notes`: byte 255 (\\xff) is not in the alphabet (byte offset 5)"
        ),
        "{msg}"
    );

    std::fs::write(
        dir.join("codecs.toml"),
        "[codec.notes]\nkind = \"bytes\"\nsamples = [\"missing.txt\"]\n",
    )
    .unwrap();
    let msg = precast::render(dir.join("codecs.toml"))
        .unwrap_err()
        .to_string();
    assert!(
        msg.contains("codecs.toml:3:12: codec `notes`: cannot read sample \"missing.txt\""),
        "{msg}"
    );
}

#[test]
fn defaults_apply_and_codec_keys_override_them() {
    let spec = "[defaults]\ntable_bits = 9\nkind = \"tokens\"\n\n[codec.a]\nsymbols = [\"x\", \"y\"]\ncounts = { x = 3, y = 1 }\n\n[codec.b]\nkind = \"bytes\"\ntable_bits = 10\ntext = \"hello\"\nsymbols = \"helo\"\n";
    let r = precast::render_str(spec, Path::new("codecs.toml")).unwrap();
    assert_eq!(r.reports[0].table_bits, 9);
    assert_eq!(r.reports[1].table_bits, 10);
    // Codecs keep the order of the file, not alphabetical order.
    let spec = "[codec.zeta]\nkind = \"bytes\"\ntext = \"a\"\nsymbols = \"a\"\n[codec.alpha]\nkind = \"bytes\"\ntext = \"b\"\nsymbols = \"b\"\n";
    let r = precast::render_str(spec, Path::new("codecs.toml")).unwrap();
    assert_eq!(r.reports[0].name, "zeta");
    assert!(r.source.find("pub mod zeta").unwrap() < r.source.find("pub mod alpha").unwrap());
}

#[test]
fn awkward_token_names_still_make_valid_variants() {
    let spec = "[codec.a]\nkind = \"tokens\"\nsymbols = [\"self\", \"_9lives\", \"x__y\", \"Ok\", \"none\"]\ncounts = { self = 5 }\n";
    let r = precast::render_str(spec, Path::new("codecs.toml")).unwrap();
    for v in ["Self_,", "T9lives,", "XY,", "Ok,", "None,"] {
        assert!(r.source.contains(v), "{v} missing");
    }
}

#[test]
fn garbage_specs_never_panic() {
    // Every prefix of a good spec, and a few byte-level mutations of it, fail cleanly or pass.
    let demo = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/specs/small.toml"),
    )
    .unwrap();
    for cut in (0..demo.len()).filter(|&c| demo.is_char_boundary(c)) {
        let _ = precast::spec::parse(&demo[..cut], Path::new("x.toml"));
    }
    let mut bytes = demo.into_bytes();
    for i in (0..bytes.len()).step_by(7) {
        let old = bytes[i];
        bytes[i] = b"=[]\"{},.9a \n"[i % 12];
        if let Ok(text) = std::str::from_utf8(&bytes) {
            let _ = precast::spec::parse(text, Path::new("x.toml"));
        }
        bytes[i] = old;
    }
}

#[test]
fn lanes_and_lookup_are_checked() {
    let base =
        "[codec.a]\nkind = \"tokens\"\nsymbols = [\"x\", \"y\"]\ncounts = { x = 1, y = 2 }\n";
    let msg = err(&format!("{base}lanes = 3\n"));
    assert!(msg.starts_with("codecs.toml:5:9:"), "{msg}");
    assert!(
        msg.contains("lanes = 3") && msg.contains("1, 2, 4 or 8"),
        "{msg}"
    );
    let msg = err(&format!("{base}symbol_lookup = \"search\"\n"));
    assert!(msg.starts_with("codecs.toml:5:17:"), "{msg}");
    assert!(msg.contains("rans"), "{msg}");
    let msg = err(&format!(
        "{base}method = \"rans\"\nsymbol_lookup = \"bisect\"\n"
    ));
    assert!(msg.contains("codec `a`") && msg.contains("bisect"), "{msg}");
    let msg = err(&format!("{base}method = \"huffman\"\n"));
    assert!(msg.contains("\"tans\" or \"rans\""), "{msg}");
    for ok in [
        "lanes = 8\nmethod = \"rans\"\n",
        "symbol_lookup = \"search\"\nmethod = \"rans\"\n",
    ] {
        assert!(precast::render_str(&format!("{base}{ok}"), Path::new("c.toml")).is_ok());
    }
}

#[test]
fn every_mistake_of_a_spec_is_reported_at_once() {
    let spec =
        "[codec.a]\nkind = \"tokens\"\nsymbols = [\"x\"]\ncounts = { x = 1 }\ntable_bits = 99\n\n\
                [codec.b]\nknd = \"bytes\"\ntext = \"x\"\n\n\
                [codec.c]\nkind = \"bytes\"\ntable_bits = \"11\"\ntext = \"x\"\n";
    let e = precast::render_str(spec, Path::new("codecs.toml")).unwrap_err();
    let lines: Vec<String> = e.all().map(|e| e.to_string()).collect();
    assert_eq!(lines.len(), 4, "{lines:#?}");
    assert_eq!(e.to_string().lines().count(), 4);
    assert!(
        lines[0].starts_with("codecs.toml:5:14: codec `a`: table_bits = 99 is out of range"),
        "{lines:#?}"
    );
    assert!(
        lines[1].starts_with("codecs.toml:7:1: codec `b`: missing key `kind`"),
        "{lines:#?}"
    );
    assert!(
        lines[2].starts_with("codecs.toml:8:1: codec `b`: unknown key `knd`: did you mean `kind`?"),
        "{lines:#?}"
    );
    assert!(
        lines[3].starts_with(
            "codecs.toml:13:14: codec `c`: `table_bits` must be an integer, found a string"
        ),
        "{lines:#?}"
    );
}

#[test]
fn the_old_key_name_is_refused_with_the_new_one() {
    let msg = err("[codec.a]\nkind = \"bytes\"\ntext = \"x\"\nsize_bits = 9\n");
    assert!(
        msg.starts_with("codecs.toml:4:1: codec `a`: unknown key `size_bits`"),
        "{msg}"
    );
    assert!(msg.contains("`table_bits`"), "{msg}");
    let msg = err("[defaults]\nsize_bits = 9\n[codec.a]\nkind = \"bytes\"\ntext = \"x\"\n");
    assert!(
        msg.starts_with("codecs.toml:2:1:") && msg.contains("`table_bits`"),
        "{msg}"
    );
}

#[test]
fn type_errors_name_the_codec_and_the_key() {
    let base = "[codec.a]\nkind = \"tokens\"\nsymbols = [\"x\", \"y\"]\ncounts = { x = 1 }\n";
    let cases: &[(&str, &str)] = &[
        ("lanes = \"4\"\n", "codecs.toml:5:9: codec `a`: `lanes` must be an integer, found a string"),
        ("method = 2\n", "codecs.toml:5:10: codec `a`: `method` must be one of \"tans\" or \"rans\", found an integer"),
        ("framing = [\"bare\"]\n", "codecs.toml:5:11: codec `a`: `framing` must be one of \"tagged\", \"compact\" or \"bare\", found an array"),
        ("text = 5\n", "codecs.toml:5:8: codec `a`: `text` must be a string, found an integer"),
        ("samples = [3]\n", "codecs.toml:5:12: codec `a`: `samples` must be a path string, found an integer"),
    ];
    for (extra, want) in cases {
        let msg = err(&format!("{base}{extra}"));
        assert!(msg.starts_with(want), "want {want:?}, got {msg:?}");
    }
    let msg = err("[codec.a]\nkind = \"tokens\"\nsymbols = [\"x\"]\ncounts = { x = \"many\" }\n");
    assert!(
        msg.starts_with(
            "codecs.toml:4:16: codec `a`: `counts` must be integer counts, found a string"
        ),
        "{msg}"
    );
}

#[test]
fn a_spec_that_is_not_utf8_is_located() {
    let dir = scratch("utf8");
    let path = dir.join("codecs.toml");
    std::fs::write(&path, b"[codec.a]\nkind = \"bytes\"\ntext = \"ab\xffc\"\n").unwrap();
    let e = precast::render(&path).unwrap_err();
    let loc = e.location.clone().expect("located");
    assert_eq!((loc.line, loc.column), (3, 11), "{e}");
    assert!(e.to_string().contains("not UTF-8"), "{e}");
}

#[test]
fn one_sample_may_be_given_as_a_string() {
    let dir = scratch("one-sample");
    std::fs::write(dir.join("log.txt"), "ok ok low_battery ok\n").unwrap();
    std::fs::write(
        dir.join("codecs.toml"),
        "[codec.status]\nkind = \"tokens\"\nsymbols = [\"ok\", \"low_battery\"]\nsamples = \"log.txt\"\n",
    )
    .unwrap();
    let r = precast::render(dir.join("codecs.toml")).unwrap();
    assert_eq!(r.reports[0].training_symbols, 4);
    assert!(r.inputs.iter().any(|p| p.ends_with("log.txt")));
}

#[test]
fn a_count_key_names_a_byte_once() {
    // Aliases of one byte value must not overwrite each other silently.
    let msg =
        err("[codec.a]\nkind = \"bytes\"\nsymbols = \"ab\"\ncounts = { 97 = 1, \"097\" = 1000 }\n");
    assert!(
        msg.contains("count key \"097\" is not a byte value"),
        "{msg}"
    );
    let msg = err("[codec.a]\nkind = \"bytes\"\nsymbols = \"ab\"\ncounts = { \"+97\" = 5 }\n");
    assert!(msg.contains("count key \"+97\""), "{msg}");
}

#[test]
fn only_regular_files_are_read() {
    let dir = scratch("regular");
    std::fs::create_dir_all(dir.join("folder.txt")).unwrap();
    std::fs::write(
        dir.join("codecs.toml"),
        "[codec.notes]\nkind = \"bytes\"\nsamples = [\"folder.txt\"]\n",
    )
    .unwrap();
    let msg = precast::render(dir.join("codecs.toml"))
        .unwrap_err()
        .to_string();
    assert!(
        msg.contains("codecs.toml:3:12: codec `notes`: cannot read sample \"folder.txt\": not a regular file"),
        "{msg}"
    );
}
