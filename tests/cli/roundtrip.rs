//! Round trips: `export --raw` gives back the ingested bytes exactly, for every dialect emend
//! accepts; `export` of an unfixed version gives back the same cells (checked with the test's
//! own CSV parser) and the same bytes every time.

use crate::util::{TestDir, parse_csv, rows, setup_store};

struct Case {
    table: &'static str,
    file: &'static str,
    bytes: Vec<u8>,
    args: &'static [&'static str],
    delim: char,
    /// The cells as a reader should see them (header first).
    cells: Vec<Vec<String>>,
    /// What `export` (no fixes) writes, when it is exactly known.
    export: Option<Vec<u8>>,
}

fn cases() -> Vec<Case> {
    let plain = rows(&[
        &["station", "reach", "flow_l_s"],
        &["ST-1", "upper", "12.5"],
        &["ST-2", "lower", ""],
        &["ST-3", "middle", "9"],
    ]);
    let lf = "station,reach,flow_l_s\nST-1,upper,12.5\nST-2,lower,\nST-3,middle,9\n";
    let crlf = lf.replace('\n', "\r\n");
    let bom = format!("\u{feff}{lf}");
    let tsv = lf.replace(',', "\t");
    let semi = lf.replace(',', ";");
    let no_final = lf.trim_end_matches('\n').to_string();

    // Quoted fields with the delimiter, embedded LF and CR LF, doubled quotes, an empty
    // quoted field; apart from the empty one, only fields that need quotes are quoted.
    let quoted = "station,note,flow\n\
ST-1,\"bank eroded, fence down\",3\n\
ST-2,\"two\nlines\",4\n\
ST-3,\"she said \"\"low\"\"\",5\n\
ST-4,\"\",6\n\
ST-5,\"crlf\r\ninside\",7\n";
    let quoted_cells = rows(&[
        &["station", "note", "flow"],
        &["ST-1", "bank eroded, fence down", "3"],
        &["ST-2", "two\nlines", "4"],
        &["ST-3", "she said \"low\"", "5"],
        &["ST-4", "", "6"],
        &["ST-5", "crlf\r\ninside", "7"],
    ]);
    // Every field quoted (header included): export keeps quoting every field.
    let all_quoted = "\"station\",\"note\"\r\n\"ST-1\",\"a \"\"b\"\"\"\r\n\"ST-2\",\"x\"\r\n";
    // windows-1252 bytes. Expected characters from the WHATWG Encoding Standard,
    // index-windows-1252: 0x80 -> U+20AC EURO SIGN, 0x96 -> U+2013 EN DASH,
    // 0xE9 -> U+00E9 LATIN SMALL LETTER E WITH ACUTE, 0xD8 -> U+00D8.
    let cp1252: Vec<u8> =
        b"station,observer,cost\nST-1,Ren\xe9e,\x8012\nST-2,\xd8ystein \x96 trainee,5\n".to_vec();
    let cp1252_cells = rows(&[
        &["station", "observer", "cost"],
        &["ST-1", "Ren\u{e9}e", "\u{20ac}12"],
        &["ST-2", "\u{d8}ystein \u{2013} trainee", "5"],
    ]);
    let cp1252_export =
        "station,observer,cost\nST-1,Ren\u{e9}e,\u{20ac}12\nST-2,\u{d8}ystein \u{2013} trainee,5\n";
    // latin-1 (ISO 8859-1): each byte is the code point of the same number.
    let latin1: Vec<u8> = b"station,site\nST-1,Gr\xfcnbach\n".to_vec();

    vec![
        Case {
            table: "comma_lf",
            file: "comma_lf.csv",
            bytes: lf.into(),
            args: &[],
            delim: ',',
            cells: plain.clone(),
            export: Some(lf.into()),
        },
        Case {
            table: "crlf",
            file: "crlf.csv",
            bytes: crlf.clone().into(),
            args: &[],
            delim: ',',
            cells: plain.clone(),
            export: Some(crlf.into()),
        },
        Case {
            table: "bom",
            file: "bom.csv",
            bytes: bom.clone().into(),
            args: &[],
            delim: ',',
            cells: plain.clone(),
            export: Some(bom.into()),
        },
        Case {
            table: "tsv_ext",
            file: "tabs.tsv",
            bytes: tsv.clone().into(),
            args: &[],
            delim: '\t',
            cells: plain.clone(),
            export: Some(tsv.clone().into()),
        },
        Case {
            table: "tsv_flag",
            file: "tabs.txt",
            bytes: tsv.clone().into(),
            args: &["--delimiter", "tab"],
            delim: '\t',
            cells: plain.clone(),
            export: Some(tsv.into()),
        },
        Case {
            table: "semicolon",
            file: "semi.csv",
            bytes: semi.clone().into(),
            args: &[],
            delim: ';',
            cells: plain.clone(),
            export: Some(semi.into()),
        },
        Case {
            table: "semicolon_flag",
            file: "semi2.csv",
            bytes: lf.replace(',', ";").replace("12.5", "12,5").into(),
            args: &["--delimiter", ";"],
            delim: ';',
            cells: {
                let mut c = plain.clone();
                c[1][2] = "12,5".into();
                c
            },
            export: Some(lf.replace(',', ";").replace("12.5", "12,5").into()),
        },
        Case {
            table: "quoted",
            file: "quoted.csv",
            bytes: quoted.into(),
            args: &[],
            delim: ',',
            cells: quoted_cells,
            // an empty field needs no quotes
            export: Some(quoted.replace("ST-4,\"\",6", "ST-4,,6").into()),
        },
        Case {
            table: "all_quoted",
            file: "all_quoted.csv",
            bytes: all_quoted.into(),
            args: &[],
            delim: ',',
            cells: rows(&[&["station", "note"], &["ST-1", "a \"b\""], &["ST-2", "x"]]),
            export: Some(all_quoted.into()),
        },
        Case {
            table: "cp1252",
            file: "cp1252.csv",
            bytes: cp1252,
            args: &["--encoding", "windows-1252"],
            delim: ',',
            cells: cp1252_cells,
            export: Some(cp1252_export.into()),
        },
        Case {
            table: "latin1",
            file: "latin1.csv",
            bytes: latin1,
            args: &["--encoding", "latin-1"],
            delim: ',',
            cells: rows(&[&["station", "site"], &["ST-1", "Gr\u{fc}nbach"]]),
            export: Some("station,site\nST-1,Gr\u{fc}nbach\n".into()),
        },
        Case {
            table: "no_final_newline",
            file: "nofinal.csv",
            bytes: no_final.into(),
            args: &[],
            delim: ',',
            cells: plain,
            // export always ends its last record
            export: Some(lf.into()),
        },
    ]
}

#[test]
fn raw_export_is_byte_identical_and_export_gives_the_same_cells() {
    let dir = TestDir::new("roundtrip");
    setup_store(&dir);
    let cases = cases();
    for c in &cases {
        dir.write_bytes(c.file, &c.bytes);
        let mut args = vec!["ingest", c.file, "--table", c.table];
        args.extend_from_slice(c.args);
        dir.cmd(&args).ok();
    }
    for c in &cases {
        let raw = dir.cmd(["export", c.table, "--raw"]).ok();
        assert_eq!(raw.stdout_bytes(), &c.bytes[..], "{}: --raw", c.table);
        dir.cmd([
            "export",
            c.table,
            "--raw",
            "-o",
            &format!("{}.raw", c.table),
        ])
        .ok();
        assert_eq!(
            dir.read(&format!("{}.raw", c.table)),
            c.bytes,
            "{}: -o",
            c.table
        );

        let first = dir.cmd(["export", c.table]).ok();
        let second = dir.cmd(["export", c.table]).ok();
        assert_eq!(
            first.stdout_bytes(),
            second.stdout_bytes(),
            "{}: export is deterministic",
            c.table
        );
        let text = first.stdout();
        assert_eq!(parse_csv(&text, c.delim), c.cells, "{}: cells", c.table);
        if let Some(expected) = &c.export {
            assert_eq!(
                text.as_bytes(),
                &expected[..],
                "{}: export of the unfixed version\n{text:?}",
                c.table
            );
        }
        // The shown cells agree with the independent parse.
        let show = dir.cmd(["show", c.table, "--json"]).ok().json();
        let header: Vec<String> = serde_json::from_value(show["columns"].clone()).unwrap();
        assert_eq!(header, c.cells[0], "{}: header", c.table);
        for (i, r) in show["rows"].as_array().unwrap().iter().enumerate() {
            let got: Vec<String> = serde_json::from_value(r["cells"].clone()).unwrap();
            assert_eq!(got, c.cells[i + 1], "{}: row {}", c.table, i + 1);
        }
    }
    dir.cmd(["verify"]).ok();
}

#[test]
fn blank_lines_are_kept_in_the_raw_bytes_and_skipped_in_rows() {
    let dir = TestDir::new("blank_lines");
    setup_store(&dir);
    let bytes = "a,b\n1,2\n\n3,4\n\n";
    dir.write("blank.csv", bytes);
    dir.cmd(["ingest", "blank.csv", "--table", "t"])
        .ok()
        .says(&["2 rows", "skipped 2 blank lines"]);
    assert_eq!(dir.cmd(["export", "t", "--raw"]).ok().stdout(), bytes);
    assert_eq!(dir.cmd(["export", "t"]).ok().stdout(), "a,b\n1,2\n3,4\n");
}

#[test]
fn fixes_keep_the_dialect_on_export() {
    let dir = TestDir::new("fixed_dialect");
    setup_store(&dir);
    dir.write("tabs.tsv", "\u{feff}id\tnote\r\nA\tplain\r\nB\tx\r\n");
    dir.cmd(["ingest", "tabs.tsv", "--table", "t", "--key", "id"])
        .ok();
    dir.cmd([
        "set",
        "t",
        "B",
        "note",
        "has\ttab and \"quote\"",
        "--why",
        "field note",
    ])
    .ok();
    dir.cmd(["commit", "-m", "note"]).ok();
    assert_eq!(
        dir.cmd(["export", "t"]).ok().stdout(),
        "\u{feff}id\tnote\r\nA\tplain\r\nB\t\"has\ttab and \"\"quote\"\"\"\r\n"
    );
}
