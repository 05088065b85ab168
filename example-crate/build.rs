// Generates the codecs at build time: codecs.toml into $OUT_DIR/codecs.rs (the library), and
// bench_codecs.toml into $OUT_DIR/bench_codecs.rs (only the bench and bench-report include it).
fn main() {
    precast::build("codecs.toml");
    precast::build("bench_codecs.toml");
}
