//! The Rust that `lawsmith build` generated for every spec (`generated/*/*.rs`), compiled as
//! one crate with `libm` as its only dependency, as a firmware crate would build it. The
//! tests compare it, and the generated C, with lawsmith's reference interpreter.

include!(concat!(env!("OUT_DIR"), "/modules.rs"));
