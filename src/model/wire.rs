//! Body format 2: the cells a fix changed, packed.
//!
//! Format 1 lists every cell edit in full (row id, column name, old and new value), so a fix
//! carried every month onto a million-row extract costs tens of bytes a cell. Format 2 keeps the
//! same content: per fix record, the distinct rows (in the order first met), columns and values
//! once each, and per cell four small numbers into those lists, all zstd-compressed inside the
//! signed body. Decoding gives back exactly the [`FixRecord`]s that were packed, so every reader
//! sees the same model whatever the format; a body is never re-encoded once signed (its id is
//! the hash of the stored bytes), so old bodies keep format 1 for ever.

use super::{
    Author, CellEdit, Change, CommitBody, Fix, FixRecord, IngestRecord, RevokeRecord, RowId,
    TableVersion, TagRecord, TrustRecord,
};
use crate::hash::CommitId;
use serde::{Deserialize, Serialize};
use std::collections::HashMap;

/// The largest unpacked cell list a body may claim (a bound for a damaged or hostile body,
/// far above any real commit: a billion bytes).
const MAX_UNPACKED: u64 = 1 << 30;
/// zstd level for packed cells.
const LEVEL: i32 = 3;

/// A format 2 body as written.
#[derive(Serialize, Deserialize)]
struct BodyV2 {
    format: u32,
    seq: u64,
    parent: Option<CommitId>,
    author: Author,
    time: String,
    message: String,
    change: ChangeV2,
    versions: Vec<TableVersion>,
}

/// [`Change`] with packed cells. The variants keep [`Change`]'s order; new ones go at the end.
#[derive(Serialize, Deserialize)]
enum ChangeV2 {
    Ingest(IngestRecord),
    Fixes(Vec<PackedRecord>),
    Tag(TagRecord),
    Trust(TrustRecord),
    Revoke(RevokeRecord),
}

#[derive(Serialize, Deserialize)]
struct PackedRecord {
    fix: Fix,
    cells: Packed,
}

/// Cells packed: the unpacked length and the zstd frame of a postcard [`CellTable`].
#[derive(Serialize, Deserialize)]
struct Packed {
    n_cells: u64,
    unpacked_len: u64,
    frame: Vec<u8>,
}

/// Columns of numbers compress better than rows of them: each list holds one field of every
/// cell, in cell order.
#[derive(Serialize, Deserialize, Default)]
struct CellTable {
    rows: Vec<String>,
    columns: Vec<String>,
    values: Vec<Option<String>>,
    row: Vec<u32>,
    column: Vec<u32>,
    old: Vec<u32>,
    new: Vec<u32>,
}

fn intern<K: std::hash::Hash + Eq + Clone>(
    list: &mut Vec<K>,
    seen: &mut HashMap<K, u32>,
    k: &K,
) -> u32 {
    if let Some(&i) = seen.get(k) {
        return i;
    }
    let i = list.len() as u32;
    list.push(k.clone());
    seen.insert(k.clone(), i);
    i
}

fn pack(edits: &[CellEdit]) -> Packed {
    let mut t = CellTable::default();
    let (mut rows, mut cols, mut vals) = (HashMap::new(), HashMap::new(), HashMap::new());
    for e in edits {
        let r = intern(&mut t.rows, &mut rows, &e.row.0);
        let c = intern(&mut t.columns, &mut cols, &e.column);
        let o = intern(&mut t.values, &mut vals, &e.old);
        let n = intern(&mut t.values, &mut vals, &e.new);
        t.row.push(r);
        t.column.push(c);
        t.old.push(o);
        t.new.push(n);
    }
    let bytes = postcard::to_stdvec(&t).expect("cell tables hold only plain data");
    let frame = zstd::bulk::compress(&bytes, LEVEL).expect("compressing to memory cannot fail");
    Packed {
        n_cells: edits.len() as u64,
        unpacked_len: bytes.len() as u64,
        frame,
    }
}

/// [`CellTable`] read in place, for a reader after a few cells of a large fix.
#[derive(Deserialize)]
struct CellTableRef<'a> {
    #[serde(borrow)]
    rows: Vec<&'a str>,
    #[serde(borrow)]
    columns: Vec<&'a str>,
    #[serde(borrow)]
    values: Vec<Option<&'a str>>,
    row: Vec<u32>,
    column: Vec<u32>,
    old: Vec<u32>,
    new: Vec<u32>,
}

/// The cells a filter on (row, column) keeps, without building the others.
pub type CellFilter<'f> = &'f dyn Fn(&str, &str) -> bool;

fn unpack_where(p: &Packed, keep: CellFilter<'_>) -> crate::Result<Vec<CellEdit>> {
    let bad = |what: &str| crate::Error::Corrupt(format!("a commit body's packed cells {what}"));
    if p.unpacked_len > MAX_UNPACKED {
        return Err(bad("claim more than 1 GiB"));
    }
    let bytes = zstd::bulk::decompress(&p.frame, p.unpacked_len as usize)
        .map_err(|_| bad("do not decompress"))?;
    if bytes.len() as u64 != p.unpacked_len {
        return Err(bad("are not the length they claim"));
    }
    let t: CellTableRef<'_> = postcard::from_bytes(&bytes).map_err(|_| bad("do not decode"))?;
    let n = t.row.len();
    if t.column.len() != n || t.old.len() != n || t.new.len() != n || n as u64 != p.n_cells {
        return Err(bad("have lists of different lengths"));
    }
    let get = |list_len: usize, i: u32| -> crate::Result<usize> {
        let i = i as usize;
        if i < list_len {
            Ok(i)
        } else {
            Err(bad("point past their lists"))
        }
    };
    // Which rows and columns the filter keeps, asked once per distinct name.
    let row_kept: Vec<bool> = if t.columns.len() == 1 {
        t.rows.iter().map(|r| keep(r, t.columns[0])).collect()
    } else {
        Vec::new()
    };
    let mut out = Vec::new();
    for k in 0..n {
        let r = get(t.rows.len(), t.row[k])?;
        let c = get(t.columns.len(), t.column[k])?;
        let o = get(t.values.len(), t.old[k])?;
        let v = get(t.values.len(), t.new[k])?;
        let kept = match row_kept.get(r) {
            Some(&k) => k,
            None => keep(t.rows[r], t.columns[c]),
        };
        if !kept {
            continue;
        }
        out.push(CellEdit {
            row: RowId(t.rows[r].to_string()),
            column: t.columns[c].to_string(),
            old: t.values[o].map(str::to_string),
            new: t.values[v].map(str::to_string),
        });
    }
    Ok(out)
}

/// Encode a body in format 2.
pub(super) fn encode_v2(b: &CommitBody) -> Vec<u8> {
    let change = match &b.change {
        Change::Ingest(r) => ChangeV2::Ingest(r.clone()),
        Change::Fixes(list) => ChangeV2::Fixes(
            list.iter()
                .map(|r| PackedRecord {
                    fix: r.fix.clone(),
                    cells: pack(&r.edits),
                })
                .collect(),
        ),
        Change::Tag(t) => ChangeV2::Tag(t.clone()),
        Change::Trust(t) => ChangeV2::Trust(t.clone()),
        Change::Revoke(r) => ChangeV2::Revoke(r.clone()),
    };
    let wire = BodyV2 {
        format: b.format,
        seq: b.seq,
        parent: b.parent,
        author: b.author.clone(),
        time: b.time.clone(),
        message: b.message.clone(),
        change,
        versions: b.versions.clone(),
    };
    postcard::to_stdvec(&wire).expect("commit bodies hold only serialisable plain data")
}

/// Decode a format 2 body, keeping the cell edits `cells` accepts; with none the fix records
/// come back with no cell edits (for readers that need only the chain and the fixes, which
/// then skip decompression).
pub(super) fn decode_v2(bytes: &[u8], cells: Option<CellFilter<'_>>) -> crate::Result<CommitBody> {
    let w: BodyV2 = postcard::from_bytes(bytes)?;
    let change = match w.change {
        ChangeV2::Ingest(r) => Change::Ingest(r),
        ChangeV2::Fixes(list) => Change::Fixes(
            list.into_iter()
                .map(|p| {
                    Ok(FixRecord {
                        edits: match cells {
                            Some(keep) => unpack_where(&p.cells, keep)?,
                            None => Vec::new(),
                        },
                        fix: p.fix,
                    })
                })
                .collect::<crate::Result<_>>()?,
        ),
        ChangeV2::Tag(t) => Change::Tag(t),
        ChangeV2::Trust(t) => Change::Trust(t),
        ChangeV2::Revoke(r) => Change::Revoke(r),
    };
    Ok(CommitBody {
        format: w.format,
        seq: w.seq,
        parent: w.parent,
        author: w.author,
        time: w.time,
        message: w.message,
        change,
        versions: w.versions,
    })
}
