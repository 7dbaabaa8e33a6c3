//! Every integration test in one binary around one `util` module (the shape ripgrep's
//! `tests/` uses): the library and `util` compile once for all of them. Each file is one
//! area; run one with `cargo test --test it AREA::` (e.g. `cargo test --test it allocate::`).

mod util;

mod allocate;
mod atomic_kill;
mod bad_input;
mod baseline;
mod cli;
mod demo_files;
mod determinism;
mod extremes;
mod forecast;
mod fuzz_corpus;
mod geodesy;
mod highs;
mod ledger;
mod limits;
mod loader;
mod out_safety;
mod outputs;
mod paperwork;
mod plan_check;
mod pressure;
mod roads;
mod route_feasibility;
mod routing;
mod sweep;
mod whole_problem;
