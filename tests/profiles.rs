//! Output is byte-identical across build profiles of the generator and across its front
//! ends. Build scripts run unoptimised by default, and the README suggests optimising them:
//! neither may change a byte of the generated code.

use std::path::{Path, PathBuf};
use std::process::Command;

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

/// Specs covering every kind, method, lane count, framing and table size, and chosen sizes.
fn specs() -> Vec<PathBuf> {
    [
        "tests/specs/small.toml",
        "tests/specs/matrix.toml",
        "tests/specs/sizing.toml",
        "tests/specs/awkward_names.toml",
        "example-crate/codecs.toml",
        "example-crate/bench_codecs.toml",
    ]
    .iter()
    .map(|s| root().join(s))
    .collect()
}

/// This test binary is the profile it was built in (debug under `cargo test`); the other
/// profile's command line is built into a target folder of its own.
fn other_profile_cli() -> PathBuf {
    let (flag, folder) = if cfg!(debug_assertions) {
        (Some("--release"), "release")
    } else {
        (None, "debug")
    };
    let target = root().join("target/profile-check");
    let mut cargo = Command::new(env!("CARGO"));
    cargo
        .current_dir(root())
        .args(["build", "--quiet", "--features", "cli", "--bin", "precast"])
        .arg("--target-dir")
        .arg(&target);
    if let Some(flag) = flag {
        cargo.arg(flag);
    }
    let status = cargo.status().expect("cargo runs");
    assert!(
        status.success(),
        "building the command line in the other profile"
    );
    target
        .join(folder)
        .join(format!("precast{}", std::env::consts::EXE_SUFFIX))
}

#[test]
fn debug_and_release_builds_render_the_same_bytes() {
    let cli = other_profile_cli();
    for spec in specs() {
        let here = precast::render(&spec).expect("renders").source;
        let out = Command::new(&cli)
            .arg("render")
            .arg(&spec)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        assert!(
            out.stdout == here.as_bytes(),
            "{} renders differently in the two profiles",
            spec.display()
        );
    }
}

#[test]
fn the_build_script_api_writes_what_render_returns() {
    let dir = std::env::temp_dir().join(format!("precast-profiles-{}", std::process::id()));
    for spec in specs() {
        let path = precast::Builder::new(&spec)
            .out_dir(&dir)
            .cargo_output(false)
            .write()
            .expect("writes");
        let written = std::fs::read_to_string(&path).unwrap();
        assert_eq!(written, precast::render(&spec).unwrap().source);
        // And again: the same bytes on every run.
        assert_eq!(written, precast::render(&spec).unwrap().source);
    }
}
