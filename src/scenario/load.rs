//! Loading and validating a scenario folder (format v1, `docs/formats.md`).
//! Raw serde rows live here and nowhere else.

use std::path::{Path, PathBuf};

use super::{InputError, Scenario, TravelMatrix};

/// Where a scenario comes from.
#[derive(Clone, Debug)]
pub enum Source {
    /// A folder on disk.
    Dir(PathBuf),
    /// The demo scenario built into the binary.
    EmbeddedDemo,
}

/// Loads and validates a scenario from `source`.
pub fn load(source: &Source) -> Result<Scenario, InputError> {
    match source {
        Source::Dir(dir) => load_dir(dir),
        Source::EmbeddedDemo => load_embedded_demo(),
    }
}

/// Loads and validates the scenario folder `dir`.
pub fn load_dir(_dir: &Path) -> Result<Scenario, InputError> {
    unimplemented!("loader: issue 2")
}

/// Loads the built-in demo scenario.
pub fn load_embedded_demo() -> Result<Scenario, InputError> {
    unimplemented!("loader: issue 2")
}

/// Parses and validates a travel-time matrix CSV; `file` names it in problems.
pub fn parse_travel_matrix(_file: &str, _text: &[u8]) -> Result<TravelMatrix, InputError> {
    unimplemented!("loader: issue 2")
}
