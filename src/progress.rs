//! How long work tells its caller how far it has got, without printing: the library calls a
//! [`Progress`] it is handed, and the command line draws a bar from it (on a terminal only).
//! No I/O here.

/// What a [`Progress`] counts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Unit {
    /// Bytes of a file or extract.
    Bytes,
    /// Rows of a table.
    Rows,
}

/// Told as long work advances. Calls may come from any thread, so an implementation keeps its
/// state behind interior mutability. `start` begins a stage (a new one may follow `finish`).
pub trait Progress: Sync {
    /// A stage begins: `label` says what, `total` how much (0 when not known).
    fn start(&self, label: &str, total: u64, unit: Unit);
    /// `n` more units of the current stage are done.
    fn advance(&self, n: u64);
    /// The current stage is done.
    fn finish(&self);
}

/// A [`Progress`] that ignores everything.
#[derive(Debug, Clone, Copy, Default)]
pub struct NoProgress;

impl Progress for NoProgress {
    fn start(&self, _label: &str, _total: u64, _unit: Unit) {}
    fn advance(&self, _n: u64) {}
    fn finish(&self) {}
}

/// The [`NoProgress`] every caller that shows none can borrow.
pub static NONE: NoProgress = NoProgress;
