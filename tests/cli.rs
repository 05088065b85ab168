//! The `render` verb of the command line (a contract): output, files, exit status, messages.

use std::path::Path;
use std::process::Command;

fn precast() -> Command {
    Command::new(env!("CARGO_BIN_EXE_precast"))
}

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

#[test]
fn render_prints_the_same_source_as_the_library() {
    let spec = root().join("tests/specs/small.toml");
    let out = precast().arg("render").arg(&spec).output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let source = String::from_utf8(out.stdout).unwrap();
    assert_eq!(source, precast::render(&spec).unwrap().source);
}

#[test]
fn render_writes_a_file_with_dash_o() {
    let dir = std::env::temp_dir().join(format!("precast-cli-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("codecs.rs");
    let spec = root().join("example-crate/codecs.toml");
    let status = precast()
        .arg("render")
        .arg(&spec)
        .arg("-o")
        .arg(&file)
        .status()
        .unwrap();
    assert!(status.success());
    let written = std::fs::read_to_string(&file).unwrap();
    assert!(written.contains("pub mod gauge_status"));
    assert!(written.contains("pub mod field_notes"));
}

#[test]
fn a_bad_spec_exits_with_status_one_and_a_located_message() {
    let dir = std::env::temp_dir().join(format!("precast-cli-bad-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let spec = dir.join("bad.toml");
    std::fs::write(
        &spec,
        "[codec.a]\nkind = \"bytes\"\ntext = \"abc\"\ncolour = \"blue\"\n",
    )
    .unwrap();
    let out = precast().arg("render").arg(&spec).output().unwrap();
    assert_eq!(out.status.code(), Some(1));
    let err = String::from_utf8(out.stderr).unwrap();
    let want = format!("{}:4:1:", spec.display());
    assert!(err.starts_with(&want), "{err}");
    assert!(err.contains("colour"), "{err}");
    assert!(out.stdout.is_empty());

    let out = precast()
        .arg("render")
        .arg(dir.join("absent.toml"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
}
