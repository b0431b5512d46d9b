//! Checking that a store is intact: the hash chain, every signature, every stored byte, every
//! table version and every derived index row.
//!
//! A problem found is a result, not an error: [`verify`] returns every problem it finds, each
//! naming the commit or object and what is wrong. Only a failure to read the store at all is an
//! error.

use super::version::Version;
use crate::error::Result;
use crate::hash::{ChunkId, CommitId, Digest};
use crate::model::{Change, CommitBody};
use crate::signing;
use crate::store::{IndexRows, Reader};
use std::collections::{HashMap, HashSet};

/// One thing found wrong.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Problem {
    /// The object: `commit 3`, `chunk 1a2b…`, `cell_edit index`, ….
    pub object: String,
    /// What is wrong with it.
    pub what: String,
}

/// What [`verify`] checked and found.
#[derive(Debug, Clone, Default)]
pub struct VerifyReport {
    /// Commits checked.
    pub n_commits: u64,
    /// Chunks re-hashed.
    pub n_chunks: u64,
    /// Stored files re-hashed.
    pub n_files: u64,
    /// Table versions rebuilt.
    pub n_versions: u64,
    /// Index rows compared.
    pub n_index_rows: u64,
    /// Everything wrong, in the order found: what an altered, cut or forged store shows.
    pub problems: Vec<Problem>,
    /// Commits validly signed by keys not trusted at that commit. Not tampering: someone
    /// committed with a key nobody trusted yet (see `emend trust`).
    pub untrusted: Vec<Problem>,
    /// What an auditor should see but that proves nothing wrong (a commit dated before its
    /// parent: clocks drift).
    pub warnings: Vec<Problem>,
    /// For each key that signed a commit: how it came to be trusted, root first.
    pub trust_paths: Vec<TrustPath>,
}

/// How one signing key is trusted: a root of the trust list, or vouched for by a trust commit
/// of a key trusted at that commit, which is itself trusted through its own path.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct TrustPath {
    /// The key.
    pub key: [u8; 32],
    /// The name it signed with.
    pub name: String,
    /// The commits it signed.
    pub n_signed: u64,
    /// Root first: the root key with its name, then each (trust commit, key vouched for by
    /// it) down to this key. Empty when the key is not trusted at all.
    pub chain: Vec<TrustStep>,
}

/// One link of a [`TrustPath`].
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct TrustStep {
    /// The key trusted at this step.
    pub key: [u8; 32],
    /// Its name, as its trust commit or its own commits give it.
    pub name: String,
    /// The trust commit that vouched for it; `None` for the root.
    pub by_commit: Option<u64>,
}

impl VerifyReport {
    /// Whether nothing is wrong (untrusted signers and warnings aside).
    pub fn is_clean(&self) -> bool {
        self.problems.is_empty()
    }

    /// Whether nothing is wrong and every commit is signed by a key trusted at it.
    pub fn is_trusted(&self) -> bool {
        self.is_clean() && self.untrusted.is_empty()
    }

    fn problem(&mut self, object: impl Into<String>, what: impl Into<String>) {
        self.problems.push(Problem {
            object: object.into(),
            what: what.into(),
        });
    }
}

/// Which keys count as trusted.
#[derive(Debug, Clone)]
pub enum Trust {
    /// The store's own list of signers.
    Store,
    /// A list supplied from outside (an auditor's), ignoring the store's list.
    Keys(Vec<[u8; 32]>),
}

/// Check everything. `progress` is called with a short stage name as work advances.
pub fn verify(
    reader: &Reader<'_>,
    trust: &Trust,
    progress: &mut dyn FnMut(&str),
) -> Result<VerifyReport> {
    let mut report = VerifyReport::default();
    // The roots of trust: the store's own (the keys it trusted without a trust commit), or an
    // auditor's list. Trust commits and revocations signed by keys trusted at that point extend
    // and narrow it, commit by commit: key -> (first trusted commit, first untrusted commit).
    let signers = reader.signers()?;
    let mut trusted: HashMap<[u8; 32], (u64, Option<u64>)> = match trust {
        Trust::Store => signers
            .iter()
            .filter(|s| s.since_seq == 0)
            .map(|s| (s.key, (0, None)))
            .collect(),
        Trust::Keys(keys) => keys.iter().map(|k| (*k, (0, None))).collect(),
    };
    let trusts = |t: &HashMap<[u8; 32], (u64, Option<u64>)>, key: &[u8; 32], seq: u64| {
        t.get(key)
            .is_some_and(|(from, until)| seq >= *from && until.is_none_or(|u| seq < u))
    };
    let mut prev_time: Option<String> = None;
    // Validly signed commits, judged once every trust commit and revocation is known (a
    // revocation may reach back to commits before it).
    let mut signed: Vec<(u64, [u8; 32], String)> = Vec::new();
    // Who vouched for each key not in the roots: key -> (trust commit, voucher).
    let mut vouched_by: HashMap<[u8; 32], (u64, [u8; 32])> = HashMap::new();
    let mut names: HashMap<[u8; 32], String> =
        signers.iter().map(|s| (s.key, s.name.clone())).collect();

    progress("schema");
    for object in reader.foreign_objects()? {
        report.problem(
            "store file",
            format!("holds {object}: emend runs nothing it did not make"),
        );
    }
    progress("commits");
    let mut bodies: Vec<CommitBody> = Vec::new();
    let mut prev: Option<CommitId> = None;
    let mut expected_seq = 1u64;
    for stored in reader.commits()? {
        report.n_commits += 1;
        let name = format!("commit {}", stored.seq);
        if stored.seq != expected_seq {
            report.problem(
                &name,
                format!(
                    "sequence jumps from {} to {} (a commit is missing)",
                    expected_seq - 1,
                    stored.seq
                ),
            );
        }
        expected_seq = stored.seq + 1;
        let actual_id = CommitBody::id_of(&stored.body);
        if actual_id != stored.id {
            report.problem(
                &name,
                format!(
                    "body does not hash to the commit id {} (the body was altered)",
                    stored.id.short()
                ),
            );
        }
        let body = match CommitBody::decode(&stored.body) {
            Ok(b) => b,
            Err(e) => {
                report.problem(&name, format!("body does not decode: {e}"));
                prev = Some(stored.id);
                continue;
            }
        };
        if body.seq != stored.seq {
            report.problem(
                &name,
                format!(
                    "body says it is commit {} (commits were reordered)",
                    body.seq
                ),
            );
        }
        if body.parent != prev {
            report.problem(
                &name,
                format!(
                    "parent is {} but the previous commit is {} (the chain is broken)",
                    body.parent
                        .map(|p| p.short())
                        .unwrap_or_else(|| "none".into()),
                    prev.map(|p| p.short()).unwrap_or_else(|| "none".into())
                ),
            );
        }
        if !signing::verify(&body.author.key, stored.id.as_bytes(), &stored.signature) {
            report.problem(
                &name,
                format!(
                    "signature does not verify for key {} ({})",
                    signing::fingerprint(&body.author.key),
                    body.author.name
                ),
            );
        } else {
            signed.push((stored.seq, body.author.key, body.author.name.clone()));
        }
        if let Some(p) = &prev_time
            && body.time < *p
        {
            report.warnings.push(Problem {
                object: name.clone(),
                what: format!(
                    "dated {}, before its parent ({p}): the signer's clock was behind, or the time was set by hand",
                    body.time
                ),
            });
        }
        prev_time = Some(body.time.clone());
        // A key vouched for by a valid commit of a trusted signer is trusted after it, so an
        // auditor's list of keys reaches rotated and added keys through the chain; a revocation
        // by a trusted signer ends a key's trust from the commit it names.
        let vouched = signing::verify(&body.author.key, stored.id.as_bytes(), &stored.signature)
            && trusts(&trusted, &body.author.key, stored.seq);
        names
            .entry(body.author.key)
            .or_insert_with(|| body.author.name.clone());
        match &body.change {
            Change::Trust(t) if vouched => {
                if !trusted.contains_key(&t.key) {
                    vouched_by.insert(t.key, (stored.seq, body.author.key));
                    names.entry(t.key).or_insert_with(|| t.name.clone());
                }
                trusted.entry(t.key).or_insert((stored.seq + 1, None));
            }
            Change::Revoke(r) if vouched => {
                if let Some(entry) = trusted.get_mut(&r.key) {
                    entry.1 = Some(entry.1.map_or(r.from_seq, |u| u.min(r.from_seq)));
                }
            }
            _ => {}
        }
        if let Trust::Store = trust {
            let listed = signers.iter().find(|s| match &body.change {
                Change::Trust(t) => s.key == t.key,
                Change::Revoke(r) => s.key == r.key,
                _ => false,
            });
            let agrees = match (&body.change, listed) {
                (Change::Trust(_), Some(s)) => s.since_seq == stored.seq,
                (Change::Revoke(r), Some(s)) => s.revoked_from == Some(r.from_seq),
                (Change::Trust(_) | Change::Revoke(_), None) => false,
                _ => true,
            };
            if vouched && !agrees {
                report.problem(
                    &name,
                    "the store's list of signers does not match this signed trust commit (the list was edited)",
                );
            }
        }
        if let Change::Fixes(records) = &body.change {
            for r in records {
                if let crate::model::FixAction::Rules {
                    file_name, blob, ..
                } = &r.fix.action
                    && !reader.has_blob(blob)?
                {
                    report.problem(
                        &name,
                        format!("rules file '{file_name}' ({}) is not stored", blob.short()),
                    );
                }
                for ev in &r.fix.evidence {
                    if !reader.has_blob(&ev.blob)? {
                        report.problem(
                            &name,
                            format!("evidence '{}' ({}) is not stored", ev.name, ev.blob.short()),
                        );
                    }
                }
            }
        }
        prev = Some(stored.id);
        bodies.push(body);
    }
    // The chain of trust of every key that signed: followed from the key back to its root.
    let mut by_key: Vec<([u8; 32], String, u64)> = Vec::new();
    for (_, key, author) in &signed {
        match by_key.iter_mut().find(|(k, _, _)| k == key) {
            Some(entry) => entry.2 += 1,
            None => by_key.push((*key, author.clone(), 1)),
        }
    }
    for (key, name, n_signed) in by_key {
        let mut chain = Vec::new();
        let mut at = key;
        loop {
            match vouched_by.get(&at) {
                Some(&(seq, voucher)) if chain.len() < 10_000 => {
                    chain.push(TrustStep {
                        key: at,
                        name: names.get(&at).cloned().unwrap_or_default(),
                        by_commit: Some(seq),
                    });
                    at = voucher;
                }
                _ => break,
            }
        }
        if trusted.get(&at).is_some_and(|(from, _)| *from == 0) {
            chain.push(TrustStep {
                key: at,
                name: names.get(&at).cloned().unwrap_or_default(),
                by_commit: None,
            });
            chain.reverse();
        } else {
            chain.clear();
        }
        report.trust_paths.push(TrustPath {
            key,
            name,
            n_signed,
            chain,
        });
    }
    for (seq, key, author) in signed {
        if !trusts(&trusted, &key, seq) {
            report.untrusted.push(Problem {
                object: format!("commit {seq}"),
                what: format!(
                    "signed by key {} ({author}), which this {} does not trust at that commit",
                    signing::fingerprint(&key),
                    match trust {
                        Trust::Store => "store",
                        Trust::Keys(_) => "list of keys",
                    }
                ),
            });
        }
    }

    // Every stored file is read in order (so delta chunks rebuild cheaply through the cache):
    // each chunk is re-hashed the first time it is met, and the file's bytes are re-hashed
    // whole. Chunks that no file uses are checked on their own afterwards.
    progress("stored files");
    let mut seen: HashSet<ChunkId> = HashSet::new();
    for (id, n_bytes, _) in reader.blobs()? {
        report.n_files += 1;
        let name = format!("stored file {}", id.short());
        let mut hasher = blake3::Hasher::new();
        let mut total = 0u64;
        let result = reader.open_blob(&id).and_then(|mut r| {
            while let Some((chunk, bytes)) = r.next_chunk()? {
                if seen.insert(chunk) {
                    report.n_chunks += 1;
                    if ChunkId(Digest::of(&bytes)) != chunk {
                        report.problem(
                            format!("chunk {}", chunk.short()),
                            "content does not match its hash",
                        );
                    }
                }
                hasher.update(&bytes);
                total += bytes.len() as u64;
            }
            Ok(())
        });
        match result {
            Err(e) => report.problem(&name, e.to_string()),
            Ok(()) => {
                if *hasher.finalize().as_bytes() != *id.as_bytes() {
                    report.problem(&name, "bytes do not match its hash");
                }
                if total != n_bytes {
                    report.problem(
                        &name,
                        format!("holds {total} bytes, its record says {n_bytes}"),
                    );
                }
            }
        }
    }
    progress("chunks");
    let mut buf = Vec::new();
    for id in reader.chunk_ids()? {
        if seen.contains(&id) {
            continue;
        }
        report.n_chunks += 1;
        buf.clear();
        match reader.read_chunk(&id, &mut buf) {
            Ok(()) => {
                if ChunkId(Digest::of(&buf)) != id {
                    report.problem(
                        format!("chunk {}", id.short()),
                        "content does not match its hash",
                    );
                }
            }
            Err(e) => report.problem(format!("chunk {}", id.short()), e.to_string()),
        }
    }

    progress("index");
    let mut expected = IndexRows::default();
    for b in &bodies {
        expected.add_body(b);
    }
    expected.sort();
    let actual = reader.index_rows()?;
    report.n_index_rows =
        (actual.extracts.len() + actual.marks.len() + actual.versions.len() + actual.tags.len())
            as u64;
    compare_rows(
        &mut report,
        "tag index",
        &expected.tags,
        &actual.tags,
        |r| format!("tag {} (commit {})", r.0, r.1),
    );
    compare_rows(
        &mut report,
        "extract index",
        &expected.extracts,
        &actual.extracts,
        |r| format!("table {} commit {}", r.0, r.1),
    );
    compare_rows(
        &mut report,
        "mark index",
        &expected.marks,
        &actual.marks,
        |r| format!("table {} {} {} commit {}", r.table, r.kind, r.target, r.seq),
    );
    compare_rows(
        &mut report,
        "version index",
        &expected.versions,
        &actual.versions,
        |r| format!("table {} commit {}", r.0, r.1),
    );

    progress("versions");
    for b in &bodies {
        for tv in &b.versions {
            report.n_versions += 1;
            let name = format!("commit {}", b.seq);
            match Version::load(reader, &tv.table, b.seq, false).and_then(|v| v.hash(reader)) {
                Ok((hash, n_rows)) => {
                    if hash != tv.hash {
                        report.problem(
                            &name,
                            format!("table '{}' rebuilt from its extract and fixes does not match the recorded version hash", tv.table),
                        );
                    } else if n_rows != tv.n_rows {
                        report.problem(
                            &name,
                            format!(
                                "table '{}' has {n_rows} rows, the commit says {}",
                                tv.table, tv.n_rows
                            ),
                        );
                    }
                }
                Err(e) => report.problem(
                    &name,
                    format!("table '{}' cannot be rebuilt: {e}", tv.table),
                ),
            }
        }
    }
    // Row maps are derived from the extracts: each is rebuilt and compared, and a map kept
    // for a commit that adds no extract is named.
    progress("row maps");
    let mut ingests: HashSet<u64> = HashSet::new();
    for b in &bodies {
        let crate::model::Change::Ingest(r) = &b.change else {
            continue;
        };
        ingests.insert(b.seq);
        let Some(stored) = reader.row_map_bytes(b.seq)? else {
            continue;
        };
        report.n_index_rows += 1;
        let name = format!("row map of commit {}", b.seq);
        match Version::load(reader, &r.table, b.seq, true).and_then(|v| v.rebuild_row_map(reader)) {
            Ok(rebuilt) if rebuilt == stored => {}
            Ok(_) => report.problem(
                &name,
                format!(
                    "differs from the one rebuilt from extract {}: rows could be looked for in the wrong place",
                    r.extract.short()
                ),
            ),
            Err(e) => report.problem(&name, format!("cannot be rebuilt: {e}")),
        }
    }
    for seq in reader.row_map_seqs()? {
        if !ingests.contains(&seq) {
            report.problem(
                format!("row map of commit {seq}"),
                "is kept for a commit that adds no extract",
            );
        }
    }
    Ok(report)
}

fn compare_rows<T: Ord + Clone>(
    report: &mut VerifyReport,
    what: &str,
    expected: &[T],
    actual: &[T],
    describe: impl Fn(&T) -> String,
) {
    // Both lists are sorted: walk them together.
    let (mut i, mut j) = (0, 0);
    let mut shown = 0;
    let mut missing = 0;
    let mut extra = 0;
    while i < expected.len() || j < actual.len() {
        let ord = match (expected.get(i), actual.get(j)) {
            (Some(a), Some(b)) => a.cmp(b),
            (Some(_), None) => std::cmp::Ordering::Less,
            (None, _) => std::cmp::Ordering::Greater,
        };
        match ord {
            std::cmp::Ordering::Equal => {
                i += 1;
                j += 1;
            }
            std::cmp::Ordering::Less => {
                missing += 1;
                if shown < 10 {
                    report.problem(
                        what,
                        format!(
                            "{} is in the commit bodies but not in the index, or differs",
                            describe(&expected[i])
                        ),
                    );
                    shown += 1;
                }
                i += 1;
            }
            std::cmp::Ordering::Greater => {
                extra += 1;
                if shown < 10 {
                    report.problem(
                        what,
                        format!(
                            "{} is in the index but no commit body says so",
                            describe(&actual[j])
                        ),
                    );
                    shown += 1;
                }
                j += 1;
            }
        }
    }
    if missing + extra > shown {
        report.problem(
            what,
            format!("{} more rows differ", missing + extra - shown),
        );
    }
}
