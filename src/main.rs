//! The `broodcast` command line.
fn main() {}
