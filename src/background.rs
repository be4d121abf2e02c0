//! A named background thread that can be woken early and asked to stop: the mail worker and the
//! report scheduler run on it. Owns the wake-up channel (coalescing: one pending wake-up is
//! enough), the stop flag and the bounded wait at shutdown; the work itself belongs to callers.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{Receiver, RecvTimeoutError, SyncSender};
use std::sync::Arc;
use std::time::{Duration, Instant};

/// What the thread sees: wake-ups and the stop request.
pub struct Signals {
    wake: Receiver<()>,
    stop: Arc<AtomicBool>,
}

impl Signals {
    /// Wait for a wake-up or `d`; true when the thread must stop.
    pub fn wait(&self, d: Duration) -> bool {
        match self.wake.recv_timeout(d) {
            Ok(()) | Err(RecvTimeoutError::Timeout) => {}
            Err(RecvTimeoutError::Disconnected) => return true,
        }
        self.stopping()
    }

    /// Whether a stop was requested.
    pub fn stopping(&self) -> bool {
        self.stop.load(Ordering::SeqCst)
    }
}

/// Wakes a background thread from another thread.
#[derive(Clone)]
pub struct Waker(SyncSender<()>);

impl Waker {
    pub fn wake(&self) {
        let _ = self.0.try_send(());
    }
}

/// A running background thread.
pub struct Background {
    wake: SyncSender<()>,
    stop: Arc<AtomicBool>,
    thread: Option<std::thread::JoinHandle<()>>,
}

impl Background {
    /// Start `work` on a thread called `name`.
    ///
    /// # Errors
    /// The thread cannot be spawned.
    pub fn spawn(
        name: &str,
        work: impl FnOnce(&Signals) + Send + 'static,
    ) -> std::io::Result<Background> {
        let (wake, rx) = std::sync::mpsc::sync_channel(1);
        let stop = Arc::new(AtomicBool::new(false));
        let signals = Signals {
            wake: rx,
            stop: Arc::clone(&stop),
        };
        let thread = std::thread::Builder::new()
            .name(name.into())
            .spawn(move || work(&signals))?;
        Ok(Background {
            wake,
            stop,
            thread: Some(thread),
        })
    }

    /// A handle for waking the thread.
    pub fn waker(&self) -> Waker {
        Waker(self.wake.clone())
    }

    /// Ask the thread to stop and wait up to `deadline` for it; a thread still busy then is
    /// left to end with the process.
    pub fn stop(mut self, deadline: Duration) -> bool {
        self.stop.store(true, Ordering::SeqCst);
        let _ = self.wake.try_send(());
        if let Some(t) = self.thread.take() {
            let end = Instant::now() + deadline;
            while !t.is_finished() && Instant::now() < end {
                std::thread::sleep(Duration::from_millis(20));
            }
            if !t.is_finished() {
                return false;
            }
            let _ = t.join();
        }
        true
    }
}
