//! The one retry schedule of the service: capped exponential backoff, used by export writes,
//! mail delivery and broker reconnects. The wait after the n-th failure in a row is
//! `min · 2^(n−1)`, capped at `max`.

use std::time::Duration;

/// Capped exponential backoff with its count of failures in a row.
#[derive(Debug, Clone)]
pub struct Backoff {
    min: Duration,
    max: Duration,
    /// Failures in a row.
    pub failures: u32,
}

impl Backoff {
    /// A backoff from `min` doubling up to `max` (`max` below `min` is taken as `min`).
    #[must_use]
    pub fn new(min: Duration, max: Duration) -> Backoff {
        Backoff {
            min,
            max: max.max(min),
            failures: 0,
        }
    }

    /// The wait after the `failures`-th failure in a row (0 and 1 both give `min`).
    #[must_use]
    pub fn delay(&self, failures: u32) -> Duration {
        let exp = failures.saturating_sub(1).min(20);
        self.min.saturating_mul(1 << exp).min(self.max)
    }

    /// The retry schedule of a failed database commit (the disk may come back: full, or a
    /// file-size limit): 100 ms doubling to 5 s.
    #[must_use]
    pub fn commit() -> Backoff {
        Backoff::new(Duration::from_millis(100), Duration::from_secs(5))
    }

    /// Count a failure and return how long to wait before the next try.
    pub fn fail(&mut self) -> Duration {
        self.failures = self.failures.saturating_add(1);
        self.delay(self.failures)
    }

    /// A success: the next failure waits `min` again.
    pub fn reset(&mut self) {
        self.failures = 0;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn doubles_from_min_to_the_cap_and_resets() {
        let mut b = Backoff::new(Duration::from_millis(100), Duration::from_millis(1000));
        let waits: Vec<u64> = (0..6).map(|_| b.fail().as_millis() as u64).collect();
        assert_eq!(waits, [100, 200, 400, 800, 1000, 1000]);
        b.reset();
        assert_eq!(b.fail(), Duration::from_millis(100));
        assert_eq!(b.delay(0), Duration::from_millis(100));
        // A huge count neither overflows nor passes the cap.
        assert_eq!(b.delay(u32::MAX), Duration::from_millis(1000));
        // max below min: min.
        let c = Backoff::new(Duration::from_secs(5), Duration::from_secs(1));
        assert_eq!(c.delay(3), Duration::from_secs(5));
    }
}
