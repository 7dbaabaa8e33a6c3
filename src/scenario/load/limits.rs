//! Size limits on the input, checked before the expensive step they guard, so that a wrong or
//! runaway file fails in a second with a message instead of exhausting memory. The values and
//! the reasoning are in `docs/formats.md` ("Limits").

/// Largest input file, bytes (256 MiB). Checked from the file's metadata before it is read,
/// and again while reading (a pipe or device has no reliable length). The loader holds a file
/// as text and then as parsed values, several times its size for GeoJSON, so this keeps a
/// load under a few GB; the largest realistic inputs (50,000 block outlines, a 5,000-location
/// matrix) are well under 200 MB.
pub const MAX_FILE_BYTES: u64 = 256 * 1024 * 1024;

/// Most data rows in one CSV file (the header not counted). Ten times the largest candidate
/// pool the planner is measured on (tens of thousands of sites).
pub const MAX_CSV_ROWS: usize = 1_000_000;

/// Most features in `blocks.geojson`.
pub const MAX_FEATURES: usize = 200_000;

/// Most positions in one polygon (all its rings), counted before geometry validation, whose
/// cost grows faster than linearly in vertices. A surveyed grove block has tens to a few
/// thousand vertices; 100,000 means an unsimplified trace.
pub const MAX_POLYGON_VERTICES: usize = 100_000;

/// Most positions over all polygons of `blocks.geojson`.
pub const MAX_TOTAL_VERTICES: usize = 5_000_000;

/// Most location ids in the travel matrix: the matrix holds ids² minutes as 8-byte floats,
/// 200 MB at 5,000 ids.
pub const MAX_MATRIX_IDS: usize = 5_000;

/// `n` bytes written for people: `256 MiB`, `1.5 KiB`.
pub(super) fn human_bytes(n: u64) -> String {
    const UNITS: [&str; 4] = ["bytes", "KiB", "MiB", "GiB"];
    let mut v = n as f64;
    let mut u = 0;
    while v >= 1024.0 && u + 1 < UNITS.len() {
        v /= 1024.0;
        u += 1;
    }
    if u == 0 {
        format!("{n} bytes")
    } else if v.fract() == 0.0 {
        format!("{v:.0} {}", UNITS[u])
    } else {
        format!("{v:.1} {}", UNITS[u])
    }
}

/// The problem text for a file past [`MAX_FILE_BYTES`].
pub(super) fn too_big(size: u64) -> String {
    format!(
        "the file is {size} bytes ({}), more than the limit of {}; check it is the right file (an export of a \
         whole layer or a binary file?), or split the scenario",
        human_bytes(size),
        human_bytes(MAX_FILE_BYTES)
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sizes_read_in_binary_units() {
        assert_eq!(human_bytes(MAX_FILE_BYTES), "256 MiB");
        assert_eq!(human_bytes(1536), "1.5 KiB");
        assert_eq!(human_bytes(12), "12 bytes");
    }
}
