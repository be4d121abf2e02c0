//! Shared pieces of the fault suite: a seeded random generator (the seed is printed, so a
//! failure can be replayed with `SEEPD_FAULT_SEED`), the figures file, and log polling.

use std::path::Path;
use std::time::Duration;

/// A small xorshift64* generator: fault timings and mutations need variety, not quality.
pub struct Rng(u64);

impl Rng {
    /// Seeded from `SEEPD_FAULT_SEED` if set, else from the clock; the seed goes to stderr.
    pub fn new(scenario: &str) -> Rng {
        let seed = std::env::var("SEEPD_FAULT_SEED")
            .ok()
            .and_then(|s| s.parse().ok())
            .unwrap_or_else(|| {
                std::time::SystemTime::now()
                    .duration_since(std::time::UNIX_EPOCH)
                    .map_or(1, |d| d.as_nanos() as u64)
            });
        eprintln!("{scenario}: SEEPD_FAULT_SEED={seed}");
        Rng(seed | 1)
    }

    pub fn next(&mut self) -> u64 {
        let mut x = self.0;
        x ^= x >> 12;
        x ^= x << 25;
        x ^= x >> 27;
        self.0 = x;
        x.wrapping_mul(0x2545_f491_4f6c_dd1d)
    }

    /// Uniform in `0..n` (n > 0).
    pub fn below(&mut self, n: u64) -> u64 {
        self.next() % n.max(1)
    }

    /// One of `items`.
    pub fn pick<'a, T>(&mut self, items: &'a [T]) -> &'a T {
        &items[self.below(items.len() as u64) as usize]
    }
}

/// Record a scenario's figures (one `key: value` per line) for the README and print them.
pub fn figures(scenario: &str, lines: &[(&str, String)]) {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("fault-figures");
    let _ = std::fs::create_dir_all(&dir);
    let text: String = lines.iter().map(|(k, v)| format!("{k}: {v}\n")).collect();
    let _ = std::fs::write(dir.join(format!("{scenario}.txt")), &text);
    println!("{scenario}\n{text}");
}

/// How many times `needle` appears in the file at `log`.
pub fn log_count(log: &Path, needle: &str) -> usize {
    std::fs::read_to_string(log)
        .unwrap_or_default()
        .matches(needle)
        .count()
}

/// Wait until `needle` appears at least `n` times in `log`.
pub fn wait_log(log: &Path, needle: &str, n: usize, timeout: Duration) -> bool {
    super::common::wait_for(timeout, || (log_count(log, needle) >= n).then_some(())).is_some()
}

/// `PRAGMA integrity_check` of the test database.
pub fn integrity(dir: &Path) -> String {
    super::common::db(dir)
        .query_row("PRAGMA integrity_check", [], |r| r.get(0))
        .unwrap_or_else(|e| format!("error: {e}"))
}

/// Seconds with millisecond precision, for figures.
pub fn secs(d: Duration) -> String {
    format!("{:.3} s", d.as_secs_f64())
}
