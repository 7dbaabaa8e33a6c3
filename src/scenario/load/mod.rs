//! Loading and validating a scenario folder (format v1, `docs/formats.md`).
//! Raw rows live here and nowhere else.
//!
//! Disk folders and embedded files go through one path: the files are fetched by name, decoded
//! (UTF-8, BOM and CRLF accepted), each file is checked row by row, then references and ids
//! are checked across files. Every problem in every file is collected; a scenario comes out
//! only when there are none. Complexity: O(total rows · log rows) plus geometry validation
//! and O((sites + scouting points) · facilities) distance checks.

mod blocks;
mod config;
mod fields;
pub mod limits;
mod matrix;
mod tables;
mod text;

use std::borrow::Cow;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use super::problems::Location;
use super::{
    Facility, InputError, LonLat, Override, Scenario, Site, SiteDetail, SiteId, Supply, Travel,
    TravelMatrix,
};
pub use text::{CsvLines, SwallowedRow, swallowed_row};
pub(crate) use text::{Table, read_csv};

/// A value as problems show it: at most 60 characters, control and invisible characters
/// escaped (`\u{feff}`).
///
/// ```
/// assert_eq!(broodcast::scenario::show_value("\u{feff}F1"), "\\u{feff}F1");
/// ```
pub fn show_value(s: &str) -> String {
    fields::show(s)
}
pub use config::SCENARIO_KEYS;
use text::{Sink, decode};

use crate::roads::{self, RoadNetwork};

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
pub fn load_dir(dir: &Path) -> Result<Scenario, InputError> {
    load_with(
        &|name: &str| read_limited(&dir.join(name)),
        &|name: &str| resolves_inside(dir, name),
        Some(&dir.join(CACHE_DIR)),
    )
}

/// Folder inside the scenario folder where the parsed road network is cached
/// ([`crate::roads::cache`]); deleting it only costs the next plan the parse.
pub const CACHE_DIR: &str = ".broodcast-cache";

/// Whether `dir/name` resolves (through any symbolic link) to a file inside `dir`. A file that
/// does not exist yet counts as inside: it is reported missing.
fn resolves_inside(dir: &Path, name: &str) -> bool {
    match (dir.join(name).canonicalize(), dir.canonicalize()) {
        (Ok(file), Ok(dir)) => file.starts_with(dir),
        _ => true,
    }
}

/// Reads a file of at most [`limits::MAX_FILE_BYTES`]: the size is checked from metadata
/// before reading, and the read itself stops one byte past the limit, so a device, a pipe or
/// a file that grows while read cannot exhaust memory either.
fn read_limited(path: &Path) -> Fetched<'static> {
    use std::io::Read;
    let unreadable = |e: std::io::Error| match e.kind() {
        std::io::ErrorKind::NotFound => Fetched::Missing,
        _ => Fetched::Unreadable(e.to_string()),
    };
    let file = match std::fs::File::open(path) {
        Ok(f) => f,
        Err(e) => return unreadable(e),
    };
    match file.metadata() {
        Ok(m) if m.is_dir() => {
            return Fetched::Unreadable("it is a folder, not a file".into());
        }
        Ok(m) if m.len() > limits::MAX_FILE_BYTES => return Fetched::TooBig(m.len()),
        Ok(_) => {}
        Err(e) => return unreadable(e),
    }
    let mut bytes = Vec::new();
    match file
        .take(limits::MAX_FILE_BYTES + 1)
        .read_to_end(&mut bytes)
    {
        Ok(n) if n as u64 > limits::MAX_FILE_BYTES => Fetched::TooBig(n as u64),
        Ok(_) => Fetched::Found(Cow::Owned(bytes)),
        Err(e) => unreadable(e),
    }
}

/// Loads and validates a scenario given as (file name, bytes) pairs, e.g. files embedded in
/// the binary. Names are relative to the scenario folder (`supply.csv`, or the
/// `travel.matrix` path as written).
///
/// ```
/// // Nothing given: every required file is reported missing, none is assumed.
/// let err = broodcast::scenario::load_files(&[]).unwrap_err();
/// assert_eq!(err.problems.len(), 7);
/// assert!(err.to_string().contains("scenario.json: required file is missing"));
/// ```
pub fn load_files(files: &[(&str, &[u8])]) -> Result<Scenario, InputError> {
    load_with(
        &|name: &str| {
            files
                .iter()
                .find(|(n, _)| normalize(n) == name)
                .map_or(Fetched::Missing, |(_, b)| Fetched::Found(Cow::Borrowed(*b)))
        },
        &|_: &str| true,
        None,
    )
}

/// Loads the built-in demo scenario ([`crate::demo::FILES`]) through the same checks.
pub fn load_embedded_demo() -> Result<Scenario, InputError> {
    load_files(crate::demo::FILES)
}

/// Parses and validates a travel-time matrix CSV; `file` names it in problems.
///
/// ```
/// let m = broodcast::scenario::parse_travel_matrix("m.csv", b"id,F1,B1\nF1,0,12\nB1,11.5,0\n")
///     .unwrap();
/// assert_eq!(m.minutes[1][0], 11.5);
/// let err = broodcast::scenario::parse_travel_matrix("m.csv", b"id,F1\nF1,3\n").unwrap_err();
/// assert!(err.problems[0].to_string().starts_with("m.csv:2: field 'F1': value '3'"));
/// ```
pub fn parse_travel_matrix(file: &str, text: &[u8]) -> Result<TravelMatrix, InputError> {
    let mut sink = Sink::default();
    match matrix::parse(file, text, &mut sink) {
        Some(m) if sink.problems.is_empty() => Ok(m),
        _ => Err(InputError::from_problems(sink.problems)),
    }
}

enum Fetched<'a> {
    Found(Cow<'a, [u8]>),
    Missing,
    Unreadable(String),
    /// Past [`limits::MAX_FILE_BYTES`]: the size in bytes (as far as known).
    TooBig(u64),
}

/// Distance past which a site or scouting point is probably mistyped, km (common practice: a
/// weekly delivery program serves a region, not a continent).
const FAR_KM: f64 = 500.0;

fn normalize(name: &str) -> &str {
    name.trim_start_matches("./")
}

/// Fetches `name`; a missing required file is a problem, a missing optional file is `None`.
fn fetch<'a>(
    get: &dyn Fn(&str) -> Fetched<'a>,
    name: &str,
    required: bool,
    sink: &mut Sink,
) -> Option<Cow<'a, [u8]>> {
    match get(name) {
        Fetched::Found(b) if b.len() as u64 > limits::MAX_FILE_BYTES => {
            sink.problem(
                name,
                Location::File,
                None,
                None,
                limits::too_big(b.len() as u64),
            );
            None
        }
        Fetched::Found(b) => Some(b),
        Fetched::TooBig(size) => {
            sink.problem(name, Location::File, None, None, limits::too_big(size));
            None
        }
        Fetched::Missing => {
            if required {
                sink.problem(
                    name,
                    Location::File,
                    None,
                    None,
                    "required file is missing from the scenario folder; see docs/formats.md \
                     (`broodcast demo --out DIR` writes an example)",
                );
            }
            None
        }
        Fetched::Unreadable(e) => {
            sink.problem(
                name,
                Location::File,
                None,
                None,
                format!("cannot read the file: {e}"),
            );
            None
        }
    }
}

fn load_with<'a>(
    get: &dyn Fn(&str) -> Fetched<'a>,
    inside: &dyn Fn(&str) -> bool,
    cache_dir: Option<&Path>,
) -> Result<Scenario, InputError> {
    let mut sink = Sink::default();
    let sink = &mut sink;

    let cfg_bytes = fetch(get, "scenario.json", true, sink);
    let cfg = cfg_bytes
        .as_deref()
        .and_then(|b| decode("scenario.json", b, sink))
        .and_then(|t| config::parse("scenario.json", t, sink));
    let week_start = cfg.as_ref().and_then(|c| c.week_start);

    let bytes = fetch(get, "facilities.csv", true, sink);
    let (facilities, facility_index) = match bytes
        .as_deref()
        .and_then(|b| decode("facilities.csv", b, sink))
    {
        Some(t) => tables::facilities("facilities.csv", t, sink),
        None => (Vec::new(), None),
    };

    let bytes = fetch(get, "supply.csv", true, sink);
    let supply = bytes
        .as_deref()
        .and_then(|b| decode("supply.csv", b, sink))
        .map(|t| tables::supply("supply.csv", t, &facility_index, week_start, sink))
        .unwrap_or_default();

    let bytes = fetch(get, "blocks.geojson", true, sink);
    let (blocks, block_ids_written) = bytes
        .as_deref()
        .and_then(|b| decode("blocks.geojson", b, sink))
        .map(|t| blocks::parse("blocks.geojson", t, sink))
        .unwrap_or_default();

    let bytes = fetch(get, "requests.csv", true, sink);
    let (requests, request_ids_written) = bytes
        .as_deref()
        .and_then(|b| decode("requests.csv", b, sink))
        .map(|t| tables::requests("requests.csv", t, sink))
        .unwrap_or_default();

    // Blocks and requests share one id space: overrides and outputs name sites by id alone.
    let block_ids: BTreeMap<&str, usize> =
        blocks.iter().map(|b| (b.id.as_str(), b.index)).collect();
    let mut sites: Vec<Site> = Vec::with_capacity(blocks.len() + requests.len());
    let mut site_where: Vec<(&str, Location)> = Vec::with_capacity(blocks.len() + requests.len());
    for b in &blocks {
        site_where.push((
            "blocks.geojson",
            Location::Feature {
                index: b.index,
                id: Some(b.id.clone()),
            },
        ));
        sites.push(Site {
            id: SiteId(b.id.clone()),
            location: b.location,
            detail: SiteDetail::Block(b.block.clone()),
        });
    }
    for r in requests {
        if let Some(feature) = block_ids.get(r.id.as_str()) {
            sink.problem(
                "requests.csv",
                Location::Line(r.line),
                Some("id"),
                Some(&r.id),
                format!(
                    "the id is already used by block feature {feature} in blocks.geojson; block \
                     and request ids must differ (e.g. prefix requests with R)"
                ),
            );
            continue;
        }
        site_where.push(("requests.csv", Location::Line(r.line)));
        sites.push(Site {
            id: SiteId(r.id),
            location: r.location,
            detail: SiteDetail::Dooryard(r.request),
        });
    }

    let bytes = fetch(get, "scouting.csv", true, sink);
    let scouting = bytes
        .as_deref()
        .and_then(|b| decode("scouting.csv", b, sink))
        .map(|t| tables::scouting("scouting.csv", t, sink))
        .unwrap_or_default();

    let bytes = fetch(get, "fleet.csv", true, sink);
    let fleet = bytes
        .as_deref()
        .and_then(|b| decode("fleet.csv", b, sink))
        .map(|t| tables::fleet("fleet.csv", t, &facility_index, sink))
        .unwrap_or_default();

    let bytes = fetch(get, "overrides.csv", false, sink);
    let override_rows = bytes
        .as_deref()
        .and_then(|b| decode("overrides.csv", b, sink))
        .map(|t| tables::overrides("overrides.csv", t, sink))
        .unwrap_or_default();
    let site_index: BTreeMap<&str, usize> = sites
        .iter()
        .enumerate()
        .map(|(i, s)| (s.id.as_str(), i))
        .collect();
    let mut overrides = Vec::with_capacity(override_rows.len());
    // An id written in a file whose row or feature has a problem is not unknown: that problem
    // is already reported. When a whole site file is unusable, nothing can be resolved.
    let written = |id: &str| match (&block_ids_written, &request_ids_written) {
        (Some(b), Some(r)) => b.contains(id) || r.contains(id),
        _ => true,
    };
    for o in override_rows {
        match site_index.get(o.site_id.as_str()) {
            Some(&site) => overrides.push(Override {
                site,
                action: o.action,
            }),
            None if written(&o.site_id) => {}
            None => sink.problem(
                "overrides.csv",
                Location::Line(o.line),
                Some("site_id"),
                Some(&o.site_id),
                "no block or request has this id; check blocks.geojson and requests.csv",
            ),
        }
    }

    let travel_matrix = cfg
        .as_ref()
        .and_then(|c| c.matrix.as_deref())
        .and_then(|path| load_matrix(get, inside, path, sink));
    if let Some(m) = &travel_matrix {
        let file = cfg
            .as_ref()
            .and_then(|c| c.matrix.as_deref())
            .unwrap_or("travel matrix");
        let is_facility = |id: &str| facilities.iter().any(|f| f.id.as_str() == id);
        for (j, id) in m.ids.iter().enumerate() {
            if is_facility(id) && site_index.contains_key(id.as_str()) {
                // The matrix has one row per id, so the facility would be 0 minutes from the
                // site: a route would reach it without driving.
                sink.problem(
                    normalize(file),
                    Location::Line(1),
                    Some(&format!("column {}", j + 2)),
                    Some(id),
                    "the id is both a facility (facilities.csv) and a site (blocks.geojson or \
                     requests.csv), so the matrix cannot tell them apart; give the facility or \
                     the site another id",
                );
            }
        }
        let unknown: Vec<&str> = m
            .ids
            .iter()
            .map(String::as_str)
            .filter(|id| !site_index.contains_key(id) && !is_facility(id))
            .collect();
        if !unknown.is_empty() {
            // Ids are quoted only when they look like ids: a wrong file's header may be a
            // person's name, phone or e-mail.
            let shown: Vec<&str> = unknown
                .iter()
                .copied()
                .filter(|id| matrix::id_like(id))
                .take(10)
                .collect();
            let hidden = unknown.iter().filter(|id| !matrix::id_like(id)).count();
            sink.warning(
                normalize(file),
                Location::Line(1),
                format!(
                    "{} id(s) are not a facility or site and are ignored: {}{}",
                    unknown.len(),
                    shown.join(", "),
                    if hidden > 0 {
                        format!(" ({hidden} not shown: they do not look like ids)")
                    } else {
                        String::new()
                    }
                ),
            );
        }
    }

    let road_network = cfg
        .as_ref()
        .and_then(|c| c.road_network.as_deref())
        .and_then(|path| load_roads(get, inside, cache_dir, path, sink));
    if let Some(net) = &road_network {
        check_snaps(net, &facilities, &sites, &site_where, sink);
    }

    if !facilities.is_empty() {
        let far = |p: LonLat| {
            facilities
                .iter()
                .all(|f| crate::geodesy::distance_m(p, f.location) > FAR_KM * 1000.0)
        };
        for (site, (file, loc)) in sites.iter().zip(&site_where) {
            if far(site.location) {
                sink.warning(
                    file,
                    loc.clone(),
                    format!(
                        "site '{}' is more than {FAR_KM} km from every facility; check its \
                         coordinates (lat/lon swapped, or a sign lost?)",
                        site.id
                    ),
                );
            }
        }
        for (line, s) in &scouting {
            if far(s.location) {
                sink.warning(
                    "scouting.csv",
                    Location::Line(*line),
                    format!(
                        "scouting point '{}' is more than {FAR_KM} km from every facility; check \
                         its coordinates",
                        s.id
                    ),
                );
            }
        }
    }

    let Some(cfg) = cfg.filter(|_| sink.problems.is_empty()) else {
        return Err(InputError::from_problems(std::mem::take(
            &mut sink.problems,
        )));
    };
    let Some(week_start) = cfg.week_start else {
        return Err(InputError::from_problems(std::mem::take(
            &mut sink.problems,
        )));
    };
    Ok(Scenario {
        name: cfg.name,
        week_start,
        agent: cfg.agent,
        policy: cfg.policy,
        travel: Travel {
            circuity: cfg.circuity,
            speed_kmh: cfg.speed_kmh,
            matrix: travel_matrix,
            road_network,
        },
        parcel: cfg.parcel,
        dispatch: cfg.dispatch,
        facilities,
        supply: supply
            .into_iter()
            .map(|s| Supply {
                facility: s.facility,
                date: s.date,
                vials: s.vials,
            })
            .collect(),
        sites,
        scouting: scouting.into_iter().map(|(_, s)| s).collect(),
        fleet,
        overrides,
        warnings: std::mem::take(&mut sink.warnings),
    })
}

fn load_matrix<'a>(
    get: &dyn Fn(&str) -> Fetched<'a>,
    inside: &dyn Fn(&str) -> bool,
    path: &str,
    sink: &mut Sink,
) -> Option<TravelMatrix> {
    let name = confined(
        inside,
        path,
        "travel.matrix",
        "the travel matrix",
        "travel.csv",
        sink,
    )?;
    let bytes = fetch(get, name, true, sink)?;
    matrix::parse(name, &bytes, sink)
}

/// `path` (a `scenario.json` value under `key`) normalized, when it names a file inside the
/// scenario folder; otherwise a problem saying so, and `None`.
fn confined<'p>(
    inside: &dyn Fn(&str) -> bool,
    path: &'p str,
    key: &str,
    what: &str,
    example: &str,
    sink: &mut Sink,
) -> Option<&'p str> {
    use std::path::Component;
    let name = normalize(path.trim());
    let loc = || Location::Key(key.into());
    if name.is_empty() || Path::new(name).is_absolute() {
        sink.problem(
            "scenario.json",
            loc(),
            None,
            Some(path),
            format!("give {what}'s path relative to the scenario folder, e.g. \"{example}\""),
        );
        return None;
    }
    // A scenario is one folder: it can be copied, archived and re-planned as a whole, and a
    // path that climbs out of it could make the planner read (and quote) any file, e.g. a
    // system file. `\\` is a separator on Windows, so it is treated as one everywhere.
    let leaves = Path::new(&name.replace('\\', "/")).components().any(|c| {
        matches!(
            c,
            Component::ParentDir | Component::RootDir | Component::Prefix(_)
        )
    }) || name.contains(':');
    if leaves || !inside(name) {
        sink.problem(
            "scenario.json",
            loc(),
            None,
            Some(path),
            format!(
                "{what} must be a file inside the scenario folder (no '..', no drive or \
                 absolute path, no link to a file elsewhere); copy it into the folder and \
                 give its name, e.g. \"{example}\""
            ),
        );
        return None;
    }
    Some(name)
}

/// Reads the extract `travel.road_network` names into a road graph: from the cache in
/// `cache_dir` when a valid entry for the extract's content is there, otherwise by parsing it
/// (and then storing it in the cache; a cache that cannot be written is only a note).
fn load_roads<'a>(
    get: &dyn Fn(&str) -> Fetched<'a>,
    inside: &dyn Fn(&str) -> bool,
    cache_dir: Option<&Path>,
    path: &str,
    sink: &mut Sink,
) -> Option<RoadNetwork> {
    let name = confined(
        inside,
        path,
        "travel.road_network",
        "the road network extract",
        "roads.osm.pbf",
        sink,
    )?;
    let bytes = fetch(get, name, true, sink)?;
    let key = roads::cache::key(&bytes);
    if let Some(graph) = cache_dir.and_then(|d| roads::cache::load(d, key)) {
        return Some(RoadNetwork {
            file: name.to_string(),
            graph: Arc::new(graph),
            from_cache: true,
        });
    }
    match roads::read::parse(&bytes) {
        Ok(graph) => {
            if let Some(dir) = cache_dir {
                // A read-only scenario folder only costs the next run the parse.
                let _ = roads::cache::store(dir, key, &graph);
            }
            Some(RoadNetwork {
                file: name.to_string(),
                graph: Arc::new(graph),
                from_cache: false,
            })
        }
        Err(e) => {
            sink.problem(name, Location::File, None, None, e.to_string());
            None
        }
    }
}

/// Every facility and site must be within [`roads::snap::MAX_SNAP_M`] of a road of the extract
/// (else the extract does not cover the scenario: a problem); beyond
/// [`roads::snap::WARN_SNAP_M`] a warning asks for a look.
fn check_snaps(
    net: &RoadNetwork,
    facilities: &[Facility],
    sites: &[Site],
    site_where: &[(&str, Location)],
    sink: &mut Sink,
) {
    use roads::snap::{MAX_SNAP_M, Snapper, WARN_SNAP_M};
    let snapper = Snapper::new(&net.graph, roads::mid_lat(&net.graph));
    let places = facilities
        .iter()
        .map(|f| {
            (
                "facilities.csv",
                Location::File,
                "facility",
                f.id.as_str(),
                f.location,
            )
        })
        .chain(
            sites
                .iter()
                .zip(site_where)
                .map(|(s, (file, loc))| (*file, loc.clone(), "site", s.id.as_str(), s.location)),
        );
    let mut far = 0usize;
    for (file, loc, kind, id, at) in places {
        let m = snapper
            .snap(&net.graph, at)
            .map_or(f64::INFINITY, |s| s.offroad_m);
        if m > MAX_SNAP_M {
            far += 1;
            if far <= 20 {
                sink.problem(
                    &net.file,
                    Location::File,
                    None,
                    None,
                    format!(
                        "the extract does not cover {kind} '{id}' ({file}): its nearest road \
                         is {:.0} km away, more than the {:.0} km limit; use an extract that \
                         covers the whole scenario, or correct the {kind}'s coordinates",
                        m / 1000.0,
                        MAX_SNAP_M / 1000.0
                    ),
                );
            }
        } else if m > WARN_SNAP_M {
            sink.warning(
                file,
                loc,
                format!(
                    "{kind} '{id}' is {m:.0} m from the nearest road of {}; the off-road leg is \
                     timed at {} km/h. Check its coordinates or the extract",
                    net.file,
                    roads::snap::OFFROAD_KMH
                ),
            );
        }
    }
    if far > 20 {
        sink.problem(
            &net.file,
            Location::File,
            None,
            None,
            format!("… and {} more places the extract does not cover", far - 20),
        );
    }
}
