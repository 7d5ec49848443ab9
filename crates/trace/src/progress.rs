//! How far an import has got, and a way to stop it: shared between the importer and whoever
//! watches it (a window's progress bar and cancel button).

use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};

/// Byte counts of an import in progress, and its cancel flag. Every count only grows; reads
/// from another thread see a value at most one block old.
///
/// The importer sets the total and counts the bytes it has parsed. A caller that reads the
/// file into memory itself first (to hash it, say) counts its reading with
/// [`Progress::add_read`], so one bar can show both stages.
#[derive(Debug, Default)]
pub struct Progress {
    total: AtomicU64,
    read: AtomicU64,
    parsed: AtomicU64,
    cancelled: AtomicBool,
}

impl Progress {
    /// Sets the size of the source in bytes.
    pub fn set_total(&self, bytes: u64) {
        self.total.store(bytes, Ordering::Relaxed);
    }

    /// Counts `bytes` more read by the caller.
    pub fn add_read(&self, bytes: u64) {
        self.read.fetch_add(bytes, Ordering::Relaxed);
    }

    /// Counts `bytes` more parsed (the importer calls it for every block it takes).
    pub fn add_parsed(&self, bytes: u64) {
        self.parsed.fetch_add(bytes, Ordering::Relaxed);
    }

    /// The size of the source in bytes, 0 while unknown.
    pub fn total(&self) -> u64 {
        self.total.load(Ordering::Relaxed)
    }

    /// Bytes read by the caller so far.
    pub fn read(&self) -> u64 {
        self.read.load(Ordering::Relaxed)
    }

    /// Bytes parsed so far.
    pub fn parsed(&self) -> u64 {
        self.parsed.load(Ordering::Relaxed)
    }

    /// Asks the import to stop. It returns [`crate::ImportError::Cancelled`] at its next
    /// block (every 1 MiB of text).
    pub fn cancel(&self) {
        self.cancelled.store(true, Ordering::Relaxed);
    }

    /// Whether [`Progress::cancel`] was called.
    pub fn is_cancelled(&self) -> bool {
        self.cancelled.load(Ordering::Relaxed)
    }
}
