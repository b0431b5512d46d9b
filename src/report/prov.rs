//! `export --provenance`: the history of one table as a W3C PROV-JSON document.
//!
//! PROV-JSON is a W3C Member Submission (24 April 2013) serialising the PROV Data Model
//! (W3C Recommendation, 30 April 2013). The mapping:
//!
//! | emend | PROV |
//! |---|---|
//! | raw extract, evidence file, table version | `entity` |
//! | commit | `activity` (start and end time = commit time) |
//! | signer | `agent` of type `prov:Person` |
//! | commit read the previous version / the extract / an evidence file | `used` |
//! | commit produced a version | `wasGeneratedBy` |
//! | version revises the previous version, or comes from the extract | `wasDerivedFrom` |
//! | signer signed the commit | `wasAssociatedWith` |
//! | version is the signer's | `wasAttributedTo` |
//!
//! Identifiers are qualified names: things of this store under the `store:` prefix (bound to
//! the caller's namespace IRI), emend's attributes under `emend:` ([`super::EMEND_VOCAB`]).
//! Local names use only letters, digits, `-`, `_` and `.`; anything else is percent-encoded.
//! Relation ids are blank ids numbered per relation (`_:u1`, `_:g1`, ...), as in the PROV-JSON
//! examples. Relation maps with no members are left out.

use std::collections::BTreeMap;

use serde::Serialize;
use serde_json::{Map, Value, json};

use super::csvw::EMEND_VOCAB;
use super::view::{EvidenceView, SignatureStatus};

/// The history to describe.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ProvView {
    /// IRI bound to the `store:` prefix, e.g. `"urn:emend:store:river-survey:"`.
    pub namespace: String,
    /// Table name.
    pub table: String,
    /// The raw extracts of the table.
    pub extracts: Vec<ProvExtract>,
    /// Every commit that produced a version of the table, oldest first.
    pub commits: Vec<ProvCommit>,
    /// Every signer of those commits.
    pub signers: Vec<ProvSigner>,
}

/// A raw extract.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ProvExtract {
    /// BLAKE3 hash (hex); also the extract's id.
    pub blake3: String,
    /// File name it was ingested from.
    pub file_name: String,
    /// Size in bytes.
    pub n_bytes: u64,
}

/// A commit and the version it produced.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ProvCommit {
    /// Sequence number.
    pub seq: u64,
    /// Commit id (hex).
    pub id: String,
    /// `"ingest"` or `"fixes"`.
    pub kind: String,
    /// Commit message.
    pub message: String,
    /// Commit time, an `xsd:dateTime` (RFC 3339) string.
    pub time: String,
    /// Fingerprint of the signer (matches a [`ProvSigner::fingerprint`]).
    pub signer: String,
    /// Signature check result.
    pub signature: SignatureStatus,
    /// Id of the commit whose version this one builds on; `None` for the first.
    pub previous: Option<String>,
    /// BLAKE3 of the extract this commit ingested, for ingest commits.
    pub extract: Option<String>,
    /// Evidence files attached to the commit's fixes.
    pub evidence: Vec<EvidenceView>,
    /// Canonical hash of the version the commit produced.
    pub version_hash: String,
    /// Tags naming that version.
    pub tags: Vec<String>,
}

/// A signer.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ProvSigner {
    /// Key fingerprint.
    pub fingerprint: String,
    /// Name.
    pub name: String,
    /// E-mail, if known.
    pub email: Option<String>,
    /// Whether the store trusts the key.
    pub trusted: bool,
}

/// Percent-encodes a local name so it stays a plain qualified-name part.
fn local(kind: &str, raw: &str) -> String {
    let mut s = format!("store:{kind}-");
    for b in raw.bytes() {
        if b.is_ascii_alphanumeric() || matches!(b, b'-' | b'_' | b'.') {
            s.push(b as char);
        } else {
            s.push_str(&format!("%{b:02X}"));
        }
    }
    s
}

fn qname(value: &str) -> Value {
    json!({"$": value, "type": "xsd:QName"})
}

/// Collects relation records under blank ids `_:{tag}1`, `_:{tag}2`, ...
struct Relation {
    tag: &'static str,
    records: Map<String, Value>,
}

impl Relation {
    fn new(tag: &'static str) -> Relation {
        Relation {
            tag,
            records: Map::new(),
        }
    }

    fn add(&mut self, record: Value) {
        let id = format!("_:{}{}", self.tag, self.records.len() + 1);
        self.records.insert(id, record);
    }
}

/// Builds the PROV-JSON document for `view`.
///
/// ```
/// use emend::report::*;
/// let view = ProvView {
///     namespace: "urn:emend:store:demo:".into(),
///     table: "samples".into(),
///     extracts: vec![],
///     commits: vec![],
///     signers: vec![],
/// };
/// let doc = prov_json(&view);
/// assert_eq!(doc["prefix"]["store"], "urn:emend:store:demo:");
/// ```
pub fn prov_json(view: &ProvView) -> Value {
    let mut entity = Map::new();
    let mut activity = Map::new();
    let mut agent = Map::new();
    let mut used = Relation::new("u");
    let mut generated = Relation::new("g");
    let mut derived = Relation::new("d");
    let mut associated = Relation::new("as");
    let mut attributed = Relation::new("at");

    for e in &view.extracts {
        entity.insert(
            local("extract", &e.blake3),
            json!({
                "prov:label": e.file_name,
                "prov:type": qname("emend:Extract"),
                "emend:blake3": e.blake3,
                "emend:bytes": e.n_bytes,
            }),
        );
    }
    for s in &view.signers {
        let mut attrs = Map::new();
        attrs.insert("prov:type".into(), qname("prov:Person"));
        attrs.insert("prov:label".into(), json!(s.name));
        attrs.insert("emend:fingerprint".into(), json!(s.fingerprint));
        if let Some(email) = &s.email {
            attrs.insert("emend:email".into(), json!(email));
        }
        attrs.insert("emend:trusted".into(), json!(s.trusted));
        agent.insert(local("signer", &s.fingerprint), Value::Object(attrs));
    }
    // Evidence may be attached to several commits; it is one entity, named by its hash.
    let mut evidence: BTreeMap<String, Value> = BTreeMap::new();

    for c in &view.commits {
        let act = local("commit", &c.id);
        let version = local("version", &c.id);
        let signer = local("signer", &c.signer);
        activity.insert(
            act.clone(),
            json!({
                "prov:startTime": c.time,
                "prov:endTime": c.time,
                "prov:label": c.message,
                "emend:seq": c.seq,
                "emend:kind": c.kind,
                "emend:signature": c.signature.code(),
            }),
        );
        let mut label = format!("{} at commit {}", view.table, c.seq);
        if !c.tags.is_empty() {
            label.push_str(&format!(" ({})", c.tags.join(", ")));
        }
        let mut v_attrs = Map::new();
        v_attrs.insert("prov:label".into(), json!(label));
        v_attrs.insert("prov:type".into(), qname("emend:Version"));
        v_attrs.insert("emend:table".into(), json!(view.table));
        v_attrs.insert("emend:seq".into(), json!(c.seq));
        v_attrs.insert("emend:versionHash".into(), json!(c.version_hash));
        if !c.tags.is_empty() {
            v_attrs.insert("emend:tags".into(), json!(c.tags));
        }
        entity.insert(version.clone(), Value::Object(v_attrs));

        if let Some(prev) = &c.previous {
            let prev = local("version", prev);
            used.add(json!({"prov:activity": act, "prov:entity": prev}));
            derived.add(json!({
                "prov:generatedEntity": version,
                "prov:usedEntity": prev,
                "prov:activity": act,
                "prov:type": qname("prov:Revision"),
            }));
        }
        if let Some(x) = &c.extract {
            let x = local("extract", x);
            used.add(json!({"prov:activity": act, "prov:entity": x}));
            derived.add(json!({
                "prov:generatedEntity": version,
                "prov:usedEntity": x,
                "prov:activity": act,
            }));
        }
        for e in &c.evidence {
            let id = local("evidence", &e.blake3);
            evidence.entry(id.clone()).or_insert_with(|| {
                json!({
                    "prov:label": e.name,
                    "prov:type": qname("emend:Evidence"),
                    "emend:blake3": e.blake3,
                    "emend:bytes": e.n_bytes,
                })
            });
            used.add(json!({"prov:activity": act, "prov:entity": id}));
        }
        generated.add(json!({"prov:entity": version, "prov:activity": act, "prov:time": c.time}));
        associated.add(json!({"prov:activity": act, "prov:agent": signer}));
        attributed.add(json!({"prov:entity": version, "prov:agent": signer}));
    }
    entity.extend(evidence);

    let mut doc = Map::new();
    doc.insert(
        "prefix".into(),
        json!({"store": view.namespace, "emend": EMEND_VOCAB}),
    );
    for (key, map) in [("entity", entity), ("activity", activity), ("agent", agent)] {
        if !map.is_empty() {
            doc.insert(key.into(), Value::Object(map));
        }
    }
    for (key, rel) in [
        ("used", used),
        ("wasGeneratedBy", generated),
        ("wasDerivedFrom", derived),
        ("wasAssociatedWith", associated),
        ("wasAttributedTo", attributed),
    ] {
        if !rel.records.is_empty() {
            doc.insert(key.into(), Value::Object(rel.records));
        }
    }
    Value::Object(doc)
}
