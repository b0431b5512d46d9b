//! Reads check what they read: the derived tables are a cache, never the truth.
//!
//! Every command that shows or writes out history (`show`, `export`, `why`, `diff`, `check`,
//! `log`, tags, the report, and every write) first calls [`check`]: the chain of commits is
//! walked (numbers without gaps, each body hashing to its id and naming its parent, each
//! signature valid) and every derived index row is compared with what the signed bodies say
//! (row maps, derived from extracts, are rebuilt by `verify`; a lookup through one re-reads the
//! row's key from the extract).
//! Stored bytes are checked as they are read (each piece against its hash, each file against
//! its id, in `store`), and `export` compares the version it rebuilt with the version hash its
//! signed commit records. What cannot be caught here is history cut at its end, or the whole
//! store replaced by an older copy: nothing inside the store can prove what it no longer holds.
//! Receipts held outside the store catch that (`ledger::receipt`, `verify --receipt`).
//!
//! Cost: one pass over the commit bodies (hash, signature, decode without unpacking cells) and
//! one over the index rows. Cell edits have no derived rows to compare: every reader takes them
//! from the signed bodies.

use crate::error::{Error, Result};
use crate::hash::CommitId;
use crate::model::CommitBody;
use crate::signing;
use crate::store::{IndexRows, Reader};

/// What one [`check`] walked.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Checked {
    /// Commits walked.
    pub commits: u64,
    /// Index rows compared with the bodies.
    pub index_rows: u64,
}

/// Check the chain and every derived row against the signed commit bodies. The first thing
/// found wrong is an [`Error::Tampered`] naming it; `verify` lists them all.
pub fn check(reader: &Reader<'_>) -> Result<Checked> {
    let foreign = reader.foreign_objects()?;
    if !foreign.is_empty() {
        return Err(Error::ForeignSchema {
            path: reader.path().to_path_buf(),
            objects: foreign,
        });
    }
    let tampered = |what: String| Err(Error::Tampered(what));
    let mut checked = Checked::default();
    let mut expected = IndexRows::default();
    let mut prev: Option<CommitId> = None;
    for stored in reader.commits()? {
        let seq = checked.commits + 1;
        if stored.seq != seq {
            return tampered(format!(
                "commit numbers jump from {} to {}: commit {seq} is missing",
                seq - 1,
                stored.seq
            ));
        }
        checked.commits = seq;
        if CommitBody::id_of(&stored.body) != stored.id {
            return tampered(format!(
                "commit {seq}'s body does not hash to its id {}",
                stored.id.short()
            ));
        }
        // The cells a fix changed are not unpacked: nothing derived from them is stored (readers
        // take them from these very bodies), so the chain and the marks are all there is to check.
        let body = CommitBody::decode_without_cells(&stored.body)
            .map_err(|e| Error::Tampered(format!("commit {seq}'s body does not decode ({e})")))?;
        if body.seq != seq {
            return tampered(format!(
                "commit {seq}'s body says it is commit {}",
                body.seq
            ));
        }
        if body.parent != prev {
            return tampered(format!(
                "commit {seq} does not name commit {} as its parent: the chain is broken",
                seq - 1
            ));
        }
        if !signing::verify(&body.author.key, stored.id.as_bytes(), &stored.signature) {
            return tampered(format!("commit {seq}'s signature does not verify"));
        }
        let mut rows = IndexRows::from_body(&body);
        expected.extracts.append(&mut rows.extracts);
        expected.marks.append(&mut rows.marks);
        expected.versions.append(&mut rows.versions);
        expected.tags.append(&mut rows.tags);
        prev = Some(stored.id);
    }
    expected.sort();
    let actual = reader.index_rows()?;
    for (what, same) in [
        ("extract", expected.extracts == actual.extracts),
        (
            "exclusion, distrust, kept-value and note",
            expected.marks == actual.marks,
        ),
        ("table version", expected.versions == actual.versions),
        ("tag", expected.tags == actual.tags),
    ] {
        if !same {
            return tampered(format!(
                "the {what} index differs from what the signed commits say"
            ));
        }
    }
    checked.index_rows =
        (actual.extracts.len() + actual.marks.len() + actual.versions.len() + actual.tags.len())
            as u64;
    Ok(checked)
}
