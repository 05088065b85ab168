//! The proc-macro front end of precast: `precast_macros::codecs!("codecs.toml")` expands, in
//! place, to the same code a build script would write. The path is taken from the calling
//! crate's `CARGO_MANIFEST_DIR`. It adds nothing to the core: it finds the file, calls
//! [`precast::render`], and turns errors into compile errors at the path literal.
//!
//! Advice (the build log's `cargo:warning=` lines of `precast::build`) becomes compiler
//! warnings at the path literal. Stable Rust has no warning API for proc macros
//! (`proc_macro::Diagnostic` is nightly-only), so each piece of advice is the note of a
//! `#[deprecated]` constant that the expansion uses once: rustc reports it as a
//! `deprecated` warning naming the advice. `#[allow(deprecated)]` on the call silences it.

#![forbid(unsafe_code)]

use proc_macro::TokenStream;
use quote::quote;
use std::path::PathBuf;
use syn::LitStr;

/// Expands to the codec modules generated from the spec at the given path (relative to the
/// crate's `Cargo.toml`). The compiler re-runs the macro when the spec or a sample changes.
#[proc_macro]
pub fn codecs(input: TokenStream) -> TokenStream {
    let lit = match syn::parse::<LitStr>(input) {
        Ok(l) => l,
        Err(e) => return e.to_compile_error().into(),
    };
    let mut path = PathBuf::from(lit.value());
    if path.is_relative() {
        if let Some(dir) = std::env::var_os("CARGO_MANIFEST_DIR") {
            path = PathBuf::from(dir).join(path);
        }
    }
    // Tracked either way, so that fixing a broken spec triggers a rebuild.
    let track = |p: &PathBuf| {
        let p = p.to_string_lossy().into_owned();
        quote!(
            const _: &[u8] = ::core::include_bytes!(#p);
        )
    };
    let rendered = match precast::render(&path) {
        Ok(r) => r,
        Err(e) => {
            let msg = e.to_string();
            let err = syn::Error::new(lit.span(), msg).to_compile_error();
            let tracked = if path.exists() {
                track(&path)
            } else {
                quote!()
            };
            return quote!(#err #tracked).into();
        }
    };
    let code: proc_macro2::TokenStream = match rendered.source.parse() {
        Ok(t) => t,
        Err(e) => {
            return syn::Error::new(lit.span(), format!("precast internal error: {e}"))
                .to_compile_error()
                .into()
        }
    };
    let tracked = rendered.inputs.iter().map(track);
    let advice = rendered.warnings.iter().map(|w| {
        let note = format!("precast advice: {w}");
        let name = syn::Ident::new("precast_advice", lit.span());
        quote::quote_spanned! {lit.span()=>
            const _: () = {
                #[deprecated(note = #note)]
                #[allow(non_upper_case_globals)]
                const #name: () = ();
                #name
            };
        }
    });
    quote!(#code #(#tracked)* #(#advice)*).into()
}
