//! Shared by the fuzz targets: the oracle lives in `oracle.rs` so that `tests/fuzz_corpus.rs`
//! (stable, no libFuzzer) can include the very same file with `#[path]`.
#![allow(missing_docs)]

pub mod oracle;
