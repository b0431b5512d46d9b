//! One read of a version for several kinds of work, on every core the caller's thread pool has.
//!
//! The calling thread rebuilds the rows (it holds the store reader, which stays on one thread)
//! and packs them into [`RowBatch`]es; with more than one thread in the pool, a second thread
//! takes each batch and hands it to every [`RowSink`] at once, and each sink may spread its own
//! work (columns, rules) over the pool. A sink sees every batch in extract order, so what it
//! computes is the same with one thread or many.
//! **Memory:** at most four batches are alive (one filling, two waiting, one in work), each
//! [`BATCH_ROWS`] rows or [`BATCH_BYTES`] of text plus one row, whatever the table's size.

use super::version::Version;
use crate::error::Result;
use crate::model::RowBatch;
use crate::progress::{Progress, Unit};
use crate::store::Reader;
use std::ops::ControlFlow;
use std::sync::mpsc;

/// The most rows in one batch.
pub const BATCH_ROWS: usize = 4096;
/// A batch is handed on once its text reaches this many bytes.
pub const BATCH_BYTES: usize = 4 << 20;

/// Work that takes a version's rows a batch at a time, in extract order.
pub trait RowSink: Send {
    /// The next batch of rows.
    fn push_batch(&mut self, batch: &RowBatch);
}

/// Whether the work here should use more than one thread: the caller's pool (the global rayon
/// pool, or the one it runs in) has more than one.
pub fn parallel() -> bool {
    rayon::current_num_threads() > 1
}

/// Hand every row of `version` to every sink, batch by batch; `progress` counts rows under
/// `label`. With one thread, everything runs on the calling thread.
pub fn scan(
    reader: &Reader<'_>,
    version: &Version,
    sinks: &mut [&mut dyn RowSink],
    progress: &dyn Progress,
    label: &str,
) -> Result<()> {
    progress.start(label, version.def.n_rows, Unit::Rows);
    let n_cols = version.header().len();
    let full = |b: &RowBatch| b.len() >= BATCH_ROWS || b.text_bytes() >= BATCH_BYTES;
    if !parallel() {
        let mut batch = RowBatch::new(n_cols);
        version.for_each_row(reader, |row| {
            batch.push(row.pos, row.id.as_str(), row.excluded, row.cells);
            if full(&batch) {
                feed(sinks, &batch);
                progress.advance(batch.len() as u64);
                batch.clear();
            }
            Ok(ControlFlow::Continue(()))
        })?;
        if !batch.is_empty() {
            feed(sinks, &batch);
            progress.advance(batch.len() as u64);
        }
        progress.finish();
        return Ok(());
    }
    let (to_work, work_rx) = mpsc::sync_channel::<RowBatch>(2);
    let (to_fill, fill_rx) = mpsc::channel::<RowBatch>();
    for _ in 0..3 {
        let _ = to_fill.send(RowBatch::new(n_cols));
    }
    std::thread::scope(|s| {
        s.spawn(move || {
            for batch in work_rx {
                feed(sinks, &batch);
                progress.advance(batch.len() as u64);
                // The filler may have stopped (an error); then the batch is dropped.
                let _ = to_fill.send(batch);
            }
        });
        let mut batch = fill_rx.recv().unwrap_or_else(|_| RowBatch::new(n_cols));
        let read = version.for_each_row(reader, |row| {
            batch.push(row.pos, row.id.as_str(), row.excluded, row.cells);
            if full(&batch) {
                let next = fill_rx.recv().unwrap_or_else(|_| RowBatch::new(n_cols));
                let done = std::mem::replace(&mut batch, next);
                if to_work.send(done).is_err() {
                    return Ok(ControlFlow::Break(()));
                }
                batch.clear();
            }
            Ok(ControlFlow::Continue(()))
        });
        if read.is_ok() && !batch.is_empty() {
            let _ = to_work.send(batch);
        }
        // Closing the channel ends the worker once it has taken every batch.
        drop(to_work);
        read
    })?;
    progress.finish();
    Ok(())
}

/// One batch to every sink: side by side when there are several.
fn feed(sinks: &mut [&mut dyn RowSink], batch: &RowBatch) {
    match sinks {
        [] => {}
        [one] => one.push_batch(batch),
        many => rayon::scope(|s| {
            for sink in many.iter_mut() {
                s.spawn(move |_| sink.push_batch(batch));
            }
        }),
    }
}
