//! Trust: vouching for another key in a signed commit, withdrawing trust from one, and
//! trusting a key locally (the store's roots).

use super::seal::{CommitContext, CommitOutcome, seal};
use crate::error::{Error, Result};
use crate::model::{Change, RevokeRecord, TrustRecord};
use crate::store::{Store, WriteTx};

/// The signer must be trusted by the store as of the next commit to vouch or revoke.
fn check_signer(tx: &WriteTx<'_>, ctx: &CommitContext<'_>, what: &str) -> Result<u64> {
    let next = tx.read().head()?.map_or(1, |(seq, _)| seq + 1);
    if !tx.read().trusted_at(&ctx.signer.public_key(), next)? {
        return Err(Error::Key(format!(
            "your own key is not trusted by this store, so it cannot {what}; a trusted signer runs 'emend trust' for your key first"
        )));
    }
    Ok(next)
}

/// Vouch for another key in a signed commit (key rotation, a new colleague): its commits
/// after this one verify as trusted, also against an auditor's key list that holds the
/// signer; its earlier commits stay untrusted.
pub fn trust_key(
    store: &mut Store,
    key: &[u8; 32],
    name: &str,
    email: Option<&str>,
    why: &str,
    ctx: &CommitContext<'_>,
) -> Result<CommitOutcome> {
    if why.trim().is_empty() {
        return Err(Error::EmptyReason);
    }
    if name.trim().is_empty() {
        return Err(Error::Invalid(
            "--name is empty: say whose key this is".into(),
        ));
    }
    if ed25519_dalek::VerifyingKey::from_bytes(key).is_err() {
        return Err(Error::Key("that is not an Ed25519 public key".into()));
    }
    let tx = store.transaction()?;
    let next = check_signer(&tx, ctx, "vouch for another")?;
    if let Some(s) = tx.read().signers()?.into_iter().find(|s| s.key == *key) {
        return Err(Error::Invalid(match s.revoked_from {
            Some(r) => format!(
                "trust was withdrawn from that key (its commits from {r} on); a new key is trusted instead: 'emend id new', then 'emend trust' for it"
            ),
            None => format!("that key ({}) is trusted already", s.name),
        }));
    }
    let change = Change::Trust(TrustRecord {
        key: *key,
        name: name.trim().to_string(),
        email: email.map(str::to_string),
        why: why.trim().to_string(),
    });
    let message = format!("trust {}: {}", name.trim(), why.trim());
    let done = seal(&tx, ctx, &message, change, Vec::new())?;
    debug_assert_eq!(done.seq, next);
    tx.trust_signer(key, name.trim(), email, &ctx.now, done.seq)?;
    tx.commit()?;
    Ok(done)
}

/// Withdraw trust from a key in a signed commit: its commits from `from_seq` on (default:
/// from this commit) verify as signed by an untrusted key.
pub fn revoke_key(
    store: &mut Store,
    key: &[u8; 32],
    from_seq: Option<u64>,
    why: &str,
    ctx: &CommitContext<'_>,
) -> Result<CommitOutcome> {
    if why.trim().is_empty() {
        return Err(Error::EmptyReason);
    }
    let tx = store.transaction()?;
    let next = check_signer(&tx, ctx, "withdraw trust")?;
    let Some(listed) = tx.read().signers()?.into_iter().find(|s| s.key == *key) else {
        return Err(Error::Invalid(
            "that key is not among this store's signers ('emend id show' in the store lists them)"
                .into(),
        ));
    };
    if let Some(r) = listed.revoked_from {
        return Err(Error::Invalid(format!(
            "trust was withdrawn from that key already (its commits from {r} on)"
        )));
    }
    let from_seq = from_seq.unwrap_or(next);
    if from_seq == 0 || from_seq > next {
        return Err(Error::Invalid(format!(
            "--from {from_seq}: give a commit between 1 and {next} (this revocation's own number)"
        )));
    }
    let change = Change::Revoke(RevokeRecord {
        key: *key,
        from_seq,
        why: why.trim().to_string(),
    });
    let message = format!("withdraw trust from {}: {}", listed.name, why.trim());
    let done = seal(&tx, ctx, &message, change, Vec::new())?;
    tx.revoke_signer(key, from_seq)?;
    tx.commit()?;
    Ok(done)
}

/// Trust a signer's key in this store as one of its roots (the identity that makes it).
pub fn trust(
    store: &mut Store,
    key: &[u8; 32],
    name: &str,
    email: Option<&str>,
    now: &str,
) -> Result<bool> {
    let tx = store.transaction()?;
    let added = tx.trust_signer(key, name, email, now, 0)?;
    tx.commit()?;
    Ok(added)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ledger::testkit::{Kit, NOW, ctx, signer};
    use crate::model::FixAction;
    use crate::query::verify::{Trust, verify};
    use crate::signing::Signer;

    fn untrusted(kit: &Kit, trust: &Trust) -> Vec<String> {
        let report = verify(&kit.store.read(), trust, &mut |_| {}).unwrap();
        assert!(report.is_clean(), "{:?}", report.problems);
        report.untrusted.into_iter().map(|p| p.object).collect()
    }

    fn commit_as(kit: &mut Kit, who: &Signer, row: &str) -> u64 {
        kit.fix(FixAction::Exclude {
            row: crate::model::RowId(row.into()),
        });
        let mut c = ctx(who);
        c.name = "Colleague".into();
        crate::ledger::commit_pending(&mut kit.store, "by a colleague", &c)
            .unwrap()
            .seq
    }

    #[test]
    fn trust_counts_from_the_vouching_commit_on_and_ends_where_it_is_withdrawn() {
        let mut kit = Kit::new(); // commit 1, by the store's root
        let root = signer();
        let colleague = Signer::from_seed(&[8; 32]);
        let key = colleague.public_key();
        assert_eq!(commit_as(&mut kit, &colleague, "S-1"), 2);
        assert_eq!(untrusted(&kit, &Trust::Store), ["commit 2"]);
        let vouched = trust_key(
            &mut kit.store,
            &key,
            "Colleague",
            None,
            "joins",
            &ctx(&root),
        );
        assert_eq!(vouched.unwrap().seq, 3);
        assert_eq!(commit_as(&mut kit, &colleague, "S-2"), 4);
        // Commit 2 stays untrusted: trust is not given backwards. An auditor's list holding
        // only the root reaches the colleague through the trust commit.
        assert_eq!(untrusted(&kit, &Trust::Store), ["commit 2"]);
        let auditor = Trust::Keys(vec![root.public_key()]);
        assert_eq!(untrusted(&kit, &auditor), ["commit 2"]);
        assert!(kit.store.read().trusted_at(&key, 4).unwrap());
        assert!(!kit.store.read().trusted_at(&key, 2).unwrap());

        // The key was lost after commit 3: withdrawn from 4 on, in commit 5.
        let revoked = revoke_key(&mut kit.store, &key, Some(4), "laptop lost", &ctx(&root));
        assert_eq!(revoked.unwrap().seq, 5);
        assert_eq!(untrusted(&kit, &Trust::Store), ["commit 2", "commit 4"]);
        assert_eq!(untrusted(&kit, &auditor), ["commit 2", "commit 4"]);
        assert!(!kit.store.read().trusted_at(&key, 6).unwrap());
        // A withdrawn key is not trusted again, nor can it vouch.
        assert!(trust_key(&mut kit.store, &key, "Colleague", None, "back", &ctx(&root)).is_err());
        let other = Signer::from_seed(&[9; 32]).public_key();
        assert!(trust_key(&mut kit.store, &other, "X", None, "y", &ctx(&colleague)).is_err());
    }

    #[test]
    fn a_store_from_before_dated_trust_learns_when_each_key_was_vouched_for() {
        let mut kit = Kit::new();
        let root = signer();
        let colleague = Signer::from_seed(&[8; 32]);
        commit_as(&mut kit, &colleague, "S-1");
        trust_key(
            &mut kit.store,
            &colleague.public_key(),
            "Colleague",
            None,
            "joins",
            &ctx(&root),
        )
        .unwrap();
        // Back to the schema v2 signer table, which knew no commit numbers.
        kit.store
            .conn()
            .execute_batch(&format!(
                "CREATE TABLE old AS SELECT key, name, email, added_at FROM signer;
                 DROP TABLE signer;
                 CREATE TABLE signer (key BLOB PRIMARY KEY, name TEXT NOT NULL, email TEXT, added_at TEXT NOT NULL) STRICT;
                 INSERT INTO signer SELECT * FROM old; DROP TABLE old;
                 DROP TABLE row_map; DROP TABLE open_conflict; DROP TABLE pending; CREATE TABLE pending (id INTEGER PRIMARY KEY AUTOINCREMENT, tbl TEXT NOT NULL, fix BLOB NOT NULL, note TEXT, added_at TEXT NOT NULL) STRICT;
                 PRAGMA user_version = 2; -- written {NOW}"
            ))
            .unwrap();
        let path = kit.store.path().to_path_buf();
        let reopened = Store::open(&path).unwrap();
        let signers = reopened.read().signers().unwrap();
        let since = |k: [u8; 32]| signers.iter().find(|s| s.key == k).unwrap().since_seq;
        assert_eq!(since(root.public_key()), 0, "the root stays a root");
        assert_eq!(since(colleague.public_key()), 3, "vouched for in commit 3");
    }
}
