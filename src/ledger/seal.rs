//! Sealing a commit: the canonical body, its id, the signature and the append, in the caller's
//! transaction. Every signed write in the ledger ends here.

use crate::error::Result;
use crate::hash::CommitId;
use crate::model::{Author, BODY_FORMAT, Change, CommitBody, TableVersion};
use crate::signing::Signer;
use crate::store::WriteTx;

/// Who signs a commit, and when: handed in by the caller.
pub struct CommitContext<'a> {
    /// The private key.
    pub signer: &'a Signer,
    /// The signer's display name.
    pub name: String,
    /// The signer's e-mail.
    pub email: Option<String>,
    /// The time to record (RFC 3339, UTC).
    pub now: String,
}

/// A commit that was just made.
#[derive(Debug, Clone)]
pub struct CommitOutcome {
    /// Sequence.
    pub seq: u64,
    /// Id.
    pub id: CommitId,
    /// The signed body.
    pub body: CommitBody,
}

/// Seal `change` as the next commit in `tx`: body, id, signature, append.
pub fn seal(
    tx: &WriteTx<'_>,
    ctx: &CommitContext<'_>,
    message: &str,
    change: Change,
    versions: Vec<TableVersion>,
) -> Result<CommitOutcome> {
    let head = tx.read().head()?;
    let author = Author {
        name: ctx.name.clone(),
        email: ctx.email.clone(),
        key: ctx.signer.public_key(),
    };
    let body = CommitBody {
        format: BODY_FORMAT,
        seq: head.map(|(s, _)| s).unwrap_or(0) + 1,
        parent: head.map(|(_, id)| id),
        author,
        time: ctx.now.clone(),
        message: message.to_string(),
        change,
        versions,
    };
    let bytes = body.encode();
    let id = CommitBody::id_of(&bytes);
    let signature = ctx.signer.sign(id.as_bytes());
    tx.append_commit(&body, &bytes, &id, &signature)?;
    // The first signer of a store with no trusted key becomes trusted (recorded, not implied).
    if tx.read().signers()?.is_empty() {
        tx.trust_signer(
            &body.author.key,
            &ctx.name,
            ctx.email.as_deref(),
            &ctx.now,
            0,
        )?;
    }
    Ok(CommitOutcome {
        seq: body.seq,
        id,
        body,
    })
}
