//! Writes VRPTW instances for the peer benchmark (`scripts/bench_routing_peers.py`) and
//! broodcast's own result on each, as JSON lines.
//!
//! `cargo run --release --example bench_routing_peers -- [--out FILE] [--weeks 0:1,1500:2]
//! [--busy 1,2] [--solomon C101,R101] [--seeds 1,2] [--day-seeds 1] [--iterations N] [--stall N]
//! [--only TEXT] [--replay FILE]`
//!
//! Instances: the route depot-days of planned generated weeks (`SITES:SEED`; SITES 0 is the
//! demo's shape with that seed; mixed fleets from the generator;
//! `dispatch::depot_day_instances` of the final allocation), the depot-days of *busy* weeks
//! (`--busy SEED,...`: the demo's region with 2 depots, 10 vehicles, 600 blocks, 400
//! requests and five times the supply, so a depot-day holds 20–45 stops and more vials than
//! most single vehicles carry, and needs several of its depot's mixed vehicles) and the 100-customer
//! Solomon files in `tests/data/solomon/`. Every time, distance and window is scaled by 100
//! and rounded to an integer *before* any solver sees it (PyVRP and VROOM take integers), so
//! all solvers solve the same numbers. broodcast runs with its default work limits (no time
//! limit), one seed per `--seeds` entry (`--day-seeds` for depot-days; default the same),
//! one thread. `--only TEXT` keeps the instances whose name contains TEXT (for profiling one
//! depot-day); each instance's stops, drive time and seconds go to standard error.
//! `--replay FILE` solves the instances of an earlier output again (already scaled) instead
//! of planning weeks, e.g. to profile one slow depot-day without planning its week.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::time::Instant;

use broodcast::dispatch::depot_day_instances;
use broodcast::dispatch::vrptw::{Customer, Instance, SolveOptions, VehicleSpec, solve};
use broodcast::generate::{self, GenParams};
use broodcast::plan::{self, PlanOptions};
use broodcast::travel::TravelModel;
use serde_json::json;

/// The search's work limits: perturbation rounds in all (`--iterations`) and rounds in a row
/// without a new best (`--stall`); both default to `SolveOptions::default()`.
#[derive(Clone, Copy)]
struct Limits {
    iterations: u32,
    stall: u32,
}

/// Scale applied to every time before rounding to integers.
const SCALE: f64 = 100.0;

fn scaled(inst: &Instance) -> Instance {
    let r = |x: f64| {
        if x.is_finite() {
            (x * SCALE).round()
        } else {
            // Open ends become a large finite bound every solver accepts.
            x.signum() * 1e9
        }
    };
    Instance {
        customers: inst
            .customers
            .iter()
            .map(|c| Customer {
                demand_vials: c.demand_vials,
                service_minutes: r(c.service_minutes),
                earliest: r(c.earliest),
                latest: r(c.latest.min(c.deadline)),
                deadline: r(c.latest.min(c.deadline)),
            })
            .collect(),
        minutes: inst
            .minutes
            .iter()
            .map(|row| row.iter().map(|&m| r(m)).collect())
            .collect(),
        vehicles: inst
            .vehicles
            .iter()
            .map(|v| VehicleSpec {
                capacity_vials: v.capacity_vials,
                start: r(v.start),
                latest_return: r(v.latest_return),
            })
            .collect(),
    }
}

/// A 100-customer Solomon file: distance = travel time = Euclidean.
fn solomon(path: &Path) -> Instance {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{path:?}: {e}"));
    let mut nums: Vec<Vec<f64>> = Vec::new();
    for line in text.lines() {
        let f: Vec<f64> = line
            .split_whitespace()
            .filter_map(|t| t.parse().ok())
            .collect();
        if !f.is_empty() {
            nums.push(f);
        }
    }
    let (vehicles, capacity) = (nums[0][0] as usize, nums[0][1] as u32);
    let rows = &nums[1..];
    let depot = &rows[0];
    Instance {
        customers: rows[1..]
            .iter()
            .map(|r| Customer {
                demand_vials: r[3] as u32,
                service_minutes: r[6],
                earliest: r[4],
                latest: r[5],
                deadline: f64::INFINITY,
            })
            .collect(),
        minutes: rows
            .iter()
            .map(|a| {
                rows.iter()
                    .map(|b| (a[1] - b[1]).hypot(a[2] - b[2]))
                    .collect()
            })
            .collect(),
        vehicles: (0..vehicles)
            .map(|_| VehicleSpec {
                capacity_vials: capacity,
                start: depot[4],
                latest_return: depot[5],
            })
            .collect(),
    }
}

/// An instance as [`record`] wrote it (already scaled).
fn from_json(v: &serde_json::Value) -> Result<Instance, Box<dyn std::error::Error>> {
    let num = |x: &serde_json::Value| x.as_f64().ok_or("number expected");
    let list = |x: &serde_json::Value| x.as_array().cloned().ok_or("list expected");
    let customers = list(&v["customers"])?
        .iter()
        .map(|c| {
            Ok(Customer {
                demand_vials: u32::try_from(c["demand"].as_u64().ok_or("demand")?)?,
                service_minutes: num(&c["service"])?,
                earliest: num(&c["earliest"])?,
                latest: num(&c["latest"])?,
                deadline: num(&c["latest"])?,
            })
        })
        .collect::<Result<_, Box<dyn std::error::Error>>>()?;
    let vehicles = list(&v["vehicles"])?
        .iter()
        .map(|c| {
            Ok(VehicleSpec {
                capacity_vials: u32::try_from(c["capacity"].as_u64().ok_or("capacity")?)?,
                start: num(&c["start"])?,
                latest_return: num(&c["end"])?,
            })
        })
        .collect::<Result<_, Box<dyn std::error::Error>>>()?;
    let minutes = list(&v["matrix"])?
        .iter()
        .map(|row| list(row)?.iter().map(num).collect::<Result<Vec<f64>, _>>())
        .collect::<Result<_, _>>()?;
    Ok(Instance {
        customers,
        minutes,
        vehicles,
    })
}

fn record(name: &str, kind: &str, inst: &Instance, seeds: &[u64], limits: Limits) -> String {
    record_scaled(name, kind, &scaled(inst), seeds, limits)
}

/// [`record`] of an instance already scaled.
fn record_scaled(name: &str, kind: &str, inst: &Instance, seeds: &[u64], limits: Limits) -> String {
    let runs: Vec<serde_json::Value> = seeds
        .iter()
        .map(|&seed| {
            let t = Instant::now();
            let sol = solve(
                inst,
                &SolveOptions {
                    seed,
                    max_iterations: limits.iterations,
                    stall_rounds: limits.stall,
                    ..SolveOptions::default()
                },
            );
            let secs = t.elapsed().as_secs_f64();
            let drive: f64 = sol
                .routes
                .iter()
                .map(|r| {
                    let mut at = 0;
                    let mut sum = 0.0;
                    for &c in &r.customers {
                        sum += inst.minutes[at][c];
                        at = c;
                    }
                    sum + inst.minutes[at][0]
                })
                .sum();
            eprintln!(
                "  {name} seed {seed}: {} stops, {} routes, drive {drive:.0}, {secs:.2} s",
                inst.customers.len(),
                sol.routes.len()
            );
            json!({
                "seed": seed,
                "seconds": secs,
                "routes": sol.routes.iter().map(|r| json!({
                    "vehicle": r.vehicle,
                    "customers": r.customers,
                })).collect::<Vec<_>>(),
            })
        })
        .collect();
    json!({
        "name": name,
        "kind": kind,
        "customers": inst.customers.iter().map(|c| json!({
            "demand": c.demand_vials,
            "service": c.service_minutes,
            "earliest": c.earliest,
            "latest": c.latest,
        })).collect::<Vec<_>>(),
        "vehicles": inst.vehicles.iter().map(|v| json!({
            "capacity": v.capacity_vials,
            "start": v.start,
            "end": v.latest_return,
        })).collect::<Vec<_>>(),
        "matrix": inst.minutes,
        "broodcast": runs,
    })
    .to_string()
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let mut args = std::env::args().skip(1);
    let mut out = PathBuf::from("target/bench_routing_peers.jsonl");
    // SITES:SEED, SITES 0 for the demo's shape (GenParams::demo with that seed).
    let mut weeks = vec![(0usize, 20_270_301u64), (0, 1), (0, 2), (1500, 1)];
    let mut names: Vec<String> = ["C101", "C201", "R101", "R201", "RC101", "RC201"]
        .map(String::from)
        .to_vec();
    let mut busy: Vec<u64> = Vec::new();
    let mut seeds = vec![1u64];
    let mut day_seeds: Option<Vec<u64>> = None;
    let mut limits = Limits {
        iterations: SolveOptions::default().max_iterations,
        stall: SolveOptions::default().stall_rounds,
    };
    let mut only = String::new();
    let mut replay: Option<PathBuf> = None;
    while let Some(a) = args.next() {
        let v = args.next().ok_or(format!("{a} needs a value"))?;
        match a.as_str() {
            "--out" => out = PathBuf::from(v),
            "--weeks" => {
                weeks = v
                    .split(',')
                    .filter(|s| !s.is_empty())
                    .map(|w| {
                        let (a, b) = w.split_once(':').ok_or("weeks as SITES:SEED")?;
                        Ok((a.parse()?, b.parse()?))
                    })
                    .collect::<Result<_, Box<dyn std::error::Error>>>()?
            }
            "--solomon" => {
                names = v
                    .split(',')
                    .filter(|s| !s.is_empty())
                    .map(String::from)
                    .collect()
            }
            "--busy" => {
                busy = v
                    .split(',')
                    .filter(|s| !s.is_empty())
                    .map(str::parse)
                    .collect::<Result<_, _>>()?
            }
            "--seeds" => seeds = v.split(',').map(str::parse).collect::<Result<_, _>>()?,
            "--day-seeds" => {
                day_seeds = Some(v.split(',').map(str::parse).collect::<Result<_, _>>()?)
            }
            "--iterations" => limits.iterations = v.parse()?,
            "--stall" => limits.stall = v.parse()?,
            "--only" => only = v,
            "--replay" => replay = Some(PathBuf::from(v)),
            other => return Err(format!("unknown argument {other}; see the file's doc").into()),
        }
    }
    if let Some(path) = replay {
        let text = std::fs::read_to_string(&path)?;
        let mut f = std::io::BufWriter::new(std::fs::File::create(&out)?);
        for line in text.lines() {
            let v: serde_json::Value = serde_json::from_str(line)?;
            let name = v["name"].as_str().unwrap_or_default();
            if !name.contains(&only) {
                continue;
            }
            let kind = v["kind"].as_str().unwrap_or_default();
            let seeds = if kind == "solomon" {
                &seeds
            } else {
                day_seeds.as_ref().unwrap_or(&seeds)
            };
            writeln!(
                f,
                "{}",
                record_scaled(name, kind, &from_json(&v)?, seeds, limits)
            )?;
        }
        f.flush()?;
        eprintln!("wrote {}", out.display());
        return Ok(());
    }
    let mut f = std::io::BufWriter::new(std::fs::File::create(&out)?);
    let data = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/solomon");
    for name in &names {
        if !name.contains(&only) {
            continue;
        }
        let inst = solomon(&data.join(format!("{name}.txt")));
        writeln!(f, "{}", record(name, "solomon", &inst, &seeds, limits))?;
        eprintln!("{name}");
    }
    let day_seeds = day_seeds.unwrap_or_else(|| seeds.clone());
    let mut all: Vec<(String, &str, GenParams)> = Vec::new();
    for (sites, seed) in weeks {
        let params = if sites == 0 {
            GenParams {
                seed,
                ..GenParams::demo()
            }
        } else {
            GenParams::sized(sites, seed)
        };
        all.push((format!("week {sites}/{seed}"), "depot-day", params));
    }
    for seed in busy {
        let params = GenParams {
            seed,
            facilities: 2,
            vehicles: 10,
            blocks: 600,
            requests: 400,
            supply_scale: 5.0,
            ..GenParams::demo()
        };
        all.push((format!("busy {seed}"), "busy-day", params));
    }
    for (label, kind, params) in all {
        let s = generate::load(&params)?;
        let p = plan::plan(s, &PlanOptions::default())?;
        let travel = TravelModel::new(&p.scenario);
        for (depot, date, inst) in depot_day_instances(&p.scenario, &p.allocation, &travel) {
            if inst.customers.is_empty() {
                continue;
            }
            let name = format!("{label} {} {date}", p.scenario.facilities[depot].id.0);
            if !name.contains(&only) {
                continue;
            }
            writeln!(f, "{}", record(&name, kind, &inst, &day_seeds, limits))?;
        }
        eprintln!("{label}");
    }
    f.flush()?;
    eprintln!("wrote {}", out.display());
    Ok(())
}
