//! Schema and forward migrations, versioned by `PRAGMA user_version`.
//!
//! `MIGRATIONS[i]` takes the file from version `i` to `i + 1`; each runs in its own transaction
//! together with its `user_version` bump, so a crash leaves a whole version. Never edit a
//! released migration: add the next one.

use rusqlite::Connection;

use super::LedgerError;

/// Migrations, oldest first.
const MIGRATIONS: &[&str] = &[
    // 1: plans, shipments, dooryard candidates per committed week.
    "
    CREATE TABLE plans (
        week_start TEXT PRIMARY KEY,          -- Monday, ISO date
        scenario   TEXT NOT NULL              -- summary.json `scenario`, or empty
    ) STRICT;
    CREATE TABLE shipments (
        shipment_id          TEXT PRIMARY KEY,
        week_start           TEXT NOT NULL REFERENCES plans(week_start) ON DELETE CASCADE,
        facility_id          TEXT NOT NULL,
        dispatch_date        TEXT NOT NULL,   -- ISO date
        mode                 TEXT NOT NULL CHECK (mode IN ('route', 'parcel')),
        route_id             TEXT,
        stop_seq             INTEGER,
        site_id              TEXT NOT NULL,
        site_kind            TEXT NOT NULL CHECK (site_kind IN ('block', 'dooryard')),
        vials                INTEGER NOT NULL CHECK (vials >= 0),
        wasps_packed         INTEGER NOT NULL CHECK (wasps_packed >= 0),
        wasps_expected_alive REAL NOT NULL,
        eta                  TEXT NOT NULL,   -- ISO date-time, local, minutes
        release_by           TEXT NOT NULL,
        status               TEXT NOT NULL DEFAULT 'scheduled'
            CHECK (status IN ('scheduled', 'released', 'not_released', 'dead_on_arrival')),
        released_at          TEXT,            -- ISO date or date-time, from confirmations
        note                 TEXT NOT NULL DEFAULT ''
    ) STRICT;
    CREATE INDEX shipments_by_week ON shipments(week_start);
    CREATE INDEX shipments_by_site ON shipments(site_id, dispatch_date);
    CREATE TABLE candidates (
        week_start TEXT NOT NULL REFERENCES plans(week_start) ON DELETE CASCADE,
        site_id    TEXT NOT NULL,
        reason     TEXT NOT NULL,             -- allocation.csv `reason`, empty when served
        PRIMARY KEY (week_start, site_id)
    ) STRICT;
    ",
];

/// Schema version this build writes.
pub const SCHEMA_VERSION: i64 = MIGRATIONS.len() as i64;

/// Applies the missing migrations; returns (version before, version after).
pub(super) fn migrate(conn: &mut Connection, path: &str) -> Result<(i64, i64), LedgerError> {
    let err = |source| LedgerError::Sqlite {
        path: path.to_string(),
        source,
    };
    let found: i64 = conn
        .pragma_query_value(None, "user_version", |r| r.get(0))
        .map_err(err)?;
    if found > SCHEMA_VERSION {
        return Err(LedgerError::TooNew {
            path: path.to_string(),
            found,
            supported: SCHEMA_VERSION,
        });
    }
    for (i, sql) in MIGRATIONS.iter().enumerate().skip(found.max(0) as usize) {
        let tx = conn.transaction().map_err(err)?;
        tx.execute_batch(sql).map_err(err)?;
        tx.pragma_update(None, "user_version", i as i64 + 1)
            .map_err(err)?;
        tx.commit().map_err(err)?;
    }
    Ok((found, SCHEMA_VERSION))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn migrations_apply_in_order_and_only_once() {
        let mut c = Connection::open_in_memory().expect("memory db");
        assert_eq!(
            migrate(&mut c, ":memory:").expect("first"),
            (0, SCHEMA_VERSION)
        );
        assert_eq!(
            migrate(&mut c, ":memory:").expect("second"),
            (SCHEMA_VERSION, SCHEMA_VERSION)
        );
        let tables: i64 = c
            .query_row(
                "SELECT count(*) FROM sqlite_schema WHERE type = 'table'",
                [],
                |r| r.get(0),
            )
            .expect("count");
        assert_eq!(tables, 3);
    }
}
