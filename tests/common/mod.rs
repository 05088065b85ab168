//! Helpers shared by the integration tests.
#![allow(dead_code)]

use std::path::{Path, PathBuf};

/// SplitMix64 (Steele, Lea & Flood, "Fast splittable pseudorandom number generators",
/// OOPSLA 2014): a tiny deterministic generator, so that test data is the same on every run.
pub struct Rng(pub u64);

impl Rng {
    pub fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }

    pub fn below(&mut self, n: usize) -> usize {
        (self.next() % n as u64) as usize
    }

    /// An index drawn with the given weights.
    pub fn weighted(&mut self, weights: &[u64]) -> usize {
        let total: u64 = weights.iter().sum();
        let mut r = self.next() % total;
        for (i, &w) in weights.iter().enumerate() {
            if r < w {
                return i;
            }
            r -= w;
        }
        weights.len() - 1
    }
}

pub fn root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).to_path_buf()
}

/// The spec behind the golden file, rendered now.
pub fn small_spec() -> (precast::spec::Spec, String) {
    precast::spec::load(&root().join("tests/specs/small.toml")).expect("small spec loads")
}

/// The tables the generator builds for codec `name` of the small spec.
pub fn small_codec(name: &str) -> precast::Built {
    let (spec, _) = small_spec();
    let codec = spec
        .codecs
        .iter()
        .find(|c| c.name == name)
        .expect("codec exists");
    precast::build_codec(codec).expect("codec builds")
}

/// A fresh folder for test files, unique to this test process and `name`.
pub fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("precast-test-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// The message of rendering `spec` (in a folder with `files`), which must fail.
pub fn render_failure(name: &str, spec: &str, files: &[(&str, &[u8])]) -> String {
    let dir = scratch(name);
    for (file, bytes) in files {
        std::fs::write(dir.join(file), bytes).unwrap();
    }
    let path = dir.join("codecs.toml");
    std::fs::write(&path, spec).unwrap();
    match precast::render(&path) {
        Ok(_) => panic!("{name}: the spec must fail"),
        Err(e) => e.to_string(),
    }
}
