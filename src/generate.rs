//! A seeded generator of format-v1 scenario folders: the demo scenario and benchmark weeks.
//!
//! [`generate`] returns the files of a scenario folder as `(file name, bytes)` pairs. The same
//! [`GenParams`] always give the same bytes: one ChaCha8 stream (value-stable by the
//! `rand_chacha` contract, versions pinned in `Cargo.toml`) drawn in a fixed order, and every
//! number written with a fixed format (coordinates with 6 decimals, about 0.1 m).
//!
//! Layout of the invented region: grove clusters sit on a coarse grid of super-cells (so
//! clusters never overlap); inside a cluster each block is a jittered, slightly rotated
//! rectangle of 2–30 ha in its own 900 m cell (so blocks never overlap). Towns with dooryard
//! requests, facilities and scouting hot spots are placed among the clusters.
//!
//! Complexity: O(blocks + requests + scouting points + facilities × days + vehicles) time and
//! memory; 35,000 candidate sites take well under a second in a release build.

use chrono::{Days, NaiveDate};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::Serialize;

use crate::scenario::LonLat;

/// WGS 84 semi-major axis, m, and first eccentricity squared.
const WGS84_A_M: f64 = 6_378_137.0;
const WGS84_E2: f64 = 6.694_379_990_14e-3;

/// Metres per degree of latitude and of longitude at `lat_deg` (meridian and prime-vertical
/// radii of curvature). Only used to lay out invented shapes: areas and distances are measured
/// geodesically by the loader, and over a 700 m block the flat approximation errs by < 0.01 %.
fn m_per_deg(lat_deg: f64) -> (f64, f64) {
    let phi = lat_deg.to_radians();
    let w2 = 1.0 - WGS84_E2 * phi.sin().powi(2);
    let meridian = WGS84_A_M * (1.0 - WGS84_E2) / (w2 * w2.sqrt());
    let prime_vertical = WGS84_A_M / w2.sqrt();
    let per_rad = std::f64::consts::PI / 180.0;
    (meridian * per_rad, prime_vertical * phi.cos() * per_rad)
}

/// Side of the square cell that holds one block, m. A block's largest extent (26 ha at aspect
/// 1.4, rotated 10°, jittered) stays under 720 m, so neighbours never touch.
const CELL_M: f64 = 900.0;

/// Gap between grove clusters, m.
const CLUSTER_GAP_M: f64 = 4_000.0;

/// Invented town names (no real place intended).
const TOWNS: &[&str] = &[
    "Ambleshade",
    "Corrowick",
    "Istrel Wells",
    "Sallowfen",
    "Mirrenhold",
    "Oskavey",
    "Veltharrow",
    "Draskel Flats",
];

/// Invented hamlet names for the generated road network's `place=hamlet` nodes, one at each
/// grove cluster (no real place intended).
const HAMLETS: &[&str] = &[
    "Ossel Well",
    "Kettlebrand",
    "Thimble Flats",
    "Wrenna Cross",
    "Halvenmoor",
    "Cobbet End",
];

/// Invented names of the generated network's major roads running east–west, then
/// north–south; they repeat every so many roads across a large region.
const ROAD_NAMES: [&[&str]; 2] = [
    &[
        "Tamarind Road",
        "Old Cattle Road",
        "Canal Road",
        "Escarpment Road",
        "Millrace Road",
        "Saltbush Road",
    ],
    &[
        "Pumphouse Road",
        "Quarry Road",
        "Red Earth Road",
        "Windmill Road",
        "Limekiln Road",
        "Weaver Road",
    ],
];

/// Kinds of facility; a facility's invented name is a town name and one of these.
const FACILITY_KINDS: &[&str] = &["Rearing Station", "Insectary", "Field Depot"];

/// Invented street names for dooryard addresses.
const STREETS: &[&str] = &[
    "Kestrel",
    "Neem",
    "Kumquat",
    "Dry Wash",
    "Weaver Bird",
    "Mulberry",
    "Marl Pit",
    "Lemonwood",
    "Tamarind",
    "Well House",
    "Hoopoe",
    "Old Packinghouse",
];

const STREET_SUFFIXES: &[&str] = &["Lane", "Road", "Way", "Court", "Drive", "Circle"];

/// Crops and their weights (orange-heavy, as in a juice region).
const CROPS: &[(&str, f64)] = &[
    ("orange", 0.6),
    ("grapefruit", 0.2),
    ("tangerine", 0.1),
    ("lemon", 0.05),
    ("tangelo", 0.05),
];

/// Weekday patterns for vehicles, `fleet.csv` `days` syntax.
const DAY_PATTERNS: &[&str] = &[
    "mon;tue;wed;thu;fri",
    "mon;wed;fri",
    "tue;thu",
    "mon;tue;wed;thu",
    "tue;wed;thu;fri",
    "mon;tue;wed;thu;fri;sat",
];

/// What to generate. Counts are exact; everything else is drawn from the seeded stream.
#[derive(Clone, Debug, PartialEq)]
pub struct GenParams {
    /// Seed of the ChaCha8 stream; same seed and parameters give byte-identical files.
    pub seed: u64,
    /// Name of the invented region, used in `scenario.json` `name`.
    pub region: String,
    /// Monday that starts the week (`week_start`).
    pub week_start: NaiveDate,
    /// Centre of the region (degrees). Keep it within about 20°–32° N: the road grid's
    /// spacing in degrees ([`ROAD_SPACING_DEG`]) assumes the subtropics.
    pub center: LonLat,
    /// Grove blocks (`blocks.geojson` features).
    pub blocks: usize,
    /// Grove clusters the blocks are spread over (≥ 1).
    pub clusters: usize,
    /// Dooryard requests (`requests.csv` rows).
    pub requests: usize,
    /// Towns the requests are spread over (≥ 1; names cycle through an invented list).
    pub towns: usize,
    /// Scouting observations (`scouting.csv` rows).
    pub scouting_points: usize,
    /// Pest hot spots the scouting data concentrate around.
    pub hot_spots: usize,
    /// Facilities (≥ 1); each is a depot for the vehicles assigned to it.
    pub facilities: usize,
    /// Vehicles, assigned to depots round-robin.
    pub vehicles: usize,
    /// Multiplier on daily supply: each facility packs U(25, 60) × `supply_scale` vials on
    /// each weekday, Monday to Friday (vials).
    pub supply_scale: f64,
    /// Whether to write `roads.osm.pbf`, an invented road grid over the region ([`road_grid`]),
    /// and name it in `travel.road_network`.
    pub roads: bool,
}

impl GenParams {
    /// The demo week: the Kelvarro Plateau (invented; inland, at about 24° N, 80° E, a warm
    /// dry-season week), week of Monday 2027-03-01, 300 blocks in
    /// 5 clusters, 200 requests in 4 towns, 500 scouting points around 3 hot spots, 3
    /// facilities, 7 vehicles; 614 vials packed (about 119,000 wasps) against an eligible-looking
    /// demand of about 300,000 wasps at the target release size.
    pub fn demo() -> Self {
        GenParams {
            seed: 20_270_301,
            region: "Kelvarro Plateau".into(),
            week_start: NaiveDate::from_ymd_opt(2027, 3, 1).expect("2027-03-01 is a valid date"),
            center: LonLat {
                lon: 79.66,
                lat: 24.31,
            },
            blocks: 300,
            clusters: 5,
            requests: 200,
            towns: 4,
            scouting_points: 500,
            hot_spots: 3,
            facilities: 3,
            vehicles: 7,
            supply_scale: 1.0,
            roads: true,
        }
    }

    /// A benchmark week with `sites` candidate sites (blocks + requests), e.g. 1,000, 5,000,
    /// 20,000 or 35,000. At 35,000 it is the state-scale week: 20,000 blocks, 15,000 requests,
    /// 20,000 scouting points, 6 facilities, 30 vehicles and supply for about 1,000 releases.
    /// Smaller sizes keep the same proportions, including the scarcity: supply for about one
    /// release per 35 candidate sites (at least 10 releases), so benchmark ratios compare like
    /// with like. Blocks come in clusters of about 500.
    pub fn sized(sites: usize, seed: u64) -> Self {
        let blocks = sites * 4 / 7;
        let requests = sites - blocks;
        let releases = (sites as f64 / 35.0).round().max(10.0);
        let facilities = 6;
        // One release ≈ 7 vials (target 1,200 wasps at ~200 wasps a vial, ~85 % alive on
        // arrival); the base supply is 42.5 vials a facility-day over 5 weekdays.
        let supply_scale = releases * 7.0 / (facilities as f64 * 5.0 * 42.5);
        GenParams {
            seed,
            region: format!("Benchmark region {sites}"),
            week_start: NaiveDate::from_ymd_opt(2027, 3, 1).expect("2027-03-01 is a valid date"),
            center: LonLat {
                lon: 81.42,
                lat: 27.28,
            },
            blocks,
            clusters: blocks.div_ceil(500).max(1),
            requests,
            towns: (requests / 400).clamp(3, 40),
            scouting_points: blocks,
            hot_spots: (blocks / 1_000).clamp(2, 30),
            facilities,
            vehicles: 30,
            supply_scale,
            roads: false,
        }
    }
}

/// Generates the files of a format-v1 scenario folder for `p`, in this order:
/// `scenario.json`, `facilities.csv`, `supply.csv`, `blocks.geojson`, `requests.csv`,
/// `scouting.csv`, `fleet.csv`. Deterministic: the same `p` gives the same bytes.
///
/// `requests.csv` carries obviously fake `name`, `phone` (555-01xx) and `email`
/// (`@example.invalid`) columns so that tests can check personal data never leaks.
///
/// ```
/// use broodcast::generate::{GenParams, generate};
///
/// let files = generate(&GenParams::sized(1_000, 7));
/// assert_eq!(files[0].0, "scenario.json");
/// assert_eq!(files, generate(&GenParams::sized(1_000, 7)));
/// ```
pub fn generate(p: &GenParams) -> Vec<(String, Vec<u8>)> {
    let mut g = Gen {
        rng: ChaCha8Rng::seed_from_u64(p.seed),
        p,
    };
    let clusters = g.cluster_centres();
    let facilities = g.facilities(&clusters);
    let supply = g.supply(&facilities);
    let (blocks_json, block_centres) = g.blocks(&clusters);
    let towns = g.town_centres(&clusters);
    let requests = g.requests(&towns);
    let hot_spots = g.hot_spots(&block_centres);
    let scouting = g.scouting(&hot_spots, &block_centres);
    let fleet = g.fleet();
    let scenario = g.scenario_json();
    let mut files = vec![
        ("scenario.json".into(), scenario),
        ("facilities.csv".into(), facilities_csv(&facilities)),
        ("supply.csv".into(), supply),
        ("blocks.geojson".into(), blocks_json),
        ("requests.csv".into(), requests),
        ("scouting.csv".into(), scouting),
        ("fleet.csv".into(), fleet),
    ];
    if p.roads {
        let places: Vec<LonLat> = facilities
            .iter()
            .map(|f| f.location)
            .chain(block_centres)
            .chain(towns.iter().map(|t| t.1))
            .collect();
        let named: Vec<(&str, &str, LonLat)> = towns
            .iter()
            .map(|(name, at)| ("town", name.as_str(), *at))
            .chain(
                clusters
                    .iter()
                    .zip(HAMLETS.iter().cycle())
                    .map(|(c, name)| ("hamlet", *name, c.centre)),
            )
            .collect();
        files.push((ROADS_FILE.into(), road_grid(&places, &named)));
    }
    files
}

/// Name of the generated road network in the scenario folder.
pub const ROADS_FILE: &str = "roads.osm.pbf";

/// Spacing of the generated road grid, degrees (about 890 m north–south, 810 m east–west at
/// 24° N): no point of the grid's area is more than about 400 m from a road, under the
/// snapping warning distance.
pub const ROAD_SPACING_DEG: f64 = 0.008;

/// An invented road network as an OpenStreetMap extract: a grid of straight roads
/// [`ROAD_SPACING_DEG`] apart over the bounding box of `places` widened by 0.05° (about 5 km,
/// where dooryard requests scatter around their town centres), one way per road; every fifth
/// road `highway=secondary` with an invented `name` (from a fixed list, by its grid line),
/// the rest `highway=unclassified`; then one node per entry of `named`, `(place kind, name,
/// position)`, tagged `place` and `name` so that maps can label settlements. No randomness:
/// the other files' bytes do not depend on it.
pub fn road_grid(places: &[LonLat], named: &[(&str, &str, LonLat)]) -> Vec<u8> {
    use crate::roads::write::{OsmNode, OsmWay, write_pbf};
    let pad = 0.05;
    let (mut w, mut e, mut s, mut n) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for p in places {
        (w, e, s, n) = (w.min(p.lon), e.max(p.lon), s.min(p.lat), n.max(p.lat));
    }
    // Snap the box to the grid so that the lines sit on round coordinates.
    let lo = |x: f64| ((x - pad) / ROAD_SPACING_DEG).floor() as i64;
    let hi = |x: f64| ((x + pad) / ROAD_SPACING_DEG).ceil() as i64;
    let (c0, c1, r0, r1) = (lo(w), hi(e), lo(s), hi(n));
    let cols = (c1 - c0 + 1) as usize;
    let id = |r: i64, c: i64| (r - r0) * cols as i64 + (c - c0) + 1;
    let mut nodes = Vec::new();
    for r in r0..=r1 {
        for c in c0..=c1 {
            nodes.push(OsmNode {
                id: id(r, c),
                at: LonLat {
                    lon: c as f64 * ROAD_SPACING_DEG,
                    lat: r as f64 * ROAD_SPACING_DEG,
                },
                tags: Vec::new(),
            });
        }
    }
    let last_id = id(r1, c1);
    for (i, (kind, name, at)) in named.iter().enumerate() {
        nodes.push(OsmNode {
            id: last_id + 1 + i as i64,
            at: *at,
            tags: vec![
                ("place".into(), (*kind).into()),
                ("name".into(), (*name).into()),
            ],
        });
    }
    // `axis` 0: a road along grid row k (east–west), 1: along column k (north–south).
    let tags = |axis: usize, k: i64| -> Vec<(String, String)> {
        if k % 5 == 0 {
            let names = ROAD_NAMES[axis];
            let name = names[(k / 5).rem_euclid(names.len() as i64) as usize];
            vec![
                ("highway".into(), "secondary".into()),
                ("name".into(), name.into()),
            ]
        } else {
            vec![("highway".into(), "unclassified".into())]
        }
    };
    let mut ways = Vec::new();
    for r in r0..=r1 {
        ways.push((tags(0, r), (c0..=c1).map(|c| id(r, c)).collect()));
    }
    for c in c0..=c1 {
        ways.push((tags(1, c), (r0..=r1).map(|r| id(r, c)).collect()));
    }
    let ways: Vec<OsmWay> = ways
        .into_iter()
        .enumerate()
        .map(|(i, (tags, refs))| OsmWay {
            id: i as i64 + 1,
            tags,
            refs,
        })
        .collect();
    write_pbf(&nodes, &ways)
}

/// The week [`generate`] writes for `p`, loaded and validated as `broodcast plan` would load
/// the folder (for benchmarks and tests that plan a generated week without writing it).
///
/// # Errors
/// The loader's error, which would be a bug in the generator.
pub fn load(p: &GenParams) -> Result<crate::scenario::Scenario, crate::scenario::InputError> {
    let files = generate(p);
    let view: Vec<(&str, &[u8])> = files
        .iter()
        .map(|(n, b)| (n.as_str(), b.as_slice()))
        .collect();
    crate::scenario::load_files(&view)
}

/// A grove cluster: centre and number of blocks.
struct Cluster {
    centre: LonLat,
    blocks: usize,
}

/// A generated facility.
struct GenFacility {
    id: String,
    name: String,
    location: LonLat,
    wasps_per_vial: u32,
}

struct Gen<'a> {
    rng: ChaCha8Rng,
    p: &'a GenParams,
}

impl Gen<'_> {
    /// Moves `from` by `east_m`, `north_m` metres (local flat approximation).
    fn offset(&self, from: LonLat, east_m: f64, north_m: f64) -> LonLat {
        let (lat_m, lon_m) = m_per_deg(from.lat);
        LonLat {
            lon: from.lon + east_m / lon_m,
            lat: from.lat + north_m / lat_m,
        }
    }

    fn uniform(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.rng.random::<f64>()
    }

    /// A standard normal draw (Box–Muller; one of the pair is dropped for simplicity).
    fn normal(&mut self) -> f64 {
        let u1: f64 = 1.0 - self.rng.random::<f64>(); // in (0, 1]
        let u2: f64 = self.rng.random::<f64>();
        (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
    }

    fn pick<'s, T>(&mut self, items: &'s [T]) -> &'s T {
        &items[self.rng.random_range(0..items.len())]
    }

    fn weighted<'s>(&mut self, items: &[(&'s str, f64)]) -> &'s str {
        let total: f64 = items.iter().map(|(_, w)| w).sum();
        let mut x = self.uniform(0.0, total);
        for &(name, w) in items {
            if x < w {
                return name;
            }
            x -= w;
        }
        items.last().map(|(n, _)| *n).unwrap_or("")
    }

    /// Places clusters on a grid of super-cells wide enough for the largest cluster, with a
    /// jitter smaller than half the gap, and picks which super-cells are used at random.
    fn cluster_centres(&mut self) -> Vec<Cluster> {
        let n = self.p.clusters.max(1);
        let weights: Vec<f64> = (0..n).map(|_| self.uniform(0.6, 1.4)).collect();
        let total: f64 = weights.iter().sum();
        // Largest remainder, so counts add up to `blocks` exactly.
        let exact: Vec<f64> = weights
            .iter()
            .map(|w| w / total * self.p.blocks as f64)
            .collect();
        let mut counts: Vec<usize> = exact.iter().map(|x| x.floor() as usize).collect();
        let mut order: Vec<usize> = (0..n).collect();
        order.sort_by(|&a, &b| {
            (exact[b] - exact[b].floor())
                .total_cmp(&(exact[a] - exact[a].floor()))
                .then(a.cmp(&b))
        });
        let short = self.p.blocks - counts.iter().sum::<usize>();
        for &i in order.iter().take(short) {
            counts[i] += 1;
        }
        let max_side = counts
            .iter()
            .map(|&c| (c as f64).sqrt().ceil() * CELL_M)
            .fold(CELL_M, f64::max);
        let super_m = max_side + CLUSTER_GAP_M;
        let cols = (n as f64 * 1.2).sqrt().ceil() as usize;
        let rows = (n + 1).div_ceil(cols);
        let mut slots: Vec<usize> = (0..cols * rows).collect();
        // Partial Fisher–Yates: the first n slots are a random choice.
        for i in 0..n.min(slots.len()) {
            let j = self.rng.random_range(i..slots.len());
            slots.swap(i, j);
        }
        let jitter = CLUSTER_GAP_M * 0.45;
        (0..n)
            .map(|i| {
                let (r, c) = (slots[i] / cols, slots[i] % cols);
                let east = (c as f64 - (cols as f64 - 1.0) / 2.0) * super_m
                    + self.uniform(-jitter, jitter);
                let north = (r as f64 - (rows as f64 - 1.0) / 2.0) * super_m
                    + self.uniform(-jitter, jitter);
                Cluster {
                    centre: self.offset(self.p.center, east, north),
                    blocks: counts[i],
                }
            })
            .collect()
    }

    fn facilities(&mut self, clusters: &[Cluster]) -> Vec<GenFacility> {
        (0..self.p.facilities.max(1))
            .map(|i| {
                let town = TOWNS[i % TOWNS.len()];
                let kind = FACILITY_KINDS[i % FACILITY_KINDS.len()];
                let name = if i < TOWNS.len() {
                    format!("{town} {kind}")
                } else {
                    format!("{town} {kind} {}", i / TOWNS.len() + 1)
                };
                // Beside a cluster, spread over the clusters.
                let cl = &clusters[i * clusters.len() / self.p.facilities.max(1)];
                let half = (cl.blocks as f64).sqrt().ceil() * CELL_M / 2.0;
                let east = half + 1_000.0;
                let north = self.uniform(-half, half);
                GenFacility {
                    id: format!("F{}", i + 1),
                    name,
                    location: self.offset(cl.centre, east, north),
                    wasps_per_vial: 150 + 10 * self.rng.random_range(0..=10u32),
                }
            })
            .collect()
    }

    /// Weekday packing, Monday to Friday.
    fn supply(&mut self, facilities: &[GenFacility]) -> Vec<u8> {
        let mut w = csv_writer();
        write_row(&mut w, &["facility_id", "date", "vials"]);
        for f in facilities {
            for d in 0..5 {
                let date = self.p.week_start + Days::new(d);
                let vials = (self.uniform(25.0, 60.0) * self.p.supply_scale).round() as u64;
                write_row(&mut w, &[&f.id, &date.to_string(), &vials.to_string()]);
            }
        }
        finish(w)
    }

    /// Blocks as a GeoJSON FeatureCollection, one feature per line, plus the block centres
    /// (for placing scouting points).
    fn blocks(&mut self, clusters: &[Cluster]) -> (Vec<u8>, Vec<LonLat>) {
        let width = id_width(self.p.blocks);
        let mut out = String::from("{\"type\":\"FeatureCollection\",\"features\":[\n");
        let mut centres = Vec::with_capacity(self.p.blocks);
        let mut k = 0usize;
        for cl in clusters {
            let cols = (cl.blocks as f64).sqrt().ceil().max(1.0) as usize;
            let rows = cl.blocks.div_ceil(cols);
            // A cluster leans conventional or toward abandoned groves.
            let abandoned_share = self.uniform(0.1, 0.4);
            for j in 0..cl.blocks {
                k += 1;
                let (r, c) = (j / cols, j % cols);
                let east =
                    (c as f64 - (cols as f64 - 1.0) / 2.0) * CELL_M + self.uniform(-60.0, 60.0);
                let north =
                    (r as f64 - (rows as f64 - 1.0) / 2.0) * CELL_M + self.uniform(-60.0, 60.0);
                let centre = self.offset(cl.centre, east, north);
                centres.push(centre);
                let ring = self.block_ring(centre);
                let props = self.block_properties(k, width, abandoned_share);
                if k > 1 {
                    out.push_str(",\n");
                }
                out.push_str("{\"type\":\"Feature\",\"properties\":");
                out.push_str(&props);
                out.push_str(",\"geometry\":{\"type\":\"Polygon\",\"coordinates\":[[");
                for (i, pt) in ring.iter().enumerate() {
                    if i > 0 {
                        out.push(',');
                    }
                    out.push_str(&format!("[{:.6},{:.6}]", pt.lon, pt.lat));
                }
                out.push_str("]]}}");
            }
        }
        out.push_str("\n]}\n");
        (out.into_bytes(), centres)
    }

    /// A closed, counter-clockwise ring of 5 positions: a rectangle of 2.5–26 ha nominal
    /// area (more small blocks than large), aspect 0.7–1.4, rotated up to ±10°, each corner
    /// moved by at most 4 % of the shorter side, which keeps it convex and its area within
    /// about 8 % of nominal, so inside 2–30 ha.
    fn block_ring(&mut self, centre: LonLat) -> [LonLat; 5] {
        let area_m2 = (2.5 + 23.5 * self.rng.random::<f64>().powf(1.6)) * 10_000.0;
        let aspect = self.uniform(0.7, 1.4);
        let w = (area_m2 * aspect).sqrt();
        let h = area_m2 / w;
        let theta = self.uniform(-10.0, 10.0).to_radians();
        let (s, c) = theta.sin_cos();
        let j = 0.04 * w.min(h);
        let corners = [(-w, -h), (w, -h), (w, h), (-w, h)];
        let mut ring = [centre; 5];
        for (i, &(x, y)) in corners.iter().enumerate() {
            let x = x / 2.0 + self.uniform(-j, j);
            let y = y / 2.0 + self.uniform(-j, j);
            ring[i] = self.offset(centre, x * c - y * s, x * s + y * c);
        }
        ring[4] = ring[0];
        ring
    }

    fn block_properties(&mut self, k: usize, width: usize, abandoned_share: f64) -> String {
        let crop = self.weighted(CROPS);
        let management = self.weighted(&[
            ("conventional", 0.75 * (1.0 - abandoned_share)),
            ("organic", 0.25 * (1.0 - abandoned_share)),
            ("abandoned", abandoned_share),
        ]);
        let flush = self.weighted(&[("none", 0.25), ("light", 0.4), ("heavy", 0.35)]);
        // Days before week_start of the last spray: 1–14 excludes the whole week under a
        // 21-day window, 15–20 only its first days, 28–120 none of it.
        let spray_days = match management {
            "conventional" => {
                let u = self.rng.random::<f64>();
                if u < 0.25 {
                    Some(self.rng.random_range(1..=14u64))
                } else if u < 0.33 {
                    Some(self.rng.random_range(15..=20u64))
                } else if u < 0.85 {
                    Some(self.rng.random_range(28..=120u64))
                } else {
                    None
                }
            }
            "organic" => {
                (self.rng.random::<f64>() < 0.15).then(|| self.rng.random_range(28..=90u64))
            }
            _ => None,
        };
        let last = match spray_days {
            Some(d) => format!("\"{}\"", self.p.week_start - Days::new(d)),
            None => "null".into(),
        };
        let (start, end) = if self.rng.random::<f64>() < 0.05 {
            ("09:00".to_string(), "12:00".to_string())
        } else {
            let start = *self.pick(&["06:00", "06:30", "07:00", "07:30", "08:00"]);
            let end = *self.pick(&["15:00", "16:00", "17:00", "18:00"]);
            (start.to_string(), end.to_string())
        };
        format!(
            "{{\"id\":\"B{k:0width$}\",\"crop\":\"{crop}\",\"management\":\"{management}\",\
             \"flush\":\"{flush}\",\"last_insecticide\":{last},\"access_start\":\"{start}\",\
             \"access_end\":\"{end}\"}}"
        )
    }

    /// Towns sit between and around the clusters, inside the region's extent.
    fn town_centres(&mut self, clusters: &[Cluster]) -> Vec<(String, LonLat)> {
        let (mut lo, mut hi) = (self.p.center, self.p.center);
        for c in clusters {
            lo.lon = lo.lon.min(c.centre.lon);
            lo.lat = lo.lat.min(c.centre.lat);
            hi.lon = hi.lon.max(c.centre.lon);
            hi.lat = hi.lat.max(c.centre.lat);
        }
        (0..self.p.towns.max(1))
            .map(|i| {
                let name = if i < TOWNS.len() {
                    TOWNS[i].to_string()
                } else {
                    format!("{} {}", TOWNS[i % TOWNS.len()], i / TOWNS.len() + 1)
                };
                let at = LonLat {
                    lon: self.uniform(lo.lon, hi.lon),
                    lat: self.uniform(lo.lat, hi.lat),
                };
                (name, at)
            })
            .collect()
    }

    fn requests(&mut self, towns: &[(String, LonLat)]) -> Vec<u8> {
        let width = id_width(self.p.requests);
        let mut w = csv_writer();
        write_row(
            &mut w,
            &[
                "id",
                "received",
                "lat",
                "lon",
                "address",
                "host_plant",
                "insecticide_free",
                "delivery",
                "name",
                "phone",
                "email",
            ],
        );
        for k in 1..=self.p.requests {
            let (town, centre) = self.pick(towns).clone();
            let (e, n) = (self.normal() * 1_200.0, self.normal() * 1_200.0);
            let at = self.offset(centre, e, n);
            let received = self.p.week_start - Days::new(self.rng.random_range(1..=70u64));
            let address = format!(
                "{} {} {}, {}",
                self.rng.random_range(100..=9_999u32),
                self.pick(STREETS),
                self.pick(STREET_SUFFIXES),
                town
            );
            let host = self.weighted(&[("citrus", 0.8), ("orange-jasmine", 0.15), ("none", 0.05)]);
            let free = if self.rng.random::<f64>() < 0.08 {
                "no"
            } else {
                "yes"
            };
            let delivery = self.weighted(&[("either", 0.5), ("route", 0.35), ("parcel", 0.15)]);
            write_row(
                &mut w,
                &[
                    &format!("R{k:0width$}"),
                    &received.to_string(),
                    &format!("{:.6}", at.lat),
                    &format!("{:.6}", at.lon),
                    &address,
                    host,
                    free,
                    delivery,
                    &format!("Resident {k}"),
                    &format!("555-01{:02}", k % 100),
                    &format!("resident{k}@example.invalid"),
                ],
            );
        }
        finish(w)
    }

    /// Hot spots are centred on randomly chosen blocks, so they fall inside grove country.
    fn hot_spots(&mut self, block_centres: &[LonLat]) -> Vec<LonLat> {
        if block_centres.is_empty() {
            return vec![self.p.center; self.p.hot_spots];
        }
        (0..self.p.hot_spots)
            .map(|_| *self.pick(block_centres))
            .collect()
    }

    /// 35 % of points within a few km of a hot spot (high counts, the greening finds), the
    /// rest beside random blocks (low background counts).
    fn scouting(&mut self, hot: &[LonLat], block_centres: &[LonLat]) -> Vec<u8> {
        let width = id_width(self.p.scouting_points);
        let mut w = csv_writer();
        write_row(&mut w, &["id", "date", "lat", "lon", "kind", "value"]);
        for k in 1..=self.p.scouting_points {
            let near_hot = !hot.is_empty() && self.rng.random::<f64>() < 0.35;
            let at = if near_hot {
                let c = *self.pick(hot);
                let (e, n) = (self.normal() * 1_200.0, self.normal() * 1_200.0);
                self.offset(c, e, n)
            } else if block_centres.is_empty() {
                self.p.center
            } else {
                let c = *self.pick(block_centres);
                let (e, n) = (self.normal() * 250.0, self.normal() * 250.0);
                self.offset(c, e, n)
            };
            let date = self.p.week_start - Days::new(self.rng.random_range(1..=28u64));
            let greening_p = if near_hot { 0.06 } else { 0.004 };
            let u = self.rng.random::<f64>();
            let (kind, value) = if u < greening_p {
                (
                    "greening_positive",
                    format!("{}", self.rng.random_range(1..=2u32)),
                )
            } else if u < greening_p + (1.0 - greening_p) * 0.55 {
                let mean = if near_hot { 2.0 } else { 0.25 };
                let v = -mean * (1.0 - self.rng.random::<f64>()).ln();
                ("tap_adults", format!("{:.2}", v.min(15.0)))
            } else {
                let v = if near_hot {
                    self.uniform(30.0, 90.0)
                } else {
                    20.0 * self.rng.random::<f64>().powi(2)
                };
                ("flush_infested_pct", format!("{v:.1}"))
            };
            write_row(
                &mut w,
                &[
                    &format!("S{k:0width$}"),
                    &date.to_string(),
                    &format!("{:.6}", at.lat),
                    &format!("{:.6}", at.lon),
                    kind,
                    &value,
                ],
            );
        }
        finish(w)
    }

    /// Vehicles round-robin over the depots; each depot's first vehicle runs Monday to Friday.
    fn fleet(&mut self) -> Vec<u8> {
        let nf = self.p.facilities.max(1);
        let width = id_width(self.p.vehicles);
        let mut w = csv_writer();
        write_row(
            &mut w,
            &[
                "vehicle_id",
                "depot_id",
                "days",
                "capacity_vials",
                "shift_start",
                "shift_hours",
            ],
        );
        for i in 0..self.p.vehicles {
            let days = if i < nf {
                DAY_PATTERNS[0]
            } else {
                self.pick(DAY_PATTERNS)
            };
            let capacity = 40 + 10 * self.rng.random_range(0..=12u32);
            let start = *self.pick(&["07:00", "07:30", "08:00"]);
            let hours = *self.pick(&[8.0, 8.5, 9.0, 10.0]);
            write_row(
                &mut w,
                &[
                    &format!("V{:0width$}", i + 1),
                    &format!("F{}", i % nf + 1),
                    days,
                    &capacity.to_string(),
                    start,
                    &format!("{hours:.1}"),
                ],
            );
        }
        finish(w)
    }

    /// `scenario.json`. The agent and policy values are invented defaults, documented in
    /// `scenarios/demo/README.md`.
    fn scenario_json(&mut self) -> Vec<u8> {
        let parcel_vials = (40.0 * self.p.supply_scale).round().max(1.0) as u32;
        let doc = ScenarioDoc {
            name: format!("{} — week of {}", self.p.region, self.p.week_start),
            week_start: self.p.week_start.to_string(),
            agent: AgentDoc {
                name: "psyllid nymph parasitoid",
                shelf_life_hours: 72.0,
                survival: SurvivalDoc {
                    model: "exponential",
                    half_life_hours: 96.0,
                },
                min_release_wasps: 300.0,
                target_release_wasps: 1_200.0,
                max_release_wasps: 2_400.0,
                pack_time: "06:00",
            },
            policy: PolicyDoc {
                dooryard_share_min: 0.2,
                dooryard_vials_per_request: 2,
                insecticide_exclusion_days: 21,
                require_flush: true,
                pressure_radius_km: 3.0,
                pressure_bandwidth_km: 1.5,
            },
            travel: TravelDoc {
                circuity: 1.3,
                speed_kmh: 55.0,
                road_network: self.p.roads.then_some(ROADS_FILE),
            },
            parcel: ParcelDoc {
                transit_hours: 24.0,
                days: ["mon", "tue", "wed"],
                max_vials_per_day: parcel_vials,
                ship_time: "15:00",
            },
            dispatch: DispatchDoc {
                service_minutes_block: 15.0,
                service_minutes_dooryard: 5.0,
                dooryard_window_start: "08:00",
                dooryard_window_end: "18:00",
                seed: self.p.seed,
            },
        };
        let mut out = serde_json::to_vec_pretty(&doc).expect("a struct of plain values serialises");
        out.push(b'\n');
        out
    }
}

fn facilities_csv(facilities: &[GenFacility]) -> Vec<u8> {
    let mut w = csv_writer();
    write_row(&mut w, &["id", "name", "lat", "lon", "wasps_per_vial"]);
    for f in facilities {
        write_row(
            &mut w,
            &[
                &f.id,
                &f.name,
                &format!("{:.6}", f.location.lat),
                &format!("{:.6}", f.location.lon),
                &f.wasps_per_vial.to_string(),
            ],
        );
    }
    finish(w)
}

/// Digits for zero-padded ids: at least 4 (B0001), more when the count needs them.
fn id_width(n: usize) -> usize {
    n.to_string().len().max(4)
}

fn csv_writer() -> csv::Writer<Vec<u8>> {
    csv::WriterBuilder::new()
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(Vec::new())
}

fn write_row(w: &mut csv::Writer<Vec<u8>>, fields: &[&str]) {
    w.write_record(fields)
        .expect("writing CSV into memory cannot fail");
}

fn finish(w: csv::Writer<Vec<u8>>) -> Vec<u8> {
    w.into_inner()
        .expect("flushing CSV into memory cannot fail")
}

#[derive(Serialize)]
struct ScenarioDoc {
    name: String,
    week_start: String,
    agent: AgentDoc,
    policy: PolicyDoc,
    travel: TravelDoc,
    parcel: ParcelDoc,
    dispatch: DispatchDoc,
}

#[derive(Serialize)]
struct AgentDoc {
    name: &'static str,
    shelf_life_hours: f64,
    survival: SurvivalDoc,
    min_release_wasps: f64,
    target_release_wasps: f64,
    max_release_wasps: f64,
    pack_time: &'static str,
}

#[derive(Serialize)]
struct SurvivalDoc {
    model: &'static str,
    half_life_hours: f64,
}

#[derive(Serialize)]
struct PolicyDoc {
    dooryard_share_min: f64,
    dooryard_vials_per_request: u32,
    insecticide_exclusion_days: u32,
    require_flush: bool,
    pressure_radius_km: f64,
    pressure_bandwidth_km: f64,
}

#[derive(Serialize)]
struct TravelDoc {
    circuity: f64,
    speed_kmh: f64,
    #[serde(skip_serializing_if = "Option::is_none")]
    road_network: Option<&'static str>,
}

#[derive(Serialize)]
struct ParcelDoc {
    transit_hours: f64,
    days: [&'static str; 3],
    max_vials_per_day: u32,
    ship_time: &'static str,
}

#[derive(Serialize)]
struct DispatchDoc {
    service_minutes_block: f64,
    service_minutes_dooryard: f64,
    dooryard_window_start: &'static str,
    dooryard_window_end: &'static str,
    seed: u64,
}

#[cfg(test)]
mod tests {
    use super::*;

    fn file<'a>(files: &'a [(String, Vec<u8>)], name: &str) -> &'a [u8] {
        &files
            .iter()
            .find(|(n, _)| n == name)
            .unwrap_or_else(|| panic!("{name} missing"))
            .1
    }

    fn small() -> GenParams {
        let mut p = GenParams::sized(700, 7);
        p.hot_spots = 2;
        p
    }

    #[test]
    fn same_params_same_bytes_other_seed_other_bytes() {
        let a = generate(&small());
        let b = generate(&small());
        assert_eq!(a, b);
        let mut p = small();
        p.seed = 8;
        let c = generate(&p);
        assert_eq!(a.len(), c.len());
        assert_ne!(file(&a, "blocks.geojson"), file(&c, "blocks.geojson"));
    }

    #[test]
    fn counts_are_exact() {
        let p = small();
        let files = generate(&p);
        let lines = |name: &str| {
            std::str::from_utf8(file(&files, name))
                .expect("utf-8")
                .lines()
                .count()
        };
        assert_eq!(lines("requests.csv"), p.requests + 1);
        assert_eq!(lines("scouting.csv"), p.scouting_points + 1);
        assert_eq!(lines("fleet.csv"), p.vehicles + 1);
        assert_eq!(lines("facilities.csv"), p.facilities + 1);
        assert_eq!(lines("supply.csv"), p.facilities * 5 + 1);
        // Header line, one line per feature, closing line.
        assert_eq!(lines("blocks.geojson"), p.blocks + 2);
    }

    #[test]
    fn sized_state_week_has_the_stated_shape() {
        let p = GenParams::sized(35_000, 1);
        assert_eq!(
            (
                p.blocks,
                p.requests,
                p.scouting_points,
                p.facilities,
                p.vehicles
            ),
            (20_000, 15_000, 20_000, 6, 30)
        );
        // ~1,000 releases of ~7 vials over 30 facility-days of 42.5 × scale vials.
        let vials = p.supply_scale * 42.5 * 30.0;
        assert!((vials / 7.0 - 1_000.0).abs() < 1.0, "{vials}");
    }

    #[test]
    fn largest_remainder_keeps_block_total() {
        for blocks in [0, 1, 7, 299, 300, 301] {
            let mut p = small();
            p.blocks = blocks;
            p.clusters = 4;
            let files = generate(&p);
            let n = std::str::from_utf8(file(&files, "blocks.geojson"))
                .expect("utf-8")
                .matches("\"Feature\"")
                .count();
            assert_eq!(n, blocks);
        }
    }
}
