//! Trust: vouching for another key in a signed commit, and trusting a key locally.

use super::seal::{CommitContext, CommitOutcome, seal};
use crate::error::{Error, Result};
use crate::model::Change;
use crate::store::Store;

/// Vouch for another key in a signed commit (key rotation, a new colleague): from this commit
/// on its commits verify as trusted, also against an auditor's key list that holds the signer.
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
    let signer = ctx.signer.public_key();
    if !tx.read().signers()?.iter().any(|s| s.key == signer) {
        return Err(Error::Key(
            "your own key is not trusted by this store, so it cannot vouch for another".into(),
        ));
    }
    let change = Change::Trust(crate::model::TrustRecord {
        key: *key,
        name: name.trim().to_string(),
        email: email.map(str::to_string),
        why: why.trim().to_string(),
    });
    let message = format!("trust {}: {}", name.trim(), why.trim());
    let done = seal(&tx, ctx, &message, change, Vec::new())?;
    tx.trust_signer(key, name.trim(), email, &ctx.now)?;
    tx.commit()?;
    Ok(done)
}

/// Trust a signer's key in this store.
pub fn trust(
    store: &mut Store,
    key: &[u8; 32],
    name: &str,
    email: Option<&str>,
    now: &str,
) -> Result<bool> {
    let tx = store.transaction()?;
    let added = tx.trust_signer(key, name, email, now)?;
    tx.commit()?;
    Ok(added)
}
