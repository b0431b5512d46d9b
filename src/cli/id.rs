//! Signing identities on disk: `identity.json` (name, e-mail, public key) and `identity.key`
//! (the secret seed in hex, mode 0600) in `$EMEND_HOME`, else the user's config folder.
//! Keys never enter a store; a key file that others can read is refused.

use super::context::CliContext;
use super::out::{self, BOLD, DIM, GOOD, paint};
use anyhow::{Context, Result, anyhow, bail};
use clap::Args;
use emend::signing::{Signer, fingerprint};
use serde::{Deserialize, Serialize};
use std::io::Write;

#[derive(Args, Debug)]
pub struct NewArgs {
    /// Your name as it will appear on every commit you sign
    #[arg(long)]
    name: String,
    /// Your e-mail (optional)
    #[arg(long)]
    email: Option<String>,
}

#[derive(Serialize, Deserialize)]
struct IdentityFile {
    name: String,
    email: Option<String>,
    public_key: String,
}

/// A loaded identity.
pub struct Identity {
    pub name: String,
    pub email: Option<String>,
    pub signer: Signer,
}

impl Identity {
    pub fn context(&self, now: String) -> emend::ledger::CommitContext<'_> {
        emend::ledger::CommitContext {
            signer: &self.signer,
            name: self.name.clone(),
            email: self.email.clone(),
            now,
        }
    }
}

/// Make a new identity in `dir`. Refuses to replace one.
pub fn create(dir: &std::path::Path, name: &str, email: Option<&str>) -> Result<Identity> {
    if name.trim().is_empty() {
        bail!("--name is empty: commits must say who signed them");
    }
    let key_path = dir.join("identity.key");
    let info_path = dir.join("identity.json");
    if key_path.exists() || info_path.exists() {
        bail!(
            "an identity already exists in {} (keys are never replaced silently; move it away first, or set EMEND_HOME to another folder)",
            dir.display()
        );
    }
    std::fs::create_dir_all(dir).with_context(|| format!("creating {}", dir.display()))?;
    let mut seed = [0u8; 32];
    getrandom::fill(&mut seed).map_err(|e| anyhow!("no randomness for a key: {e}"))?;
    let signer = Signer::from_seed(&seed);
    let hex = data_encoding::HEXLOWER.encode(&seed);
    write_private(&key_path, hex.as_bytes())?;
    let info = IdentityFile {
        name: name.trim().to_string(),
        email: email
            .map(|e| e.trim().to_string())
            .filter(|e| !e.is_empty()),
        public_key: data_encoding::HEXLOWER.encode(&signer.public_key()),
    };
    std::fs::write(&info_path, serde_json::to_string_pretty(&info)? + "\n")
        .with_context(|| format!("writing {}", info_path.display()))?;
    Ok(Identity {
        name: info.name,
        email: info.email,
        signer,
    })
}

fn write_private(path: &std::path::Path, bytes: &[u8]) -> Result<()> {
    let mut opts = std::fs::OpenOptions::new();
    opts.write(true).create_new(true);
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        opts.mode(0o600);
    }
    let mut f = opts
        .open(path)
        .with_context(|| format!("creating {}", path.display()))?;
    f.write_all(bytes)?;
    f.sync_all()?;
    Ok(())
}

/// Load the identity from `dir`, or `None` when there is none.
pub fn try_load(dir: &std::path::Path) -> Result<Option<Identity>> {
    let key_path = dir.join("identity.key");
    let info_path = dir.join("identity.json");
    if !key_path.exists() {
        return Ok(None);
    }
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let mode = std::fs::metadata(&key_path)?.permissions().mode();
        if mode & 0o077 != 0 {
            bail!(
                "key file {} can be read by others (mode {:o}); run: chmod 600 {}",
                key_path.display(),
                mode & 0o777,
                key_path.display()
            );
        }
    }
    let hex = std::fs::read_to_string(&key_path)
        .with_context(|| format!("reading {}", key_path.display()))?;
    let seed: [u8; 32] = data_encoding::HEXLOWER_PERMISSIVE
        .decode(hex.trim().as_bytes())
        .ok()
        .and_then(|v| v.try_into().ok())
        .ok_or_else(|| anyhow!("{} does not hold a 32-byte key in hex", key_path.display()))?;
    let info: IdentityFile = serde_json::from_str(
        &std::fs::read_to_string(&info_path)
            .with_context(|| format!("reading {}", info_path.display()))?,
    )
    .with_context(|| format!("{} is not an emend identity file", info_path.display()))?;
    let signer = Signer::from_seed(&seed);
    if data_encoding::HEXLOWER.encode(&signer.public_key()) != info.public_key.to_lowercase() {
        bail!(
            "{} names a different public key than {} holds; the two files do not belong together",
            info_path.display(),
            key_path.display()
        );
    }
    Ok(Some(Identity {
        name: info.name,
        email: info.email,
        signer,
    }))
}

pub fn new(cx: &CliContext, args: NewArgs) -> Result<i32> {
    let dir = cx.home()?;
    let id = create(&dir, &args.name, args.email.as_deref())?;
    let mut o = out::stdout();
    writeln!(
        o,
        "{} identity for {}{}",
        paint(GOOD, "made"),
        paint(BOLD, &id.name),
        id.email
            .as_deref()
            .map(|e| format!(" <{e}>"))
            .unwrap_or_default()
    )?;
    writeln!(
        o,
        "  key fingerprint {}",
        fingerprint(&id.signer.public_key())
    )?;
    writeln!(
        o,
        "  {}",
        paint(
            DIM,
            format!(
                "private key: {} (mode 0600; keep it safe, never share it)",
                dir.join("identity.key").display()
            )
        )
    )?;
    Ok(0)
}

/// After a commit signed by `key`: a line saying, when this store does not trust the key at
/// that commit, what `verify` will say and which command makes the key's next commits trusted.
pub fn untrusted_note(
    reader: &emend::store::Reader<'_>,
    key: &[u8; 32],
    name: &str,
    seq: u64,
) -> Result<Option<String>> {
    if reader.trusted_at(key, seq)? {
        return Ok(None);
    }
    Ok(Some(format!(
        "note: this store does not trust your key {}, so 'emend verify' lists commit {seq} as signed by an untrusted key (exit 3). A trusted signer makes your later commits trusted with: emend trust {} --name {} --why \"...\"",
        fingerprint(key),
        data_encoding::HEXLOWER.encode(key),
        out::shell_quote(name)
    )))
}

pub fn show(cx: &CliContext, json: bool, key_only: bool) -> Result<i32> {
    let dir = cx.home()?;
    let id = cx.identity()?;
    let key = id.signer.public_key();
    if key_only {
        writeln!(out::stdout(), "{}", data_encoding::HEXLOWER.encode(&key))?;
        return Ok(0);
    }
    let trusted = match cx.store_read() {
        Ok(store) => {
            let reader = store.read();
            let next = reader.head()?.map_or(1, |(seq, _)| seq + 1);
            Some(reader.trusted_at(&key, next)?)
        }
        Err(_) => None,
    };
    if json {
        out::json(&serde_json::json!({
            "name": id.name,
            "email": id.email,
            "public_key": data_encoding::HEXLOWER.encode(&key),
            "fingerprint": fingerprint(&key),
            "folder": dir.display().to_string(),
            "trusted_by_store": trusted,
        }))?;
        return Ok(0);
    }
    let mut o = out::stdout();
    writeln!(
        o,
        "{}{}",
        paint(BOLD, &id.name),
        id.email
            .as_deref()
            .map(|e| format!(" <{e}>"))
            .unwrap_or_default()
    )?;
    writeln!(o, "  fingerprint  {}", fingerprint(&key))?;
    writeln!(o, "  public key   {}", data_encoding::HEXLOWER.encode(&key))?;
    writeln!(o, "  folder       {}", dir.display())?;
    match trusted {
        Some(true) => writeln!(o, "  this store   {}", paint(GOOD, "trusts this key"))?,
        Some(false) => writeln!(o, "  this store   does not trust this key yet")?,
        None => {}
    }
    Ok(0)
}
