//! The built-in demo scenario: the files of `scenarios/demo/`, embedded in the binary.
//!
//! This list is the one source of truth for `broodcast plan` without a folder and for
//! `broodcast demo --out DIR`. The data files are the output of
//! [`generate`](crate::generate::generate) for [`GenParams::demo`](crate::generate::GenParams::demo)
//! (regenerate with `cargo run --example write_demo`); `tests/it/demo_files.rs` checks they match
//! byte for byte. All data in them are invented, in an invented region.

/// `(file name, contents)` of every file in `scenarios/demo/`, in the order a folder listing
/// would show them after `scenario.json`.
pub const FILES: &[(&str, &[u8])] = &[
    (
        "scenario.json",
        include_bytes!("../scenarios/demo/scenario.json"),
    ),
    (
        "facilities.csv",
        include_bytes!("../scenarios/demo/facilities.csv"),
    ),
    ("supply.csv", include_bytes!("../scenarios/demo/supply.csv")),
    (
        "blocks.geojson",
        include_bytes!("../scenarios/demo/blocks.geojson"),
    ),
    (
        "requests.csv",
        include_bytes!("../scenarios/demo/requests.csv"),
    ),
    (
        "scouting.csv",
        include_bytes!("../scenarios/demo/scouting.csv"),
    ),
    ("fleet.csv", include_bytes!("../scenarios/demo/fleet.csv")),
    (
        "roads.osm.pbf",
        include_bytes!("../scenarios/demo/roads.osm.pbf"),
    ),
    ("README.md", include_bytes!("../scenarios/demo/README.md")),
];

/// The contents of the demo file `name`, if there is one.
pub fn file(name: &str) -> Option<&'static [u8]> {
    FILES.iter().find(|(n, _)| *n == name).map(|(_, b)| *b)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_demo_file_is_non_empty_and_found_by_name() {
        for (name, bytes) in FILES {
            assert!(!bytes.is_empty(), "{name} is empty");
            assert_eq!(file(name), Some(*bytes));
        }
        assert_eq!(file("no-such-file.csv"), None);
    }
}
