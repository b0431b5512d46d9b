//! How a stored piece of a file is encoded: the codec numbers kept in the `chunk` table, and
//! the one encoder that every writer (ingest, evidence files) goes through.
//!
//! A file is stored as pieces of [`PIECE_SIZE`] bytes, each addressed by the BLAKE3 hash of its
//! raw bytes. A piece is kept plain ([`Codec::Stored`], only ever written by tests that tamper),
//! as a zstd frame ([`Codec::Zstd`]), or as a zstd frame against a byte range of an earlier
//! stored file used as a reference prefix ([`Codec::Delta`]): the previous extract of the same
//! table, so a monthly re-extract costs little more than its changed rows.

use crate::error::{Error, Result};
use crate::hash::{BlobId, ChunkId, Digest};

/// Size of a stored piece of a file.
pub const PIECE_SIZE: usize = 1 << 20;

/// zstd level for pieces: level 1 is as small as 3 on CSV and much faster.
pub const ZSTD_LEVEL: i32 = 1;

/// The codec numbers of the `chunk` table. Released numbers never change meaning.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Codec {
    /// The raw bytes, uncompressed.
    Stored,
    /// One zstd frame.
    Zstd,
    /// One zstd frame against a reference prefix taken from an earlier stored file.
    Delta,
}

impl Codec {
    /// The number stored in the `chunk.codec` column.
    pub fn code(self) -> i64 {
        match self {
            Codec::Stored => 0,
            Codec::Zstd => 1,
            Codec::Delta => 2,
        }
    }

    /// The codec a stored number names, if any.
    pub fn from_code(code: i64) -> Option<Codec> {
        Some(match code {
            0 => Codec::Stored,
            1 => Codec::Zstd,
            2 => Codec::Delta,
            _ => return None,
        })
    }
}

/// The reference of a delta piece: a stored file and the byte range `lo..hi` used as prefix.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct DeltaBase {
    /// The stored file.
    pub blob: BlobId,
    /// First byte of the range.
    pub lo: u64,
    /// One past the last byte.
    pub hi: u64,
}

/// A piece ready for [`super::WriteTx::put_piece`].
#[derive(Clone, Debug)]
pub struct EncodedPiece {
    /// BLAKE3 of the raw bytes.
    pub id: ChunkId,
    /// Length of the raw bytes.
    pub raw_len: u64,
    /// How `data` encodes them.
    pub codec: Codec,
    /// The reference of a [`Codec::Delta`] piece.
    pub base: Option<DeltaBase>,
    /// The encoded bytes; `None` when the store already holds this piece.
    pub data: Option<Vec<u8>>,
}

/// Encodes pieces, reusing one zstd context.
pub struct PieceEncoder {
    compressor: zstd::bulk::Compressor<'static>,
}

impl PieceEncoder {
    /// A new encoder at [`ZSTD_LEVEL`].
    pub fn new() -> Result<PieceEncoder> {
        Ok(PieceEncoder {
            compressor: zstd::bulk::Compressor::new(ZSTD_LEVEL)
                .map_err(|e| Error::io("<compressor>", e))?,
        })
    }

    /// A piece the store already holds: nothing to encode.
    pub fn known(piece: &[u8]) -> EncodedPiece {
        EncodedPiece {
            id: ChunkId(Digest::of(piece)),
            raw_len: piece.len() as u64,
            codec: Codec::Zstd,
            base: None,
            data: None,
        }
    }

    /// A piece as one zstd frame.
    pub fn plain(&mut self, piece: &[u8]) -> Result<EncodedPiece> {
        let data = self
            .compressor
            .compress(piece)
            .map_err(|e| Error::io("<compressor>", e))?;
        Ok(EncodedPiece {
            data: Some(data),
            ..PieceEncoder::known(piece)
        })
    }

    /// A piece as a delta against `prefix` (the bytes of `base`), unless plain zstd is smaller:
    /// a weak delta (an unrelated file) is kept only if it still beats plain zstd, so unrelated
    /// files do not grow long reference chains.
    pub fn delta(&mut self, piece: &[u8], prefix: &[u8], base: DeltaBase) -> Result<EncodedPiece> {
        let delta =
            delta_compress(piece, prefix, ZSTD_LEVEL).map_err(|e| Error::io("<compressor>", e))?;
        if delta.len() as u64 > piece.len() as u64 / 8 {
            let plain = self.plain(piece)?;
            if plain.data.as_ref().is_some_and(|p| p.len() <= delta.len()) {
                return Ok(plain);
            }
        }
        Ok(EncodedPiece {
            codec: Codec::Delta,
            base: Some(base),
            data: Some(delta),
            ..PieceEncoder::known(piece)
        })
    }
}

/// Decodes a [`Codec::Stored`] or [`Codec::Zstd`] piece; a delta needs its prefix
/// ([`delta_decompress`]).
pub fn decode_plain(codec: Codec, data: Vec<u8>, raw_len: usize) -> std::io::Result<Vec<u8>> {
    match codec {
        Codec::Stored => Ok(data),
        Codec::Zstd => zstd::bulk::decompress(&data, raw_len),
        Codec::Delta => Err(std::io::Error::other("a delta piece needs its reference")),
    }
}

/// zstd parameters for delta pieces: a window that covers the reference and the piece.
const DELTA_WINDOW_LOG: u32 = 24;

/// Compress `data` against `prefix` (zstd reference prefix with long-distance matching).
pub fn delta_compress(data: &[u8], prefix: &[u8], level: i32) -> std::io::Result<Vec<u8>> {
    use zstd::zstd_safe::{CCtx, CParameter};
    let err = |code: usize| std::io::Error::other(zstd::zstd_safe::get_error_name(code));
    let mut cctx = CCtx::create();
    cctx.set_parameter(CParameter::CompressionLevel(level))
        .map_err(err)?;
    cctx.set_parameter(CParameter::WindowLog(DELTA_WINDOW_LOG))
        .map_err(err)?;
    cctx.set_parameter(CParameter::EnableLongDistanceMatching(true))
        .map_err(err)?;
    cctx.ref_prefix(prefix).map_err(err)?;
    let mut out = Vec::with_capacity(zstd::zstd_safe::compress_bound(data.len()));
    cctx.compress2(&mut out, data).map_err(err)?;
    Ok(out)
}

/// Undo [`delta_compress`].
pub fn delta_decompress(frame: &[u8], prefix: &[u8], raw_len: usize) -> std::io::Result<Vec<u8>> {
    use zstd::zstd_safe::{DCtx, DParameter};
    let err = |code: usize| std::io::Error::other(zstd::zstd_safe::get_error_name(code));
    let mut dctx = DCtx::create();
    dctx.set_parameter(DParameter::WindowLogMax(DELTA_WINDOW_LOG + 1))
        .map_err(err)?;
    dctx.ref_prefix(prefix).map_err(err)?;
    let mut out = Vec::with_capacity(raw_len);
    dctx.decompress(&mut out, frame).map_err(err)?;
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn codec_numbers_are_frozen() {
        for (codec, code) in [(Codec::Stored, 0), (Codec::Zstd, 1), (Codec::Delta, 2)] {
            assert_eq!(codec.code(), code);
            assert_eq!(Codec::from_code(code), Some(codec));
        }
        assert_eq!(Codec::from_code(3), None);
    }

    #[test]
    fn pieces_round_trip_plain_and_as_deltas() {
        let base: Vec<u8> = (0..200_000u32)
            .flat_map(|i| (i % 977).to_le_bytes())
            .collect();
        let mut piece = base[1000..150_000].to_vec();
        piece[5000] ^= 0xff;
        let mut enc = PieceEncoder::new().unwrap();
        let plain = enc.plain(&piece).unwrap();
        assert_eq!(plain.codec, Codec::Zstd);
        let back = decode_plain(plain.codec, plain.data.unwrap(), piece.len()).unwrap();
        assert_eq!(back, piece);
        let reference = DeltaBase {
            blob: BlobId(Digest::of(&base)),
            lo: 0,
            hi: base.len() as u64,
        };
        let delta = enc.delta(&piece, &base, reference).unwrap();
        assert_eq!(
            delta.codec,
            Codec::Delta,
            "a near-copy of the reference is a delta"
        );
        let data = delta.data.unwrap();
        assert!(data.len() < piece.len() / 50, "{} bytes", data.len());
        assert_eq!(delta_decompress(&data, &base, piece.len()).unwrap(), piece);
        assert_eq!(delta.id, ChunkId(Digest::of(&piece)));
    }
}
