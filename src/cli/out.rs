//! Printing: styles that appear only on a terminal (and never with NO_COLOR), plain aligned
//! tables, JSON, and the error format `emend: error: ...` followed by `hint: ...`.

use anstyle::{AnsiColor, Style};
use std::io::Write;
use unicode_width::{UnicodeWidthChar, UnicodeWidthStr};

/// Headings and names.
pub const BOLD: Style = Style::new().bold();
/// Quiet detail (ids, times).
pub const DIM: Style = Style::new().dimmed();
/// Something went right.
pub const GOOD: Style = Style::new().fg_color(Some(anstyle::Color::Ansi(AnsiColor::Green)));
/// Something needs attention.
pub const BAD: Style = Style::new()
    .fg_color(Some(anstyle::Color::Ansi(AnsiColor::Red)))
    .bold();
/// A value that was changed by a fix.
pub const CHANGED: Style = Style::new().fg_color(Some(anstyle::Color::Ansi(AnsiColor::Blue)));

/// Standard output for people: every control character in the text is shown escaped (our own
/// styles excepted), then styles are stripped when it is not a terminal or NO_COLOR is set.
/// Every command prints its human output through this one path, so a signer's name or a cell
/// holding `ESC [2K CR intact` can never repaint the terminal (issue 16).
pub fn stdout() -> Escaped<anstream::AutoStream<std::io::StdoutLock<'static>>> {
    Escaped::new(anstream::AutoStream::auto(std::io::stdout().lock()), true)
}

/// Standard error for people, escaped like [`stdout`].
pub fn stderr() -> Escaped<anstream::AutoStream<std::io::StderrLock<'static>>> {
    Escaped::new(anstream::AutoStream::auto(std::io::stderr().lock()), true)
}

/// Standard output for data (CSV, raw bytes): written exactly as given when it is a pipe or a
/// file; on a terminal, every control character is shown escaped, since the bytes are then
/// read by a person, not a program.
pub fn data_stdout() -> Box<dyn Write> {
    use std::io::IsTerminal;
    let raw = std::io::BufWriter::with_capacity(1 << 16, std::io::stdout().lock());
    if std::io::stdout().is_terminal() {
        Box::new(Escaped::new(raw, false))
    } else {
        Box::new(raw)
    }
}

/// A writer that shows every control character as an escape (`\u{1b}`), except the line feed
/// and tab, and, when `styles` is on, the SGR style sequences (`ESC [ digits;… m`) that only
/// change colour. Text is passed on a line at a time, so a sequence split across writes is
/// still seen whole.
pub struct Escaped<W: Write> {
    inner: W,
    pending: Vec<u8>,
    styles: bool,
}

impl<W: Write> Escaped<W> {
    /// Wrap `inner`.
    pub fn new(inner: W, styles: bool) -> Self {
        Escaped {
            inner,
            pending: Vec::new(),
            styles,
        }
    }

    fn pass(&mut self, upto: usize) -> std::io::Result<()> {
        let chunk: Vec<u8> = self.pending.drain(..upto).collect();
        let text = String::from_utf8_lossy(&chunk);
        self.inner
            .write_all(escape_controls(&text, self.styles).as_bytes())
    }
}

impl<W: Write> Write for Escaped<W> {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        self.pending.extend_from_slice(buf);
        if let Some(nl) = self.pending.iter().rposition(|&b| b == b'\n') {
            self.pass(nl + 1)?;
        }
        Ok(buf.len())
    }

    fn flush(&mut self) -> std::io::Result<()> {
        let n = self.pending.len();
        self.pass(n)?;
        self.inner.flush()
    }
}

impl<W: Write> Drop for Escaped<W> {
    fn drop(&mut self) {
        let _ = self.flush();
    }
}

/// The one escaping rule for text bound for a terminal: control characters (C0, DEL and C1,
/// as Unicode defines them) become `\u{…}` escapes; the line feed and tab stay; with `styles`,
/// an SGR sequence `ESC [ [0-9;]* m` stays too (it changes colour, never the cursor or the
/// screen). Source for what a control sequence is: ECMA-48, 5th edition (from memory: CSI is
/// `ESC [`, and a sequence ends at a final byte in 0x40–0x7E; SGR's final byte is `m`).
pub fn escape_controls(s: &str, styles: bool) -> std::borrow::Cow<'_, str> {
    if !s.chars().any(|c| c.is_control() && c != '\n' && c != '\t') {
        return std::borrow::Cow::Borrowed(s);
    }
    let mut out = String::with_capacity(s.len() + 16);
    let mut rest = s;
    while let Some(c) = rest.chars().next() {
        if c == '\u{1b}' && styles {
            let params = rest[1..].strip_prefix('[').map(|p| {
                p.bytes()
                    .take_while(|b| b.is_ascii_digit() || *b == b';')
                    .count()
            });
            if let Some(n) = params
                && rest.as_bytes().get(2 + n) == Some(&b'm')
            {
                out.push_str(&rest[..3 + n]);
                rest = &rest[3 + n..];
                continue;
            }
        }
        if c.is_control() && c != '\n' && c != '\t' {
            out.push_str(&c.escape_unicode().to_string());
        } else {
            out.push(c);
        }
        rest = &rest[c.len_utf8()..];
    }
    std::borrow::Cow::Owned(out)
}

/// Wrap `text` in `style`.
pub fn paint(style: Style, text: impl std::fmt::Display) -> String {
    format!("{style}{text}{style:#}")
}

/// Print an error and the hint the library has for it.
pub fn error(err: &anyhow::Error) {
    // Errors quote values (rows, columns, revisions as typed or stored): the message goes
    // through `clean_lines`, the styles through `stderr`.
    let mut e = stderr();
    let _ = writeln!(
        e,
        "{} {}",
        paint(BAD, "emend: error:"),
        clean_lines(&format!("{err:#}"))
    );
    let hint = err
        .chain()
        .find_map(|c| c.downcast_ref::<emend::Error>())
        .and_then(emend::Error::hint);
    if let Some(h) = hint {
        let _ = writeln!(e, "{} {}", paint(BOLD, "hint:"), clean_lines(&h));
    }
}

/// Print a JSON value followed by a newline.
pub fn json(value: &serde_json::Value) -> anyhow::Result<()> {
    let mut o = std::io::stdout().lock();
    serde_json::to_writer_pretty(&mut o, value)?;
    writeln!(o)?;
    Ok(())
}

/// The width of the terminal standard output writes to; `None` when it is not a terminal
/// (a pipe or a file gets every column).
pub fn terminal_width() -> Option<usize> {
    use std::io::IsTerminal;
    if !std::io::stdout().is_terminal() {
        return None;
    }
    terminal_size::terminal_size()
        .map(|(w, _)| usize::from(w.0))
        .or_else(|| std::env::var("COLUMNS").ok()?.parse().ok())
}

/// Render rows as a plain table with aligned columns, measured in terminal columns (a wide
/// character takes two); cells wider than `max_width` are cut with an ellipsis. `styles` gives
/// an optional style per cell.
pub fn table(header: &[String], rows: &[Vec<(String, Option<Style>)>], max_width: usize) -> String {
    table_within(header, rows, max_width, None).0
}

/// As [`table`], keeping only the leading columns that fit in `width` terminal columns (at
/// least the first two); returns the table and how many columns it shows.
pub fn table_within(
    header: &[String],
    rows: &[Vec<(String, Option<Style>)>],
    max_width: usize,
    width: Option<usize>,
) -> (String, usize) {
    let cut = |s: &str| -> String {
        let spaced: String = s
            .chars()
            .map(|c| {
                if c == '\n' || c == '\r' || c == '\t' {
                    ' '
                } else {
                    c
                }
            })
            .collect();
        // Column names and cells alike: no control character reaches the table raw.
        let clean = clean(&spaced).into_owned();
        if clean.width() > max_width {
            let mut t = String::new();
            let mut used = 0;
            for c in clean.chars() {
                let w = c.width().unwrap_or(0);
                if used + w + 1 > max_width {
                    break;
                }
                used += w;
                t.push(c);
            }
            t.push('…');
            t
        } else {
            clean
        }
    };
    let mut widths: Vec<usize> = header.iter().map(|h| cut(h).width()).collect();
    let cells: Vec<Vec<(String, Option<Style>)>> = rows
        .iter()
        .map(|r| r.iter().map(|(t, s)| (cut(t), *s)).collect())
        .collect();
    for r in &cells {
        for (i, (t, _)) in r.iter().enumerate() {
            if i < widths.len() {
                widths[i] = widths[i].max(t.width());
            }
        }
    }
    let mut shown = widths.len();
    if let Some(limit) = width {
        let mut used = 0;
        for (i, w) in widths.iter().enumerate() {
            used += w + if i > 0 { 2 } else { 0 };
            if used > limit && i >= 2 {
                shown = i;
                break;
            }
        }
    }
    let mut out = String::new();
    let line = |out: &mut String, r: &[(String, Option<Style>)]| {
        let r = &r[..r.len().min(shown)];
        for (i, (t, s)) in r.iter().enumerate() {
            let pad = widths[i].saturating_sub(t.width());
            let last = i + 1 == r.len();
            match s {
                Some(st) => out.push_str(&paint(*st, t)),
                None => out.push_str(t),
            }
            if !last {
                out.push_str(&" ".repeat(pad + 2));
            }
        }
        while out.ends_with(' ') {
            out.pop();
        }
        out.push('\n');
    };
    let head: Vec<(String, Option<Style>)> = header.iter().map(|h| (cut(h), Some(BOLD))).collect();
    line(&mut out, &head);
    for r in &cells {
        line(&mut out, r);
    }
    (out, shown)
}

/// How many cells a committed fix changed, in words (`3 cells`); `None` for the fixes that
/// change no value by design (exclusions, distrust, keep, note, rules), whose description
/// says what they chose.
pub fn cells_changed(action: &emend::model::FixAction, n: usize) -> Option<String> {
    use emend::model::FixAction as A;
    match action {
        A::Exclude { .. }
        | A::Distrust { .. }
        | A::ExcludeRows { .. }
        | A::Keep { .. }
        | A::Note { .. }
        | A::Rules { .. } => None,
        // Withdrawing a fix that changed no value changes none either.
        A::Withdraw { .. } if n == 0 => None,
        _ => Some(emend::model::quantity(n as u64, "cell", "cells")),
    }
}

/// Text from the store or an input file made safe for a terminal: control characters (escape
/// sequences among them, which could repaint the screen) are shown as `\u{1b}`-style escapes.
pub fn clean(s: &str) -> std::borrow::Cow<'_, str> {
    if !s.chars().any(char::is_control) {
        return std::borrow::Cow::Borrowed(s);
    }
    std::borrow::Cow::Owned(
        s.chars()
            .map(|c| {
                if c.is_control() {
                    c.escape_unicode().to_string()
                } else {
                    c.to_string()
                }
            })
            .collect(),
    )
}

/// As [`clean`], keeping line feeds: for messages of several lines.
pub fn clean_lines(s: &str) -> String {
    s.split('\n').map(clean).collect::<Vec<_>>().join("\n")
}

/// A value in a change shown to people: quoted, so spaces at either end and doubled spaces
/// inside can be seen (`'Heron  Pool' → 'Heron Pool'`); missing is `(missing)`.
pub fn quoted(v: &Option<String>) -> String {
    match v {
        Some(s) => format!("'{}'", clean(s)),
        None => "(missing)".into(),
    }
}

/// Show a cell value for people: missing is `(missing)`; a value with spaces at either end or
/// doubled inside is quoted, so they can be seen.
pub fn cell(v: &Option<String>) -> String {
    match v {
        Some(s)
            if s.starts_with(char::is_whitespace)
                || s.ends_with(char::is_whitespace)
                || s.contains("  ") =>
        {
            format!("'{}'", clean(s))
        }
        Some(s) => clean(s).into_owned(),
        None => "(missing)".into(),
    }
}

/// Quote a value for a command line the user can paste.
pub fn shell_quote(s: &str) -> String {
    if !s.is_empty()
        && s.chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.' | '/' | ':' | ','))
    {
        s.to_string()
    } else {
        format!("'{}'", s.replace('\'', "'\\''"))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wide_characters_take_two_columns_and_the_next_column_still_lines_up() {
        // Source: Unicode Standard Annex #11 (East Asian Width): CJK ideographs are Wide, so
        // one takes two terminal columns; the widths come from the unicode-width crate.
        let rows = vec![
            vec![("河川".to_string(), None), ("x".to_string(), None)],
            vec![("ab".to_string(), None), ("y".to_string(), None)],
        ];
        let text = table(&["site".into(), "v".into()], &rows, 40);
        let lines: Vec<&str> = text.lines().collect();
        let col = |line: &str, needle: char| line[..line.find(needle).unwrap()].width();
        assert_eq!(col(lines[1], 'x'), col(lines[2], 'y'));
        assert_eq!(col(lines[1], 'x'), 6, "4 columns of text, then 2 of gap");
    }

    #[test]
    fn control_characters_never_reach_the_terminal_raw() {
        // ECMA-48 (the control functions of terminals): ESC (U+001B) starts a control sequence.
        let forged = "Ana\u{1b}[2K\rintact: every hash checks out";
        let shown = clean(forged);
        assert!(
            !shown.contains('\u{1b}') && !shown.contains('\r'),
            "{shown}"
        );
        assert!(shown.contains("\\u{1b}[2K"), "{shown}");
        assert_eq!(clean("Heron Pool"), "Heron Pool");
    }

    #[test]
    fn the_terminal_stream_escapes_forged_sequences_and_keeps_our_styles() {
        // ECMA-48: CSI (ESC [) "2K" erases the line; OSC (ESC ]) sets the window title; CR
        // returns the cursor. Only SGR (final byte 'm') changes nothing but colour.
        let forged = "signer Mallory\u{1b}[2K\rintact\u{1b}]0;owned\u{7}\u{9b}2J\n";
        let styled = format!("{}\t{}", paint(BAD, "NOT INTACT"), forged);
        let mut shown = Escaped::new(Vec::new(), true);
        // Split mid-sequence: the writer still sees each sequence whole.
        let bytes = styled.as_bytes();
        shown.write_all(&bytes[..20]).unwrap();
        shown.write_all(&bytes[20..]).unwrap();
        shown.flush().unwrap();
        let text = String::from_utf8(shown.inner.clone()).unwrap();
        assert!(text.starts_with(&paint(BAD, "NOT INTACT")), "{text:?}");
        assert!(text.contains("Mallory\\u{1b}[2K\\u{d}intact"), "{text:?}");
        assert!(text.contains("\\u{1b}]0;owned\\u{7}"), "{text:?}");
        assert!(
            text.contains("\\u{9b}2J"),
            "C1 CSI is escaped too: {text:?}"
        );
        assert!(text.contains('\t') && text.ends_with('\n'));
        // For data on a terminal, even colour sequences are escaped.
        assert_eq!(escape_controls("\u{1b}[31mred", false), "\\u{1b}[31mred");
        assert_eq!(escape_controls("plain text\n", false), "plain text\n");
        // Error messages keep their lines and lose their control characters.
        assert_eq!(clean_lines("a\u{1b}[2K\nb"), "a\\u{1b}[2K\nb");
    }

    #[test]
    fn a_table_wider_than_the_terminal_keeps_the_leading_columns_that_fit() {
        let header: Vec<String> = ["#", "site", "ph", "notes"].map(String::from).into();
        let rows = vec![vec![
            ("1".to_string(), None),
            ("Heron Pool".to_string(), None),
            ("7.1".to_string(), None),
            ("a long note".to_string(), None),
        ]];
        // Widths 1, 10, 3, 11 with gaps of 2: the first three take 1+2+10+2+3 = 18 columns.
        let (text, shown) = table_within(&header, &rows, 32, Some(20));
        assert_eq!(shown, 3);
        // The header line carries style codes; the row line is plain text.
        assert!(text.lines().nth(1).unwrap().width() <= 20, "{text}");
        assert!(!text.contains("notes"));
        assert_eq!(table_within(&header, &rows, 32, Some(31)).1, 4);
        assert_eq!(table_within(&header, &rows, 32, None).1, 4);
        // However narrow, the position and one column stay.
        assert_eq!(table_within(&header, &rows, 32, Some(3)).1, 2);
    }
}
