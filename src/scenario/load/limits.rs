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

/// Most positions in one polygon (all its rings), counted before geometry validation. geo's
/// OGC validity check grows with the square of the vertex count; measured on the release
/// binary (`broodcast check` on one regular polygon, one run on a shared 2-core machine):
/// 5,000 positions 0.18 s, 10,000 0.67 s, 14,000 1.26 s, 20,000 2.35 s, 40,000 8.4 s; in a
/// later run of `examples/bench_polygon` (median of 3, machine busier) 10,000 took 1.09 s, 2.8×
/// the 5,000 time. The limit keeps one polygon at about a second. A surveyed grove block has tens to a few thousand
/// vertices; more means an unsimplified trace.
pub const MAX_POLYGON_VERTICES: usize = 10_000;

/// Smallest block area, m²: below it the outline is a line or a point (a zero-area ring
/// passes the ring rules and OGC validity).
pub const MIN_BLOCK_M2: f64 = 1.0;

/// Block area above which a warning asks for a look, hectares (common practice: a citrus
/// block, the unit a crew treats as one, is a few to a few hundred hectares; 2,000 ha is a
/// whole large grove or more).
pub const LARGE_BLOCK_HA: f64 = 2_000.0;

/// Most positions over all polygons of `blocks.geojson`.
pub const MAX_TOTAL_VERTICES: usize = 5_000_000;

/// Most location ids in the travel matrix: the matrix holds ids² minutes as 8-byte floats,
/// 200 MB at 5,000 ids.
pub const MAX_MATRIX_IDS: usize = 5_000;

/// Years a planning week may start in. Every date the planner computes (release-by, re-release
/// and exclusion windows, route clocks) then stays a four-digit year, so date arithmetic cannot
/// overflow and every output date is plain `YYYY-MM-DD`.
pub const WEEK_YEARS: std::ops::RangeInclusive<i32> = 1900..=2999;

/// Longest interval in days (`policy.insecticide_exclusion_days`,
/// `policy.rerelease_interval_days`): ten years. Keeps `date + days` inside four-digit years.
pub const MAX_INTERVAL_DAYS: u64 = 3660;

/// Longest duration in hours (`agent.shelf_life_hours`, `agent.survival.half_life_hours`,
/// table points, `parcel.transit_hours`): one year, far past any live shipment.
pub const MAX_HOURS: f64 = 8760.0;

/// Most wasps in one release (`agent.*_release_wasps`): a million. A release is hundreds to a
/// few thousand wasps (common practice); a million at one site is a typing or unit mistake.
/// Measured: 1e9 with a hundred million vials a day left the LP solver without progress
/// (exit 1); 1e6 and 1e7 solve.
pub const MAX_RELEASE_WASPS: f64 = 1e6;

/// Most vials one dooryard request gets (`policy.dooryard_vials_per_request`).
pub const MAX_VIALS_PER_REQUEST: u64 = 10_000;

/// Most vials by parcel on one day (`parcel.max_vials_per_day`): a week's total then still
/// fits a 32-bit count.
pub const MAX_VIALS_PER_DAY: u64 = 100_000_000;

/// Most vials one facility packs on one day (`supply.csv`, rows of the same facility and day
/// added up) and most vials one vehicle carries (`fleet.csv` `capacity_vials`): the same
/// hundred million as [`MAX_VIALS_PER_DAY`]. A vial holds a few hundred wasps, so that is tens
/// of billions of wasps a day, far past any rearing program; the planner's whole-vial counts
/// stay well inside 32 bits.
pub const MAX_VIALS_PER_ROW: u32 = 100_000_000;

/// Largest scouting count (`scouting.csv` `value` for `tap_adults` and `greening_positive`):
/// a million adults in one tap sample or trees positive at one point is a typing or unit
/// mistake (common practice: a tap sample counts from 0 to a few dozen adults). Pest pressure
/// and priority then stay finite (measured: a count of 1e308 made the objective infinite).
pub const MAX_SCOUT_COUNT: f64 = 1e6;

/// Largest distance setting, km (`policy.pressure_radius_km`, `policy.pressure_bandwidth_km`).
pub const MAX_KM: f64 = 1000.0;

/// Largest `policy.travel_cost_per_hour`, in priority-weighted wasps: ten thousand times the
/// default, when an hour's drive already costs more than a whole release at priority 1 is
/// worth. Measured on tests/data/minimal with its forced block: 1e5 and 1e6 left the LP
/// solver's optimum 3e-6 and 1e-4 below a whole-vial plan's objective (exit 1), 3e4 solves;
/// 1e300 made it fail outright.
pub const MAX_TRAVEL_COST_PER_HOUR: f64 = 1e4;

/// Largest `travel.circuity` (road over straight-line distance).
pub const MAX_CIRCUITY: f64 = 10.0;

/// Fastest `travel.speed_kmh`.
pub const MAX_SPEED_KMH: f64 = 200.0;

/// Longest service time at a stop, minutes (`dispatch.service_minutes_*`): one day.
pub const MAX_SERVICE_MINUTES: f64 = 1440.0;

/// Longest `dispatch.time_limit_seconds`: one day.
pub const MAX_TIME_LIMIT_SECONDS: f64 = 86_400.0;

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
