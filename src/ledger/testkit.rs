//! Test-only: a store in a temp folder with a fixed signer and one small keyed table, so the
//! query and ledger tests exercise real SQLite, real signatures and real rebuilds.

use super::{CommitContext, FixRequest, commit_pending, ingest, record_fix};
use crate::ingest::IngestOptions;
use crate::model::FixAction;
use crate::signing::Signer;
use crate::store::Store;

/// The fixed clock of the tests.
pub const NOW: &str = "2026-10-01T09:00:00Z";

/// A store with the table `samples` (key `sample_id`, three rows) ingested as commit 1.
pub struct Kit {
    /// Keeps the folder alive.
    pub _dir: tempfile::TempDir,
    /// The open store.
    pub store: Store,
}

/// The fixed signer of the tests.
pub fn signer() -> Signer {
    Signer::from_seed(&[7; 32])
}

/// The signing context of the tests.
pub fn ctx(signer: &Signer) -> CommitContext<'_> {
    CommitContext {
        signer,
        name: "Test Steward".into(),
        email: None,
        now: NOW.into(),
    }
}

impl Kit {
    /// A store with the three-row extract ingested.
    pub fn new() -> Kit {
        let dir = tempfile::tempdir().expect("temp dir");
        let csv = dir.path().join("samples.csv");
        std::fs::write(
            &csv,
            "sample_id,site,ph\nS-1,mill craek,7.2\nS-2,Mill Creek,71\nS-3,mill craek,-999\n",
        )
        .expect("write extract");
        let store = Store::init(dir.path(), NOW).expect("init");
        let mut kit = Kit { _dir: dir, store };
        let opts = IngestOptions {
            table: "samples".into(),
            key: vec!["sample_id".into()],
            ..IngestOptions::default()
        };
        let signer = signer();
        ingest(&mut kit.store, &csv, &opts, "first extract", &ctx(&signer)).expect("ingest");
        kit
    }

    /// Record `action` on `samples` with a reason.
    pub fn fix(&mut self, action: FixAction) {
        let req = FixRequest {
            table: "samples".into(),
            action,
            why: "test decision".into(),
            evidence: Vec::new(),
            consulted: None,
            allow_empty: false,
            despite: None,
            by: None,
        };
        record_fix(&mut self.store, req, NOW, &Default::default()).expect("record fix");
    }

    /// Commit the pending fixes; returns the commit number.
    pub fn commit(&mut self, message: &str) -> u64 {
        let signer = signer();
        commit_pending(&mut self.store, message, &ctx(&signer))
            .expect("commit")
            .seq
    }
}
