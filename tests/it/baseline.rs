//! The hand plan (`broodcast::baseline`) against the optimized plan: on the demo and on
//! generated weeks the hand plan keeps every hard limit (recounted here from its shipments,
//! not by the code that made it), and the optimized plan is worth at least as much by the same
//! objective.

use std::collections::BTreeMap;

use broodcast::allocate::{self, AllocOptions};
use broodcast::arcs::{Arcs, Mode};
use broodcast::baseline::Baseline;
use broodcast::plan::{self, PlanOptions};
use broodcast::scenario::{self, OverrideAction, Scenario, SiteKind};

use crate::util;

/// Every hard limit the hand plan must keep, recounted from its shipments: each shipment is
/// one of the week's arcs, not excluded, to a site not forbidden, within shelf life; supply per
/// (facility, pack day), vehicle capacity per (depot, day), the parcel cap per day; per site
/// at most the releases a week allows, at most the maximum release alive, a block at least the
/// minimum, a request exactly the standard count; the dooryard share floor. Returns the
/// problems found.
fn problems(
    s: &Scenario,
    arcs: &Arcs,
    opts: &AllocOptions,
    priority: &[f64],
    b: &Baseline,
) -> Vec<String> {
    let mut out = Vec::new();
    let mut supply: BTreeMap<(usize, chrono::NaiveDate), u64> = BTreeMap::new();
    let mut depot: BTreeMap<(usize, chrono::NaiveDate), u64> = BTreeMap::new();
    let mut parcel: BTreeMap<chrono::NaiveDate, u64> = BTreeMap::new();
    let n = s.sites.len();
    let (mut alive, mut vials, mut releases) = (vec![0.0; n], vec![0u64; n], vec![0u32; n]);
    let forbidden: Vec<usize> = s
        .overrides
        .iter()
        .filter(|o| o.action == OverrideAction::Forbid)
        .map(|o| o.site)
        .collect();
    for sh in &b.shipments {
        let a = &sh.arc;
        if sh.vials == 0 {
            out.push(format!("empty shipment to site {}", a.site));
        }
        if !arcs.arcs.contains(a) {
            out.push(format!("site {}: not one of the week's arcs", a.site));
        }
        if opts
            .excluded
            .contains(&(a.facility, a.dispatch_date, a.site, a.mode))
        {
            out.push(format!("site {}: excluded arc used", a.site));
        }
        if forbidden.contains(&a.site) {
            out.push(format!("site {} is forbidden", a.site));
        }
        let release_by = a.pack_date.and_time(s.agent.pack_time)
            + chrono::Duration::seconds((s.agent.shelf_life_hours * 3600.0).round() as i64);
        if a.eta > release_by || a.pack_date > a.dispatch_date {
            out.push(format!(
                "site {}: past shelf life or sent before packing",
                a.site
            ));
        }
        *supply.entry((a.facility, a.pack_date)).or_default() += u64::from(sh.vials);
        match a.mode {
            Mode::Route => {
                *depot.entry((a.facility, a.dispatch_date)).or_default() += u64::from(sh.vials)
            }
            Mode::Parcel => *parcel.entry(a.dispatch_date).or_default() += u64::from(sh.vials),
        }
        alive[a.site] += sh.wasps_expected_alive();
        vials[a.site] += u64::from(sh.vials);
        releases[a.site] += 1;
    }
    for ((f, d), u) in &supply {
        if *u > u64::from(s.supply_vials(*f, *d)) {
            out.push(format!("supply of facility {f} on {d} exceeded: {u}"));
        }
    }
    for ((f, d), u) in &depot {
        let cap: u64 = s
            .fleet
            .iter()
            .filter(|v| v.depot == *f && v.runs_on(*d))
            .map(|v| u64::from(v.capacity_vials))
            .sum();
        if *u > cap {
            out.push(format!("vehicles of depot {f} on {d}: {u} > {cap}"));
        }
    }
    for (d, u) in &parcel {
        if *u > u64::from(s.parcel.max_vials_per_day) {
            out.push(format!("parcel cap on {d}: {u}"));
        }
    }
    let (mut door, mut total) = (0u64, 0u64);
    for i in 0..n {
        total += vials[i];
        if vials[i] == 0 {
            continue;
        }
        if releases[i] > s.policy.releases_per_site_week.max(1) {
            out.push(format!("site {i}: {} releases", releases[i]));
        }
        if alive[i] > s.agent.max_release_wasps + 1e-6 {
            out.push(format!("site {i}: {} wasps over the maximum", alive[i]));
        }
        match s.sites[i].kind() {
            SiteKind::Block if alive[i] < s.agent.min_release_wasps - 1e-6 => {
                out.push(format!("block {i}: {} wasps under the minimum", alive[i]));
            }
            SiteKind::Dooryard if vials[i] != u64::from(s.policy.dooryard_vials_per_request) => {
                out.push(format!("request {i}: {} vials", vials[i]));
            }
            SiteKind::Dooryard => door += vials[i],
            SiteKind::Block => {}
        }
    }
    let floor = allocate::share_floor(s, priority, arcs, opts)
        .expect("valid")
        .unwrap_or(0.0);
    if (door as f64) < floor * total as f64 - 1e-9 {
        out.push(format!("dooryard share: {door} of {total} vials < {floor}"));
    }
    if total != b.shipped_vials {
        out.push(format!(
            "shipped_vials {} but {total} counted",
            b.shipped_vials
        ));
    }
    out
}

fn check(name: &str, s: Scenario, opts: &PlanOptions) {
    let p = plan::plan(s, opts).expect("plans");
    let b = &p.baseline;
    let found = problems(&p.scenario, &p.arcs, &opts.alloc, &p.priority, b);
    assert!(found.is_empty(), "{name}: {found:?}");
    // Not vacuous: the hand plan ships most of the week.
    assert!(b.shipped_vials * 2 > b.supply_vials, "{name}: {b:?}");
    assert!(b.blocks_served > 0 && b.requests_served > 0, "{name}");
    let a = &p.allocation;
    let eligible: Vec<bool> = a.sites.iter().map(|o| o.eligible).collect();
    let top = broodcast::baseline::top_quarter(&eligible, &p.priority);
    let plan_top: f64 = a
        .shipments
        .iter()
        .filter(|sh| top[sh.arc.site])
        .map(|sh| sh.wasps_expected_alive())
        .sum();
    eprintln!(
        "{name}: optimized {:.1} (bound {:.1}), by hand {:.1} = {:.3} of it; top-quarter wasps \
         {:.0} vs {:.0}; unshipped {} vs {}",
        a.objective,
        a.bound,
        b.objective,
        b.objective / a.objective,
        plan_top,
        b.top_quarter_wasps,
        p.scenario.total_supply_vials()
            - a.shipments.iter().map(|s| u64::from(s.vials)).sum::<u64>(),
        b.unshipped_vials()
    );
    assert!(
        a.objective >= b.objective,
        "{name}: optimized {} < by hand {}",
        a.objective,
        b.objective
    );
}

#[test]
fn demo_hand_plan_keeps_every_limit_and_is_worth_no_more_than_the_plan() {
    check(
        "demo",
        scenario::load_embedded_demo().unwrap(),
        &PlanOptions::default(),
    );
}

/// Four times the demo's supply: vehicle capacity, not supply, limits the hand plan.
#[test]
fn demo_with_four_times_the_supply_hand_plan_keeps_vehicle_capacity() {
    let demo = scenario::load_embedded_demo().unwrap();
    let four = broodcast::sweep::Multiplier::parse("4").unwrap();
    let opts = PlanOptions {
        route_rounds_divisor: 10,
        ..PlanOptions::default()
    };
    check(
        "demo x4",
        broodcast::sweep::scale_supply(&demo, &four).unwrap(),
        &opts,
    );
}

#[test]
fn generated_hand_plans_keep_every_limit_and_are_worth_no_more_than_the_plan() {
    let opts = PlanOptions {
        route_rounds_divisor: 10,
        ..PlanOptions::default()
    };
    for (sites, seed) in [(800, 3), (1500, 4)] {
        check(
            &format!("generated {sites}/{seed}"),
            util::generated(sites, seed),
            &opts,
        );
    }
}
