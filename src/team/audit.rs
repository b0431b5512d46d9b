//! `verify --team`: an auditor's check of what the server holds. The team store's objects are
//! copied, exactly as stored and without believing any of them, into a store file in a
//! temporary folder; the same `verify` that checks a local store then checks the copy, so a
//! local copy and the server are judged alike. What only the server can get wrong (its head
//! row, gaps in its chain) is added here, and its receipts are handed back to be checked.

use super::server::Server;
use crate::error::Result;
use crate::model::{Change, CommitBody};
use crate::query::verify::Problem;
use crate::store::Store;
use std::path::Path;

/// A team store copied for an audit.
pub struct AuditCopy {
    /// The copy (delete its folder when done).
    pub store: Store,
    /// What is wrong on the server beyond what `verify` of the copy finds.
    pub problems: Vec<Problem>,
    /// The receipts published with each head: (head number, text, the role that published).
    pub receipts: Vec<(u64, String, String)>,
    /// The team's head as its head row gives it.
    pub head: u64,
}

/// Copy the team store on one snapshot (read only) into a new store file at `path`: the root
/// signers, every stored file piece by piece, every commit as stored (with the index rows its
/// body implies, where it decodes).
pub fn copy_for_audit(server: &mut Server, path: &Path, now: &str) -> Result<AuditCopy> {
    let mut store = Store::create_at(path, now)?;
    let mut s = server.read()?;
    let (head, head_id) = s.head()?;
    let last = s.last_commit()?;
    let roots = s.roots()?;
    let receipts = s.receipts()?;
    let mut problems = Vec::new();
    {
        let tx = store.transaction()?;
        for (key, name, email, added_at) in &roots {
            tx.trust_signer(key, name, email.as_deref(), added_at, 0)?;
        }
        for (id, n_bytes, _) in s.blobs()? {
            let pieces = s.each_piece(&id, |c| tx.put_stored_chunk(&c))?;
            tx.put_blob(&id, n_bytes, &pieces)?;
        }
        let mut expected = 1;
        s.each_commit(0, u64::MAX >> 1, |c| {
            if c.seq != expected {
                problems.push(Problem {
                    object: format!("team store commit {expected}"),
                    what: format!("is missing: the server's chain jumps to commit {}", c.seq),
                });
            }
            expected = c.seq + 1;
            match CommitBody::decode(&c.body) {
                Ok(body) if body.seq == c.seq => {
                    tx.append_commit(&body, &c.body, &c.id, &c.signature)?;
                    if tx.read().signers()?.is_empty() {
                        tx.trust_signer(
                            &body.author.key,
                            &body.author.name,
                            body.author.email.as_deref(),
                            &body.time,
                            0,
                        )?;
                    }
                    match &body.change {
                        Change::Trust(t) => {
                            tx.trust_signer(
                                &t.key,
                                t.name.trim(),
                                t.email.as_deref(),
                                &body.time,
                                body.seq,
                            )?;
                        }
                        Change::Revoke(r) => tx.revoke_signer(&r.key, r.from_seq)?,
                        _ => {}
                    }
                }
                // Kept as found: verify names what is wrong with it.
                _ => tx.append_raw_commit(c.seq, &c.id, &c.body, &c.signature)?,
            }
            Ok(())
        })?;
        tx.commit()?;
    }
    if head != last {
        problems.push(Problem {
            object: "team store head".into(),
            what: format!(
                "says commit {head}, but the server's last commit is {last}: the head row or the chain was changed outside emend"
            ),
        });
    } else if head > 0 {
        let held = store.read().try_commit(head)?.map(|c| c.id);
        if held != head_id {
            problems.push(Problem {
                object: "team store head".into(),
                what: format!(
                    "names commit {head} as {}, but the server holds {} at that number",
                    head_id.map(|i| i.short()).unwrap_or_default(),
                    held.map(|i| i.short()).unwrap_or_else(|| "nothing".into())
                ),
            });
        }
    }
    drop(s);
    // Row maps are derived: each table's newest extract gets its own, rebuilt from its bytes
    // (a file that fails to rebuild is left to verify, which reads it again and says why).
    {
        let tx = store.transaction()?;
        let reader = tx.read();
        for table in reader.table_names()? {
            if let Some((seq, _)) = reader.extract_at(&table, u64::MAX)?
                && let Ok(v) = crate::query::Version::load(&reader, &table, seq, true)
                && !matches!(
                    v.def.dialect.encoding,
                    crate::model::TextEncoding::Workbook(_)
                )
                && let Ok(map) = v.rebuild_row_map(&reader)
                && !map.is_empty()
            {
                tx.put_row_map(&table, seq, &map)?;
            }
        }
        tx.commit()?;
    }
    Ok(AuditCopy {
        store,
        problems,
        receipts,
        head,
    })
}
