//! Receipts: what a store held, signed and kept outside it.
//!
//! Nothing inside a store can prove the store was not cut at its end or replaced by an older
//! copy: whoever holds the file can delete the newest commits with their derived rows, and the
//! rest still verifies. A receipt names the store's head (its number and id, with the id of
//! commit 1 to name the history and the tables it holds) and is signed by whoever made it. Kept
//! somewhere else (an auditor's mailbox, a ticket, a second machine), it lets `verify
//! --receipt` prove the store still holds that commit at that number; since every commit names
//! its parent's id and `verify` checks the chain, the current history then extends it.
//!
//! This follows the idea of signed checkpoints of append-only logs (RFC 9162, Certificate
//! Transparency 2.0, and the C2SP signed-note checkpoint format); ours is a plain hash chain, so
//! checking that a later head extends a receipted one is the walk of parents `verify` already
//! does, not a Merkle consistency proof. The text format is our own.
//!
//! Making a receipt signs but writes nothing to the store.

use crate::error::{Error, Result};
use crate::hash::CommitId;
use crate::signing::{self, Signer};
use crate::store::Reader;

/// The first line of every receipt (and how receipts in one file are told apart).
pub const RECEIPT_HEADER: &str = "emend receipt 1";

/// What a store held at one moment, and who says so.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Receipt {
    /// Id of commit 1: which history this is.
    pub history: CommitId,
    /// The head commit's number.
    pub seq: u64,
    /// The head commit's id.
    pub id: CommitId,
    /// The head commit's time, as it records it.
    pub commit_time: String,
    /// The tables the store holds.
    pub tables: Vec<String>,
    /// When the receipt was made.
    pub made_at: String,
    /// Who made it.
    pub signer_name: String,
    /// Their public key.
    pub key: [u8; 32],
    /// Ed25519 over [`Receipt::signed_text`].
    pub signature: [u8; 64],
}

/// A receipt field holds one line: control characters become `?`.
fn one_line(s: &str) -> String {
    s.chars()
        .map(|c| if c.is_control() { '?' } else { c })
        .collect()
}

impl Receipt {
    /// The lines the signature covers: every line of the receipt but the last.
    pub fn signed_text(&self) -> String {
        format!(
            "{RECEIPT_HEADER}\nhistory: {}\ncommit: {}\nid: {}\ncommit time: {}\ntables: {}\nmade: {}\nsigner: {}\nkey: {}\n",
            self.history.to_hex(),
            self.seq,
            self.id.to_hex(),
            one_line(&self.commit_time),
            self.tables
                .iter()
                .map(|t| one_line(t))
                .collect::<Vec<_>>()
                .join(", "),
            one_line(&self.made_at),
            one_line(&self.signer_name),
            data_encoding::HEXLOWER.encode(&self.key),
        )
    }

    /// The whole receipt as text, ending in its signature line.
    pub fn text(&self) -> String {
        format!(
            "{}signature: {}\n",
            self.signed_text(),
            data_encoding::HEXLOWER.encode(&self.signature)
        )
    }

    /// Whether the signature is valid for the key the receipt names.
    pub fn signature_valid(&self) -> bool {
        signing::verify(&self.key, self.signed_text().as_bytes(), &self.signature)
    }
}

/// Sign a receipt of the store's head. Fails on a store with no commits.
pub fn make(reader: &Reader<'_>, signer: &Signer, signer_name: &str, now: &str) -> Result<Receipt> {
    let (seq, id) = reader.head()?.ok_or_else(|| {
        Error::Invalid("the store holds no commits yet: there is nothing to receipt".into())
    })?;
    let first = reader
        .try_commit(1)?
        .ok_or_else(|| Error::Corrupt("commit 1 is missing".into()))?;
    let head = reader
        .try_commit(seq)?
        .ok_or_else(|| Error::Corrupt(format!("commit {seq} is missing")))?;
    let body = super::decode(&head)?;
    let mut receipt = Receipt {
        history: first.id,
        seq,
        id,
        commit_time: body.time,
        tables: reader.table_names()?,
        made_at: now.to_string(),
        signer_name: one_line(signer_name),
        key: signer.public_key(),
        signature: [0; 64],
    };
    receipt.signature = signer.sign(receipt.signed_text().as_bytes());
    Ok(receipt)
}

/// A receipt read back from text, or why a part of the text is not one.
pub type Parsed = std::result::Result<Receipt, String>;

/// Every receipt in `text` (a file may hold many, appended one after another), each with the
/// line it starts on. Lines outside receipts (an e-mail's own text) are skipped.
pub fn parse_all(text: &str) -> Vec<(usize, Parsed)> {
    let lines: Vec<&str> = text.lines().collect();
    let mut out = Vec::new();
    let mut i = 0;
    while i < lines.len() {
        if lines[i].trim_end() != RECEIPT_HEADER {
            i += 1;
            continue;
        }
        let start = i + 1;
        let end = (i + 1..lines.len())
            .find(|&j| lines[j].trim_end() == RECEIPT_HEADER)
            .unwrap_or(lines.len());
        out.push((start, parse_one(&lines[i + 1..end])));
        i = end;
    }
    out
}

fn parse_one(lines: &[&str]) -> Parsed {
    let field = |name: &str| -> std::result::Result<String, String> {
        lines
            .iter()
            .find_map(|l| l.strip_prefix(name).and_then(|r| r.strip_prefix(": ")))
            .map(|v| v.trim_end_matches('\r').to_string())
            .ok_or_else(|| format!("has no '{name}:' line"))
    };
    let hex32 = |name: &str| -> std::result::Result<[u8; 32], String> {
        let v = field(name)?;
        data_encoding::HEXLOWER_PERMISSIVE
            .decode(v.as_bytes())
            .ok()
            .and_then(|b| b.try_into().ok())
            .ok_or_else(|| format!("'{name}:' is not 64 hex digits"))
    };
    let signature: [u8; 64] = data_encoding::HEXLOWER_PERMISSIVE
        .decode(field("signature")?.as_bytes())
        .ok()
        .and_then(|b| b.try_into().ok())
        .ok_or("'signature:' is not 128 hex digits")?;
    let tables = field("tables")?;
    Ok(Receipt {
        history: CommitId::from_bytes(hex32("history")?),
        seq: field("commit")?
            .parse()
            .map_err(|_| "'commit:' is not a number".to_string())?,
        id: CommitId::from_bytes(hex32("id")?),
        commit_time: field("commit time")?,
        tables: if tables.is_empty() {
            Vec::new()
        } else {
            tables.split(", ").map(str::to_string).collect()
        },
        made_at: field("made")?,
        signer_name: field("signer")?,
        key: hex32("key")?,
        signature,
    })
}

/// What a store says to one receipt.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Standing {
    /// The store holds the receipted commit at its number; its head is `head`.
    Holds {
        /// The store's head now.
        head: u64,
    },
    /// The store ends before the receipted commit: history was cut or the store replaced.
    Cut {
        /// The store's head now (0 for an empty store).
        head: u64,
    },
    /// The store holds another commit at that number: history was rewritten from there or
    /// before.
    Rewritten {
        /// The id the store holds at the receipted number.
        found: CommitId,
    },
    /// The receipt is of another store's history.
    OtherHistory {
        /// Id of this store's commit 1, if any.
        found: Option<CommitId>,
    },
    /// The receipt's signature does not verify: the receipt itself was altered.
    BadSignature,
}

/// Check one receipt against the store. Whether the chain from the receipted commit to the
/// head is intact is `verify`'s chain walk; this checks the receipted commit is where the
/// receipt says.
pub fn check(reader: &Reader<'_>, receipt: &Receipt) -> Result<Standing> {
    if !receipt.signature_valid() {
        return Ok(Standing::BadSignature);
    }
    let first = reader.try_commit(1)?.map(|c| c.id);
    if first != Some(receipt.history) && !(first.is_none() && receipt.seq > 0) {
        return Ok(Standing::OtherHistory { found: first });
    }
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    if head < receipt.seq {
        return Ok(Standing::Cut { head });
    }
    match reader.try_commit(receipt.seq)? {
        None => Ok(Standing::Cut { head }),
        Some(c) if c.id != receipt.id => Ok(Standing::Rewritten { found: c.id }),
        Some(_) => Ok(Standing::Holds { head }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sample(signer: &Signer) -> Receipt {
        let mut r = Receipt {
            history: CommitId::from_bytes([1; 32]),
            seq: 12,
            id: CommitId::from_bytes([2; 32]),
            commit_time: "2026-11-03T09:00:00Z".into(),
            tables: vec!["samples".into(), "sites".into()],
            made_at: "2026-11-03T09:01:00Z".into(),
            signer_name: "River Team <team@example.org>".into(),
            key: signer.public_key(),
            signature: [0; 64],
        };
        r.signature = signer.sign(r.signed_text().as_bytes());
        r
    }

    #[test]
    fn a_receipt_reads_back_from_its_text_amid_other_lines() {
        let signer = Signer::from_seed(&[7; 32]);
        let r = sample(&signer);
        let mail = format!(
            "Hello,\nhere is today's receipt:\n\n{}\n-- \nsent\n{}",
            r.text(),
            r.text()
        );
        let parsed = parse_all(&mail);
        assert_eq!(parsed.len(), 2);
        assert_eq!(parsed[0].0, 4, "the line the first receipt starts on");
        let back = parsed[0].1.clone().unwrap();
        assert_eq!(back, r);
        assert!(back.signature_valid());
    }

    #[test]
    fn an_altered_receipt_fails_its_signature() {
        let signer = Signer::from_seed(&[7; 32]);
        let text = sample(&signer).text().replace("commit: 12", "commit: 9");
        let back = parse_all(&text).remove(0).1.unwrap();
        assert_eq!(back.seq, 9);
        assert!(!back.signature_valid());
    }

    #[test]
    fn a_broken_receipt_says_which_line_is_wrong() {
        let text = format!("{RECEIPT_HEADER}\nhistory: zz\n");
        let (_, parsed) = parse_all(&text).remove(0);
        assert_eq!(parsed.unwrap_err(), "has no 'signature:' line");
    }

    #[test]
    fn control_characters_cannot_add_lines() {
        let signer = Signer::from_seed(&[7; 32]);
        let mut r = sample(&signer);
        r.signer_name = "Eve\ncommit: 99".into();
        assert!(!r.signed_text().contains("\ncommit: 99"));
    }
}
