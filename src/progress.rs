//! The one channel through which the library reports progress and warnings; the library itself
//! never prints.

/// Receives progress and warnings from a run. The CLI shows a progress bar; tests collect
/// warnings.
pub trait Progress: Sync {
    /// A run of `total` units of work starts.
    fn start(&self, _what: &str, _total: u64) {}
    /// `n` more units are done.
    fn advance(&self, _n: u64) {}
    /// The current run of work is finished.
    fn finish(&self) {}
    /// Something the user should know that does not stop the run.
    fn warn(&self, _message: &str) {}
}

/// Reports nothing.
pub struct Silent;

impl Progress for Silent {}

/// Collects warnings, for tests and for the run summary.
#[derive(Default)]
pub struct Collect {
    /// Every warning, in order.
    pub warnings: std::sync::Mutex<Vec<String>>,
}

impl Progress for Collect {
    fn warn(&self, message: &str) {
        if let Ok(mut w) = self.warnings.lock() {
            w.push(message.to_string());
        }
    }
}
