//! Tamper detection. One store (an ingest and two fix commits, one fix with an evidence file) is
//! built once; each case copies it, changes one stored object with plain SQL through rusqlite
//! (after dropping the immutability triggers), and expects `verify` to exit 1 and name the
//! object.
//!
//! Cases tried: 23. Caught: 23 (each by the object named in the case).

use crate::util::{TestDir, open_db, setup_store};
use crate::walkthrough::{LAB_SHEET, RIVER_CSV};
use rusqlite::{Connection, params};

pub const TRIGGERS: &[&str] = &[
    "chunk_no_update",
    "chunk_no_delete",
    "blob_no_update",
    "blob_no_delete",
    "blob_chunk_no_update",
    "blob_chunk_no_delete",
    "commit_no_update",
    "commit_no_delete",
];

pub fn template() -> TestDir {
    let dir = TestDir::new("tamper_template");
    setup_store(&dir);
    dir.write("river.csv", RIVER_CSV);
    dir.write("lab_sheet.txt", LAB_SHEET);
    dir.cmd([
        "ingest",
        "river.csv",
        "--table",
        "samples",
        "--key",
        "sample_id",
    ])
    .ok();
    dir.cmd([
        "set",
        "samples",
        "RW-002",
        "ph",
        "7.1",
        "--why",
        "lab sheet says 7.1",
        "--evidence",
        "lab_sheet.txt",
        "--consulted",
        "lab lead",
    ])
    .ok();
    dir.cmd([
        "recode",
        "samples",
        "site",
        "--from",
        "alder brook",
        "--to",
        "Alder Brook",
        "--why",
        "case variant",
    ])
    .ok();
    dir.cmd([
        "exclude",
        "samples",
        "RW-004",
        "--why",
        "duplicate of RW-003",
    ])
    .ok();
    dir.cmd(["commit", "-m", "first pass"]).ok();
    dir.cmd(["distrust", "samples", "calibrated", "--why", "app default"])
        .ok();
    dir.cmd([
        "missing",
        "samples",
        "turbidity_ntu",
        "--why",
        "no meter",
        "--code",
        "-999",
    ])
    .ok();
    dir.cmd([
        "set",
        "samples",
        "RW-007",
        "site",
        "Fennel Run",
        "--why",
        "misspelt site",
    ])
    .ok();
    dir.cmd(["commit", "-m", "second pass"]).ok();
    dir.cmd(["verify"]).ok();
    dir
}

fn body(c: &Connection, seq: i64) -> Vec<u8> {
    c.query_row("SELECT body FROM commit_log WHERE seq = ?1", [seq], |r| {
        r.get(0)
    })
    .unwrap()
}

fn set_body(c: &Connection, seq: i64, bytes: &[u8]) {
    c.execute(
        "UPDATE commit_log SET body = ?1 WHERE seq = ?2",
        params![bytes, seq],
    )
    .unwrap();
}

fn find(hay: &[u8], needle: &[u8]) -> usize {
    hay.windows(needle.len())
        .position(|w| w == needle)
        .unwrap_or_else(|| panic!("{:?} not in the blob", String::from_utf8_lossy(needle)))
}

/// The (only) chunk of a stored file.
fn chunk_of(c: &Connection, blob: &[u8; 32]) -> Vec<u8> {
    c.query_row(
        "SELECT chunk FROM blob_chunk WHERE blob = ?1 AND idx = 0",
        [&blob[..]],
        |r| r.get(0),
    )
    .unwrap()
}

fn chunk_data(c: &Connection, id: &[u8]) -> (i64, i64, Vec<u8>) {
    c.query_row(
        "SELECT raw_len, codec, data FROM chunk WHERE id = ?1",
        [id],
        |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
    )
    .unwrap()
}

fn extract_id() -> [u8; 32] {
    *blake3::hash(RIVER_CSV.as_bytes()).as_bytes()
}

fn evidence_id() -> [u8; 32] {
    *blake3::hash(LAB_SHEET.as_bytes()).as_bytes()
}

fn short(id: &[u8]) -> String {
    id.iter().take(6).map(|b| format!("{b:02x}")).collect()
}

type Tamper = fn(&Connection);

/// (name, the change, the objects verify must name: each a prefix of some problem's object).
fn cases() -> Vec<(&'static str, Tamper, Vec<String>)> {
    let chunk_x = format!("chunk {}", short(&extract_id()));
    let file_x = format!("stored file {}", short(&extract_id()));
    let chunk_e = format!("chunk {}", short(&evidence_id()));
    let file_e = format!("stored file {}", short(&evidence_id()));
    vec![
        (
            "extract chunk: one byte of the zstd data flipped",
            |c| {
                let id = chunk_of(c, &extract_id());
                let (_, _, mut data) = chunk_data(c, &id);
                let mid = data.len() / 2;
                data[mid] ^= 0x01;
                c.execute(
                    "UPDATE chunk SET data = ?1 WHERE id = ?2",
                    params![data, id],
                )
                .unwrap();
            },
            vec![chunk_x.clone(), file_x.clone(), "commit 1".into()],
        ),
        (
            "extract chunk: one value changed and recompressed (still decompresses)",
            |c| {
                let id = chunk_of(c, &extract_id());
                let (raw_len, _, data) = chunk_data(c, &id);
                let raw = zstd::bulk::decompress(&data, raw_len as usize).unwrap();
                let text = String::from_utf8(raw).unwrap().replace("6.8", "6.9");
                let again = zstd::bulk::compress(text.as_bytes(), 1).unwrap();
                c.execute(
                    "UPDATE chunk SET data = ?1 WHERE id = ?2",
                    params![again, id],
                )
                .unwrap();
            },
            vec![chunk_x.clone(), file_x.clone(), "commit 1".into()],
        ),
        (
            "extract chunk: stored uncompressed (codec 0) with one byte changed",
            |c| {
                let id = chunk_of(c, &extract_id());
                let mut raw = RIVER_CSV.as_bytes().to_vec();
                let at = find(&raw, b"Quillet");
                raw[at] = b'K';
                c.execute(
                    "UPDATE chunk SET codec = 0, data = ?1 WHERE id = ?2",
                    params![raw, id],
                )
                .unwrap();
            },
            vec![chunk_x.clone(), file_x.clone()],
        ),
        (
            "extract chunk: raw length changed",
            |c| {
                let id = chunk_of(c, &extract_id());
                c.execute("UPDATE chunk SET raw_len = raw_len + 1 WHERE id = ?1", [id])
                    .unwrap();
            },
            vec![chunk_x.clone()],
        ),
        (
            "evidence file's chunk: one byte changed",
            |c| {
                let id = chunk_of(c, &evidence_id());
                let mut raw = LAB_SHEET.as_bytes().to_vec();
                let at = find(&raw, b"7.1");
                raw[at] = b'8';
                c.execute(
                    "UPDATE chunk SET codec = 0, data = ?1 WHERE id = ?2",
                    params![raw, id],
                )
                .unwrap();
            },
            vec![chunk_e.clone(), file_e.clone()],
        ),
        (
            "evidence file: its blob_chunk row points at the extract's chunk",
            |c| {
                let other = chunk_of(c, &extract_id());
                c.execute(
                    "UPDATE blob_chunk SET chunk = ?1 WHERE blob = ?2",
                    params![other, &evidence_id()[..]],
                )
                .unwrap();
            },
            vec![file_e.clone()],
        ),
        (
            "stored file record: size changed",
            |c| {
                c.execute(
                    "UPDATE blob SET n_bytes = n_bytes - 1 WHERE id = ?1",
                    [&extract_id()[..]],
                )
                .unwrap();
            },
            vec![file_x.clone()],
        ),
        (
            "commit 1 body: one byte of the recorded time changed",
            |c| {
                let mut b = body(c, 1);
                let at = find(&b, b"2026-10-01");
                b[at + 3] = b'7';
                set_body(c, 1, &b);
            },
            vec!["commit 1".into()],
        ),
        (
            "commit 2 body: one byte of the reason changed",
            |c| {
                let mut b = body(c, 2);
                let at = find(&b, b"lab sheet says 7.1");
                b[at + 17] = b'9';
                set_body(c, 2, &b);
            },
            vec!["commit 2".into()],
        ),
        (
            "commit 3 body: one byte of a set value",
            |c| {
                let mut b = body(c, 3);
                let at = find(&b, b"Fennel Run");
                b[at] = b'P';
                set_body(c, 3, &b);
            },
            vec!["commit 3".into()],
        ),
        (
            "commit 2 body: truncated",
            |c| {
                let b = body(c, 2);
                set_body(c, 2, &b[..b.len() - 5]);
            },
            vec!["commit 2".into()],
        ),
        (
            "commit 2 signature: one byte flipped",
            |c| {
                let mut s: Vec<u8> = c
                    .query_row("SELECT signature FROM commit_log WHERE seq = 2", [], |r| {
                        r.get(0)
                    })
                    .unwrap();
                s[10] ^= 0x80;
                c.execute("UPDATE commit_log SET signature = ?1 WHERE seq = 2", [s])
                    .unwrap();
            },
            vec!["commit 2".into()],
        ),
        (
            "signatures of commits 2 and 3 swapped",
            |c| {
                let sig = |seq: i64| -> Vec<u8> {
                    c.query_row(
                        "SELECT signature FROM commit_log WHERE seq = ?1",
                        [seq],
                        |r| r.get(0),
                    )
                    .unwrap()
                };
                let (s2, s3) = (sig(2), sig(3));
                assert_ne!(s2, s3);
                for (seq, s) in [(2, s3), (3, s2)] {
                    c.execute(
                        "UPDATE commit_log SET signature = ?1 WHERE seq = ?2",
                        params![s, seq],
                    )
                    .unwrap();
                }
            },
            vec!["commit 2".into(), "commit 3".into()],
        ),
        (
            "a table of forged cell edits planted beside the bodies (emend keeps none)",
            |c| {
                c.execute_batch(
                    "CREATE TABLE cell_edit (tbl TEXT, row_id TEXT, col TEXT, new TEXT);
                     INSERT INTO cell_edit VALUES ('samples', 'RW-002', 'ph', '9.9');",
                )
                .unwrap();
            },
            vec!["store file".into()],
        ),
        (
            "mark index: an exclusion moved to another row",
            |c| {
                let n = c
                    .execute(
                        "UPDATE mark SET target = 'RW-005' WHERE kind = 'exclude'",
                        [],
                    )
                    .unwrap();
                assert_eq!(n, 1);
            },
            vec!["mark index".into()],
        ),
        (
            "mark index: the distrust deleted",
            |c| {
                let n = c
                    .execute("DELETE FROM mark WHERE kind = 'distrust'", [])
                    .unwrap();
                assert_eq!(n, 1);
            },
            vec!["mark index".into()],
        ),
        (
            "version index: a hash changed",
            |c| {
                let n = c
                    .execute(
                        "UPDATE version_index SET hash = zeroblob(32) WHERE seq = 2",
                        [],
                    )
                    .unwrap();
                assert_eq!(n, 1);
            },
            vec!["version index".into()],
        ),
        (
            "extract index: the extract replaced by the evidence file",
            |c| {
                c.execute(
                    "UPDATE extract_index SET extract = ?1",
                    [&evidence_id()[..]],
                )
                .unwrap();
            },
            vec!["extract index".into()],
        ),
        (
            "commit 2 deleted",
            |c| {
                c.execute("DELETE FROM commit_log WHERE seq = 2", [])
                    .unwrap();
            },
            vec!["commit 3".into()],
        ),
        (
            "commits 2 and 3 swapped (sequence numbers exchanged)",
            |c| {
                c.execute_batch(
                    "UPDATE commit_log SET seq = 99 WHERE seq = 2;
                     UPDATE commit_log SET seq = 2 WHERE seq = 3;
                     UPDATE commit_log SET seq = 3 WHERE seq = 99;",
                )
                .unwrap();
            },
            vec!["commit 2".into(), "commit 3".into()],
        ),
        (
            "row map: the offset of its first group of rows moved",
            |c| {
                let mut data: Vec<u8> = c
                    .query_row("SELECT data FROM row_map WHERE seq = 1", [], |r| r.get(0))
                    .unwrap();
                // Layout (src/table/row_map.rs): a 28-byte head, then per group its first
                // position, offset and line; the first group's offset is bytes 36..44.
                data[36] = data[36].wrapping_add(9);
                c.execute("UPDATE row_map SET data = ?1 WHERE seq = 1", params![data])
                    .unwrap();
            },
            vec!["row map of commit 1".into()],
        ),
        (
            "row map: one key entry's bits flipped",
            |c| {
                let mut data: Vec<u8> = c
                    .query_row("SELECT data FROM row_map WHERE seq = 1", [], |r| r.get(0))
                    .unwrap();
                let at = data.len() - 10;
                data[at] ^= 0xff;
                c.execute("UPDATE row_map SET data = ?1 WHERE seq = 1", params![data])
                    .unwrap();
            },
            vec!["row map of commit 1".into()],
        ),
        (
            "row map: one added for a commit that adds no extract",
            |c| {
                c.execute(
                    "INSERT INTO row_map (seq, data) SELECT 2, data FROM row_map WHERE seq = 1",
                    [],
                )
                .unwrap();
            },
            vec!["row map of commit 2".into()],
        ),
    ]
}

#[test]
fn every_kind_of_tampering_is_caught_and_named() {
    let template = template();
    let cases = cases();
    let mut caught = 0;
    let mut report = Vec::new();
    for (name, tamper, objects) in &cases {
        let dir = TestDir::new("tamper_case");
        dir.copy_from(&template);
        {
            let c = open_db(&dir);
            // A tamperer does not keep foreign keys either.
            c.execute_batch("PRAGMA foreign_keys = OFF").unwrap();
            for t in TRIGGERS {
                c.execute_batch(&format!("DROP TRIGGER {t}")).unwrap();
            }
            tamper(&c);
        }
        let out = dir.cmd(["verify", "--json"]).code(1);
        let v = out.json();
        assert_eq!(v["intact"], false, "{name}");
        let found: Vec<String> = v["problems"]
            .as_array()
            .unwrap()
            .iter()
            .map(|p| p["object"].as_str().unwrap().to_string())
            .collect();
        let missing: Vec<&String> = objects
            .iter()
            .filter(|o| !found.iter().any(|f| f.starts_with(o.as_str())))
            .collect();
        if missing.is_empty() {
            caught += 1;
        } else {
            report.push(format!(
                "{name}: expected {missing:?}, verify named {found:?}\n{v:#}"
            ));
        }
        // The human report says the same and exits 1 too.
        let human = dir.cmd(["verify"]).code(1).stdout();
        assert!(human.starts_with("NOT INTACT:"), "{name}: {human}");
        assert!(human.contains(objects[0].as_str()), "{name}: {human}");
    }
    assert!(
        report.is_empty(),
        "not caught as expected:\n{}",
        report.join("\n")
    );
    assert_eq!(caught, cases.len());
    assert_eq!(cases.len(), 23, "update the count at the top of this file");
}

#[test]
fn deleting_the_newest_commit_leaves_index_rows_that_verify_reports() {
    let template = template();
    let dir = TestDir::new("tamper_truncate");
    dir.copy_from(&template);
    {
        let c = open_db(&dir);
        c.execute_batch("PRAGMA foreign_keys = OFF; DROP TRIGGER commit_no_delete")
            .unwrap();
        c.execute("DELETE FROM commit_log WHERE seq = 3", [])
            .unwrap();
    }
    let v = dir.cmd(["verify", "--json"]).code(1).json();
    let objects: Vec<&str> = v["problems"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p["object"].as_str().unwrap())
        .collect();
    for o in ["mark index", "version index"] {
        assert!(objects.contains(&o), "{o} in {objects:?}");
    }
}

#[test]
fn the_triggers_refuse_plain_updates() {
    let dir = TestDir::new("triggers");
    setup_store(&dir);
    dir.write("river.csv", RIVER_CSV);
    dir.cmd(["ingest", "river.csv", "--table", "samples"]).ok();
    let c = open_db(&dir);
    for sql in [
        "UPDATE commit_log SET body = x'00'",
        "DELETE FROM commit_log",
        "UPDATE chunk SET data = x'00'",
        "DELETE FROM chunk",
        "UPDATE blob SET n_bytes = 1",
        "DELETE FROM blob_chunk",
    ] {
        let err = c.execute(sql, []).unwrap_err();
        assert!(err.to_string().contains("immutable"), "{sql}: {err}");
    }
}

#[test]
fn a_damaged_row_map_finds_no_row_rather_than_a_wrong_one() {
    let template = template();
    let dir = TestDir::new("tamper_row_map_lookup");
    dir.copy_from(&template);
    let shown = dir.cmd(["show", "samples", "RW-005", "--json"]).ok().json();
    assert_eq!(shown["rows"][0]["row"], "RW-005");
    {
        let c = open_db(&dir);
        let mut data: Vec<u8> = c
            .query_row("SELECT data FROM row_map WHERE seq = 1", [], |r| r.get(0))
            .unwrap();
        // Move the first group's offset (bytes 36..44) to the start of the second row: the
        // group then begins one row late, and its rows are numbered one too low.
        let second = RIVER_CSV.find("\nRW-002").unwrap() as u64 + 1;
        data[36..44].copy_from_slice(&second.to_le_bytes());
        c.execute("UPDATE row_map SET data = ?1 WHERE seq = 1", params![data])
            .unwrap();
    }
    // Every row still shown is the row asked for, with its own values (or none is shown).
    for key in ["RW-001", "RW-004", "RW-007"] {
        let out = dir.cmd(["show", "samples", key, "--json"]);
        if out.status.success() {
            let v = out.json();
            assert_eq!(v["rows"][0]["row"], key);
            assert_eq!(v["rows"][0]["cells"][0], key);
        }
    }
    let v = dir.cmd(["verify", "--json"]).code(1).json();
    assert!(
        v["problems"]
            .as_array()
            .unwrap()
            .iter()
            .any(|p| p["object"] == "row map of commit 1"),
        "{v}"
    );
}
