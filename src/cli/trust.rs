//! `trust`: vouch for another signing key in a signed commit (key rotation, a new colleague),
//! or withdraw trust from one (`--revoke`).

use super::out::{self, GOOD, paint};
use anyhow::{Context, Result, bail};
use clap::Args;
use std::io::Write;

use super::context::CliContext;

#[derive(Args, Debug)]
pub struct TrustArgs {
    /// The public key (64 hex digits, from 'emend id show' of its holder)
    key: String,
    /// Whose key it is (needed to vouch for a key)
    #[arg(long, required_unless_present = "revoke")]
    name: Option<String>,
    /// Their e-mail
    #[arg(long, conflicts_with = "revoke")]
    email: Option<String>,
    /// Withdraw trust from the key instead: its commits from --from on (default: from this
    /// one) verify as signed by an untrusted key
    #[arg(long)]
    revoke: bool,
    /// With --revoke: the first of the key's commits no longer trusted (a key lost since
    /// commit 12 is revoked from 12)
    #[arg(long = "from", value_name = "COMMIT", requires = "revoke")]
    from_seq: Option<u64>,
    /// Why (e.g. "key rotation: replaces my laptop key", "laptop stolen on 2 Dec")
    #[arg(long, value_name = "REASON")]
    why: String,
}

pub fn trust_key(cx: &CliContext, a: TrustArgs) -> Result<i32> {
    let key: [u8; 32] = data_encoding::HEXLOWER_PERMISSIVE
        .decode(a.key.trim().as_bytes())
        .ok()
        .and_then(|v| v.try_into().ok())
        .with_context(|| {
            format!(
                "'{}' is not a public key (64 hex digits; 'emend id show' prints its holder's)",
                a.key
            )
        })?;
    let mut store = cx.store()?;
    let id = cx.identity()?;
    let ctx = id.context(cx.now()?);
    let fingerprint = emend::signing::fingerprint(&key);
    let mut o = out::stdout();
    if a.revoke {
        let done = emend::ledger::revoke_key(&mut store, &key, a.from_seq, &a.why, &ctx)?;
        let Some(emend::model::Change::Revoke(r)) = Some(&done.body.change) else {
            bail!("a revocation records a revocation");
        };
        writeln!(
            o,
            "{} from key {fingerprint} in signed commit {}: its commits from {} on verify as untrusted",
            paint(GOOD, "trust withdrawn"),
            done.seq,
            r.from_seq
        )?;
        return Ok(0);
    }
    let name = a.name.expect("clap requires --name without --revoke");
    let done = emend::ledger::trust_key(&mut store, &key, &name, a.email.as_deref(), &a.why, &ctx)?;
    writeln!(
        o,
        "{} key {fingerprint} ({}) in signed commit {}: its commits after this one verify as trusted",
        paint(GOOD, "trusted"),
        out::clean(&name),
        done.seq
    )?;
    Ok(0)
}
