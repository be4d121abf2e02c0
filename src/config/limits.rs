//! Upper bounds of the configuration's durations and counts, in one place.
//!
//! Every duration or count read from a file is bounded here, so that no value a file can hold
//! overflows when it is turned into milliseconds or added to a time (a deadline of
//! 9 223 372 036 854 775 807 s once passed `seepd check` and panicked at shutdown). Each bound
//! is far beyond any sensible setting and is named after what it limits; the readers pass them
//! to the range checks and the message says "expected between LO and HI". Must not read files.

/// One day, in seconds.
pub const DAY_S: i64 = 86_400;

/// The longest interval of time a setting may describe: a leap year. Reading intervals,
/// alignment tolerances, persistence, keep-active, reminder and escalation delays.
pub const YEAR_S: i64 = 366 * DAY_S;

/// The longest interval in hours (models' lags and refit intervals).
pub const YEAR_H: f64 = (YEAR_S / 3600) as f64;

/// The longest model training period, in days (ten years).
pub const TRAINING_DAYS: f64 = 3660.0;

/// How far ahead of its arrival a reading may be stamped before quarantine, at most (a week).
pub const FUTURE_S: i64 = 7 * DAY_S;

/// The widest barometer matching window (a week).
pub const BAROMETER_AGE_S: i64 = 7 * DAY_S;

/// The longest shutdown deadline (an hour: a service manager gives up long before).
pub const SHUTDOWN_S: i64 = 3600;

/// The longest group-commit wait (a minute: acknowledgements wait for it).
pub const COMMIT_MS: i64 = 60_000;

/// The largest group-commit batch (messages).
pub const COMMIT_READINGS: i64 = 1_000_000;

/// The largest MQTT packet the protocol can carry (bytes; MQTT 3.1.1 §2.2.3).
pub const MQTT_PACKET_BYTES: i64 = 268_435_455;

/// The longest reconnect or retry backoff, in milliseconds (an hour).
pub const BACKOFF_MS: i64 = 3_600_000;

/// The longest export flush interval or request time limit, in milliseconds (an hour).
pub const EXPORT_MS: i64 = 3_600_000;

/// The longest mail retry backoff, in seconds (a day).
pub const MAIL_RETRY_S: i64 = DAY_S;

/// The largest multiple of an instrument's interval before it counts as silent.
pub const NO_DATA_FACTOR: f64 = 1000.0;
