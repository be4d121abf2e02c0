//! The one shutdown signal of the service: requested once (a signal, the demo's end, a test),
//! observed by every task (`wait`, `sleep`) and every thread (`is_requested`, `sleep_blocking`,
//! registered wake-ups), and carrying the one deadline everything must stop within
//! (`[service] shutdown_deadline_s`, counted from the request).

use std::sync::{Arc, Condvar, Mutex, OnceLock};
use std::time::{Duration, Instant};

/// Cloneable handle on the service's shutdown.
#[derive(Clone)]
pub struct Shutdown(Arc<Inner>);

struct Inner {
    /// Async observers.
    tx: tokio::sync::watch::Sender<bool>,
    /// Thread observers.
    flag: Mutex<bool>,
    cv: Condvar,
    /// When the stop was requested.
    at: OnceLock<Instant>,
    /// How long everything has to stop once requested.
    deadline: Duration,
    /// Called once at the request (e.g. to wake a sleeping background thread).
    on_request: Mutex<Vec<Box<dyn Fn() + Send>>>,
}

impl std::fmt::Debug for Shutdown {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Shutdown")
            .field("requested", &self.is_requested())
            .field("deadline", &self.0.deadline)
            .finish()
    }
}

impl Shutdown {
    /// A shutdown not yet requested, with `deadline` to stop in once it is.
    #[must_use]
    pub fn new(deadline: Duration) -> Shutdown {
        Shutdown(Arc::new(Inner {
            tx: tokio::sync::watch::Sender::new(false),
            flag: Mutex::new(false),
            cv: Condvar::new(),
            at: OnceLock::new(),
            deadline,
            on_request: Mutex::new(Vec::new()),
        }))
    }

    /// Request the stop (idempotent: the first request starts the deadline).
    pub fn request(&self) {
        let _ = self.0.at.set(Instant::now());
        self.0.tx.send_replace(true);
        *self
            .0
            .flag
            .lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner) = true;
        self.0.cv.notify_all();
        self.run_registered();
    }

    /// Run (once) the calls registered with `on_request`.
    fn run_registered(&self) {
        let calls = std::mem::take(
            &mut *self
                .0
                .on_request
                .lock()
                .unwrap_or_else(std::sync::PoisonError::into_inner),
        );
        for f in calls {
            f();
        }
    }

    /// Whether the stop has been requested.
    #[must_use]
    pub fn is_requested(&self) -> bool {
        self.0.at.get().is_some()
    }

    /// Run `f` when the stop is requested (at once if it already was).
    pub fn on_request(&self, f: impl Fn() + Send + 'static) {
        if self.is_requested() {
            f();
            return;
        }
        self.0
            .on_request
            .lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner)
            .push(Box::new(f));
        // A request that came in between the check and the push has already run the list.
        if self.is_requested() {
            self.run_registered();
        }
    }

    /// Resolves when the stop is requested.
    pub async fn wait(&self) {
        let mut rx = self.0.tx.subscribe();
        let _ = rx.wait_for(|s| *s).await;
    }

    /// Sleep `d` unless the stop comes first; true if it did.
    pub async fn sleep(&self, d: Duration) -> bool {
        tokio::select! {
            () = tokio::time::sleep(d) => self.is_requested(),
            () = self.wait() => true,
        }
    }

    /// Block the calling thread for `d` unless the stop comes first; true if it did.
    #[must_use]
    pub fn sleep_blocking(&self, d: Duration) -> bool {
        let guard = self
            .0
            .flag
            .lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner);
        let (guard, _) = self
            .0
            .cv
            .wait_timeout_while(guard, d, |stopped| !*stopped)
            .unwrap_or_else(std::sync::PoisonError::into_inner);
        *guard
    }

    /// The time allowed to stop.
    #[must_use]
    pub fn deadline(&self) -> Duration {
        self.0.deadline
    }

    /// When everything must have stopped (the deadline from now if not yet requested).
    #[must_use]
    pub fn end(&self) -> Instant {
        self.0.at.get().copied().unwrap_or_else(Instant::now) + self.0.deadline
    }

    /// Time left until `end`.
    #[must_use]
    pub fn left(&self) -> Duration {
        self.end().saturating_duration_since(Instant::now())
    }

    /// Request the stop on SIGINT or SIGTERM (spawned on the current runtime).
    pub fn request_on_signal(&self) {
        let me = self.clone();
        tokio::spawn(async move {
            signal().await;
            me.request();
        });
    }
}

/// Resolves on SIGINT or SIGTERM.
pub async fn signal() {
    #[cfg(unix)]
    {
        use tokio::signal::unix::{signal, SignalKind};
        match signal(SignalKind::terminate()) {
            Ok(mut term) => {
                tokio::select! {
                    _ = tokio::signal::ctrl_c() => {}
                    _ = term.recv() => {}
                }
            }
            Err(_) => {
                let _ = tokio::signal::ctrl_c().await;
            }
        }
    }
    #[cfg(not(unix))]
    {
        let _ = tokio::signal::ctrl_c().await;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[tokio::test]
    async fn every_kind_of_observer_sees_one_request() {
        let s = Shutdown::new(Duration::from_secs(3));
        assert!(!s.is_requested());
        let woken = Arc::new(std::sync::atomic::AtomicUsize::new(0));
        let w = Arc::clone(&woken);
        s.on_request(move || {
            w.fetch_add(1, std::sync::atomic::Ordering::SeqCst);
        });
        let t = s.clone();
        let thread = std::thread::spawn(move || t.sleep_blocking(Duration::from_secs(30)));
        let a = s.clone();
        let task = tokio::spawn(async move { a.sleep(Duration::from_secs(30)).await });
        tokio::time::sleep(Duration::from_millis(50)).await;
        s.request();
        s.request();
        assert!(thread.join().unwrap());
        assert!(task.await.unwrap());
        assert_eq!(woken.load(std::sync::atomic::Ordering::SeqCst), 1);
        assert!(s.left() <= Duration::from_secs(3));
        assert!(s.left() > Duration::from_secs(2));
        // Registered after the request: runs at once.
        let w = Arc::clone(&woken);
        s.on_request(move || {
            w.fetch_add(1, std::sync::atomic::Ordering::SeqCst);
        });
        assert_eq!(woken.load(std::sync::atomic::Ordering::SeqCst), 2);
    }

    #[tokio::test]
    async fn sleeps_run_their_length_without_a_request() {
        let s = Shutdown::new(Duration::from_secs(1));
        assert!(!s.sleep(Duration::from_millis(20)).await);
        assert!(!s.sleep_blocking(Duration::from_millis(20)));
    }
}
