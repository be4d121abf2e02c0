//! A named background thread that can be woken early and stops on the service's shutdown: the
//! mail worker and the report scheduler run on it. Owns the wake-up channel (coalescing: one
//! pending wake-up is enough) and the bounded wait for the thread at shutdown; the stop request
//! itself is the service's one `Shutdown`; the work belongs to callers.

use std::sync::mpsc::{Receiver, RecvTimeoutError, SyncSender};
use std::time::{Duration, Instant};

use crate::shutdown::Shutdown;

/// What the thread sees: wake-ups and the stop request.
pub struct Signals {
    wake: Receiver<()>,
    shutdown: Shutdown,
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
        self.shutdown.is_requested()
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
    shutdown: Shutdown,
    thread: Option<std::thread::JoinHandle<()>>,
}

impl Background {
    /// Start `work` on a thread called `name`; it is woken when `shutdown` is requested.
    ///
    /// # Errors
    /// The thread cannot be spawned.
    pub fn spawn(
        name: &str,
        shutdown: &Shutdown,
        work: impl FnOnce(&Signals) + Send + 'static,
    ) -> std::io::Result<Background> {
        let (wake, rx) = std::sync::mpsc::sync_channel(1);
        let signals = Signals {
            wake: rx,
            shutdown: shutdown.clone(),
        };
        let thread = std::thread::Builder::new()
            .name(name.into())
            .spawn(move || work(&signals))?;
        let waker = Waker(wake.clone());
        shutdown.on_request(move || waker.wake());
        Ok(Background {
            wake,
            shutdown: shutdown.clone(),
            thread: Some(thread),
        })
    }

    /// A handle for waking the thread.
    pub fn waker(&self) -> Waker {
        Waker(self.wake.clone())
    }

    /// Request the shutdown (if not yet) and wait for the thread until the shutdown's end;
    /// false if it is still busy then (it is left to end with the process).
    pub fn join(mut self) -> bool {
        self.shutdown.request();
        if let Some(t) = self.thread.take() {
            let end = self.shutdown.end();
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
