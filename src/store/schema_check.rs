//! The store runs nothing it did not create.
//!
//! SQLite runs a trigger inside any write that touches its table, and `trusted_schema = OFF`
//! does not stop it: a trigger planted in the file could rewrite a pending fix after the user
//! recorded it and before the real key signs it. So every open and every write transaction
//! compares the file's schema objects with the exact set this build creates: the same tables
//! with the same columns, the same indexes, the same triggers with the same text, and no views.
//! Anything else is named and refused; `verify` reports it too.

use crate::error::Result;
use rusqlite::Connection;
use std::collections::BTreeMap;
use std::sync::OnceLock;

/// One schema object: (type, name) -> what must match.
type Objects = BTreeMap<(String, String), String>;

/// The objects a fresh store of this build holds, read from an in-memory database made with
/// the same schema text (so the expected set can never drift from `schema.sql`).
fn expected() -> &'static Objects {
    static EXPECTED: OnceLock<Objects> = OnceLock::new();
    EXPECTED.get_or_init(|| {
        let conn = Connection::open_in_memory().expect("an in-memory database opens");
        conn.execute_batch(super::SCHEMA)
            .expect("the schema text is valid SQL");
        objects(&conn).expect("the schema of an in-memory database reads")
    })
}

/// A canonical description of each object: a table by its columns (name, declared type, not
/// null, default, key position, hidden), since migrations rewrite a table's SQL text without
/// changing what it holds; an index by its table and columns; a trigger by its SQL text with
/// runs of white space made one space.
fn objects(conn: &Connection) -> Result<Objects> {
    let mut out = Objects::new();
    let mut stmt =
        conn.prepare("SELECT type, name, tbl_name, coalesce(sql, '') FROM sqlite_schema")?;
    let rows: Vec<(String, String, String, String)> = stmt
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?)))?
        .collect::<std::result::Result<_, _>>()?;
    for (kind, name, table, sql) in rows {
        let what = match kind.as_str() {
            "table" => {
                let mut cols = conn.prepare("SELECT cid, name, type, \"notnull\", coalesce(dflt_value, ''), pk, hidden FROM pragma_table_xinfo(?1)")?;
                let cols: Vec<String> = cols
                    .query_map([&name], |r| {
                        Ok(format!(
                            "{}:{}:{}:{}:{}:{}:{}",
                            r.get::<_, i64>(0)?,
                            r.get::<_, String>(1)?,
                            r.get::<_, String>(2)?,
                            r.get::<_, i64>(3)?,
                            r.get::<_, String>(4)?,
                            r.get::<_, i64>(5)?,
                            r.get::<_, i64>(6)?
                        ))
                    })?
                    .collect::<std::result::Result<_, _>>()?;
                // A virtual table's module runs code of its own: its SQL text says so.
                let virt = if sql.to_ascii_uppercase().contains("VIRTUAL") {
                    "virtual "
                } else {
                    ""
                };
                format!("{virt}{}", cols.join(","))
            }
            "index" => {
                let mut cols =
                    conn.prepare("SELECT coalesce(name, '<expr>') FROM pragma_index_info(?1)")?;
                let cols: Vec<String> = cols
                    .query_map([&name], |r| r.get(0))?
                    .collect::<std::result::Result<_, _>>()?;
                format!("on {table} ({})", cols.join(","))
            }
            _ => sql.split_whitespace().collect::<Vec<_>>().join(" "),
        };
        out.insert((kind, name), what);
    }
    Ok(out)
}

/// SQLite's own bookkeeping tables, which hold data and run nothing.
fn is_internal(kind: &str, name: &str) -> bool {
    kind == "table" && matches!(name, "sqlite_sequence" | "sqlite_stat1" | "sqlite_stat4")
}

/// Every schema object in the store that this build did not create, or that differs from what
/// it creates, each named (`trigger pending_rewrite`, `table mark (its columns differ)`).
/// With `only_code`, only triggers and views are compared: what runs or stands in for a table,
/// checked before an older schema is migrated (the tables of older schemas differ).
pub(crate) fn foreign_objects(conn: &Connection, only_code: bool) -> Result<Vec<String>> {
    let found = objects(conn)?;
    let expected = expected();
    let code = |kind: &str| matches!(kind, "trigger" | "view");
    let mut out = Vec::new();
    for ((kind, name), what) in &found {
        if is_internal(kind, name) || (only_code && !code(kind)) {
            continue;
        }
        match expected.get(&(kind.clone(), name.clone())) {
            None => out.push(format!("{kind} {name} (emend never makes it)")),
            Some(want) if want != what => out.push(format!(
                "{kind} {name} (it differs from the one emend makes)"
            )),
            Some(_) => {}
        }
    }
    for (kind, name) in expected.keys() {
        if (only_code && !code(kind)) || found.contains_key(&(kind.clone(), name.clone())) {
            continue;
        }
        out.push(format!("{kind} {name} (missing)"));
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fresh() -> Connection {
        let conn = Connection::open_in_memory().unwrap();
        conn.execute_batch(super::super::SCHEMA).unwrap();
        conn
    }

    #[test]
    fn a_fresh_schema_holds_nothing_foreign() {
        assert!(foreign_objects(&fresh(), false).unwrap().is_empty());
    }

    #[test]
    fn a_planted_trigger_view_index_or_column_is_named() {
        let conn = fresh();
        conn.execute_batch(
            "CREATE TRIGGER rewrite AFTER INSERT ON pending BEGIN UPDATE pending SET note = 'x'; END;
             CREATE VIEW peek AS SELECT * FROM commit_log;
             CREATE INDEX extra ON mark (target);
             ALTER TABLE store_meta ADD COLUMN planted TEXT;",
        )
        .unwrap();
        let found = foreign_objects(&conn, false).unwrap();
        assert!(
            found.contains(&"trigger rewrite (emend never makes it)".to_string()),
            "{found:?}"
        );
        assert!(
            found.contains(&"view peek (emend never makes it)".to_string()),
            "{found:?}"
        );
        assert!(
            found.contains(&"index extra (emend never makes it)".to_string()),
            "{found:?}"
        );
        assert!(
            found.contains(&"table store_meta (it differs from the one emend makes)".to_string()),
            "{found:?}"
        );
        // Before a migration only what runs is compared.
        let code = foreign_objects(&conn, true).unwrap();
        assert_eq!(code.len(), 2, "{code:?}");
    }

    #[test]
    fn a_dropped_or_rewritten_guard_trigger_is_named() {
        let conn = fresh();
        conn.execute_batch(
            "DROP TRIGGER commit_no_delete;
             DROP TRIGGER commit_no_update;
             CREATE TRIGGER commit_no_update BEFORE UPDATE ON commit_log BEGIN SELECT 1; END;",
        )
        .unwrap();
        let found = foreign_objects(&conn, true).unwrap();
        assert_eq!(
            found,
            vec![
                "trigger commit_no_update (it differs from the one emend makes)".to_string(),
                "trigger commit_no_delete (missing)".to_string()
            ]
        );
    }
}
