//! The built-in demo scenario as (file name, bytes) pairs, loaded by
//! [`crate::scenario::load_embedded_demo`] through the same checks as a folder on disk.
//!
//! Temporary: empty until the demo data lands; loading it then reports every required file
//! as missing.

/// Demo scenario files: name relative to the scenario folder, and contents.
pub const FILES: &[(&str, &[u8])] = &[];
