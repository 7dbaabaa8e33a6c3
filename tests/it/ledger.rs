//! The season ledger through the binary: two consecutive demo weeks, idempotent re-imports,
//! and integrity after `kill -9` in the middle of a write.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use chrono::NaiveDate;

use crate::util;
use util::{bin, run, run_ok};

fn s(p: &Path) -> &str {
    p.to_str().expect("utf-8 path")
}

/// Reads a CSV file as header-keyed rows.
fn read_csv(path: &Path) -> Vec<BTreeMap<String, String>> {
    let mut r = csv::Reader::from_path(path).expect("open csv");
    let headers = r.headers().expect("headers").clone();
    r.records()
        .map(|rec| {
            let rec = rec.expect("record");
            headers
                .iter()
                .zip(rec.iter())
                .map(|(h, v)| (h.to_string(), v.to_string()))
                .collect()
        })
        .collect()
}

/// Every row of every ledger table, as text, for exact comparisons.
fn dump(db: &Path) -> Vec<String> {
    let c = rusqlite::Connection::open(db).expect("open ledger");
    let mut out = Vec::new();
    for (table, order) in [
        ("plans", "week_start"),
        ("shipments", "shipment_id"),
        ("candidates", "week_start, site_id"),
    ] {
        let mut q = c
            .prepare(&format!("SELECT * FROM {table} ORDER BY {order}"))
            .expect("prepare");
        let n = q.column_count();
        let rows = q
            .query_map([], |r| {
                let mut line = format!("{table}:");
                for i in 0..n {
                    let v: rusqlite::types::Value = r.get(i)?;
                    line.push_str(&format!("{v:?}|"));
                }
                Ok(line)
            })
            .expect("query");
        out.extend(rows.map(|r| r.expect("row")));
    }
    out
}

fn date(s: &str) -> NaiveDate {
    NaiveDate::parse_from_str(s, "%Y-%m-%d").expect("ISO date")
}

/// Two consecutive demo weeks: plan week 1 with the ledger, commit, confirm (one request not
/// released), then plan week 2 (the demo moved +7 days, re-release interval 10 days). Checked
/// by reading the week-2 manifest against the week-1 manifest and confirmations.
#[test]
fn two_consecutive_weeks_serve_no_request_twice_and_respect_the_interval() {
    let tmp = tempfile::tempdir().expect("temp dir");
    let t = tmp.path();
    let db = t.join("season.db");
    let w1 = t.join("week1");
    let w2 = t.join("week2");
    let out1 = t.join("out1");
    let out2 = t.join("out2");
    run_ok(&["ledger", "init", s(&db)]);
    run_ok(&["demo", "--out", s(&w1)]);
    run_ok(&["plan", s(&w1), "--ledger", s(&db), "--out", s(&out1)]);
    run_ok(&["ledger", "commit", s(&db), s(&out1)]);
    let before = dump(&db);
    let again = run_ok(&["ledger", "commit", s(&db), s(&out1)]);
    assert!(again.contains("nothing changed"), "{again}");
    assert_eq!(
        dump(&db),
        before,
        "committing the same plan twice changes nothing"
    );

    // Confirm: every other shipment released (at 10:00 on its day), one dooryard not released,
    // one block dead on arrival, the rest left scheduled.
    let m1 = read_csv(&out1.join("manifest.csv"));
    assert!(m1.len() > 20, "the demo ships enough to test with");
    let returned = m1
        .iter()
        .find(|r| r["site_kind"] == "dooryard")
        .expect("a dooryard shipment")["site_id"]
        .clone();
    let doa_block = m1
        .iter()
        .rev()
        .find(|r| r["site_kind"] == "block")
        .expect("a block shipment")["site_id"]
        .clone();
    let mut conf = String::from("shipment_id,status,released_at,note\n");
    let mut release_of: BTreeMap<String, NaiveDate> = BTreeMap::new();
    let mut counts_as_release: BTreeSet<String> = BTreeSet::new();
    for (i, r) in m1.iter().enumerate() {
        let id = &r["shipment_id"];
        let site = r["site_id"].clone();
        let day = date(&r["dispatch_date"]);
        if site == returned {
            conf.push_str(&format!("{id},not_released,,gate locked\n"));
        } else if site == doa_block {
            conf.push_str(&format!("{id},dead_on_arrival,{day}T11:00,hot day\n"));
        } else if i % 2 == 0 {
            conf.push_str(&format!("{id},released,{day}T10:00,\n"));
            counts_as_release.insert(site.clone());
            release_of.insert(site, day);
        } else {
            // Left scheduled: still counts, at its dispatch date.
            counts_as_release.insert(site.clone());
            release_of.insert(site, day);
        }
    }
    std::fs::write(t.join("confirmations.csv"), &conf).expect("write confirmations");
    let c1 = run_ok(&["ledger", "confirm", s(&db), s(&t.join("confirmations.csv"))]);
    assert!(c1.contains(&returned), "returned request named: {c1}");
    let after_confirm = dump(&db);
    let c2 = run_ok(&["ledger", "confirm", s(&db), s(&t.join("confirmations.csv"))]);
    assert!(c2.contains("0 shipments changed"), "{c2}");
    assert_eq!(dump(&db), after_confirm, "confirming twice changes nothing");

    // Week 2: the demo moved +7 days, interval 10 days.
    run_ok(&["demo", "--out", s(&w2)]);
    let scen = std::fs::read_to_string(w2.join("scenario.json")).expect("scenario");
    let mut json: serde_json::Value = serde_json::from_str(&scen).expect("json");
    json["week_start"] = "2027-03-08".into();
    json["policy"]["rerelease_interval_days"] = 10.into();
    std::fs::write(w2.join("scenario.json"), json.to_string()).expect("write scenario");
    let supply = std::fs::read_to_string(w2.join("supply.csv")).expect("supply");
    let mut moved = String::new();
    for (i, line) in supply.lines().enumerate() {
        if i == 0 {
            moved.push_str(line);
        } else {
            let f: Vec<&str> = line.split(',').collect();
            let d = date(f[1]) + chrono::Days::new(7);
            moved.push_str(&format!("{},{d},{}", f[0], f[2]));
        }
        moved.push('\n');
    }
    std::fs::write(w2.join("supply.csv"), moved).expect("write supply");
    let said = run_ok(&["plan", s(&w2), "--ledger", s(&db), "--out", s(&out2)]);
    assert!(said.contains("ledger:"), "{said}");

    let m2 = read_csv(&out2.join("manifest.csv"));
    assert!(!m2.is_empty(), "week 2 ships something");
    let interval = 10;
    let mut rereleased = 0;
    for r in &m2 {
        let site = &r["site_id"];
        let day = date(&r["dispatch_date"]);
        assert!(day >= date("2027-03-08") && day <= date("2027-03-14"));
        if r["site_kind"] == "dooryard" {
            assert!(
                !counts_as_release.contains(site),
                "request {site} served in week 1 and again in week 2"
            );
        } else if let Some(prev) = release_of.get(site) {
            assert!(
                (day - *prev).num_days() >= interval,
                "block {site} released {prev} and again {day}, inside {interval} days"
            );
            rereleased += 1;
        }
    }
    // The reasons say why, and only for sites the ledger names.
    let a2 = read_csv(&out2.join("allocation.csv"));
    let mut already = 0;
    let mut recent = 0;
    for r in &a2 {
        match r["reason"].as_str() {
            "already-served" => {
                already += 1;
                assert!(
                    counts_as_release.contains(&r["site_id"]),
                    "{}",
                    r["site_id"]
                );
                assert_eq!(r["eligible"], "false");
            }
            "released-recently" => {
                recent += 1;
                assert!(release_of.contains_key(&r["site_id"]), "{}", r["site_id"]);
            }
            _ => {}
        }
    }
    let dooryards_week1 = counts_as_release
        .iter()
        .filter(|s| s.starts_with('R'))
        .count();
    assert_eq!(already, dooryards_week1, "every served request is marked");
    eprintln!(
        "week 1: {} shipments; week 2: {} shipments, {already} already-served, {recent} \
         released-recently, {rereleased} week-1 blocks served again after {interval} days",
        m1.len(),
        m2.len()
    );
    let back = a2
        .iter()
        .find(|r| r["site_id"] == returned)
        .expect("returned request listed");
    assert_ne!(
        back["reason"], "already-served",
        "not-released request is a candidate again"
    );

    // Commit week 2, then the season report.
    run_ok(&["ledger", "commit", s(&db), s(&out2)]);
    let rep = t.join("report");
    run_ok(&[
        "ledger",
        "report",
        s(&db),
        "--season",
        "2027",
        "--out",
        s(&rep),
    ]);
    let rep2 = t.join("report2");
    run_ok(&[
        "ledger",
        "report",
        s(&db),
        "--season",
        "2027",
        "--out",
        s(&rep2),
    ]);
    for f in [
        "weeks.csv",
        "blocks.csv",
        "requests_waiting.csv",
        "report.html",
    ] {
        assert_eq!(
            std::fs::read(rep.join(f)).expect("read"),
            std::fs::read(rep2.join(f)).expect("read"),
            "{f} is deterministic"
        );
    }
    let other = t.join("report-2026");
    run_ok(&[
        "ledger",
        "report",
        s(&db),
        "--season",
        "2026",
        "--out",
        s(&other),
    ]);
    assert_eq!(read_csv(&other.join("weeks.csv")).len(), 0, "no 2026 weeks");
    let weeks = read_csv(&rep.join("weeks.csv"));
    assert_eq!(weeks.len(), 2);
    let vials1: u64 = m1
        .iter()
        .map(|r| r["vials"].parse::<u64>().expect("vials"))
        .sum();
    assert_eq!(weeks[0]["vials"].parse::<u64>().expect("vials"), vials1);
    let html = std::fs::read_to_string(rep.join("report.html")).expect("report");
    let requests = std::fs::read_to_string(w1.join("requests.csv")).expect("requests");
    // No address or resident name from requests.csv reaches the report.
    for line in requests.lines().skip(1).take(50) {
        let mut r = csv::ReaderBuilder::new()
            .has_headers(false)
            .from_reader(line.as_bytes());
        let rec = r.records().next().expect("line").expect("record");
        for personal in [4, 8] {
            if let Some(v) = rec.get(personal) {
                assert!(!html.contains(v), "personal data {v:?} in the report");
            }
        }
    }
}

#[test]
fn a_different_plan_for_a_committed_week_needs_replace() {
    let tmp = tempfile::tempdir().expect("temp dir");
    let t = tmp.path();
    let db = t.join("season.db");
    run_ok(&["ledger", "init", s(&db)]);
    write_manifest(&t.join("a"), 5, "2027-03-01");
    write_manifest(&t.join("b"), 4, "2027-03-01");
    run_ok(&["ledger", "commit", s(&db), s(&t.join("a"))]);
    let out = run(&["ledger", "commit", s(&db), s(&t.join("b"))]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--replace"));
    run_ok(&["ledger", "commit", s(&db), s(&t.join("b")), "--replace"]);
    assert_eq!(count(&db, "SELECT count(*) FROM shipments"), 4);
    // Unknown shipment: exit 2, the line named, nothing changed.
    std::fs::write(
        t.join("c.csv"),
        "shipment_id,status,released_at,note\nS-0,released,,\nS-nope,released,,\n",
    )
    .expect("write");
    let before = dump(&db);
    let out = run(&["ledger", "confirm", s(&db), s(&t.join("c.csv"))]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("c.csv:3"));
    assert_eq!(dump(&db), before);
}

/// A plan folder with `n` synthetic shipments in the week of `week`.
fn write_manifest(dir: &Path, n: usize, week: &str) {
    std::fs::create_dir_all(dir).expect("mkdir");
    let mut text = String::from(
        "shipment_id,facility_id,dispatch_date,mode,route_id,stop_seq,site_id,site_kind,lat,lon,vials,wasps_packed,wasps_expected_alive,eta,release_by\n",
    );
    let w = date(week);
    for i in 0..n {
        let d = w + chrono::Days::new((i % 5) as u64);
        let kind = if i % 3 == 0 { "dooryard" } else { "block" };
        text.push_str(&format!(
            "S-{i},F{},{d},route,R-{},{},X{i},{kind},27.1,81.2,{},{},{:.1},{d}T09:00,{d}T18:00\n",
            i % 3,
            i / 20,
            i % 20 + 1,
            i % 7 + 1,
            (i % 7 + 1) * 170,
            (i % 7 + 1) as f64 * 160.0
        ));
    }
    std::fs::write(dir.join("manifest.csv"), text).expect("write manifest");
    std::fs::write(
        dir.join("summary.json"),
        format!("{{\"scenario\": \"synthetic\", \"week_start\": \"{week}\"}}"),
    )
    .expect("write summary");
}

fn count(db: &Path, sql: &str) -> i64 {
    let c = rusqlite::Connection::open(db).expect("open");
    c.query_row(sql, [], |r| r.get(0)).expect("count")
}

fn integrity(db: &Path) -> String {
    let c = rusqlite::Connection::open(db).expect("open after kill");
    c.query_row("PRAGMA integrity_check", [], |r| r.get(0))
        .expect("integrity_check")
}

/// Copies a closed ledger (and its WAL files, if any) to `to`.
fn copy_db(from: &Path, to: &Path) {
    for suffix in ["", "-wal", "-shm"] {
        let f = PathBuf::from(format!("{}{suffix}", from.display()));
        let t = PathBuf::from(format!("{}{suffix}", to.display()));
        let _ = std::fs::remove_file(&t);
        if f.exists() {
            std::fs::copy(&f, &t).expect("copy ledger");
        }
    }
}

/// Runs `args`, SIGKILLs it after `delay` (if still running), returns whether it had finished.
fn run_and_kill(args: &[&str], delay: Duration) -> bool {
    let mut child = Command::new(bin())
        .args(args)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("spawn");
    let start = Instant::now();
    let mut finished = false;
    while start.elapsed() < delay {
        if child.try_wait().expect("try_wait").is_some() {
            finished = true;
            break;
        }
        std::thread::sleep(Duration::from_millis(2));
    }
    if !finished {
        // Child::kill sends SIGKILL on Unix: no handler, no cleanup, like `kill -9`.
        child.kill().expect("kill");
    }
    let _ = child.wait();
    finished
}

/// `kill -9` during `ledger commit` and `ledger confirm` of a large file, over a spread of
/// delays: the reopened file passes `PRAGMA integrity_check` and holds all of the write or
/// none of it.
#[test]
fn kill_9_mid_write_leaves_all_before_or_all_after() {
    const N: usize = 60_000;
    let tmp = tempfile::tempdir().expect("temp dir");
    let t = tmp.path();
    let plan = t.join("plan");
    write_manifest(&plan, N, "2027-03-01");
    let empty = t.join("empty.db");
    run_ok(&["ledger", "init", s(&empty)]);
    let mut conf = String::from("shipment_id,status,released_at,note\n");
    for i in 0..N {
        conf.push_str(&format!("S-{i},released,2027-03-0{}T10:00,ok\n", i % 5 + 1));
    }
    let conf_path = t.join("confirmations.csv");
    std::fs::write(&conf_path, conf).expect("write confirmations");

    // How long an uninterrupted run takes, to spread the kills over it.
    let db = t.join("season.db");
    copy_db(&empty, &db);
    let start = Instant::now();
    run_ok(&["ledger", "commit", s(&db), s(&plan)]);
    let commit_time = start.elapsed();
    let committed = t.join("committed.db");
    copy_db(&db, &committed);
    let start = Instant::now();
    run_ok(&["ledger", "confirm", s(&db), s(&conf_path)]);
    let confirm_time = start.elapsed();

    // The first kills land before the write (start-up, parsing), the last after it, whatever
    // the machine's load; the middle ones spread over the transaction.
    let fractions = [0.02, 0.1, 0.2, 0.3, 0.45, 0.6, 0.7, 0.8, 0.9, 1.0, 1.5, 4.0];
    let mut outcomes: BTreeMap<&str, (usize, usize)> = BTreeMap::new();
    for &f in &fractions {
        // commit
        copy_db(&empty, &db);
        run_and_kill(
            &["ledger", "commit", s(&db), s(&plan)],
            commit_time.mul_f64(f),
        );
        assert_eq!(integrity(&db), "ok", "commit killed at {f} × run time");
        let n = count(&db, "SELECT count(*) FROM shipments");
        let p = count(&db, "SELECT count(*) FROM plans");
        assert!(
            (n == 0 && p == 0) || (n == N as i64 && p == 1),
            "commit killed at {f}: {n} shipments, {p} plans"
        );
        let e = outcomes.entry("commit").or_default();
        if n == 0 {
            e.0 += 1
        } else {
            e.1 += 1
        }
        // confirm
        copy_db(&committed, &db);
        run_and_kill(
            &["ledger", "confirm", s(&db), s(&conf_path)],
            confirm_time.mul_f64(f),
        );
        assert_eq!(integrity(&db), "ok", "confirm killed at {f} × run time");
        let released = count(
            &db,
            "SELECT count(*) FROM shipments WHERE status = 'released'",
        );
        assert_eq!(count(&db, "SELECT count(*) FROM shipments"), N as i64);
        assert!(
            released == 0 || released == N as i64,
            "confirm killed at {f}: {released} of {N} released"
        );
        let e = outcomes.entry("confirm").or_default();
        if released == 0 { e.0 += 1 } else { e.1 += 1 }
    }
    eprintln!(
        "kill -9 over {} delays each (commit {:?}, confirm {:?} uninterrupted): (before, after) = {outcomes:?}",
        fractions.len(),
        commit_time,
        confirm_time
    );
    // The delays must span the write: some kills land before it commits, some after.
    for (cmd, (before, after)) in &outcomes {
        assert!(
            *before > 0 && *after > 0,
            "{cmd}: kills did not span the write: {before} before, {after} after"
        );
    }
}
