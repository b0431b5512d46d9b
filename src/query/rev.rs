//! Revisions as users type them (`7`, a tag, 8+ hex digits, `latest`, `raw`), resolved to a
//! commit; the version of a table at one; and row ids as typed.

use super::commits::ingest_record;
use super::version::Version;
use crate::error::{Error, Result};
use crate::model::RowId;
use crate::store::Reader;

/// A revision resolved to a commit.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Rev {
    /// Commit sequence.
    pub seq: u64,
    /// The raw extract, without fixes.
    pub raw: bool,
}

/// Resolve what a user typed as a revision.
pub fn resolve(reader: &Reader<'_>, text: &str) -> Result<Rev> {
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    let text = text.trim();
    match text {
        "latest" => {
            return Ok(Rev {
                seq: head,
                raw: false,
            });
        }
        "raw" => {
            return Ok(Rev {
                seq: head,
                raw: true,
            });
        }
        _ => {}
    }
    if let Some((_, target)) = reader.try_tag(text)? {
        return Ok(Rev {
            seq: target,
            raw: false,
        });
    }
    if !text.is_empty() && text.len() < 8 && text.bytes().all(|b| b.is_ascii_digit()) {
        let seq: u64 = text
            .parse()
            .map_err(|_| Error::UnknownRevision(text.into()))?;
        if seq == 0 || seq > head {
            return Err(Error::UnknownRevision(text.into()));
        }
        return Ok(Rev { seq, raw: false });
    }
    if text.len() >= 8 && text.len() <= 64 && text.bytes().all(|b| b.is_ascii_hexdigit()) {
        let prefix = text.to_ascii_lowercase();
        let found = reader.commits_with_prefix(&prefix)?;
        return match found.as_slice() {
            [] => Err(Error::UnknownRevision(text.into())),
            [(seq, _)] => Ok(Rev {
                seq: *seq,
                raw: false,
            }),
            many => Err(Error::AmbiguousRevision {
                prefix: text.into(),
                candidates: many
                    .iter()
                    .map(|(s, id)| format!("{s} ({})", id.short()))
                    .collect(),
            }),
        };
    }
    Err(Error::UnknownRevision(text.into()))
}

/// The version of `table` at a resolved revision.
pub fn version_at(reader: &Reader<'_>, table: &str, rev: Rev) -> Result<Version> {
    Version::load(reader, table, rev.seq, rev.raw)
}

/// A row id as the user typed it, for a table.
pub fn parse_row(reader: &Reader<'_>, table: &str, text: &str) -> Result<RowId> {
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    let (seq, _) = reader
        .extract_at(table, head)?
        .ok_or_else(|| Error::UnknownTable(table.to_string()))?;
    let def = ingest_record(reader, seq)?;
    Ok(RowId::parse_user(text, def.key.len()))
}

/// Reads a list of rows as a user writes them: keys (a composite key's values joined by
/// commas) or `#N` for the row at 1-based position N of the latest version. Positions of a
/// keyed table are turned into keys in one pass over the table; a position past the end is
/// an unknown row.
pub fn parse_rows(reader: &Reader<'_>, table: &str, texts: &[String]) -> Result<Vec<RowId>> {
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    let (seq, _) = reader
        .extract_at(table, head)?
        .ok_or_else(|| Error::UnknownTable(table.to_string()))?;
    let def = ingest_record(reader, seq)?;
    let position = |t: &str| t.strip_prefix('#').and_then(|n| n.parse::<u64>().ok());
    let mut out: Vec<Option<RowId>> = texts
        .iter()
        .map(|t| match position(t) {
            Some(n) if def.key.is_empty() => Some(RowId::from_position(n)),
            Some(_) => None,
            None => Some(RowId::parse_user(t, def.key.len())),
        })
        .collect();
    if out.iter().any(Option::is_none) {
        let wanted: std::collections::HashMap<u64, Vec<usize>> = texts
            .iter()
            .enumerate()
            .filter_map(|(i, t)| position(t).map(|n| (n, i)))
            .fold(Default::default(), |mut m, (n, i)| {
                m.entry(n).or_insert_with(Vec::new).push(i);
                m
            });
        // Ids do not change with fixes (a key column cannot be fixed): the raw extract's row
        // map finds each position without reading the rows before it.
        let version = crate::query::Version::load(reader, table, head, true)?;
        for (&n, slots) in &wanted {
            version.for_each_picked(reader, &crate::query::Pick::Positions(n, n), |row| {
                for &i in slots {
                    out[i] = Some(row.id.clone());
                }
                Ok(std::ops::ControlFlow::Break(()))
            })?;
        }
    }
    out.into_iter()
        .zip(texts)
        .map(|(r, t)| {
            r.ok_or_else(|| Error::UnknownRow {
                table: table.to_string(),
                row: t.clone(),
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ledger::testkit::Kit;
    use crate::model::FixAction;
    use crate::query::diff::diff;
    use crate::query::why::why_cell;

    fn kit_with_a_fix() -> Kit {
        let mut kit = Kit::new();
        kit.fix(FixAction::Set {
            row: RowId("S-2".into()),
            column: "ph".into(),
            value: Some("7.1".into()),
        });
        kit.commit("decimal point");
        kit
    }

    #[test]
    fn revisions_resolve_by_number_word_and_id_prefix() {
        let kit = kit_with_a_fix();
        let reader = kit.store.read();
        let rev = |t: &str| resolve(&reader, t);
        assert_eq!(rev("latest").unwrap(), Rev { seq: 2, raw: false });
        assert_eq!(rev("raw").unwrap(), Rev { seq: 2, raw: true });
        assert_eq!(rev("1").unwrap(), Rev { seq: 1, raw: false });
        let id = reader.try_commit(1).unwrap().unwrap().id.to_string();
        assert_eq!(rev(&id[..12]).unwrap(), Rev { seq: 1, raw: false });
        for bad in ["0", "3", "nope", ""] {
            assert!(
                matches!(rev(bad), Err(Error::UnknownRevision(_))),
                "{bad:?}"
            );
        }
    }

    #[test]
    fn a_version_is_rebuilt_and_its_changes_are_traced() {
        let kit = kit_with_a_fix();
        let reader = kit.store.read();
        let cell = |rev: Rev| {
            let v = version_at(&reader, "samples", rev).unwrap();
            let (_, cells, _) = v.find_row(&reader, &RowId("S-2".into())).unwrap().unwrap();
            cells[2].clone()
        };
        assert_eq!(
            cell(resolve(&reader, "raw").unwrap()).as_deref(),
            Some("71")
        );
        assert_eq!(
            cell(resolve(&reader, "latest").unwrap()).as_deref(),
            Some("7.1")
        );
        let d = diff(
            &reader,
            "samples",
            resolve(&reader, "raw").unwrap(),
            resolve(&reader, "latest").unwrap(),
        )
        .unwrap();
        let changed: Vec<(&str, &str, Option<&str>, Option<&str>)> = d
            .cells
            .iter()
            .map(|c| {
                (
                    c.row.as_str(),
                    c.column.as_str(),
                    c.old.as_deref(),
                    c.new.as_deref(),
                )
            })
            .collect();
        assert_eq!(changed, vec![("S-2", "ph", Some("71"), Some("7.1"))]);
        let story = why_cell(
            &reader,
            "samples",
            &RowId("S-2".into()),
            "ph",
            resolve(&reader, "latest").unwrap(),
        )
        .unwrap();
        assert_eq!(story.raw.as_deref(), Some("71"));
        assert_eq!(story.events.len(), 1);
        assert_eq!(story.events[0].seq, 2);
        assert_eq!(
            parse_row(&reader, "samples", "S-2").unwrap().as_str(),
            "S-2"
        );
    }
}
