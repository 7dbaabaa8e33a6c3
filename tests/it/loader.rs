//! Loader integration tests: the minimal folder loads; every defect in the case table is
//! reported with its file and line/feature; all problems are collected; nothing panics.

use crate::util;

use std::fs;
use std::path::Path;

use broodcast::scenario::{
    self, InputError, Location, MAX_LISTED, OverrideAction, SiteKind, Survival,
};
use chrono::{NaiveTime, Weekday};
use geo::Winding;

fn must_fail(dir: &Path) -> InputError {
    match scenario::load_dir(dir) {
        Ok(_) => panic!("the scenario loaded but should not have"),
        Err(e) => e,
    }
}

#[test]
fn minimal_folder_loads_cleanly() {
    let s = scenario::load_dir(&util::minimal_dir()).expect("minimal scenario loads");
    assert_eq!(s.facilities.len(), 2);
    assert_eq!(s.sites.len(), 8);
    let blocks = s
        .sites
        .iter()
        .filter(|x| x.kind() == SiteKind::Block)
        .count();
    assert_eq!(blocks, 4);
    assert_eq!(s.sites[0].id.as_str(), "B1");
    assert_eq!(s.sites[4].id.as_str(), "R1");
    assert_eq!(s.scouting.len(), 4);
    assert_eq!(s.fleet.len(), 2);
    assert_eq!(s.fleet[1].depot, 1);
    assert_eq!(
        s.fleet[0].days,
        vec![Weekday::Mon, Weekday::Wed, Weekday::Fri]
    );
    assert_eq!(s.total_supply_vials(), 36);
    assert!(s.warnings.is_empty(), "{:?}", s.warnings);

    // Defaults of optional keys.
    assert_eq!(s.agent.above_target_weight, 0.5);
    assert_eq!(s.agent.pack_time, NaiveTime::from_hms_opt(6, 0, 0).unwrap());
    assert_eq!(
        s.parcel.ship_time,
        NaiveTime::from_hms_opt(15, 0, 0).unwrap()
    );
    assert_eq!(s.policy.travel_cost_per_hour, 1.0);
    assert_eq!(s.dispatch.service_minutes_block, 15.0);
    assert_eq!(s.dispatch.service_minutes_dooryard, 5.0);
    assert_eq!(
        s.dispatch.dooryard_window_start,
        NaiveTime::from_hms_opt(8, 0, 0).unwrap()
    );
    assert_eq!(
        s.dispatch.dooryard_window_end,
        NaiveTime::from_hms_opt(18, 0, 0).unwrap()
    );
    assert_eq!(s.dispatch.time_limit_seconds, None);
    assert_eq!(s.dispatch.seed, 1);
    assert_eq!(
        s.agent.survival,
        Survival::Exponential {
            half_life_hours: 96.0
        }
    );

    // Overrides resolve to site positions.
    assert_eq!(s.overrides.len(), 2);
    assert_eq!(s.overrides[0].site, s.site_idx("B2").unwrap());
    assert_eq!(s.overrides[0].action, OverrideAction::Force { vials: None });
    assert_eq!(s.overrides[1].action, OverrideAction::Forbid);

    // The matrix is read through the same file lookup.
    let m = s.travel.matrix.as_ref().expect("matrix loaded");
    assert_eq!(m.ids, vec!["F1", "B1", "R1"]);
    assert_eq!(m.minutes[0][1], 6.5);
}

#[test]
fn block_geometry_is_oriented_measured_and_located() {
    let s = scenario::load_dir(&util::minimal_dir()).unwrap();
    for site in &s.sites {
        if let Some(b) = site.as_block() {
            for p in &b.geometry {
                // B4 is written clockwise in the file; every stored exterior is counter-clockwise.
                assert!(p.exterior().is_ccw(), "{}", site.id);
            }
        }
    }
    let b1 = s.sites[0].as_block().unwrap();
    // 0.004° × 0.004° at 27° N: 0.004·111.0 km × 0.004·111.3·cos 27° km ≈ 444 m × 397 m
    // ≈ 17.6 ha (hand calculation on a sphere; the geodesic value is within 0.5 ha).
    assert!((b1.area_ha - 17.6).abs() < 0.5, "{}", b1.area_ha);
    // No access point given: the centroid of a square.
    assert!((s.sites[0].location.lon - 80.02).abs() < 1e-9);
    assert!((s.sites[0].location.lat - 26.98).abs() < 1e-9);
    // Explicit access point.
    assert_eq!(s.sites[1].location.lon, 80.050);
    assert_eq!(s.sites[1].location.lat, 26.947);
    // MultiPolygon keeps both parts.
    assert_eq!(s.sites[2].as_block().unwrap().geometry.0.len(), 2);
    assert_eq!(
        s.sites[3].as_block().unwrap().last_insecticide,
        chrono::NaiveDate::from_ymd_opt(2027, 2, 20)
    );
}

#[test]
fn personal_data_columns_are_never_stored() {
    let s = scenario::load_dir(&util::minimal_dir()).unwrap();
    let dump = format!("{s:?}");
    for personal in ["A. Sample", "555-0100", "example.invalid"] {
        assert!(!dump.contains(personal), "{personal} was stored");
    }
    assert_eq!(s.sites[4].as_request().unwrap().address, "12 Palm Row");
}

#[test]
fn load_files_matches_load_dir() {
    let dir = util::minimal_dir();
    let mut owned = Vec::new();
    for e in fs::read_dir(&dir).unwrap() {
        let e = e.unwrap();
        owned.push((
            e.file_name().to_string_lossy().into_owned(),
            fs::read(e.path()).unwrap(),
        ));
    }
    let files: Vec<(&str, &[u8])> = owned
        .iter()
        .map(|(n, b)| (n.as_str(), b.as_slice()))
        .collect();
    let a = scenario::load_files(&files).expect("embedded copy loads");
    let b = scenario::load_dir(&dir).unwrap();
    assert_eq!(format!("{a:?}"), format!("{b:?}"));
    // And a missing file is a problem on that file, not a panic.
    let err = scenario::load_files(&files[..0]).unwrap_err();
    assert!(err.problems.iter().any(|p| p.file == "scenario.json"));
}

#[test]
fn bom_and_crlf_are_accepted() {
    let tmp = util::copy_minimal();
    for e in fs::read_dir(tmp.path()).unwrap() {
        let path = e.unwrap().path();
        let text = fs::read_to_string(&path).unwrap();
        let mut bytes = b"\xEF\xBB\xBF".to_vec();
        bytes.extend_from_slice(text.replace('\n', "\r\n").as_bytes());
        fs::write(&path, bytes).unwrap();
    }
    let s = scenario::load_dir(tmp.path()).expect("BOM + CRLF variant loads");
    assert_eq!(s.sites.len(), 8);
    assert_eq!(s.facilities[0].id.as_str(), "F1");
    assert_eq!(s.travel.matrix.unwrap().ids[0], "F1");
}

#[test]
fn each_defect_is_reported_with_file_and_location() {
    let cases = util::cases();
    assert!(cases.len() >= 30, "{} cases", cases.len());
    for case in cases {
        let tmp = util::copy_minimal();
        (case.edit)(tmp.path());
        let err = match scenario::load_dir(tmp.path()) {
            Ok(_) => panic!(
                "case '{}' ({}): loaded without a problem",
                case.name, case.file
            ),
            Err(e) => e,
        };
        let hit = err.problems.iter().any(|p| {
            let text = p.to_string();
            p.file == case.expect_file
                && text.starts_with(case.expect_file)
                && text.contains(case.expect_location)
        });
        assert!(
            hit,
            "case '{}': no problem names {} and '{}':\n{err}",
            case.name, case.expect_file, case.expect_location
        );
    }
}

#[test]
fn rendering_names_file_line_field_value_and_fix() {
    let tmp = util::copy_minimal();
    util::replace(
        tmp.path(),
        "supply.csv",
        "F1,2027-03-01,10",
        "F1,2027-03-01,-5",
    );
    let err = must_fail(tmp.path());
    assert_eq!(err.problems.len(), 1, "{err}");
    assert_eq!(
        err.problems[0].to_string(),
        "supply.csv:2: field 'vials': value '-5': must be 0 or more"
    );
    assert_eq!(err.problems[0].location, Location::Line(2));
}

#[test]
fn every_problem_in_a_file_is_reported() {
    let tmp = util::copy_minimal();
    util::write(
        tmp.path(),
        "supply.csv",
        b"facility_id,date,vials\nF1,2027-03-01,-1\nF9,2027-03-02,3\nF2,2027-13-01,x\nF2,2027-03-04,8\n",
    );
    let err = must_fail(tmp.path());
    let lines: Vec<&Location> = err
        .problems
        .iter()
        .filter(|p| p.file == "supply.csv")
        .map(|p| &p.location)
        .collect();
    // Line 4 has two defects (date and vials).
    assert_eq!(
        lines,
        vec![
            &Location::Line(2),
            &Location::Line(3),
            &Location::Line(4),
            &Location::Line(4)
        ]
    );
}

#[test]
fn problems_across_files_are_all_collected() {
    let tmp = util::copy_minimal();
    util::replace(
        tmp.path(),
        "supply.csv",
        "F1,2027-03-01,10",
        "F1,2027-03-01,-5",
    );
    util::replace(tmp.path(), "fleet.csv", "07:30", "7:30");
    util::replace(
        tmp.path(),
        "blocks.geojson",
        r#""flush": "heavy""#,
        r#""flush": "Heavy""#,
    );
    let err = must_fail(tmp.path());
    let files: Vec<&str> = err.problems.iter().map(|p| p.file.as_str()).collect();
    assert_eq!(files, vec!["supply.csv", "blocks.geojson", "fleet.csv"]);
}

#[test]
fn problems_are_capped_at_fifty_with_a_count() {
    let tmp = util::copy_minimal();
    let mut text = String::from("facility_id,date,vials\n");
    for _ in 0..60 {
        text.push_str("F1,2027-03-01,-1\n");
    }
    util::write(tmp.path(), "supply.csv", text.as_bytes());
    let err = must_fail(tmp.path());
    assert_eq!(err.problems.len(), MAX_LISTED);
    assert_eq!(err.omitted, 10);
    assert!(err.to_string().contains("the scenario has 60 problems"));
    assert!(err.to_string().contains("… and 10 more"));
}

#[test]
fn a_far_point_is_a_warning_not_an_error() {
    let tmp = util::copy_minimal();
    // About 1,400 km north of both facilities.
    util::replace(tmp.path(), "requests.csv", "26.990,80.010", "39.990,80.010");
    util::replace(tmp.path(), "scouting.csv", "26.900,79.980", "26.900,69.980");
    let s = scenario::load_dir(tmp.path()).expect("a far point still loads");
    let w: Vec<String> = s.warnings.iter().map(|w| w.to_string()).collect();
    assert_eq!(w.len(), 2, "{w:?}");
    assert!(
        w[0].starts_with("requests.csv:2:") && w[0].contains("500 km"),
        "{}",
        w[0]
    );
    assert!(w[1].starts_with("scouting.csv:4:"), "{}", w[1]);
}

#[test]
fn unknown_columns_and_keys_are_allowed() {
    let tmp = util::copy_minimal();
    util::replace(
        tmp.path(),
        "facilities.csv",
        "wasps_per_vial\n",
        "wasps_per_vial,notes\n",
    );
    util::replace(
        tmp.path(),
        "facilities.csv",
        "80.000,100\n",
        "80.000,100,north room\n",
    );
    util::replace(
        tmp.path(),
        "facilities.csv",
        "80.000,120\n",
        "80.000,120,\n",
    );
    util::replace(
        tmp.path(),
        "scenario.json",
        r#""name": "Minimal"#,
        r#""comment": "x", "name": "Minimal"#,
    );
    scenario::load_dir(tmp.path()).expect("extra columns and keys are ignored");
}

#[test]
fn optional_keys_override_defaults() {
    let tmp = util::copy_minimal();
    util::replace(
        tmp.path(),
        "scenario.json",
        r#"{ "model": "exponential", "half_life_hours": 96 }"#,
        r#"{ "model": "table", "points": [[0, 1.0], [24, 0.9], [72, 0.4]] }, "pack_time": "05:30""#,
    );
    util::replace(
        tmp.path(),
        "scenario.json",
        r#""parcel":"#,
        r#""dispatch": {"seed": 7, "time_limit_seconds": 0.5, "service_minutes_block": 20}, "parcel":"#,
    );
    let s = scenario::load_dir(tmp.path()).unwrap();
    assert_eq!(
        s.agent.survival,
        Survival::Table(vec![(0.0, 1.0), (24.0, 0.9), (72.0, 0.4)])
    );
    assert_eq!(
        s.agent.pack_time,
        NaiveTime::from_hms_opt(5, 30, 0).unwrap()
    );
    assert_eq!(s.dispatch.seed, 7);
    assert_eq!(s.dispatch.time_limit_seconds, Some(0.5));
    assert_eq!(s.dispatch.service_minutes_block, 20.0);
}

#[test]
fn overrides_file_is_optional() {
    let tmp = util::copy_minimal();
    fs::remove_file(tmp.path().join("overrides.csv")).unwrap();
    let s = scenario::load_dir(tmp.path()).unwrap();
    assert!(s.overrides.is_empty());
}

#[test]
fn matrix_parser_accepts_square_and_rejects_defects() {
    let m =
        scenario::parse_travel_matrix("m.csv", b"\xEF\xBB\xBF,A,B\r\nA,0,5\r\nB,6,0\r\n").unwrap();
    assert_eq!(m.ids, vec!["A", "B"]);
    assert_eq!(m.minutes, vec![vec![0.0, 5.0], vec![6.0, 0.0]]);
    let err = scenario::parse_travel_matrix("m.csv", b",A,B\nA,0,-5\nB,inf,1\n").unwrap_err();
    let text = err.to_string();
    assert_eq!(err.problems.len(), 3, "{text}");
    assert!(text.contains("m.csv:2: field 'B': value '-5'"), "{text}");
    assert!(text.contains("m.csv:3: field 'A': value 'inf'"), "{text}");
    assert!(text.contains("m.csv:3: field 'B': value '1'"), "{text}");
    assert!(scenario::parse_travel_matrix("m.csv", b"").is_err());
}

/// Regression guard for "never panic on input": every file truncated at many points, and
/// overwritten with bytes that are not text, must give problems, never a panic.
#[test]
fn truncated_and_garbage_files_never_panic() {
    let names: Vec<String> = fs::read_dir(util::minimal_dir())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    for name in &names {
        let full = fs::read(util::minimal_dir().join(name)).unwrap();
        let tmp = util::copy_minimal();
        let step = (full.len() / 25).max(1);
        for cut in (0..full.len()).step_by(step) {
            util::write(tmp.path(), name, &full[..cut]);
            let _ = scenario::load_dir(tmp.path());
        }
        let garbage: Vec<u8> = (0..512u32)
            .map(|i| (i.wrapping_mul(2_654_435_761) >> 13) as u8)
            .collect();
        util::write(tmp.path(), name, &garbage);
        assert!(scenario::load_dir(tmp.path()).is_err(), "{name}");
    }
}

/// Regression: csv's `Position::line` lags one line per CRLF terminator (rust-csv #395); the
/// loader must still name the physical line.
#[test]
fn crlf_files_report_physical_line_numbers() {
    let tmp = util::copy_minimal();
    util::write(
        tmp.path(),
        "supply.csv",
        b"facility_id,date,vials\r\nF1,2027-03-01,10\r\nF1,2027-03-03,10\r\nF2,2027-03-02,-8\r\n",
    );
    util::write(
        tmp.path(),
        "travel.csv",
        b"id,F1,B1\r\nF1,0,5\r\nB1,-5,0\r\n",
    );
    let err = must_fail(tmp.path());
    let at: Vec<String> = err.problems.iter().map(|p| p.to_string()).collect();
    assert!(at[0].starts_with("supply.csv:4: field 'vials'"), "{at:?}");
    assert!(at[1].starts_with("travel.csv:3: field 'F1'"), "{at:?}");
}

#[test]
fn check_summary_of_the_minimal_folder() {
    let s = scenario::load_dir(&util::minimal_dir()).unwrap();
    let c = broodcast::check::summarize(&s);
    assert_eq!((c.blocks, c.requests, c.scouting, c.vehicles), (4, 4, 4, 2));
    // supply.csv: F1 10 + 10 vials × 100 wasps, F2 8 + 8 vials × 120 wasps.
    assert_eq!(c.total_vials, 36);
    assert_eq!(c.total_wasps, 2000 + 1920);
    assert_eq!(c.supply_by_day[1].wasps, 960);
    // Three 0.004° squares (≈ 17.6 ha each, hand calculation) and one 0.002° square (≈ 4.4 ha).
    assert!(
        (c.block_area_ha - (4.0 * 17.6 + 4.4)).abs() < 1.5,
        "{}",
        c.block_area_ha
    );
    assert_eq!((c.overrides_force, c.overrides_forbid), (1, 1));
    assert_eq!(c.travel_matrix_ids, Some(3));
    let text = c.to_text();
    assert!(text.contains("total vials"), "{text}");
}

#[test]
fn matrix_ids_that_are_not_locations_are_a_warning() {
    let tmp = util::copy_minimal();
    util::replace(tmp.path(), "travel.csv", "id,F1,B1,R1", "id,F1,B1,X7");
    util::replace(tmp.path(), "travel.csv", "R1,3,4,0", "X7,3,4,0");
    let s = scenario::load_dir(tmp.path()).expect("unknown matrix ids do not stop loading");
    let w: Vec<String> = s.warnings.iter().map(|w| w.to_string()).collect();
    assert_eq!(w.len(), 1, "{w:?}");
    assert!(
        w[0].starts_with("travel.csv:1:") && w[0].contains("X7"),
        "{}",
        w[0]
    );
}

#[test]
fn feature_level_id_is_used_when_properties_have_none() {
    let tmp = util::copy_minimal();
    util::replace(
        tmp.path(),
        "blocks.geojson",
        r#""properties": {
        "id": "B1", "crop""#,
        r#""id": "B1", "properties": {
        "crop""#,
    );
    let s = scenario::load_dir(tmp.path()).unwrap();
    assert_eq!(s.sites[0].id.as_str(), "B1");
}

mod never_panics {
    use super::*;
    use proptest::prelude::*;

    const FILES: [&str; 9] = [
        "scenario.json",
        "facilities.csv",
        "supply.csv",
        "blocks.geojson",
        "requests.csv",
        "scouting.csv",
        "fleet.csv",
        "overrides.csv",
        "travel.csv",
    ];

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]

        /// Any bytes in any one file give a scenario or problems, never a panic; and a file
        /// that is not the original gives problems naming that file or loads cleanly.
        #[test]
        fn arbitrary_bytes_in_one_file(which in 0usize..FILES.len(), bytes in proptest::collection::vec(any::<u8>(), 0..400)) {
            let dir = util::minimal_dir();
            let mut owned: Vec<(String, Vec<u8>)> = FILES
                .iter()
                .map(|n| (n.to_string(), fs::read(dir.join(n)).unwrap()))
                .collect();
            owned[which].1 = bytes;
            let files: Vec<(&str, &[u8])> = owned.iter().map(|(n, b)| (n.as_str(), b.as_slice())).collect();
            if let Err(e) = scenario::load_files(&files) {
                prop_assert!(!e.problems.is_empty());
            }
        }

        /// Arbitrary text in one CSV cell is reported on that line or accepted.
        #[test]
        fn arbitrary_cell_text(cell in "[0-9]{0,3}[^\n\r\",]{0,6}[0-9]{0,12}") {
            let dir = util::minimal_dir();
            let supply = fs::read_to_string(dir.join("supply.csv")).unwrap().replacen("F1,2027-03-03,10", &format!("F1,2027-03-03,{cell}"), 1);
            let mut owned: Vec<(String, Vec<u8>)> = FILES
                .iter()
                .map(|n| (n.to_string(), fs::read(dir.join(n)).unwrap()))
                .collect();
            owned[2].1 = supply.into_bytes();
            let files: Vec<(&str, &[u8])> = owned.iter().map(|(n, b)| (n.as_str(), b.as_slice())).collect();
            match scenario::load_files(&files) {
                Ok(s) => prop_assert_eq!(Ok(s.supply[1].vials), cell.trim().parse::<u32>()),
                Err(e) => prop_assert!(e.problems.iter().all(|p| p.to_string().starts_with("supply.csv:3: field 'vials'"))),
            }
        }
    }
}
