//! The macro expands the small test spec into the same API the build script gives.

// These specs carry advice on purpose; the macro reports advice as `deprecated` warnings.
#![allow(deprecated)]

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

mod awkward {
    precast_macros::codecs!("../tests/specs/awkward_names.toml");
}

#[test]
fn tokens_named_like_internals_render_compile_and_round_trip() {
    use awkward::{markers, markers_rans};
    let input: Vec<markers::Symbol> = markers::ALL.iter().copied().cycle().take(100).collect();
    let mut buf = [0u8; 256];
    let n = markers::encode(&input, &mut buf).unwrap();
    let mut back = [markers::Symbol::Put; 100];
    assert_eq!(markers::decode(&buf[..n], &mut back), Ok(100));
    assert_eq!(back[..], input[..]);
    assert_eq!(markers::Symbol::PrecastRows.name(), "__precast_rows");
    let input = [
        markers_rans::Symbol::CUM,
        markers_rans::Symbol::PrecastRows2,
    ];
    let n = markers_rans::encode(&input, &mut buf).unwrap();
    let mut back = [markers_rans::Symbol::LOW; 2];
    assert_eq!(markers_rans::decode(&buf[..n], &mut back), Ok(2));
    assert_eq!(back, input);
}
