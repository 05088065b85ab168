// Generates the codecs from codecs.toml into $OUT_DIR/codecs.rs at build time.
fn main() {
    precast::build("codecs.toml");
}
