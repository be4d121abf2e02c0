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
    // 3: alerting. Rule states (phase, runs, pending/clearing timers, notice timers) as JSON;
    // alerts; acknowledgements and silences (written by the CLI, applied by the service);
    // notices (one per rule action, waiting out the bundle window) and the mail outbox.
    "CREATE TABLE rule_states (
        rule TEXT PRIMARY KEY,
        state TEXT NOT NULL,
        updated_ms INTEGER NOT NULL
    );
    CREATE TABLE alerts (
        id INTEGER PRIMARY KEY,
        rule TEXT NOT NULL,
        site TEXT NOT NULL,
        object TEXT NOT NULL,
        quantity TEXT NOT NULL,
        level TEXT NOT NULL,
        raised_ms INTEGER NOT NULL,
        value REAL,
        unit TEXT NOT NULL,
        resolved_ms INTEGER,
        acked_ms INTEGER,
        acked_by TEXT,
        ack_note TEXT
    );
    CREATE INDEX alerts_open ON alerts (resolved_ms);
    CREATE TABLE acks (
        id INTEGER PRIMARY KEY,
        alert INTEGER NOT NULL REFERENCES alerts (id),
        who TEXT NOT NULL,
        note TEXT,
        t_ms INTEGER NOT NULL,
        applied_ms INTEGER
    );
    CREATE TABLE silences (
        id INTEGER PRIMARY KEY,
        rule TEXT,
        object TEXT,
        until_ms INTEGER NOT NULL,
        reason TEXT NOT NULL,
        who TEXT NOT NULL,
        created_ms INTEGER NOT NULL,
        CHECK ((rule IS NULL) != (object IS NULL))
    );
    CREATE TABLE notices (
        id INTEGER PRIMARY KEY,
        alert INTEGER NOT NULL,
        rule TEXT NOT NULL,
        site TEXT NOT NULL,
        kind TEXT NOT NULL,
        level TEXT NOT NULL,
        value REAL,
        unit TEXT NOT NULL,
        t_ms INTEGER NOT NULL,
        created_ms INTEGER NOT NULL,
        recipients TEXT NOT NULL,
        status TEXT NOT NULL,
        outbox INTEGER
    );
    CREATE INDEX notices_status ON notices (status);
    CREATE TABLE outbox (
        id INTEGER PRIMARY KEY,
        created_ms INTEGER NOT NULL,
        site TEXT NOT NULL,
        recipients TEXT NOT NULL,
        subject TEXT NOT NULL,
        body_text TEXT NOT NULL,
        body_html TEXT NOT NULL,
        message_id TEXT NOT NULL UNIQUE,
        status TEXT NOT NULL,
        attempts INTEGER NOT NULL DEFAULT 0,
        next_attempt_ms INTEGER NOT NULL,
        last_error TEXT,
        sent_ms INTEGER
    );
    CREATE INDEX outbox_due ON outbox (status, next_attempt_ms);",
    // 4: InfluxDB export: the queue of committed rows in commit order (filled in the same
    // transaction as the rows), the cursor of what the server has acknowledged, and the points
    // the server refused.
    "CREATE TABLE export_queue (
        seq INTEGER PRIMARY KEY AUTOINCREMENT,
        series INTEGER NOT NULL,
        key TEXT NOT NULL,
        quantity TEXT NOT NULL,
        t_ms INTEGER NOT NULL,
        queued_ms INTEGER NOT NULL
    );
    CREATE TABLE export_cursor (
        name TEXT PRIMARY KEY,
        seq INTEGER NOT NULL,
        points INTEGER NOT NULL,
        rejected INTEGER NOT NULL,
        updated_ms INTEGER NOT NULL
    );
    CREATE TABLE export_rejects (
        id INTEGER PRIMARY KEY,
        rejected_ms INTEGER NOT NULL,
        series TEXT NOT NULL,
        key TEXT NOT NULL,
        quantity TEXT NOT NULL,
        t_ms INTEGER NOT NULL,
        status INTEGER NOT NULL,
        reply TEXT NOT NULL,
        lines TEXT NOT NULL
    );",
    // 5: fitted stage-response and HST models, every fit kept (model history).
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
    // 6: scheduled reports. Files attached to an outbox message, and each generated period of
    // each schedule (written in the transaction that queues its message, so a restart neither
    // skips nor repeats one). Report messages take negative outbox ids: the alert evaluator
    // allocates positive ids in memory and never meets them.
    "CREATE TABLE outbox_attachments (
        outbox INTEGER NOT NULL REFERENCES outbox (id),
        seq INTEGER NOT NULL,
        name TEXT NOT NULL,
        content_type TEXT NOT NULL,
        data BLOB NOT NULL,
        PRIMARY KEY (outbox, seq)
    );
    CREATE TABLE report_runs (
        schedule TEXT NOT NULL,
        period_start_ms INTEGER NOT NULL,
        period_end_ms INTEGER NOT NULL,
        outbox_id INTEGER,
        created_ms INTEGER NOT NULL,
        PRIMARY KEY (schedule, period_start_ms)
    );",
    // 7: the running service's own state for `seepd status` (broker link, ...), one JSON
    // document per key.
    "CREATE TABLE service_state (
        key TEXT PRIMARY KEY,
        value TEXT NOT NULL,
        updated_ms INTEGER NOT NULL
    );",
    // 8: alert history as events (raised, escalated, de-escalated, acknowledged, silenced,
    // reminded, escalation notified, resolved, closed), each with its level, value and time;
    // silences that also cover the most severe level (`--all-levels`).
    "CREATE TABLE alert_events (
        id INTEGER PRIMARY KEY,
        alert INTEGER NOT NULL,
        rule TEXT NOT NULL,
        site TEXT NOT NULL,
        kind TEXT NOT NULL,
        level TEXT NOT NULL,
        value REAL,
        unit TEXT NOT NULL,
        t_ms INTEGER NOT NULL,
        recorded_ms INTEGER NOT NULL,
        detail TEXT NOT NULL DEFAULT ''
    );
    CREATE INDEX alert_events_alert ON alert_events (alert, id);
    CREATE INDEX alert_events_site_time ON alert_events (site, t_ms);
    ALTER TABLE silences ADD COLUMN all_levels INTEGER NOT NULL DEFAULT 0;",
    // 9: the fate of each recipient of an outbox message: one refused address must not
    // silence the others, so delivery is judged (and dead-lettered) recipient by recipient.
    // A recipient without a row is still to be served.
    "CREATE TABLE outbox_recipients (
        outbox INTEGER NOT NULL REFERENCES outbox (id),
        address TEXT NOT NULL,
        status TEXT NOT NULL,
        reply TEXT,
        t_ms INTEGER NOT NULL,
        PRIMARY KEY (outbox, address)
    ) WITHOUT ROWID;",
    // 10: mail threading. The Message-IDs an outbox message refers to (space-separated): every
    // message about an alert refers to that alert's thread id, so a phone shows the raise, the
    // escalations and the all-clear as one conversation.
    "ALTER TABLE outbox ADD COLUMN thread_refs TEXT NOT NULL DEFAULT '';",
    // 11: web users (made on first use by earlier builds, hence IF NOT EXISTS) get a role;
    // those already there keep acting as before (responder). Manual readings wait in an inbox
    // for the service's writer, which takes them through the engine and marks them done in
    // the transaction that stores them.
    "CREATE TABLE IF NOT EXISTS web_users (
        name TEXT PRIMARY KEY,
        hash TEXT NOT NULL,
        created_ms INTEGER NOT NULL
    );
    ALTER TABLE web_users ADD COLUMN role TEXT NOT NULL DEFAULT 'responder';
    CREATE TABLE manual_inbox (
        id INTEGER PRIMARY KEY,
        instrument TEXT NOT NULL,
        value REAL NOT NULL,
        t_ms INTEGER NOT NULL,
        by TEXT NOT NULL,
        entered_ms INTEGER NOT NULL,
        done_ms INTEGER,
        result TEXT
    );
    CREATE INDEX manual_inbox_waiting ON manual_inbox (done_ms);",
    // 12: a manual reading may carry the thermistor temperature read with it (a vibrating-wire
    // readout box shows both), for the thermal correction.
    "ALTER TABLE manual_inbox ADD COLUMN temperature_c REAL;",
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
        // Another process may be migrating the same file: take the write lock, then look again.
        conn.execute_batch("BEGIN IMMEDIATE")?;
        let step = conn
            .pragma_query_value(None, "user_version", |r| r.get::<_, i64>(0))
            .and_then(|now| {
                if now >= version {
                    return Ok(false);
                }
                conn.execute_batch(&format!("{sql}; PRAGMA user_version = {version};"))?;
                Ok(true)
            });
        match step {
            Ok(migrated) => {
                conn.execute_batch("COMMIT")?;
                if migrated {
                    tracing::info!(version, "Database schema migrated");
                }
            }
            Err(e) => {
                let _ = conn.execute_batch("ROLLBACK");
                return Err(e.into());
            }
        }
    }
    Ok(())
}
