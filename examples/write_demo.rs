//! Regenerates the committed demo scenario: `cargo run --example write_demo`.
//!
//! Writes `generate(&GenParams::demo())` into `scenarios/demo/` (the README there is
//! hand-written and left alone). `tests/demo_files.rs` fails until this has been run after a
//! change to the generator.

use std::path::PathBuf;

use broodcast::generate::{GenParams, generate};

fn main() -> std::io::Result<()> {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("scenarios/demo");
    std::fs::create_dir_all(&dir)?;
    for (name, bytes) in generate(&GenParams::demo()) {
        std::fs::write(dir.join(&name), &bytes)?;
        println!(
            "wrote {} ({} bytes)",
            dir.join(&name).display(),
            bytes.len()
        );
    }
    Ok(())
}
