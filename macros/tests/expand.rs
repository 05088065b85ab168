//! The macro expands the small test spec into the same API the build script gives.

precast_macros::codecs!("../tests/specs/small.toml");

#[test]
fn the_macro_output_round_trips() {
    let input = b"permission is hereby granted".to_vec();
    let mut buf = [0u8; 64];
    let n = mit_text::encode(&input, &mut buf).unwrap();
    let mut back = [0u8; 64];
    assert_eq!(mit_text::decode(&buf[..n], &mut back), Ok(input.len()));
    assert_eq!(&back[..input.len()], &input[..]);
    let tokens = [five::Symbol::A, five::Symbol::E, five::Symbol::C];
    let n = five::encode(&tokens, &mut buf).unwrap();
    let mut out = [five::Symbol::B; 3];
    assert_eq!(five::decode(&buf[..n], &mut out), Ok(3));
    assert_eq!(out, tokens);
}
