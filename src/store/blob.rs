//! Streaming reads of stored files, one decompressed chunk in memory at a time.

use super::Reader;
use crate::hash::ChunkId;
use std::io::Read;

/// `Read` over a stored file's bytes. Memory: one chunk.
pub struct BlobReader<'a> {
    reader: Reader<'a>,
    chunks: std::vec::IntoIter<ChunkId>,
    buf: Vec<u8>,
    pos: usize,
}

impl<'a> BlobReader<'a> {
    pub(super) fn new(reader: Reader<'a>, chunks: Vec<ChunkId>) -> Self {
        BlobReader {
            reader,
            chunks: chunks.into_iter(),
            buf: Vec::new(),
            pos: 0,
        }
    }
}

impl Read for BlobReader<'_> {
    fn read(&mut self, out: &mut [u8]) -> std::io::Result<usize> {
        while self.pos >= self.buf.len() {
            let Some(next) = self.chunks.next() else {
                return Ok(0);
            };
            self.buf.clear();
            self.pos = 0;
            self.reader
                .read_chunk(&next, &mut self.buf)
                .map_err(std::io::Error::other)?;
        }
        let n = out.len().min(self.buf.len() - self.pos);
        out[..n].copy_from_slice(&self.buf[self.pos..self.pos + n]);
        self.pos += n;
        Ok(n)
    }
}
