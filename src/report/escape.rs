//! HTML escaping for text and attribute values.
//!
//! One rule everywhere: `&`, `<`, `>`, `"` and `'` become character references, so the same
//! escaped text is safe between tags and inside single- or double-quoted attributes. Control
//! characters other than tab, newline and carriage return are not allowed in HTML text; they
//! are shown as U+FFFD so a hostile extract cannot produce a document that fails to parse.

use std::fmt;

/// Displays a string HTML-escaped, without allocating.
///
/// ```
/// use emend::report::Esc;
/// assert_eq!(
///     Esc(r#"<a href="x">Tom & 'Jerry'</a>"#).to_string(),
///     "&lt;a href=&quot;x&quot;&gt;Tom &amp; &#39;Jerry&#39;&lt;/a&gt;"
/// );
/// ```
#[derive(Debug, Clone, Copy)]
pub struct Esc<'a>(pub &'a str);

impl fmt::Display for Esc<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let mut rest = self.0;
        while let Some(i) = rest.find(needs_escape) {
            f.write_str(&rest[..i])?;
            let c = rest[i..]
                .chars()
                .next()
                .expect("find returned a char boundary");
            f.write_str(match c {
                '&' => "&amp;",
                '<' => "&lt;",
                '>' => "&gt;",
                '"' => "&quot;",
                '\'' => "&#39;",
                _ => "\u{FFFD}",
            })?;
            rest = &rest[i + c.len_utf8()..];
        }
        f.write_str(rest)
    }
}

fn needs_escape(c: char) -> bool {
    matches!(c, '&' | '<' | '>' | '"' | '\'')
        || (c.is_control() && !matches!(c, '\t' | '\n' | '\r'))
}

#[cfg(test)]
mod tests {
    use super::Esc;

    fn check(input: &str, expected: &str) {
        assert_eq!(Esc(input).to_string(), expected);
    }

    #[test]
    fn escapes_the_five_characters_and_controls() {
        check("", "");
        check("plain", "plain");
        check(
            "<script>alert(1)</script>",
            "&lt;script&gt;alert(1)&lt;/script&gt;",
        );
        check("a&&b", "a&amp;&amp;b");
        check("\"'", "&quot;&#39;");
        check("nul\0bell\u{7}", "nul\u{FFFD}bell\u{FFFD}");
        check("tab\tnl\n", "tab\tnl\n");
        check("Ünïcødé ≥ 5 m³/s", "Ünïcødé ≥ 5 m³/s");
    }
}
