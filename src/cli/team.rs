//! `init --team`, `join`, `publish`, `receive`: a local store that follows a team store on a
//! PostgreSQL server (docs/team.md). The library moves and checks; this prints.

use super::context::CliContext;
use super::out::{self, BOLD, GOOD, paint};
use anyhow::{Context, Result};
use clap::Args;
use emend::team::{self, Address, Server, ServerEnv};
use std::io::Write;

#[derive(Args, Debug)]
pub struct JoinArgs {
    /// The team store: postgres://USER@HOST/DATABASE (a password comes from PGPASSWORD, a
    /// port left out from PGPORT)
    #[arg(value_name = "ADDRESS")]
    address: String,
}

/// What PostgreSQL's client programs read from the environment.
pub fn server_env() -> Result<ServerEnv> {
    let port = match std::env::var("PGPORT") {
        Ok(p) if !p.trim().is_empty() => Some(
            p.trim()
                .parse::<u16>()
                .with_context(|| format!("PGPORT is '{p}', not a port number"))?,
        ),
        _ => None,
    };
    let root_cert = match std::env::var_os("PGSSLROOTCERT") {
        Some(p) if !p.is_empty() => Some(
            std::fs::read(&p)
                .with_context(|| format!("reading PGSSLROOTCERT ({})", p.to_string_lossy()))?,
        ),
        _ => None,
    };
    Ok(ServerEnv {
        host: std::env::var("PGHOST")
            .ok()
            .filter(|h| !h.trim().is_empty()),
        port,
        password: std::env::var("PGPASSWORD").ok(),
        root_cert,
    })
}

/// Connect to the team store at `address`.
pub fn connect(address: &str) -> Result<Server> {
    let address = Address::parse(address, &server_env()?)?;
    Ok(Server::connect(&address)?)
}

/// A signed receipt of the store's head, to keep on the server with a publish.
fn receipt_text(cx: &CliContext, store: &emend::store::Store) -> Result<Option<String>> {
    let Some(id) = cx.try_identity()? else {
        return Ok(None);
    };
    if store.read().head()?.is_none() {
        return Ok(None);
    }
    Ok(Some(
        super::receipt::signed_by(cx, &store.read(), &id)?.text(),
    ))
}

/// `init --team ADDRESS`: make the team schema on an empty database and link this folder's
/// store (made now if there is none) to it, publishing what it holds.
pub fn init_team(cx: &CliContext, address: &str, writers: &str, auditors: &str) -> Result<i32> {
    let mut server = connect(address)?;
    let here = emend::store::Store::file_in(cx.cwd());
    if !here.exists() {
        super::ingest::init(cx)?;
    }
    let mut store = cx.store()?;
    let receipt = receipt_text(cx, &store)?;
    let done = team::create(&mut store, &mut server, writers, auditors, receipt)?;
    let mut o = out::stdout();
    writeln!(
        o,
        "{} {} holds the team's history; {} writes to it, {} reads it",
        paint(GOOD, "team store ready:"),
        out::clean(server.shown()),
        paint(BOLD, writers),
        paint(BOLD, auditors)
    )?;
    if done.commits > 0 {
        writeln!(
            o,
            "  published this store's {} ({})",
            emend::model::quantity(done.commits, "commit", "commits"),
            emend::model::quantity(done.files, "stored file", "stored files")
        )?;
    }
    writeln!(
        o,
        "  next: each analyst runs 'emend join postgres://THEIR_ROLE@HOST/DATABASE' in a folder of their own"
    )?;
    Ok(0)
}

pub fn join(cx: &CliContext, a: JoinArgs) -> Result<i32> {
    let mut server = connect(&a.address)?;
    let (store, got) = team::join(cx.cwd(), &mut server, &cx.now()?)?;
    let mut o = out::stdout();
    writeln!(
        o,
        "{} {} follows {}: {} and {} received, checked",
        paint(GOOD, "joined:"),
        store.path().display(),
        out::clean(server.shown()),
        emend::model::quantity(got.commits, "commit", "commits"),
        emend::model::quantity(got.files, "stored file", "stored files")
    )?;
    if let Some(id) = cx.try_identity()? {
        let key = id.signer.public_key();
        let head = store.read().head()?.map(|(s, _)| s).unwrap_or(0);
        if !store.read().trusted_at(&key, head + 1)? {
            writeln!(
                o,
                "  your key {} is not yet trusted by the team: a trusted member runs 'emend trust {} --name \"{}\" --why ...' and publishes",
                emend::signing::fingerprint(&key),
                data_encoding::HEXLOWER.encode(&key),
                out::clean(&id.name)
            )?;
        }
    }
    writeln!(
        o,
        "  next: work as usual; 'emend publish' sends your commits, 'emend receive' brings the team's"
    )?;
    Ok(0)
}

fn linked(store: &emend::store::Store) -> Result<team::Link> {
    team::link(&store.read())?.ok_or_else(|| emend::Error::NoTeam.into())
}

pub fn publish(cx: &CliContext) -> Result<i32> {
    let mut store = cx.store()?;
    let link = linked(&store)?;
    let mut server = connect(&link.address)?;
    let receipt = receipt_text(cx, &store)?;
    let done = team::publish(&mut store, &mut server, receipt)?;
    let mut o = out::stdout();
    if done.commits == 0 {
        writeln!(
            o,
            "{} the team store holds every commit here (its head is commit {})",
            paint(GOOD, "nothing to publish:"),
            done.head
        )?;
    } else {
        writeln!(
            o,
            "{} {} and {} ({}) sent to {}; the team's head is commit {}",
            paint(GOOD, "published:"),
            emend::model::quantity(done.commits, "commit", "commits"),
            emend::model::quantity(done.files, "stored file", "stored files"),
            human_bytes(done.bytes),
            out::clean(server.shown()),
            done.head
        )?;
    }
    Ok(0)
}

fn human_bytes(n: u64) -> String {
    if n >= 1 << 20 {
        format!("{:.1} MiB", n as f64 / (1 << 20) as f64)
    } else if n >= 1 << 10 {
        format!("{:.1} KiB", n as f64 / 1024.0)
    } else {
        format!("{n} bytes")
    }
}

pub fn receive(cx: &CliContext) -> Result<i32> {
    let store = cx.store()?;
    let link = linked(&store)?;
    let mut server = connect(&link.address)?;
    let now = cx.now()?;
    let identity = cx.try_identity()?;
    let ctx = identity.as_ref().map(|id| id.context(now.clone()));
    let by = cx.recorder()?;
    let (_store, got) = team::receive(store, &mut server, &now, ctx.as_ref(), by.as_ref())?;
    let mut o = out::stdout();
    let q = emend::model::quantity;
    if got.commits == 0 {
        writeln!(
            o,
            "{} this store holds the team's head (commit {})",
            paint(GOOD, "up to date:"),
            got.head
        )?;
    } else {
        writeln!(
            o,
            "{} {} and {} from {}, checked; the team's head is commit {}",
            paint(GOOD, "received:"),
            q(got.commits, "commit", "commits"),
            q(got.files, "stored file", "stored files"),
            out::clean(server.shown()),
            got.head
        )?;
    }
    if got.found_published > 0 {
        writeln!(
            o,
            "  {} of yours {} on the team store already",
            q(got.found_published, "commit", "commits"),
            if got.found_published == 1 {
                "was"
            } else {
                "were"
            }
        )?;
    }
    if let Some(aside) = &got.set_aside {
        writeln!(
            o,
            "  your unpublished commits were set aside in {} (readable with EMEND_STORE=that file) and replayed on the team's head:",
            aside.display()
        )?;
        for r in &got.replayed {
            writeln!(
                o,
                "    commit {} ({}): {}",
                r.from_seq,
                out::clean(&r.what),
                out::clean(&r.outcome)
            )?;
        }
        writeln!(
            o,
            "  next: 'emend status' to review, 'emend commit -m ...' to sign them again, then 'emend publish'"
        )?;
    } else if got.unpublished > 0 {
        writeln!(
            o,
            "  {} here still to publish: 'emend publish'",
            q(got.unpublished, "commit", "commits")
        )?;
    }
    Ok(0)
}
