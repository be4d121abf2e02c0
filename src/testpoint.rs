//! Crash-test hook shared by the writer, the alerting and the mail worker: a named step where a
//! test can park the process (then SIGKILL it) to prove what survives a crash at that moment.

use std::time::Duration;

/// Crash-test hook: when the environment variable `SEEPD_TEST_PAUSE_AT` names `step`, log
/// "Test pause at STEP" and stop here for good (the test then kills the process with SIGKILL).
/// Steps: `before_commit`, `after_commit` (a commit that queued messages), `after_send` (the
/// relay accepted a message, not yet marked sent), `writer_batch` (the writer took a batch of
/// messages, nothing processed yet). Unset in production: one env lookup.
pub fn pause_point(step: &str) {
    static AT: std::sync::OnceLock<Option<String>> = std::sync::OnceLock::new();
    let at = AT.get_or_init(|| std::env::var("SEEPD_TEST_PAUSE_AT").ok());
    if at.as_deref() == Some(step) {
        tracing::warn!(step, "Test pause at {step}");
        loop {
            std::thread::sleep(Duration::from_secs(3600));
        }
    }
}
