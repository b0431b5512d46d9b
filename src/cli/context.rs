//! What one run of `emend` works with, read once from the environment by [`CliContext::from_env`]
//! and passed to every command: the folder it runs in, the clock (`EMEND_NOW` or the system
//! time), where signing identities live (`EMEND_HOME` or the config folder), the store
//! named explicitly (`EMEND_STORE`), if any, and the input limits (`EMEND_MAX_FIELD_MIB`,
//! `EMEND_MAX_EVIDENCE_MIB`). Commands ask the context; none of them reads the environment
//! or the clock on its own.

use super::id::{self, Identity};
use anyhow::{Result, anyhow};
use emend::store::{ReadMode, STORE_FILE, Store};
use std::path::{Path, PathBuf};

/// The folder, clock and identity home of one run.
#[derive(Debug, Clone)]
pub struct CliContext {
    cwd: PathBuf,
    fixed_now: Option<String>,
    home: Option<PathBuf>,
    store: Option<PathBuf>,
    max_field_mib: Option<String>,
    max_evidence_mib: Option<String>,
    threads: Option<String>,
}

/// A limit in MiB from the environment variable `var` (its text `value`), in bytes.
fn mib_limit(var: &str, value: Option<&str>, default: u64) -> Result<u64> {
    let Some(text) = value else {
        return Ok(default);
    };
    match text.trim().parse::<u64>() {
        Ok(n) if n > 0 && n <= 1 << 40 => Ok(n * 1024 * 1024),
        _ => Err(anyhow!(
            "{var}='{text}' is not a whole number of MiB from 1 up; e.g. {var}={}",
            default / (1024 * 1024) * 4
        )),
    }
}

impl CliContext {
    /// Reads the current folder, `EMEND_NOW`, `EMEND_HOME` and `EMEND_STORE`.
    pub fn from_env() -> Result<CliContext> {
        Ok(CliContext {
            cwd: std::env::current_dir()?,
            fixed_now: std::env::var("EMEND_NOW").ok(),
            home: std::env::var_os("EMEND_HOME").map(PathBuf::from),
            store: std::env::var_os("EMEND_STORE")
                .filter(|s| !s.is_empty())
                .map(PathBuf::from),
            max_field_mib: std::env::var("EMEND_MAX_FIELD_MIB").ok(),
            max_evidence_mib: std::env::var("EMEND_MAX_EVIDENCE_MIB").ok(),
            threads: std::env::var("EMEND_THREADS").ok(),
        })
    }

    /// Sets how many threads the work of every command may use: `EMEND_THREADS` (1 runs
    /// everything on one core, for measuring), or one per core by default.
    pub fn start_thread_pool(&self) -> Result<()> {
        let mut pool = rayon::ThreadPoolBuilder::new();
        if let Some(text) = &self.threads {
            match text.trim().parse::<usize>() {
                Ok(n) if (1..=1024).contains(&n) => pool = pool.num_threads(n),
                _ => {
                    return Err(anyhow!(
                        "EMEND_THREADS='{text}' is not a number of threads from 1 to 1024; e.g. EMEND_THREADS=1 to use one core"
                    ));
                }
            }
        }
        // Only fails when a pool was already made, which then serves.
        let _ = pool.build_global();
        Ok(())
    }

    /// The largest field (and record) an input CSV may hold: `EMEND_MAX_FIELD_MIB`, 64 MiB by
    /// default.
    pub fn max_field(&self) -> Result<usize> {
        let bytes = mib_limit(
            "EMEND_MAX_FIELD_MIB",
            self.max_field_mib.as_deref(),
            emend::table::csv::DEFAULT_MAX_FIELD as u64,
        )?;
        Ok(usize::try_from(bytes).unwrap_or(usize::MAX))
    }

    /// How evidence and rules files are opened: at most `EMEND_MAX_EVIDENCE_MIB` (256 MiB by
    /// default), pipes copied beside the store.
    pub fn evidence_limits(&self) -> Result<emend::ingest::InputOptions> {
        Ok(emend::ingest::InputOptions {
            max_bytes: Some(mib_limit(
                "EMEND_MAX_EVIDENCE_MIB",
                self.max_evidence_mib.as_deref(),
                emend::ingest::DEFAULT_MAX_EVIDENCE,
            )?),
            spool_dir: None,
        })
    }

    /// The store named by `EMEND_STORE`: its file, or a folder holding `store.sqlite` or
    /// `.emend/store.sqlite`; made absolute, so the project folder is known.
    fn named_store(&self) -> Result<Option<PathBuf>> {
        let Some(named) = &self.store else {
            return Ok(None);
        };
        let path = self.cwd.join(named);
        let file = if path.is_dir() {
            [path.join(STORE_FILE), Store::file_in(&path)]
                .into_iter()
                .find(|p| p.is_file())
        } else {
            path.is_file().then(|| path.clone())
        };
        let file = file.ok_or_else(|| {
            anyhow!(
                "EMEND_STORE={} names no store (give the store file, .emend/store.sqlite, or its project folder)",
                named.display()
            )
        })?;
        Ok(Some(file.canonicalize()?))
    }

    /// The folder the command runs in.
    pub fn cwd(&self) -> &Path {
        &self.cwd
    }

    /// Open the store for writing: the one `EMEND_STORE` names, else the one found by walking
    /// up from the current folder (refused when another user owns it); after checking its
    /// chain and derived rows against the signed commits (`query::guard`), so no command
    /// builds on what the store holds unless the signed history says it.
    pub fn store(&self) -> Result<Store> {
        let store = self.store_unchecked()?;
        store.snapshot(emend::query::guard::check)?;
        Ok(store)
    }

    /// Open the store for writing without the history check.
    pub fn store_unchecked(&self) -> Result<Store> {
        match self.named_store()? {
            Some(path) => Ok(Store::open(&path)?),
            None => Ok(Store::discover(&self.cwd)?),
        }
    }

    /// Open the store for a command that only reads: as [`CliContext::store`], read-only, so
    /// a store the user can read but not write still works, and checked the same way.
    pub fn store_read(&self) -> Result<Store> {
        let store = self.store_read_unchecked()?;
        store.snapshot(emend::query::guard::check)?;
        Ok(store)
    }

    /// Open the store read-only without the history check: for `verify`, which checks
    /// everything and lists what it finds. When reading needs SQLite's immutable mode (a
    /// read-only folder), say so on standard error.
    pub fn store_read_unchecked(&self) -> Result<Store> {
        let (store, mode) = match self.named_store()? {
            Some(path) => Store::open_reading(&path)?,
            None => Store::discover_read_only(&self.cwd)?,
        };
        if mode == ReadMode::Immutable {
            use std::io::Write;
            let _ = writeln!(
                super::out::stderr(),
                "note: {} is in a folder you cannot write; reading it as an immutable file (a writer elsewhere would not be seen)",
                store.path().display()
            );
        }
        Ok(store)
    }

    /// The time to record: `EMEND_NOW` when set (for reproducible runs), else the clock, in UTC.
    pub fn now(&self) -> Result<String> {
        if let Some(fixed) = &self.fixed_now {
            let parsed = chrono::DateTime::parse_from_rfc3339(fixed).map_err(|e| {
                anyhow!(
                    "EMEND_NOW='{fixed}' is not an RFC 3339 time ({e}); e.g. 2026-10-01T09:00:00Z"
                )
            })?;
            return Ok(parsed
                .with_timezone(&chrono::Utc)
                .format("%Y-%m-%dT%H:%M:%SZ")
                .to_string());
        }
        Ok(chrono::Utc::now().format("%Y-%m-%dT%H:%M:%SZ").to_string())
    }

    /// Where identities live: `EMEND_HOME` when set, else `emend` in the config folder.
    pub fn home(&self) -> Result<PathBuf> {
        if let Some(h) = &self.home {
            return Ok(h.clone());
        }
        use etcetera::BaseStrategy;
        let base = etcetera::choose_base_strategy()
            .map_err(|e| anyhow!("cannot find your config folder ({e}); set EMEND_HOME"))?;
        Ok(base.config_dir().join("emend"))
    }

    /// The signing identity, or an error with the command that makes one.
    pub fn identity(&self) -> Result<Identity> {
        let dir = self.home()?;
        id::try_load(&dir)?.ok_or_else(|| {
            anyhow!(
                "no signing identity in {}; make one with: emend id new --name \"Your Name\" --email you@example.org",
                dir.display()
            )
        })
    }

    /// Who records fixes now: the identity in use, when there is one.
    pub fn recorder(&self) -> Result<Option<emend::model::Recorder>> {
        Ok(self.try_identity()?.map(|id| emend::model::Recorder {
            key: id.signer.public_key(),
            name: id.name,
        }))
    }

    /// The signing identity, when there is one.
    pub fn try_identity(&self) -> Result<Option<Identity>> {
        id::try_load(&self.home()?)
    }
}
