//! `trust`: vouch for another signing key in a signed commit (key rotation, a new colleague).

use super::out::{self, GOOD, paint};
use anyhow::{Context, Result};
use clap::Args;
use std::io::Write;

use super::context::CliContext;

#[derive(Args, Debug)]
pub struct TrustArgs {
    /// The public key to vouch for (64 hex digits, from 'emend id show' of its holder)
    key: String,
    /// Whose key it is
    #[arg(long)]
    name: String,
    /// Their e-mail
    #[arg(long)]
    email: Option<String>,
    /// Why it is trusted (e.g. "key rotation: replaces my laptop key")
    #[arg(long, value_name = "REASON")]
    why: String,
}

pub fn trust_key(cx: &CliContext, a: TrustArgs) -> Result<i32> {
    let key: [u8; 32] = data_encoding::HEXLOWER_PERMISSIVE
        .decode(a.key.trim().as_bytes())
        .ok()
        .and_then(|v| v.try_into().ok())
        .with_context(|| format!("'{}' is not a public key (64 hex digits)", a.key))?;
    let mut store = cx.store()?;
    let id = cx.identity()?;
    let ctx = id.context(cx.now()?);
    let done =
        emend::ledger::trust_key(&mut store, &key, &a.name, a.email.as_deref(), &a.why, &ctx)?;
    writeln!(
        out::stdout(),
        "{} key {} ({}) in signed commit {}",
        paint(GOOD, "trusted"),
        emend::signing::fingerprint(&key),
        a.name,
        done.seq
    )?;
    Ok(0)
}
