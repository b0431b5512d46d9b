//! The row map of an extract: where each row starts, found without reading the table.
//!
//! Rows are cut into groups of at most [`GROUP_ROWS`] rows and about [`GROUP_BYTES`] bytes; for
//! each group the map keeps the position of its first row, its byte offset in the extract and
//! its line. A keyed table also gets a compact key map: for every row, a few bits of a stable
//! hash of its id and the number of its group, sorted into buckets by the hash's top bits. A
//! lookup reads one bucket (a few dozen entries) and then only the groups it names, so finding
//! a row by key or by position costs the same at ten million rows as at a thousand.
//!
//! The map only says where to look: a reader parses the group and compares the row's id, so a
//! map that names the wrong group finds nothing rather than a wrong row (and a caller that finds
//! nothing reads the whole table before saying a row does not exist). The map is derived from
//! the extract, written with the ingest and recomputed by `verify`.
//!
//! Layout, little-endian: the magic `emrm`, format 1 (u32); rows (u64), groups (u32), end offset
//! of the data (u64); per group its first position, offset and line (3 × u64); keyed (u8); for a
//! keyed map bucket bits, remainder bits and group bits (u8 each) and the number of entries
//! (u64), then `2^bucket bits + 1` bucket starts (u32) and the entries, each `remainder bits +
//! group bits` wide, packed from the lowest bit up.

/// A group holds at most this many rows.
pub const GROUP_ROWS: u64 = 4096;
/// A new group begins once a group's rows span this many bytes.
pub const GROUP_BYTES: u64 = 256 * 1024;
/// Bits of the hash kept beside each entry after its bucket: a lookup reads another row's group
/// with probability about `rows per bucket / 2^REM_BITS`.
const REM_BITS: u32 = 12;
/// Rows per bucket aimed at.
const BUCKET_ROWS: u64 = 64;
const MAGIC: &[u8; 4] = b"emrm";
const FORMAT: u32 = 1;
const HEAD: usize = 4 + 4 + 8 + 4 + 8;
const GROUP_ENTRY: usize = 24;

/// The stable 64-bit hash of a row id that the key map and ingest's duplicate check use:
/// FNV-1a over the bytes, then the 64-bit finaliser of MurmurHash3 to spread the bits (both
/// public-domain algorithms; the constants are theirs). Stable across builds and platforms, as
/// a stored map needs.
pub fn key_hash(id: &[u8]) -> u64 {
    let mut h = fnv1a64(id);
    h ^= h >> 33;
    h = h.wrapping_mul(0xff51_afd7_ed55_8ccd);
    h ^= h >> 33;
    h = h.wrapping_mul(0xc4ce_b9fe_1a85_ec53);
    h ^ (h >> 33)
}

/// FNV-1a, 64 bits.
fn fnv1a64(bytes: &[u8]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for &b in bytes {
        h ^= u64::from(b);
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    h
}

/// One group of rows: its first row's 1-based position, byte offset and line.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Group {
    /// Position of the group's first row.
    pub first_pos: u64,
    /// Byte offset of that row in the extract.
    pub offset: u64,
    /// Its line in the extract.
    pub line: u64,
}

/// Builds a row map as ingest reads the rows.
#[derive(Debug, Default)]
pub struct RowMapBuilder {
    groups: Vec<Group>,
    in_group: u64,
    keyed: bool,
    entries: Vec<(u64, u32)>,
    n_rows: u64,
}

impl RowMapBuilder {
    /// A builder; `keyed` tables also get the key map.
    pub fn new(keyed: bool) -> Self {
        RowMapBuilder {
            keyed,
            ..Default::default()
        }
    }

    /// Add the next row: its 1-based position, the offset and line of its first byte, and
    /// (for a keyed table) the [`key_hash`] of its id.
    pub fn row(&mut self, pos: u64, offset: u64, line: u64, hash: u64) {
        let start_new = match self.groups.last() {
            None => true,
            Some(g) => self.in_group >= GROUP_ROWS || offset - g.offset >= GROUP_BYTES,
        };
        if start_new {
            self.groups.push(Group {
                first_pos: pos,
                offset,
                line,
            });
            self.in_group = 0;
        }
        self.in_group += 1;
        self.n_rows = pos;
        if self.keyed {
            self.entries.push((hash, self.groups.len() as u32 - 1));
        }
    }

    /// The hashes that more than one row's id has (each once), for the duplicate-key check.
    pub fn repeated_hashes(&mut self) -> Vec<u64> {
        self.entries.sort_unstable();
        let mut out: Vec<u64> = self
            .entries
            .windows(2)
            .filter(|w| w[0].0 == w[1].0)
            .map(|w| w[0].0)
            .collect();
        out.dedup();
        out
    }

    /// Encode the map; `end` is the offset just past the last row's bytes.
    pub fn finish(mut self, end: u64) -> Vec<u8> {
        let mut out = Vec::with_capacity(HEAD + self.groups.len() * GROUP_ENTRY + 16);
        out.extend_from_slice(MAGIC);
        out.extend_from_slice(&FORMAT.to_le_bytes());
        out.extend_from_slice(&self.n_rows.to_le_bytes());
        out.extend_from_slice(&(self.groups.len() as u32).to_le_bytes());
        out.extend_from_slice(&end.to_le_bytes());
        for g in &self.groups {
            out.extend_from_slice(&g.first_pos.to_le_bytes());
            out.extend_from_slice(&g.offset.to_le_bytes());
            out.extend_from_slice(&g.line.to_le_bytes());
        }
        out.push(u8::from(self.keyed));
        if !self.keyed {
            return out;
        }
        let n = self.entries.len() as u64;
        let bucket_bits = bits_for(n.div_ceil(BUCKET_ROWS)).min(32);
        let group_bits = bits_for(self.groups.len() as u64).max(1);
        out.push(bucket_bits as u8);
        out.push(REM_BITS as u8);
        out.push(group_bits as u8);
        out.extend_from_slice(&n.to_le_bytes());
        let parts = |h: u64| -> (u64, u64) {
            let bucket = if bucket_bits == 0 {
                0
            } else {
                h >> (64 - bucket_bits)
            };
            let rem = (h >> (64 - bucket_bits - REM_BITS)) & ((1 << REM_BITS) - 1);
            (bucket, rem)
        };
        // Sorted by the whole hash, entries are sorted by bucket too; within a bucket a lookup
        // reads every entry, so the order only has to be the same every time.
        self.entries.sort_unstable();
        let n_buckets = 1u64 << bucket_bits;
        let mut next = 0usize;
        for b in 0..=n_buckets {
            while next < self.entries.len() && parts(self.entries[next].0).0 < b {
                next += 1;
            }
            out.extend_from_slice(&(next as u32).to_le_bytes());
        }
        let width = REM_BITS + group_bits;
        let mut bits = BitWriter::default();
        for &(h, g) in &self.entries {
            bits.put(parts(h).1 | (u64::from(g) << REM_BITS), width);
        }
        out.extend_from_slice(&bits.finish());
        out
    }
}

/// Bits needed to number `n` things (0 for one or none).
fn bits_for(n: u64) -> u32 {
    if n <= 1 {
        0
    } else {
        64 - (n - 1).leading_zeros()
    }
}

#[derive(Default)]
struct BitWriter {
    out: Vec<u8>,
    acc: u128,
    n: u32,
}

impl BitWriter {
    fn put(&mut self, value: u64, width: u32) {
        self.acc |= u128::from(value) << self.n;
        self.n += width;
        while self.n >= 8 {
            self.out.push(self.acc as u8);
            self.acc >>= 8;
            self.n -= 8;
        }
    }

    fn finish(mut self) -> Vec<u8> {
        if self.n > 0 {
            self.out.push(self.acc as u8);
        }
        // Room for an 8-byte read at the last entry.
        self.out.extend_from_slice(&[0; 8]);
        self.out
    }
}

/// Random access to a stored map's bytes (the store reads them from SQLite piece by piece).
pub trait MapBytes {
    /// Fill `buf` from byte `at`; an error when the map is shorter.
    fn read_at(&self, at: u64, buf: &mut [u8]) -> Result<(), String>;
}

impl MapBytes for [u8] {
    fn read_at(&self, at: u64, buf: &mut [u8]) -> Result<(), String> {
        let at = usize::try_from(at).map_err(|_| "offset out of range".to_string())?;
        let src = self
            .get(at..at + buf.len())
            .ok_or_else(|| format!("the row map ends before byte {}", at + buf.len()))?;
        buf.copy_from_slice(src);
        Ok(())
    }
}

impl MapBytes for Vec<u8> {
    fn read_at(&self, at: u64, buf: &mut [u8]) -> Result<(), String> {
        self.as_slice().read_at(at, buf)
    }
}

/// A stored row map, read on demand: the head when opened, then only what a lookup needs.
pub struct RowMap<B> {
    bytes: B,
    /// Rows in the extract.
    pub n_rows: u64,
    n_groups: u32,
    end: u64,
    keyed: Option<KeyMapHead>,
}

#[derive(Debug, Clone, Copy)]
struct KeyMapHead {
    bucket_bits: u32,
    rem_bits: u32,
    group_bits: u32,
    n_entries: u64,
    buckets_at: u64,
    entries_at: u64,
}

fn u64_at<B: MapBytes + ?Sized>(b: &B, at: u64) -> Result<u64, String> {
    let mut buf = [0u8; 8];
    b.read_at(at, &mut buf)?;
    Ok(u64::from_le_bytes(buf))
}

fn u32_at<B: MapBytes + ?Sized>(b: &B, at: u64) -> Result<u32, String> {
    let mut buf = [0u8; 4];
    b.read_at(at, &mut buf)?;
    Ok(u32::from_le_bytes(buf))
}

impl<B: MapBytes> RowMap<B> {
    /// Open a map, reading its head.
    pub fn open(bytes: B) -> Result<Self, String> {
        let mut magic = [0u8; 4];
        bytes.read_at(0, &mut magic)?;
        if &magic != MAGIC || u32_at(&bytes, 4)? != FORMAT {
            return Err("not a row map of this format".into());
        }
        let n_rows = u64_at(&bytes, 8)?;
        let n_groups = u32_at(&bytes, 16)?;
        let end = u64_at(&bytes, 20)?;
        let keyed_at = HEAD as u64 + u64::from(n_groups) * GROUP_ENTRY as u64;
        let mut flag = [0u8; 1];
        bytes.read_at(keyed_at, &mut flag)?;
        let keyed = if flag[0] == 1 {
            let mut widths = [0u8; 3];
            bytes.read_at(keyed_at + 1, &mut widths)?;
            let (bucket_bits, rem_bits, group_bits) = (
                u32::from(widths[0]),
                u32::from(widths[1]),
                u32::from(widths[2]),
            );
            if bucket_bits > 32 || rem_bits + bucket_bits > 64 || rem_bits + group_bits > 56 {
                return Err("the row map's widths are out of range".into());
            }
            let n_entries = u64_at(&bytes, keyed_at + 4)?;
            let buckets_at = keyed_at + 12;
            Some(KeyMapHead {
                bucket_bits,
                rem_bits,
                group_bits,
                n_entries,
                buckets_at,
                entries_at: buckets_at + ((1u64 << bucket_bits) + 1) * 4,
            })
        } else {
            None
        };
        Ok(RowMap {
            bytes,
            n_rows,
            n_groups,
            end,
            keyed,
        })
    }

    /// Whether the map finds rows by key.
    pub fn is_keyed(&self) -> bool {
        self.keyed.is_some()
    }

    /// Group `i` and the byte offset where it ends.
    pub fn group(&self, i: u32) -> Result<(Group, u64), String> {
        if i >= self.n_groups {
            return Err(format!("the row map has no group {i}"));
        }
        let at = HEAD as u64 + u64::from(i) * GROUP_ENTRY as u64;
        let g = Group {
            first_pos: u64_at(&self.bytes, at)?,
            offset: u64_at(&self.bytes, at + 8)?,
            line: u64_at(&self.bytes, at + 16)?,
        };
        let end = if i + 1 < self.n_groups {
            u64_at(&self.bytes, at + GROUP_ENTRY as u64 + 8)?
        } else {
            self.end
        };
        if end < g.offset {
            return Err(format!("the row map's group {i} ends before it begins"));
        }
        Ok((g, end))
    }

    /// The group holding the row at 1-based position `pos` (none past the end).
    pub fn group_of_pos(&self, pos: u64) -> Result<Option<u32>, String> {
        if pos == 0 || pos > self.n_rows || self.n_groups == 0 {
            return Ok(None);
        }
        // The last group whose first position is at most `pos`.
        let (mut lo, mut hi) = (0u32, self.n_groups);
        while hi - lo > 1 {
            let mid = lo + (hi - lo) / 2;
            let first = u64_at(
                &self.bytes,
                HEAD as u64 + u64::from(mid) * GROUP_ENTRY as u64,
            )?;
            if first <= pos {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        Ok(Some(lo))
    }

    /// The groups that may hold the row whose id hashes to `hash` (none for an unkeyed map),
    /// in order, without repeats.
    pub fn groups_of_key(&self, hash: u64) -> Result<Vec<u32>, String> {
        let Some(k) = self.keyed else {
            return Ok(Vec::new());
        };
        let bucket = if k.bucket_bits == 0 {
            0
        } else {
            hash >> (64 - k.bucket_bits)
        };
        let rem = (hash >> (64 - k.bucket_bits - k.rem_bits)) & ((1 << k.rem_bits) - 1);
        let start = u64::from(u32_at(&self.bytes, k.buckets_at + bucket * 4)?);
        let stop = u64::from(u32_at(&self.bytes, k.buckets_at + (bucket + 1) * 4)?);
        if stop < start || stop > k.n_entries {
            return Err("the row map's buckets are out of order".into());
        }
        let width = u64::from(k.rem_bits + k.group_bits);
        let mut out = Vec::new();
        for e in start..stop {
            let bit = e * width;
            let word = u64_at(&self.bytes, k.entries_at + bit / 8)?;
            let v = (word >> (bit % 8)) & ((1u64 << width) - 1);
            if v & ((1 << k.rem_bits) - 1) == rem {
                let g = (v >> k.rem_bits) as u32;
                if !out.contains(&g) {
                    out.push(g);
                }
            }
        }
        out.sort_unstable();
        Ok(out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn build(n: u64, keyed: bool, row_len: u64) -> (Vec<u8>, Vec<u64>) {
        let mut b = RowMapBuilder::new(keyed);
        let mut hashes = Vec::new();
        for pos in 1..=n {
            let h = key_hash(format!("K-{pos}").as_bytes());
            hashes.push(h);
            b.row(pos, 10 + (pos - 1) * row_len, pos + 1, h);
        }
        (b.finish(10 + n * row_len), hashes)
    }

    #[test]
    fn every_key_finds_its_own_group() {
        let (bytes, hashes) = build(50_000, true, 75);
        let map = RowMap::open(bytes).unwrap();
        assert!(map.is_keyed());
        for (i, h) in hashes.iter().enumerate() {
            let pos = i as u64 + 1;
            let want = map.group_of_pos(pos).unwrap().unwrap();
            let got = map.groups_of_key(*h).unwrap();
            assert!(got.contains(&want), "row {pos}: {got:?} lacks {want}");
            let (g, end) = map.group(want).unwrap();
            assert!(g.first_pos <= pos && g.offset <= 10 + (pos - 1) * 75 && end > g.offset);
        }
    }

    #[test]
    fn groups_are_cut_by_rows_and_by_bytes() {
        let (bytes, _) = build(10_000, false, 10);
        let map = RowMap::open(bytes).unwrap();
        // 10-byte rows: 4096 rows per group before 256 KiB is reached.
        assert_eq!(map.group(1).unwrap().0.first_pos, GROUP_ROWS + 1);
        let (bytes, _) = build(1_000, false, 1_000);
        let map = RowMap::open(bytes).unwrap();
        // 1,000-byte rows: a new group every 263 rows (263 × 1,000 ≥ 256 KiB).
        assert_eq!(map.group(1).unwrap().0.first_pos, 264);
        assert_eq!(map.group_of_pos(264).unwrap(), Some(1));
        assert_eq!(map.group_of_pos(263).unwrap(), Some(0));
        assert_eq!(map.group_of_pos(1_001).unwrap(), None);
        assert_eq!(map.group_of_pos(0).unwrap(), None);
    }

    #[test]
    fn an_absent_key_names_few_groups() {
        let (bytes, _) = build(100_000, true, 75);
        let map = RowMap::open(bytes).unwrap();
        let mut named = 0;
        for i in 0..10_000 {
            named += map
                .groups_of_key(key_hash(format!("absent-{i}").as_bytes()))
                .unwrap()
                .len();
        }
        // About 64 rows a bucket share 2^12 remainders: roughly 1.6% of lookups name a group.
        assert!(named < 400, "{named} groups named for 10,000 absent keys");
    }

    #[test]
    fn the_map_stays_small() {
        let (bytes, _) = build(1_000_000, true, 75);
        // 12 remainder bits + 9 group bits a row, and a 4-byte bucket start per 64 rows.
        assert!(bytes.len() < 2_800_000, "{} bytes", bytes.len());
    }

    #[test]
    fn damaged_maps_are_errors_not_panics() {
        let (bytes, hashes) = build(5_000, true, 75);
        for cut in [0, 3, 20, 40, bytes.len() / 2, bytes.len() - 9] {
            if let Ok(map) = RowMap::open(bytes[..cut].to_vec()) {
                let _ = map.groups_of_key(hashes[7]);
                let _ = map.group_of_pos(4_000);
            }
        }
        let mut bad = bytes.clone();
        bad[0] = b'x';
        assert!(RowMap::open(bad).is_err());
    }

    #[test]
    fn key_hash_is_stable() {
        // FNV-1a 64: the offset basis for the empty input and the value for "a" given with the
        // algorithm's reference code (Fowler, Noll, Vo; from memory of its test vectors).
        assert_eq!(fnv1a64(b""), 0xcbf2_9ce4_8422_2325);
        assert_eq!(fnv1a64(b"a"), 0xaf63_dc4c_8601_ec8c);
        // A stored map must mean the same thing to every later build: this value was computed
        // by this function when the format was set, and pins it.
        assert_eq!(key_hash(b"S-0001"), 0xec77_268b_3a17_d66c);
    }
}
