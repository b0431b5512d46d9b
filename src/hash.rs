//! Canonical bytes to BLAKE3 ids.
//!
//! Every id in emend is a 32-byte BLAKE3 digest wrapped in a newtype so that a chunk id can never
//! be passed where a commit id is expected. `Display` shows full lowercase hex; `short()` shows
//! the first 12 digits. This module does no I/O.

use serde::{Deserialize, Serialize};
use std::fmt;

/// A 32-byte BLAKE3 digest.
#[derive(Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
pub struct Digest(pub [u8; 32]);

impl Digest {
    /// BLAKE3 of `bytes`.
    ///
    /// ```
    /// // Source: BLAKE3 official test vectors, input length 0 (tests/reference/blake3_vectors.json)
    /// let d = emend::hash::Digest::of(b"");
    /// assert_eq!(d.to_hex(), "af1349b9f5f9a1a6a0404dea36dcc9499bcb25c9adc112b7cc9a93cae41f3262");
    /// ```
    pub fn of(bytes: &[u8]) -> Self {
        Digest(*blake3::hash(bytes).as_bytes())
    }

    /// Full lowercase hex.
    pub fn to_hex(&self) -> String {
        data_encoding::HEXLOWER.encode(&self.0)
    }

    /// Parse 64 hex digits.
    pub fn from_hex(text: &str) -> Option<Self> {
        let bytes = data_encoding::HEXLOWER_PERMISSIVE
            .decode(text.as_bytes())
            .ok()?;
        Some(Digest(bytes.try_into().ok()?))
    }

    /// The first 12 hex digits, for people.
    pub fn short(&self) -> String {
        self.to_hex()[..12].to_string()
    }
}

impl fmt::Display for Digest {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.to_hex())
    }
}

impl fmt::Debug for Digest {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "Digest({})", self.short())
    }
}

macro_rules! id_type {
    ($(#[$doc:meta])* $name:ident) => {
        $(#[$doc])*
        #[derive(Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
        pub struct $name(pub Digest);

        impl $name {
            /// Full lowercase hex.
            pub fn to_hex(&self) -> String {
                self.0.to_hex()
            }
            /// The first 12 hex digits, for people.
            pub fn short(&self) -> String {
                self.0.short()
            }
            /// The raw digest bytes.
            pub fn as_bytes(&self) -> &[u8; 32] {
                &self.0 .0
            }
            /// Wrap digest bytes read back from the store.
            pub fn from_bytes(bytes: [u8; 32]) -> Self {
                $name(Digest(bytes))
            }
        }

        impl fmt::Display for $name {
            fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                fmt::Display::fmt(&self.0, f)
            }
        }

        impl fmt::Debug for $name {
            fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                write!(f, concat!(stringify!($name), "({})"), self.short())
            }
        }
    };
}

id_type!(
    /// The id of a stored file (an extract or an evidence file): BLAKE3 of its bytes.
    BlobId
);
id_type!(
    /// The id of a stored piece of a file: BLAKE3 of the piece's uncompressed bytes.
    ChunkId
);
id_type!(
    /// The id of a commit: BLAKE3 of its canonical body.
    CommitId
);
id_type!(
    /// The canonical hash of one table version (header, cells and marks), independent of the
    /// CSV dialect.
    VersionHash
);

/// A streaming canonical hasher for table versions.
///
/// Every item is written with a one-byte tag and a length prefix, so no two different
/// sequences of items can produce the same byte stream. Items are gathered in a buffer and fed
/// to BLAKE3 in large blocks: a version has millions of small cells, and one hasher call per
/// cell would cost more than the hashing itself. The result does not depend on the buffering.
pub struct VersionHasher {
    inner: blake3::Hasher,
    buf: Vec<u8>,
}

const HASH_BLOCK: usize = 64 * 1024;

impl Default for VersionHasher {
    fn default() -> Self {
        Self::new()
    }
}

impl VersionHasher {
    /// A hasher with emend's domain separation prefix.
    pub fn new() -> Self {
        let mut buf = Vec::with_capacity(HASH_BLOCK + 1024);
        buf.extend_from_slice(b"emend table version v1\0");
        VersionHasher {
            inner: blake3::Hasher::new(),
            buf,
        }
    }

    /// Add a tagged, length-prefixed string (or a missing value when `None`).
    #[inline]
    pub fn item(&mut self, tag: u8, text: Option<&str>) {
        match text {
            None => self.buf.extend_from_slice(&[tag, 0]),
            Some(t) => {
                self.buf.extend_from_slice(&[tag, 1]);
                self.buf.extend_from_slice(&(t.len() as u64).to_le_bytes());
                self.buf.extend_from_slice(t.as_bytes());
            }
        }
        if self.buf.len() >= HASH_BLOCK {
            self.inner.update(&self.buf);
            self.buf.clear();
        }
    }

    /// The final hash.
    pub fn finish(&self) -> VersionHash {
        let mut h = self.inner.clone();
        h.update(&self.buf);
        VersionHash(Digest(*h.finalize().as_bytes()))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn reference() -> serde_json::Value {
        crate::testdata::reference("blake3_vectors.json")
    }

    #[test]
    fn blake3_official_vectors() {
        // Source: BLAKE3 official test vectors, BLAKE3-team/BLAKE3 test_vectors/test_vectors.json
        // (tests/reference/blake3_vectors.json); input byte i is i mod 251.
        let doc = reference();
        let cases = doc["cases"].as_array().expect("cases array");
        assert!(cases.len() >= 12);
        for case in cases {
            let n = case["input_len"].as_u64().expect("input_len") as usize;
            let input: Vec<u8> = (0..n).map(|i| (i % 251) as u8).collect();
            let expected = case["hash"].as_str().expect("hash");
            assert_eq!(Digest::of(&input).to_hex(), expected[..64], "length {n}");
        }
    }

    #[test]
    fn hex_round_trip_and_short() {
        let d = Digest::of(b"river");
        assert_eq!(Digest::from_hex(&d.to_hex()), Some(d));
        assert_eq!(d.short().len(), 12);
        assert_eq!(Digest::from_hex("zz"), None);
    }

    #[test]
    fn version_hasher_separates_items() {
        let mut a = VersionHasher::new();
        a.item(1, Some("ab"));
        a.item(1, Some("c"));
        let mut b = VersionHasher::new();
        b.item(1, Some("a"));
        b.item(1, Some("bc"));
        assert_ne!(a.finish(), b.finish());
        let mut c = VersionHasher::new();
        c.item(1, None);
        let mut d = VersionHasher::new();
        d.item(1, Some(""));
        assert_ne!(c.finish(), d.finish());
        // Buffering does not change the result: the same items, past several blocks, hash
        // to BLAKE3 of the plain concatenation.
        let mut big = VersionHasher::new();
        let mut plain = b"emend table version v1\0".to_vec();
        for i in 0..20_000u32 {
            let t = format!("cell {i}");
            big.item(4, Some(&t));
            plain.extend_from_slice(&[4, 1]);
            plain.extend_from_slice(&(t.len() as u64).to_le_bytes());
            plain.extend_from_slice(t.as_bytes());
        }
        assert_eq!(big.finish().0, Digest::of(&plain));
    }
}
