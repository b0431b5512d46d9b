//! Streaming reads of stored files, one decompressed chunk at a time, and the small cache that
//! keeps reads of delta chunks linear.

use super::read::Reader;
use crate::hash::{BlobId, ChunkId};
use std::collections::{HashMap, VecDeque};
use std::io::Read;
use std::rc::Rc;

/// A stored file's chunks with their offsets: (chunk, start, length).
pub type Layout = Vec<(ChunkId, u64, u64)>;

/// How many bytes of decompressed chunks a cache keeps.
const CACHE_BYTES: usize = 48 << 20;

/// Recently decompressed chunks and file layouts. A delta chunk needs a range of the previous
/// extract, which may itself be stored as deltas; reading a file in order touches each layer's
/// pieces a few times, so keeping the last few of each layer makes the cost linear. Memory is
/// bounded by [`CACHE_BYTES`] (one piece more at most).
#[derive(Default)]
pub struct ChunkCache {
    chunks: HashMap<ChunkId, Rc<Vec<u8>>>,
    order: VecDeque<ChunkId>,
    bytes: usize,
    layouts: HashMap<BlobId, Rc<Layout>>,
}

impl ChunkCache {
    pub(super) fn get(&mut self, id: &ChunkId) -> Option<Rc<Vec<u8>>> {
        self.chunks.get(id).cloned()
    }

    pub(super) fn put(&mut self, id: ChunkId, bytes: Rc<Vec<u8>>) {
        self.bytes += bytes.len();
        self.chunks.insert(id, bytes);
        self.order.push_back(id);
        while self.bytes > CACHE_BYTES && self.order.len() > 1 {
            let old = self.order.pop_front().expect("order is not empty");
            if let Some(b) = self.chunks.remove(&old) {
                self.bytes -= b.len();
            }
        }
    }

    pub(super) fn layout(&self, id: &BlobId) -> Option<Rc<Layout>> {
        self.layouts.get(id).cloned()
    }

    pub(super) fn put_layout(&mut self, id: BlobId, layout: Rc<Layout>) {
        self.layouts.insert(id, layout);
    }
}

/// `Read` over a stored file's bytes. Memory: the chunk cache.
pub struct BlobReader<'a> {
    reader: Reader<'a>,
    id: BlobId,
    hasher: blake3::Hasher,
    checked: bool,
    chunks: std::vec::IntoIter<ChunkId>,
    cache: ChunkCache,
    current: Rc<Vec<u8>>,
    pos: usize,
}

impl<'a> BlobReader<'a> {
    pub(super) fn new(reader: Reader<'a>, id: BlobId, chunks: Vec<ChunkId>) -> Self {
        BlobReader {
            reader,
            id,
            hasher: blake3::Hasher::new(),
            checked: false,
            chunks: chunks.into_iter(),
            cache: ChunkCache::default(),
            current: Rc::new(Vec::new()),
            pos: 0,
        }
    }

    /// The next whole chunk (id and bytes), for callers that check pieces one by one.
    pub fn next_chunk(&mut self) -> crate::Result<Option<(ChunkId, Rc<Vec<u8>>)>> {
        let Some(next) = self.chunks.next() else {
            // Each piece was checked against its own hash as it was read; the whole file is
            // checked against its id here, so pieces swapped, dropped or added are caught
            // before a reader takes the last byte as the end.
            if !self.checked {
                self.checked = true;
                if *self.hasher.finalize().as_bytes() != *self.id.as_bytes() {
                    return Err(crate::Error::Tampered(format!(
                        "stored file {} does not match its hash: its pieces were changed, swapped or cut",
                        self.id.short()
                    )));
                }
            }
            return Ok(None);
        };
        let bytes = self.reader.chunk_bytes_once(&next, &mut self.cache)?;
        self.hasher.update(&bytes);
        Ok(Some((next, bytes)))
    }
}

impl Read for BlobReader<'_> {
    fn read(&mut self, out: &mut [u8]) -> std::io::Result<usize> {
        while self.pos >= self.current.len() {
            match self.next_chunk().map_err(std::io::Error::other)? {
                Some((_, bytes)) => {
                    self.current = bytes;
                    self.pos = 0;
                }
                None => return Ok(0),
            }
        }
        let n = out.len().min(self.current.len() - self.pos);
        out[..n].copy_from_slice(&self.current[self.pos..self.pos + n]);
        self.pos += n;
        Ok(n)
    }
}
