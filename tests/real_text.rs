//! Real text as training data: Debian's word list (package `wamerican`, file
//! /usr/share/dict/american-english, 985,084 bytes, order-0 entropy 4.443836 bits/byte per
//! CHECKS.md). CI installs it; where it is absent the test says so and passes.

use std::path::Path;

const WORDS: &str = "/usr/share/dict/american-english";

#[test]
fn a_word_list_codes_within_one_percent_of_its_entropy_bound() {
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
    let dir = std::env::temp_dir().join(format!("precast-real-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let spec = format!(
        "[codec.words]\nkind = \"bytes\"\ntable_bits = 12\nsymbols = [{}]\nsamples = [\"{WORDS}\"]\n",
        symbols.join(", ")
    );
    let path = dir.join("words.toml");
    std::fs::write(&path, spec).unwrap();
    let rendered = precast::render(&path).unwrap();
    let report = &rendered.reports[0];
    if data.len() == 985_084 {
        // The file CHECKS.md describes: its entropy as published there.
        assert!(
            (report.entropy - 4.443836).abs() < 5e-7,
            "entropy {}",
            report.entropy
        );
    }
    // The whole stream, header included, against N·H/8 bytes (Shannon's bound).
    let bound = data.len() as f64 * report.entropy / 8.0;
    let size = report.verified.stream_bytes as f64;
    eprintln!(
        "word list: {} bytes → {size} bytes, bound {bound:.0}, ratio {:.5}, exact rate {:.6}",
        data.len(),
        size / bound,
        report.exact_rate
    );
    assert!(size >= bound);
    assert!(
        size < bound * 1.01,
        "{size} bytes against a bound of {bound:.0}"
    );
    assert!(Path::new(WORDS).exists());
}
