//! Conditions on one line, for choosing rows: `ph gt 14`, `site in "Fox Run","Heron Pool"`,
//! `notes is missing and weather eq fog`. The words are the rules file's (`eq`, `ne`, `lt`,
//! `le`, `gt`, `ge`, `in`, `is missing`, `is present`) and values compare the same way: as
//! numbers when both sides read as numbers, as dates when both read as dates, else as text.
//!
//! [`parse_condition`] turns the text into stored [`Clause`]s (refusing a bad one with the
//! character where it goes wrong); [`Condition::new`] resolves them against a header (refusing
//! an unknown column); [`Condition::holds`] tests a row.

use super::value::{Domain, Test};
use crate::model::edit::Clause;

/// A condition that does not read, with the 1-based character where it goes wrong.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ConditionError {
    /// 1-based character position in the condition text.
    pub at: usize,
    /// What is wrong.
    pub message: String,
}

impl std::fmt::Display for ConditionError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "at character {}: {}", self.at, self.message)
    }
}

#[derive(Debug, Clone, PartialEq)]
enum Token {
    Word(String),
    Quoted(String),
    Comma,
}

fn tokens(text: &str) -> Result<Vec<(usize, Token)>, ConditionError> {
    let chars: Vec<char> = text.chars().collect();
    let mut out = Vec::new();
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        if c.is_whitespace() {
            i += 1;
        } else if c == ',' {
            out.push((i + 1, Token::Comma));
            i += 1;
        } else if c == '"' {
            let start = i + 1;
            let mut s = String::new();
            i += 1;
            loop {
                match chars.get(i) {
                    None => {
                        return Err(ConditionError {
                            at: start,
                            message: "a quoted value is not closed with \"".into(),
                        });
                    }
                    Some('\\') if matches!(chars.get(i + 1), Some('"' | '\\')) => {
                        s.push(chars[i + 1]);
                        i += 2;
                    }
                    Some('"') => {
                        i += 1;
                        break;
                    }
                    Some(&ch) => {
                        s.push(ch);
                        i += 1;
                    }
                }
            }
            out.push((start, Token::Quoted(s)));
        } else {
            let start = i + 1;
            let mut s = String::new();
            while let Some(&ch) = chars.get(i) {
                if ch.is_whitespace() || ch == ',' || ch == '"' {
                    break;
                }
                s.push(ch);
                i += 1;
            }
            out.push((start, Token::Word(s)));
        }
    }
    Ok(out)
}

/// Reads a condition: clauses `COLUMN TEST [VALUE[,VALUE…]]` joined by `and`. A column or value
/// with spaces, commas or quotes is written in double quotes (`\"` inside).
///
/// ```
/// use emend::checks::parse_condition;
/// let c = parse_condition(r#"site one of "Fox Run","Heron Pool" and ph above 14"#).unwrap();
/// assert_eq!(c[0].values, ["Fox Run", "Heron Pool"]);
/// assert_eq!((c[1].test.as_str(), c[1].values[0].as_str()), ("above", "14"));
/// // The short forms of the first rules files still read, and are stored in words.
/// assert_eq!(parse_condition("ph gt 14").unwrap()[0].test, "above");
/// let e = parse_condition("ph over 14").unwrap_err();
/// assert_eq!(e.at, 4);
/// ```
pub fn parse_condition(text: &str) -> Result<Vec<Clause>, ConditionError> {
    let toks = tokens(text)?;
    let end = text.chars().count() + 1;
    let mut clauses = Vec::new();
    let mut i = 0;
    loop {
        let column = match toks.get(i) {
            Some((_, Token::Word(w) | Token::Quoted(w))) => w.clone(),
            Some((at, Token::Comma)) => {
                return Err(ConditionError {
                    at: *at,
                    message: "expected a column name".into(),
                });
            }
            None => {
                return Err(ConditionError {
                    at: end,
                    message: "expected a column name".into(),
                });
            }
        };
        i += 1;
        let (at, word) = match toks.get(i) {
            Some((at, Token::Word(w))) => (*at, w.clone()),
            Some((at, _)) => (*at, String::new()),
            None => (end, String::new()),
        };
        i += 1;
        // Two-word tests: is missing, is present, at most, at least, one of.
        let second = match (word.as_str(), toks.get(i)) {
            ("is", Some((_, Token::Word(w)))) if w == "missing" || w == "present" => Some(w),
            ("at", Some((_, Token::Word(w)))) if w == "most" || w == "least" => Some(w),
            ("one", Some((_, Token::Word(w)))) if w == "of" => Some(w),
            _ => None,
        };
        let test_word = match second {
            Some(w) => {
                i += 1;
                format!("{word} {w}")
            }
            None => word,
        };
        let Some(test) = Test::from_word(&test_word) else {
            return Err(ConditionError {
                at,
                message: format!(
                    "expected a test after the column '{column}': one of {}",
                    Test::WORDS
                ),
            });
        };
        let mut values = Vec::new();
        if !matches!(test, Test::IsMissing | Test::IsPresent) {
            loop {
                match toks.get(i) {
                    Some((_, Token::Word(w) | Token::Quoted(w))) => values.push(w.clone()),
                    Some((at, Token::Comma)) => {
                        return Err(ConditionError {
                            at: *at,
                            message: "expected a value".into(),
                        });
                    }
                    None => {
                        return Err(ConditionError {
                            at: end,
                            message: format!("'{column} {test_word}' needs a value"),
                        });
                    }
                }
                i += 1;
                if matches!(toks.get(i), Some((_, Token::Comma))) {
                    if test != Test::In {
                        return Err(ConditionError {
                            at: toks[i].0,
                            message: format!(
                                "only 'one of' takes a list; '{test_word}' takes one value"
                            ),
                        });
                    }
                    i += 1;
                    continue;
                }
                break;
            }
        }
        // An ordering test compares numbers or dates: a value that is neither would match no
        // row without a word.
        if test.orders()
            && let Some(v) = values.first()
            && super::value::parse_number(v).is_none()
            && super::value::parse_date(v).is_none()
        {
            return Err(ConditionError {
                at,
                message: format!(
                    "'{column} {test_word}' compares numbers or dates, and {v:?} is neither"
                ),
            });
        }
        // Stored in today's words, whichever spelling was typed.
        clauses.push(Clause {
            column,
            test: test.word().to_owned(),
            values,
        });
        match toks.get(i) {
            None => return Ok(clauses),
            Some((_, Token::Word(w))) if w == "and" => i += 1,
            Some((at, _)) => {
                return Err(ConditionError {
                    at: *at,
                    message: "expected 'and' or the end of the condition".into(),
                });
            }
        }
    }
}

/// A condition resolved against a header, ready to test rows.
#[derive(Debug, Clone)]
pub struct Condition {
    clauses: Vec<(usize, Test, Vec<String>)>,
}

impl Condition {
    /// Resolves `clauses` against `header`; `Err` names the first column not in it.
    pub fn new(clauses: &[Clause], header: &[String]) -> Result<Condition, String> {
        let mut out = Vec::with_capacity(clauses.len());
        for c in clauses {
            let idx = header
                .iter()
                .position(|h| *h == c.column)
                .ok_or_else(|| c.column.clone())?;
            let test = Test::from_word(&c.test).ok_or_else(|| c.test.clone())?;
            out.push((idx, test, c.values.clone()));
        }
        Ok(Condition { clauses: out })
    }

    /// Whether every clause holds for a row. A missing cell satisfies only `is missing`.
    pub fn holds(&self, cells: &[Option<String>]) -> bool {
        self.clauses.iter().all(|(idx, test, values)| {
            let cell = cells.get(*idx).and_then(|c| c.as_deref());
            match (test, cell) {
                (Test::IsMissing, c) => c.is_none(),
                (Test::IsPresent, c) => c.is_some(),
                (_, None) => false,
                (Test::In, Some(v)) => values.iter().any(|w| Domain::infer(v, w).equal(v, w)),
                (t, Some(v)) => {
                    let w = &values[0];
                    t.compare(Domain::infer(v, w), v, w) == Some(true)
                }
            }
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(values: &[Option<&str>]) -> Vec<Option<String>> {
        values.iter().map(|v| v.map(str::to_owned)).collect()
    }

    #[test]
    fn clauses_compare_as_the_rules_file_does() {
        let header: Vec<String> = ["site", "ph", "sampled_on"].map(String::from).to_vec();
        let holds = |text: &str, cells: &[Option<&str>]| {
            let c = Condition::new(&parse_condition(text).unwrap(), &header).unwrap();
            c.holds(&row(cells))
        };
        // Numbers compare as numbers (9 < 10), not as text ("9" > "10").
        assert!(holds("ph lt 10", &[Some("x"), Some("9"), None]));
        assert!(holds("ph eq 7", &[Some("x"), Some("7.0"), None]));
        // Dates as calendar days.
        assert!(holds(
            "sampled_on ge 2026-01-02",
            &[None, None, Some("2026-01-10")]
        ));
        assert!(holds(
            r#"site in "Fox Run","Heron Pool""#,
            &[Some("Heron Pool"), None, None]
        ));
        assert!(!holds(
            r#"site in "Fox Run""#,
            &[Some("fox run"), None, None]
        ));
        // A missing cell passes only `is missing`.
        assert!(holds("ph is missing", &[None, None, None]));
        assert!(!holds("ph ne 7", &[None, None, None]));
        assert!(holds(
            "site is present and ph gt 14",
            &[Some("a"), Some("71"), None]
        ));
        assert!(!holds(
            "site is present and ph gt 14",
            &[Some("a"), Some("7"), None]
        ));
    }

    #[test]
    fn a_bad_condition_names_where() {
        for (text, at) in [
            ("ph", 3),
            ("ph gt", 6),
            ("ph gt 1,2", 8),
            ("ph gt 14 or site eq x", 10),
            ("site eq \"open", 9),
            ("ph is", 4),
        ] {
            let e = parse_condition(text).unwrap_err();
            assert_eq!(e.at, at, "{text}: {e}");
        }
        let header = vec!["ph".to_owned()];
        let err = Condition::new(&parse_condition("pH gt 1").unwrap(), &header).unwrap_err();
        assert_eq!(err, "pH");
    }
}
