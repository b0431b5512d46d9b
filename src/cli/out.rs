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

/// Render rows as a plain table with aligned columns, measured in terminal columns (a wide
/// character takes two); cells wider than `max_width` are cut with an ellipsis. `styles` gives
/// an optional style per cell.
pub fn table(header: &[String], rows: &[Vec<(String, Option<Style>)>], max_width: usize) -> String {
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
    let mut out = String::new();
    let line = |out: &mut String, r: &[(String, Option<Style>)]| {
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
    out
}

/// Show a cell value for people: missing is `<missing>`.
pub fn cell(v: &Option<String>) -> String {
    match v {
        // Spaces at either end are invisible in a table: quote such a value.
        Some(s) if s.starts_with(char::is_whitespace) || s.ends_with(char::is_whitespace) => {
            format!("'{s}'")
        }
        Some(s) => s.clone(),
        None => "<missing>".into(),
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
}
