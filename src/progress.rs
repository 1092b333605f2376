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

/// Passes everything on to another [`Progress`] and keeps the warnings, so that a run can hand
/// them to its outputs (manifest.json, report.html) as well as to the person watching.
pub struct Record<'a> {
    inner: &'a dyn Progress,
    warnings: std::sync::Mutex<Vec<String>>,
}

impl<'a> Record<'a> {
    /// Records the warnings passed on to `inner`.
    pub fn new(inner: &'a dyn Progress) -> Self {
        Self {
            inner,
            warnings: std::sync::Mutex::new(Vec::new()),
        }
    }

    /// Every warning so far, in order, each once.
    pub fn into_warnings(self) -> Vec<String> {
        let mut out: Vec<String> = Vec::new();
        for w in self.warnings.into_inner().unwrap_or_default() {
            if !out.contains(&w) {
                out.push(w);
            }
        }
        out
    }
}

impl Progress for Record<'_> {
    fn start(&self, what: &str, total: u64) {
        self.inner.start(what, total);
    }
    fn advance(&self, n: u64) {
        self.inner.advance(n);
    }
    fn finish(&self) {
        self.inner.finish();
    }
    fn warn(&self, message: &str) {
        if let Ok(mut w) = self.warnings.lock() {
            w.push(message.to_string());
        }
        self.inner.warn(message);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_record_passes_everything_on_and_keeps_each_warning_once() {
        let seen = Collect::default();
        let r = Record::new(&seen);
        r.warn("a");
        r.warn("b");
        r.warn("a");
        assert_eq!(seen.warnings.lock().unwrap().len(), 3);
        assert_eq!(r.into_warnings(), ["a", "b"]);
    }
}
