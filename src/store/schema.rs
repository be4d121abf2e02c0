//! Schema migrations, tracked in SQLite's `user_version`. Each step runs once, in order, inside
//! a transaction; a database from a newer seepd is refused rather than guessed at.

use rusqlite::Connection;

use super::StoreError;

/// Migrations in order; index + 1 is the schema version after the step.
const MIGRATIONS: &[&str] = &[
    // 1: instruments, readings, quarantine.
    "CREATE TABLE instruments (
        id TEXT PRIMARY KEY,
        site TEXT NOT NULL,
        kind TEXT NOT NULL,
        reach TEXT,
        section TEXT,
        station_m REAL,
        offset_m REAL,
        tip_elevation_m REAL,
        installed_ms INTEGER NOT NULL,
        interval_s INTEGER NOT NULL,
        updated_ms INTEGER NOT NULL
    );
    CREATE TABLE readings (
        instrument TEXT NOT NULL,
        t_ms INTEGER NOT NULL,
        arrival_ms INTEGER NOT NULL,
        raw REAL NOT NULL,
        temperature_c REAL,
        baro_kpa REAL,
        eng_value REAL NOT NULL,
        eng_unit TEXT NOT NULL,
        pressure_kpa REAL,
        pressure_head_m REAL,
        total_head_m REAL,
        flags INTEGER NOT NULL DEFAULT 0,
        PRIMARY KEY (instrument, t_ms)
    ) WITHOUT ROWID;
    CREATE TABLE quarantine (
        id INTEGER PRIMARY KEY,
        received_ms INTEGER NOT NULL,
        topic TEXT NOT NULL,
        reason TEXT NOT NULL,
        detail TEXT NOT NULL,
        payload BLOB NOT NULL
    );
    CREATE INDEX quarantine_received ON quarantine (received_ms);",
    // 2: derived quantities (gradients, toe checks, blanket theory, sections, later trends).
    "CREATE TABLE derived (
        object TEXT NOT NULL,
        quantity TEXT NOT NULL,
        t_ms INTEGER NOT NULL,
        value REAL,
        unit TEXT NOT NULL,
        reason TEXT,
        inputs TEXT NOT NULL,
        PRIMARY KEY (object, quantity, t_ms)
    ) WITHOUT ROWID;",
    // 3: fitted stage-response and HST models, every fit kept (model history).
    "CREATE TABLE models (
        id TEXT NOT NULL,
        kind TEXT NOT NULL,
        fitted_ms INTEGER NOT NULL,
        train_start_ms INTEGER NOT NULL,
        train_end_ms INTEGER NOT NULL,
        a REAL,
        b REAL,
        lag_ms INTEGER,
        r_squared REAL NOT NULL,
        sigma REAL NOT NULL,
        n INTEGER NOT NULL,
        params TEXT NOT NULL,
        PRIMARY KEY (id, fitted_ms)
    ) WITHOUT ROWID;",
];

/// The schema version this build writes.
pub const SCHEMA_VERSION: i64 = MIGRATIONS.len() as i64;

/// Bring the database up to [`SCHEMA_VERSION`].
pub(super) fn migrate(conn: &Connection, name: &str) -> Result<(), StoreError> {
    let found: i64 = conn.pragma_query_value(None, "user_version", |r| r.get(0))?;
    if found > SCHEMA_VERSION {
        return Err(StoreError::TooNew {
            path: name.to_string(),
            found,
            supported: SCHEMA_VERSION,
        });
    }
    for (i, sql) in MIGRATIONS.iter().enumerate().skip(found as usize) {
        let version = i as i64 + 1;
        conn.execute_batch(&format!(
            "BEGIN IMMEDIATE; {sql}; PRAGMA user_version = {version}; COMMIT;"
        ))?;
        tracing::info!(version, "Database schema migrated");
    }
    Ok(())
}
