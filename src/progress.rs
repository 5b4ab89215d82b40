//! Progress of long work (tables, sweep studies), reported from worker threads to whoever
//! shows it; the library itself never prints.

/// Told of the progress of long work: stages of runs or searches, each item as it begins
/// (optional) and as it finishes.
pub trait Progress: Sync {
    /// A stage begins: `name` (empty for a table's own runs) with `total` items.
    fn stage(&self, name: &str, total: usize);
    /// An item begins, described for a display (a boundary search); runs are not
    /// announced.
    fn item(&self, _what: &str) {}
    /// An item finished.
    fn done(&self);
}

/// Progress reporting that shows nothing.
impl Progress for () {
    fn stage(&self, _: &str, _: usize) {}
    fn done(&self) {}
}
