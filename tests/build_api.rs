//! The build-script API: writing only on change, options, and advice for the build log.

use std::path::Path;

fn scratch(name: &str) -> std::path::PathBuf {
    let dir = std::env::temp_dir().join(format!("precast-build-api-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

#[test]
fn builder_writes_once_and_leaves_an_unchanged_file_alone() {
    let out = scratch("write");
    let spec = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/specs/small.toml");
    let path = precast::Builder::new(&spec)
        .out_dir(&out)
        .cargo_output(false)
        .write()
        .unwrap();
    assert_eq!(path, out.join("small.rs"));
    let first = std::fs::metadata(&path).unwrap().modified().unwrap();
    std::thread::sleep(std::time::Duration::from_millis(20));
    precast::Builder::new(&spec)
        .out_dir(&out)
        .cargo_output(false)
        .write()
        .unwrap();
    assert_eq!(std::fs::metadata(&path).unwrap().modified().unwrap(), first);
    let named = precast::Builder::new(&spec)
        .out_dir(&out)
        .file_name("tables.rs")
        .cargo_output(false)
        .write()
        .unwrap();
    assert_eq!(std::fs::read(named).unwrap(), std::fs::read(&path).unwrap());
    // render() writes nothing and lists the inputs to watch: the spec and its sample.
    let r = precast::Builder::new(&spec).render().unwrap();
    assert_eq!(r.inputs.len(), 2);
    assert!(r.inputs[1].ends_with("mit-license.txt"));
}

#[test]
fn a_large_excess_gets_a_table_bits_suggestion() {
    // Binary p = 0.99 (CHECKS.md): at 2^5 slots the rare symbol is over-weighted.
    let spec = "[codec.rare]\nkind = \"tokens\"\nsymbols = [\"common\", \"rare\"]\ncounts = { common = 99, rare = 1 }\ntable_bits = 5\n";
    let r = precast::render_str(spec, Path::new("codecs.toml")).unwrap();
    let advice = r.warnings.join("\n");
    assert!(advice.contains("codec `rare`"), "{advice}");
    assert!(advice.contains("table_bits = "), "{advice}");
    assert!(advice.contains("brings it under 0.5 %"), "{advice}");
    // The suggestion is real: that table size does bring the excess under 0.5 %.
    let bits: u32 = advice
        .split("table_bits = ")
        .nth(2)
        .and_then(|t| t.split_whitespace().next())
        .and_then(|t| t.parse().ok())
        .expect("suggested size");
    let spec = spec.replace("table_bits = 5", &format!("table_bits = {bits}"));
    let r = precast::render_str(&spec, Path::new("codecs.toml")).unwrap();
    assert!(r.reports[0].excess_percent().unwrap() <= 0.5);
    assert!(r.warnings.is_empty(), "{:?}", r.warnings);
}
