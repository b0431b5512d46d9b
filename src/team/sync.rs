//! A local store that follows a team store: start a team store, join one, publish local
//! commits, receive the team's. The server holds the same objects as a local store; every
//! commit received is checked (id, number, parent, signature) before it lands, every file
//! received is read back against its id, and every write on either side is one transaction.
//!
//! The local store keeps two settings (`store_meta`): the team store's address (never with a
//! password) and the last team commit it holds (`team_seq`). Commits after it are unpublished.
//! When the team moved on and this store holds unpublished commits, `receive` builds a new
//! store file from the common history and the team's commits, replays the unpublished work onto
//! it (ingests signed again, fixes staged for review with `carry`'s outcomes), and keeps the
//! replaced file under `.emend/set-aside/`, readable until the user removes it: a local commit is
//! never deleted from a store file.

use super::server::{Server, Session};
use crate::error::{Error, Result};
use crate::hash::{BlobId, CommitId};
use crate::ledger::carry::{Carried, Outcome, replay, stage};
use crate::ledger::{CommitContext, seal};
use crate::model::edit::Rows;
use crate::model::{CellEdit, Change, CommitBody, Fix, FixAction, Recorder, TextEncoding};
use crate::query::Version;
use crate::store::{Reader, Store, StoredCommit, WriteTx};
use std::collections::{BTreeMap, BTreeSet, HashMap, HashSet};
use std::path::{Path, PathBuf};

const META_ADDRESS: &str = "team_address";
const META_SEQ: &str = "team_seq";

/// Where a local store follows a team store.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Link {
    /// The team store's address, without its password.
    pub address: String,
    /// The last team commit this store holds; later local commits are unpublished.
    pub seq: u64,
}

/// The team store this store follows, if any.
pub fn link(reader: &Reader<'_>) -> Result<Option<Link>> {
    let Some(address) = reader.meta(META_ADDRESS)? else {
        return Ok(None);
    };
    let seq = reader
        .meta(META_SEQ)?
        .and_then(|s| s.parse().ok())
        .unwrap_or(0);
    Ok(Some(Link { address, seq }))
}

/// What `publish` did.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Published {
    /// Commits appended to the team store.
    pub commits: u64,
    /// Stored files sent (the server lacked them).
    pub files: u64,
    /// Their pieces' stored bytes.
    pub bytes: u64,
    /// The team's head now.
    pub head: u64,
}

/// One unpublished commit replayed onto the team's head by `receive`.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Replayed {
    /// Its number in the set-aside store.
    pub from_seq: u64,
    /// What it did, in a few words.
    pub what: String,
    /// What became of it.
    pub outcome: String,
}

/// What `receive` (or `join`) did.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Received {
    /// Commits brought from the team store.
    pub commits: u64,
    /// Stored files brought.
    pub files: u64,
    /// The team's head.
    pub head: u64,
    /// Local commits found on the team store already (published before, not recorded).
    pub found_published: u64,
    /// Local commits still to publish.
    pub unpublished: u64,
    /// The replaced store file, when local commits were set aside and replayed.
    pub set_aside: Option<PathBuf>,
    /// The set-aside commits and what became of each.
    pub replayed: Vec<Replayed>,
}

/// Start a team store on an empty database: the team schema, and this store's history (if
/// any) as its first publish. `store` is then linked to it.
pub fn create(
    store: &mut Store,
    server: &mut Server,
    writers: &str,
    auditors: &str,
    receipt: Option<String>,
) -> Result<Published> {
    if let Some(l) = link(&store.read())? {
        return Err(Error::Invalid(format!(
            "this store already follows the team store {}",
            l.address
        )));
    }
    server.create(writers, auditors)?;
    let tx = store.transaction()?;
    tx.set_meta(META_ADDRESS, server.shown())?;
    tx.set_meta(META_SEQ, "0")?;
    tx.commit()?;
    publish(store, server, receipt)
}

/// The last commit both stores hold with the same id. Refuses a team store whose history
/// lost or changed a commit this store already took from it.
fn common_prefix(
    local: &Reader<'_>,
    s: &mut Session<'_>,
    link: &Link,
    team_head: u64,
    shown: &str,
) -> Result<u64> {
    let diverged = |problem: String| Error::TeamDiverged {
        server: shown.to_string(),
        problem,
    };
    if team_head < link.seq {
        return Err(diverged(format!(
            "its head is commit {team_head}, but this store already holds its commit {}: commits were cut from the team's history",
            link.seq
        )));
    }
    let local_head = local.head()?.map(|(s, _)| s).unwrap_or(0);
    let upto = team_head.min(local_head);
    let mut common = link.seq.min(upto);
    if upto == 0 {
        return Ok(0);
    }
    let from = link.seq.max(1);
    let theirs = s.commit_ids(from, upto)?;
    let mut expected = from;
    for (seq, id) in theirs {
        if seq != expected {
            return Err(diverged(format!(
                "commit {expected} is missing from its history (its head is {team_head})"
            )));
        }
        expected += 1;
        let ours = local.try_commit(seq)?.map(|c| c.id);
        if seq <= link.seq {
            if ours != Some(id) {
                return Err(diverged(format!(
                    "its commit {seq} is {}, this store's is {}: the team's history was rewritten",
                    id.short(),
                    ours.map(|o| o.short()).unwrap_or_else(|| "missing".into())
                )));
            }
        } else if ours == Some(id) {
            common = seq;
        } else {
            break;
        }
    }
    if expected <= link.seq {
        return Err(diverged(format!(
            "commit {expected} is missing from its history (its head is {team_head})"
        )));
    }
    Ok(common)
}

/// The stored files a commit names (its extract, evidence, rules files).
fn files_named(body: &CommitBody) -> Vec<BlobId> {
    let mut out = Vec::new();
    match &body.change {
        Change::Ingest(r) => out.push(r.extract),
        Change::Fixes(list) => {
            for r in list {
                out.extend(r.fix.evidence.iter().map(|e| e.blob));
                if let FixAction::Rules { blob, .. } = &r.fix.action {
                    out.push(*blob);
                }
                if let Some(Rows::Breaking { rules, .. }) = r.fix.action.rows() {
                    out.push(*rules);
                }
            }
        }
        _ => {}
    }
    out
}

struct Sender<'a, 'r> {
    reader: &'a Reader<'r>,
    held: HashSet<BlobId>,
    files: u64,
    bytes: u64,
}

impl Sender<'_, '_> {
    /// Send a stored file the server lacks, piece by piece (one piece in memory at a time),
    /// after the files its delta pieces refer to.
    fn send(&mut self, s: &mut Session<'_>, id: &BlobId) -> Result<()> {
        if self.held.contains(id) {
            return Ok(());
        }
        let n_bytes = self
            .reader
            .blobs_sized(id)?
            .ok_or_else(|| Error::Corrupt(format!("stored file {} is missing", id.short())))?;
        let pieces = self.reader.blob_chunks(id)?;
        let on_server = s.chunks_held(&pieces)?;
        let mut sent: HashSet<crate::hash::ChunkId> = HashSet::new();
        for p in &pieces {
            if on_server.contains(p) || !sent.insert(*p) {
                continue;
            }
            let c = self
                .reader
                .stored_chunk(p)?
                .ok_or_else(|| Error::Corrupt(format!("chunk {p} is missing")))?;
            if let Some((base, _, _)) = &c.base
                && base != id
            {
                self.send(s, base)?;
            }
            self.bytes += c.data.len() as u64;
            s.put_piece(&c)?;
        }
        s.put_blob(id, n_bytes, &pieces)?;
        self.held.insert(*id);
        self.files += 1;
        Ok(())
    }
}

/// Send this store's unpublished commits, with the files they name, to the team store, in one
/// transaction on the server that holds the team's head locked: refused with
/// [`Error::TeamMovedOn`] when someone published first. `receipt` (a signed receipt of this
/// store's head) is kept on the server beside the commits.
pub fn publish(
    store: &mut Store,
    server: &mut Server,
    receipt: Option<String>,
) -> Result<Published> {
    let link = link(&store.read())?.ok_or(Error::NoTeam)?;
    let shown = server.shown().to_string();
    let (mut s, team_head, _) = server.publish()?;
    let reader = store.read();
    let common = common_prefix(&reader, &mut s, &link, team_head, &shown)?;
    let (local_head, head_id) = match reader.head()? {
        Some(h) => h,
        None => (0, CommitId::from_bytes([0; 32])),
    };
    if team_head > common {
        return Err(Error::TeamMovedOn {
            ours: common,
            theirs: team_head,
        });
    }
    let mut out = Published {
        commits: 0,
        files: 0,
        bytes: 0,
        head: team_head,
    };
    if local_head > common {
        let mut named = Vec::new();
        let mut commits = Vec::new();
        for seq in common + 1..=local_head {
            let c = reader
                .try_commit(seq)?
                .ok_or_else(|| Error::Corrupt(format!("commit {seq} is missing")))?;
            let body = CommitBody::decode_without_cells(&c.body)?;
            named.extend(files_named(&body));
            commits.push(c);
        }
        let held = s.blobs_held(&named)?;
        let mut sender = Sender {
            reader: &reader,
            held,
            files: 0,
            bytes: 0,
        };
        for id in &named {
            sender.send(&mut s, id)?;
        }
        (out.files, out.bytes) = (sender.files, sender.bytes);
        for signer in reader.signers()?.iter().filter(|r| r.since_seq == 0) {
            s.put_root(
                &signer.key,
                &signer.name,
                signer.email.as_deref(),
                &signer.added_at,
            )?;
        }
        let mut parent = match common {
            0 => None,
            n => Some(
                reader
                    .try_commit(n)?
                    .ok_or_else(|| Error::Corrupt(format!("commit {n} is missing")))?
                    .id,
            ),
        };
        for c in &commits {
            s.put_commit(c, parent.as_ref())?;
            parent = Some(c.id);
        }
        s.set_head(local_head, &head_id)?;
        if let Some(text) = &receipt {
            s.put_receipt(local_head, text)?;
        }
        s.commit()?;
        out.commits = local_head - common;
        out.head = local_head;
    } else {
        drop(s);
    }
    if link.seq != out.head.max(common) {
        let tx = store.transaction()?;
        tx.set_meta(META_SEQ, &out.head.max(common).to_string())?;
        tx.commit()?;
    }
    Ok(out)
}

/// Append a commit taken from elsewhere (the team store, or the store a receive replaces)
/// after checking that it is what it says: its id is its body's hash, it follows this store's
/// head, and its signature verifies. The signers it vouches for or revokes are recorded as a
/// local commit's would be.
fn append_checked(tx: &WriteTx<'_>, c: &StoredCommit, shown: &str) -> Result<CommitBody> {
    let bad = |problem: String| Error::TeamDiverged {
        server: shown.to_string(),
        problem,
    };
    if CommitBody::id_of(&c.body) != c.id {
        return Err(bad(format!(
            "its commit {} does not match its id {}: its body was changed",
            c.seq,
            c.id.short()
        )));
    }
    let body = CommitBody::decode(&c.body)
        .map_err(|e| bad(format!("its commit {} does not decode: {e}", c.seq)))?;
    let head = tx.read().head()?;
    let next = head.map(|(s, _)| s).unwrap_or(0) + 1;
    if body.seq != c.seq || c.seq != next {
        return Err(bad(format!(
            "its commit {} says it is commit {} where commit {next} was due",
            c.seq, body.seq
        )));
    }
    if body.parent != head.map(|(_, id)| id) {
        return Err(bad(format!(
            "its commit {} does not follow commit {}",
            c.seq,
            next - 1
        )));
    }
    if !crate::signing::verify(&body.author.key, c.id.as_bytes(), &c.signature) {
        return Err(bad(format!(
            "the signature of its commit {} does not verify",
            c.seq
        )));
    }
    tx.append_commit(&body, &c.body, &c.id, &c.signature)?;
    record_signers(tx, &body)?;
    Ok(body)
}

/// The signer rows a commit implies, as sealing it did where it was made.
fn record_signers(tx: &WriteTx<'_>, body: &CommitBody) -> Result<()> {
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
    Ok(())
}

/// Bring every stored file the team store holds and this store lacks, in the order they
/// arrived there, a piece at a time. Returns the files brought.
fn fetch_files(tx: &WriteTx<'_>, s: &mut Session<'_>) -> Result<Vec<BlobId>> {
    let mut got = Vec::new();
    for (id, n_bytes, _) in s.blobs()? {
        if tx.read().has_blob(&id)? {
            continue;
        }
        let pieces = s.each_piece(&id, |c| tx.put_stored_chunk(&c))?;
        tx.put_blob(&id, n_bytes, &pieces)?;
        got.push(id);
    }
    Ok(got)
}

/// Read each file back to its end: every piece against its hash, the file against its id.
fn check_files(tx: &WriteTx<'_>, files: &[BlobId]) -> Result<()> {
    let reader = tx.read();
    for id in files {
        let mut blob = reader.open_blob(id)?;
        std::io::copy(&mut blob, &mut std::io::sink())
            .map_err(|e| Error::Tampered(format!("stored file {} received: {e}", id.short())))?;
    }
    Ok(())
}

/// Give each table's newest extract its row map, where it has none.
fn refresh_row_maps(tx: &WriteTx<'_>, tables: &BTreeSet<String>) -> Result<()> {
    for table in tables {
        let reader = tx.read();
        let Some((seq, _)) = reader.extract_at(table, u64::MAX)? else {
            continue;
        };
        if reader.row_map_bytes(seq)?.is_some() {
            continue;
        }
        let v = Version::load(&reader, table, seq, true)?;
        if matches!(v.def.dialect.encoding, TextEncoding::Workbook(_)) {
            continue;
        }
        let map = v.rebuild_row_map(&reader)?;
        if !map.is_empty() {
            tx.put_row_map(table, seq, &map)?;
        }
    }
    Ok(())
}

/// Bring the team's commits `after..=upto` into `tx`, checked, with the files they need.
fn take_team_commits(
    tx: &WriteTx<'_>,
    s: &mut Session<'_>,
    after: u64,
    upto: u64,
    shown: &str,
    pending_tables: &HashSet<String>,
) -> Result<(u64, u64)> {
    let files = fetch_files(tx, s)?;
    let mut tables = BTreeSet::new();
    let mut n = 0;
    s.each_commit(after, upto, |c| {
        let body = append_checked(tx, &c, shown)?;
        for v in &body.versions {
            if pending_tables.contains(&v.table) {
                return Err(Error::PendingFixes {
                    table: v.table.clone(),
                    action: "receiving the team's changes to it",
                });
            }
        }
        if let Change::Ingest(r) = &body.change {
            tables.insert(r.table.clone());
        }
        n += 1;
        Ok(())
    })?;
    if n != upto - after {
        return Err(Error::TeamDiverged {
            server: shown.to_string(),
            problem: format!(
                "its head is commit {upto}, but it holds {n} of the commits after {after}"
            ),
        });
    }
    check_files(tx, &files)?;
    refresh_row_maps(tx, &tables)?;
    Ok((n, files.len() as u64))
}

/// Make a new store in `dir` that follows the team store: every team commit, checked, with
/// the team's root signers. Built in a temporary file and renamed at the end, so a failed join
/// leaves no store behind.
pub fn join(dir: &Path, server: &mut Server, now: &str) -> Result<(Store, Received)> {
    let path = Store::file_in(dir);
    if path.exists() {
        return Err(Error::StoreExists(path));
    }
    let folder = path
        .parent()
        .expect("a store file sits in a folder")
        .to_path_buf();
    let made_folder = !folder.exists();
    std::fs::create_dir_all(&folder).map_err(|e| Error::io(&folder, e))?;
    let tmp = folder.join(format!("joining-{}.sqlite", std::process::id()));
    remove_store_file(&tmp);
    let shown = server.shown().to_string();
    let built = (|| -> Result<Received> {
        let mut store = Store::create_at(&tmp, now)?;
        let mut s = server.read()?;
        let (head, _) = s.head()?;
        let tx = store.transaction()?;
        for (key, name, email, added_at) in s.roots()? {
            tx.trust_signer(&key, &name, email.as_deref(), &added_at, 0)?;
        }
        let (commits, files) = take_team_commits(&tx, &mut s, 0, head, &shown, &HashSet::new())?;
        tx.set_meta(META_ADDRESS, &shown)?;
        tx.set_meta(META_SEQ, &head.to_string())?;
        tx.commit()?;
        Ok(Received {
            commits,
            files,
            head,
            ..Received::default()
        })
    })();
    match built {
        Ok(received) => {
            std::fs::rename(&tmp, &path).map_err(|e| Error::io(&path, e))?;
            Ok((Store::open(&path)?, received))
        }
        Err(e) => {
            remove_store_file(&tmp);
            if made_folder {
                let _ = std::fs::remove_dir(&folder);
            }
            Err(e)
        }
    }
}

fn remove_store_file(path: &Path) {
    for suffix in ["", "-wal", "-shm", "-journal"] {
        let mut p = path.as_os_str().to_owned();
        p.push(suffix);
        let _ = std::fs::remove_file(PathBuf::from(p));
    }
}

/// Bring the team's new commits. With no unpublished local commits they are appended here in
/// one transaction. With unpublished ones, the store is rebuilt from the common history and
/// the team's commits, and the unpublished work is replayed onto it: each ingest signed again
/// by `ctx`, each fix staged as pending (or an open conflict) with its outcome, for review
/// and `emend commit`; the replaced store file is kept under `.emend/set-aside/`.
pub fn receive(
    store: Store,
    server: &mut Server,
    now: &str,
    ctx: Option<&CommitContext<'_>>,
    by: Option<&Recorder>,
) -> Result<(Store, Received)> {
    let mut store = store;
    let link = link(&store.read())?.ok_or(Error::NoTeam)?;
    let shown = server.shown().to_string();
    let mut s = server.read()?;
    let (team_head, _) = s.head()?;
    let (common, local_head, pending_tables) = {
        let reader = store.read();
        let common = common_prefix(&reader, &mut s, &link, team_head, &shown)?;
        let local_head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
        let pending: HashSet<String> = reader.pending()?.into_iter().map(|p| p.fix.table).collect();
        (common, local_head, pending)
    };
    let mut out = Received {
        head: team_head,
        found_published: common.saturating_sub(link.seq),
        unpublished: local_head - common,
        ..Received::default()
    };
    if team_head == common || local_head == common {
        let tx = store.transaction()?;
        if team_head > common {
            let (n, files) =
                take_team_commits(&tx, &mut s, common, team_head, &shown, &pending_tables)?;
            (out.commits, out.files) = (n, files);
        }
        // Either way this store now holds the team's head.
        tx.set_meta(META_SEQ, &team_head.to_string())?;
        tx.commit()?;
        return Ok((store, out));
    }
    // Both moved on: rebuild, replay, swap.
    {
        let reader = store.read();
        if !reader.pending()?.is_empty() || !reader.conflicts()?.is_empty() {
            let table = reader
                .pending()?
                .first()
                .map(|p| p.fix.table.clone())
                .or_else(|| {
                    reader
                        .conflicts()
                        .ok()?
                        .first()
                        .map(|c| c.conflict.fix.table.clone())
                })
                .unwrap_or_default();
            return Err(Error::PendingFixes {
                table,
                action: "receiving while your unpublished commits are replayed",
            });
        }
    }
    let old_path = store.path().to_path_buf();
    let folder = old_path
        .parent()
        .expect("a store file sits in a folder")
        .to_path_buf();
    let new_path = folder.join(format!("receiving-{}.sqlite", std::process::id()));
    remove_store_file(&new_path);
    let built = (|| -> Result<(Store, Vec<Replayed>, u64, u64)> {
        let mut new = Store::create_at(&new_path, now)?;
        new.copy_objects_from(&old_path)?;
        let (n, files) = {
            let tx = new.transaction()?;
            let old = store.read();
            for signer in old.signers()?.iter().filter(|r| r.since_seq == 0) {
                tx.trust_signer(
                    &signer.key,
                    &signer.name,
                    signer.email.as_deref(),
                    &signer.added_at,
                    0,
                )?;
            }
            let mut tables = BTreeSet::new();
            for seq in 1..=common {
                let c = old
                    .try_commit(seq)?
                    .ok_or_else(|| Error::Corrupt(format!("commit {seq} is missing")))?;
                let body = append_checked(&tx, &c, &shown)?;
                if let Change::Ingest(r) = &body.change {
                    tables.insert(r.table.clone());
                }
            }
            refresh_row_maps(&tx, &tables)?;
            let taken = take_team_commits(&tx, &mut s, common, team_head, &shown, &HashSet::new())?;
            tx.set_meta(META_ADDRESS, &link.address)?;
            tx.set_meta(META_SEQ, &team_head.to_string())?;
            tx.commit()?;
            taken
        };
        let replayed = replay_unpublished(&mut new, &store, common, local_head, now, ctx, by)?;
        Ok((new, replayed, n, files))
    })();
    let (new, replayed, n, files) = match built {
        Ok(b) => b,
        Err(e) => {
            remove_store_file(&new_path);
            return Err(e);
        }
    };
    drop(s);
    // Close both files so their write-ahead logs are merged, then swap: the old file is kept
    // under a second name first, so a crash leaves either store in place, never none.
    drop(new);
    drop(store);
    let mut wal = old_path.as_os_str().to_owned();
    wal.push("-wal");
    if Path::new(&wal).exists() {
        // Another process holds the store open: nothing is swapped, and it stays as it was.
        remove_store_file(&new_path);
        return Err(Error::Busy);
    }
    let aside_dir = folder.join("set-aside");
    std::fs::create_dir_all(&aside_dir).map_err(|e| Error::io(&aside_dir, e))?;
    let stamp: String = now
        .chars()
        .map(|c| if c.is_ascii_alphanumeric() { c } else { '-' })
        .collect();
    let aside = aside_dir.join(format!("{stamp}-to-commit-{local_head}.sqlite"));
    std::fs::hard_link(&old_path, &aside).map_err(|e| Error::io(&aside, e))?;
    std::fs::rename(&new_path, &old_path).map_err(|e| Error::io(&old_path, e))?;
    let store = Store::open(&old_path)?;
    out.commits = n;
    out.files = files;
    out.set_aside = Some(aside);
    out.replayed = replayed;
    Ok((store, out))
}

/// Replay the commits `common+1..=local_head` of `old` onto `new` (which holds the common
/// history and the team's commits).
fn replay_unpublished(
    new: &mut Store,
    old: &Store,
    common: u64,
    local_head: u64,
    now: &str,
    ctx: Option<&CommitContext<'_>>,
    by: Option<&Recorder>,
) -> Result<Vec<Replayed>> {
    let old_r = old.read();
    let mut out = Vec::new();
    // The old store's ingest commits, by number, to the new store's commit of the same extract.
    let mut extract_at_new: HashMap<u64, u64> = HashMap::new();
    // Per table, the fixes to stage: (the new store's extract commit they were made on, the
    // fix, its cells, where it came from).
    type Staged = (u64, Fix, Vec<CellEdit>, u64, usize);
    let mut fixes: BTreeMap<String, Vec<Staged>> = BTreeMap::new();
    for seq in common + 1..=local_head {
        let c = old_r
            .try_commit(seq)?
            .ok_or_else(|| Error::Corrupt(format!("commit {seq} is missing")))?;
        let body = crate::query::decode(&c)?;
        match body.change {
            Change::Ingest(rec) => {
                let tx = new.transaction()?;
                let latest = tx.read().extract_at(&rec.table, u64::MAX)?;
                if let Some((at, blob)) = latest
                    && blob == rec.extract
                {
                    extract_at_new.insert(seq, at);
                    out.push(Replayed {
                        from_seq: seq,
                        what: format!("ingest of {} into '{}'", rec.file_name, rec.table),
                        outcome: format!("the team ingested the same file (commit {at})"),
                    });
                    continue;
                }
                let what = format!("ingest of {} into '{}'", rec.file_name, rec.table);
                let Some(ctx) = ctx else {
                    return Err(Error::Key(format!(
                        "your unpublished commit {seq} ({what}) must be signed again on top of the team's commits, and no signing identity was given"
                    )));
                };
                let table = rec.table.clone();
                let done = seal(&tx, ctx, &body.message, Change::Ingest(rec), body.versions)?;
                refresh_row_maps(&tx, &BTreeSet::from([table]))?;
                tx.commit()?;
                extract_at_new.insert(seq, done.seq);
                out.push(Replayed {
                    from_seq: seq,
                    what,
                    outcome: format!("signed again as commit {}", done.seq),
                });
            }
            Change::Fixes(list) => {
                for (i, r) in list.into_iter().enumerate() {
                    let what = format!("{} on '{}'", r.fix.action.kind(), r.fix.table);
                    if let FixAction::Withdraw { seq: target, .. } = &r.fix.action
                        && *target > common
                    {
                        out.push(Replayed {
                            from_seq: seq,
                            what,
                            outcome: format!(
                                "not replayed: it withdraws a fix of set-aside commit {target}; discard that fix instead"
                            ),
                        });
                        continue;
                    }
                    let made_on = old_r
                        .extract_at(&r.fix.table, seq)?
                        .map(|(e, _)| e)
                        .ok_or_else(|| Error::UnknownTable(r.fix.table.clone()))?;
                    let made_on = if made_on <= common {
                        Some(made_on)
                    } else {
                        extract_at_new.get(&made_on).copied()
                    };
                    let Some(made_on) = made_on else {
                        out.push(Replayed {
                            from_seq: seq,
                            what,
                            outcome: "not replayed: the extract it was made on is not here".into(),
                        });
                        continue;
                    };
                    fixes
                        .entry(r.fix.table.clone())
                        .or_default()
                        .push((made_on, r.fix, r.edits, seq, i));
                }
            }
            Change::Tag(t) => out.push(Replayed {
                from_seq: seq,
                what: format!("tag '{}'", t.name),
                outcome: "not replayed: tag again with 'emend tag' once you have committed".into(),
            }),
            Change::Trust(t) => out.push(Replayed {
                from_seq: seq,
                what: format!("trust of {}", t.name),
                outcome: "not replayed: vouch again with 'emend trust'".into(),
            }),
            Change::Revoke(_) => out.push(Replayed {
                from_seq: seq,
                what: "revocation of a key".into(),
                outcome: "not replayed: revoke again with 'emend trust'".into(),
            }),
        }
    }
    if fixes.is_empty() {
        return Ok(out);
    }
    let tx = new.transaction()?;
    let reader = tx.read();
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    for (table, list) in fixes {
        let Some((newest, _)) = reader.extract_at(&table, u64::MAX)? else {
            continue;
        };
        // Consecutive fixes made on the same extract are replayed together.
        let mut start = 0;
        while start < list.len() {
            let made_on = list[start].0;
            let end = list[start..]
                .iter()
                .position(|f| f.0 != made_on)
                .map_or(list.len(), |p| start + p);
            let group: Vec<(Fix, Vec<CellEdit>)> = list[start..end]
                .iter()
                .map(|(_, f, e, _, _)| (f.clone(), e.clone()))
                .collect();
            let carried: Vec<Carried> = replay(&reader, &table, group, made_on, newest, head)?;
            for (c, (_, _, _, from, _)) in carried.iter().zip(&list[start..end]) {
                stage(&tx, std::slice::from_ref(c), now, by, |c| {
                    format!("replayed from set-aside commit {from}: {}", c.note())
                })?;
                let outcome = match c.outcome {
                    Outcome::Applied => {
                        "staged: review with 'emend status', then 'emend commit'".to_string()
                    }
                    Outcome::Conflict => {
                        "conflict: the team changed the cell; decide with 'emend resolve'"
                            .to_string()
                    }
                    o => format!("not staged: {}", o.label()),
                };
                out.push(Replayed {
                    from_seq: *from,
                    what: format!("{} on '{}'", c.fix.action.kind(), table),
                    outcome,
                });
            }
            start = end;
        }
    }
    tx.commit()?;
    out.sort_by_key(|r| r.from_seq);
    Ok(out)
}
