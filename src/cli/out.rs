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

/// Standard output that strips styles when it is not a terminal or NO_COLOR is set.
pub fn stdout() -> anstream::AutoStream<std::io::StdoutLock<'static>> {
    anstream::AutoStream::auto(std::io::stdout().lock())
}

/// Wrap `text` in `style`.
pub fn paint(style: Style, text: impl std::fmt::Display) -> String {
    format!("{style}{text}{style:#}")
}

/// Print an error and the hint the library has for it.
pub fn error(err: &anyhow::Error) {
    let mut e = anstream::stderr();
    let _ = writeln!(e, "{} {err:#}", paint(BAD, "emend: error:"));
    let hint = err
        .chain()
        .find_map(|c| c.downcast_ref::<emend::Error>())
        .and_then(emend::Error::hint);
    if let Some(h) = hint {
        let _ = writeln!(e, "{} {h}", paint(BOLD, "hint:"));
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
        let clean: String = s
            .chars()
            .map(|c| {
                if c == '\n' || c == '\r' || c == '\t' {
                    ' '
                } else {
                    c
                }
            })
            .collect();
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
