//! Regenerates the committed demo scenario, or writes a benchmark week.
//!
//! - `cargo run --example write_demo` writes `generate(&GenParams::demo())` into
//!   `scenarios/demo/` (the README there is hand-written and left alone).
//!   `tests/it/demo_files.rs` fails until this has been run after a change to the generator.
//! - `cargo run --release --example write_demo -- --sites 35000 [--seed 1] --out DIR` writes
//!   `generate(&GenParams::sized(35000, 1))` into DIR and reports the generation time;
//!   `--roads` adds the generated road network (`roads.osm.pbf`, `travel.road_network`).

use std::path::PathBuf;
use std::time::Instant;

use broodcast::generate::{GenParams, generate};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let mut args = std::env::args().skip(1);
    let (mut sites, mut seed, mut out, mut roads) = (None, 1u64, None, false);
    while let Some(a) = args.next() {
        let mut value = || args.next().ok_or(format!("{a} needs a value"));
        match a.as_str() {
            "--sites" => sites = Some(value()?.parse::<usize>()?),
            "--seed" => seed = value()?.parse()?,
            "--out" => out = Some(PathBuf::from(value()?)),
            "--roads" => roads = true,
            other => return Err(format!("unknown argument {other}; see the file's doc").into()),
        }
    }
    let (params, dir) = match sites {
        None => (
            GenParams::demo(),
            out.unwrap_or_else(|| PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("scenarios/demo")),
        ),
        Some(n) => (
            GenParams {
                roads,
                ..GenParams::sized(n, seed)
            },
            out.ok_or("--sites needs --out DIR")?,
        ),
    };
    let started = Instant::now();
    let files = generate(&params);
    let secs = started.elapsed().as_secs_f64();
    std::fs::create_dir_all(&dir)?;
    for (name, bytes) in &files {
        std::fs::write(dir.join(name), bytes)?;
        println!("wrote {} ({} bytes)", dir.join(name).display(), bytes.len());
    }
    println!(
        "{} blocks, {} requests, {} scouting points generated in {secs:.3} s",
        params.blocks, params.requests, params.scouting_points
    );
    Ok(())
}
