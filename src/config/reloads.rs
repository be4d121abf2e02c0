//! The hand-over of a reloaded configuration: the SIGHUP handler sends a checked
//! configuration, the writer thread takes the newest between batches (`crate::reload` does the
//! check and the swap).

use std::sync::mpsc::{Receiver, Sender};
use std::sync::Arc;

use super::Config;

/// The writer thread's end of reloads: configurations checked and waiting to be applied.
pub struct Reloads(Receiver<Arc<Config>>);

/// Make the channel between the signal handler and the writer thread.
pub fn channel() -> (Sender<Arc<Config>>, Reloads) {
    let (tx, rx) = std::sync::mpsc::channel();
    (tx, Reloads(rx))
}

impl Reloads {
    /// The newest configuration waiting, if any (older ones are skipped).
    pub fn take(&self) -> Option<Arc<Config>> {
        self.0.try_iter().last()
    }
}
