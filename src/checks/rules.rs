//! The rules file: TOML in, a checked [`RuleSet`] out.
//!
//! The TOML is read as a spanned tree ([`toml::de::DeTable`]) and walked by hand rather than
//! deserialised with serde, so that every error names the exact line and dotted key, and so
//! that unknown keys are refused at every level with the list of keys that are allowed.
//! The shape is documented in `RULES.md`. Nothing here looks at data: whether the columns
//! exist is decided later, against a header, by [`Checker::new`](super::Checker::new).

use std::collections::HashSet;
use std::ops::Range;

use regex::Regex;
use toml::Spanned;
use toml::de::{DeString, DeTable, DeValue};

use super::error::{Pos, RuleError};
use super::outcome::Severity;
use super::value::{Domain, Test, ValueType};
use crate::values::Date;

/// A parsed, checked rules file.
///
/// Build it with [`RuleSet::parse`]; evaluate it with a [`Checker`](super::Checker).
///
/// ```
/// use emend::checks::RuleSet;
///
/// let rules = RuleSet::parse(
///     "[columns.ph]\n\
///      type = \"decimal\"\n\
///      hard = { min = 0, max = 14 }\n",
/// )
/// .unwrap();
/// assert_eq!(rules.columns().collect::<Vec<_>>(), ["ph"]);
///
/// let err = RuleSet::parse("[columns.ph]\nhard = { min = 14, max = 0 }\n").unwrap_err();
/// assert_eq!(err.to_string(), "line 2, key columns.ph.hard: min 14 is above max 0");
/// ```
#[derive(Clone, Debug)]
pub struct RuleSet {
    pub(crate) columns: Vec<ColumnRules>,
    pub(crate) conditions: Vec<Condition>,
    pub(crate) flags: FlagThresholds,
    /// Every column named anywhere, in order of first mention.
    names: Vec<String>,
}

/// A column named in the rules file, and where.
#[derive(Clone, Debug)]
pub(crate) struct ColumnRef {
    pub(crate) name: String,
    pub(crate) pos: Pos,
    pub(crate) key: String,
}

/// A value and the place of the key that set it.
#[derive(Clone, Debug)]
pub(crate) struct Located<T> {
    pub(crate) value: T,
    pub(crate) pos: Pos,
}

/// The rules of one `[columns.NAME]` table.
#[derive(Clone, Debug)]
pub(crate) struct ColumnRules {
    pub(crate) column: ColumnRef,
    pub(crate) value_type: Option<Located<ValueType>>,
    pub(crate) required: Option<Pos>,
    pub(crate) unique: Option<Pos>,
    pub(crate) levels: Option<Located<Vec<String>>>,
    pub(crate) pattern: Option<Located<Pattern>>,
    pub(crate) hard: Option<Located<Bounds>>,
    pub(crate) soft: Option<Located<Bounds>>,
    pub(crate) missing_codes: Vec<String>,
}

/// A compiled `pattern`, with its text as written.
#[derive(Clone, Debug)]
pub(crate) struct Pattern {
    pub(crate) source: String,
    /// The pattern anchored at both ends: a value matches only as a whole.
    pub(crate) regex: Regex,
}

/// Inclusive bounds, on numbers or on dates.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) enum Bounds {
    Number {
        min: Option<f64>,
        max: Option<f64>,
    },
    Date {
        min: Option<Date>,
        max: Option<Date>,
    },
}

/// One `[[conditions]]` entry: when every `when` clause holds, every `then` clause must.
#[derive(Clone, Debug)]
pub(crate) struct Condition {
    pub(crate) id: String,
    /// Where the id was written (the entry's header for a default id), and its key.
    pub(crate) id_at: (Pos, String),
    pub(crate) description: Option<String>,
    pub(crate) severity: Severity,
    pub(crate) pos: Pos,
    pub(crate) when: Vec<Clause>,
    pub(crate) then: Vec<Clause>,
}

/// `column test operand`, such as `score is missing` or `sampled_on ge site_opened_on`.
#[derive(Clone, Debug)]
pub(crate) struct Clause {
    pub(crate) column: ColumnRef,
    pub(crate) test: Test,
    pub(crate) operand: Operand,
}

/// What a clause compares its column with.
#[derive(Clone, Debug)]
pub(crate) enum Operand {
    /// Nothing: `is missing`, `is present`.
    Nothing,
    /// A literal value.
    Value(Literal),
    /// A list of literal values, for `one of`.
    Values(Vec<Literal>),
    /// Another column of the same row.
    Column(ColumnRef),
}

/// A literal from the rules file: its text, and the domain its TOML type implies (none for
/// strings, whose domain follows the column).
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Literal {
    pub(crate) text: String,
    pub(crate) domain: Option<Domain>,
}

/// The `[flags]` thresholds; each flag is computed only when its threshold is given.
#[derive(Clone, Debug, Default)]
pub(crate) struct FlagThresholds {
    pub(crate) mostly_missing: Option<Located<f64>>,
    pub(crate) near_constant: Option<Located<f64>>,
}

impl RuleSet {
    /// The first per-column rule a value would break if written into `column`: its declared
    /// type, its levels, its pattern or its hard bounds (soft bounds only warn, so they do not
    /// refuse). Returns the rule id (`ph.type`) and what is wrong. A missing-value code of the
    /// column and a missing value break nothing.
    ///
    /// ```
    /// use emend::checks::RuleSet;
    /// let rules = RuleSet::parse("[columns.ph]\ntype = \"decimal\"\nhard = { min = 0, max = 14 }\n").unwrap();
    /// assert_eq!(rules.breaks("ph", "abc").unwrap().0, "ph.type");
    /// assert_eq!(rules.breaks("ph", "71").unwrap().0, "ph.hard");
    /// assert!(rules.breaks("ph", "7.1").is_none());
    /// ```
    pub fn breaks(&self, column: &str, value: &str) -> Option<(String, String)> {
        let c = self.columns.iter().find(|c| c.column.name == column)?;
        let value = super::checker::present(Some(value), &c.missing_codes)?;
        let id = |kind: &str| format!("{column}.{kind}");
        if let Some(t) = &c.value_type
            && !t.value.accepts(value)
        {
            return Some((id("type"), format!("{value:?} is not {}", t.value.phrase())));
        }
        if let Some(levels) = &c.levels
            && !levels.value.iter().any(|l| l == value)
        {
            return Some((id("levels"), format!("{value:?} is not an allowed level")));
        }
        if let Some(p) = &c.pattern
            && !p.value.regex.is_match(value)
        {
            return Some((
                id("pattern"),
                format!("{value:?} does not match {}", p.value.source),
            ));
        }
        if let Some(b) = &c.hard
            && let Some(message) = super::checker::out_of_bounds(&b.value, value, "hard")
        {
            return Some((id("hard"), message));
        }
        None
    }

    /// Parses and checks a rules file.
    ///
    /// # Errors
    ///
    /// A [`RuleError`] naming the line and key for: TOML syntax errors, unknown keys, values
    /// of the wrong type, unknown type or comparison words, patterns that do not compile, a
    /// minimum above its maximum, bounds that do not fit the column type, thresholds outside
    /// 0 to 1, and repeated rule ids.
    pub fn parse(text: &str) -> Result<RuleSet, RuleError> {
        let root = DeTable::parse(text).map_err(|err| {
            let pos = Pos::at(text, err.span().map_or(0, |span| span.start));
            pos.error(None, err.message().trim_end_matches('.').to_owned())
        })?;
        let doc = Doc { text };
        let root = Reader {
            doc: &doc,
            table: root.get_ref(),
            path: String::new(),
            span: 0..0,
        };
        root.allow(&["columns", "conditions", "flags"])?;

        let mut columns = Vec::new();
        if let Some((_, node)) = root.get("columns") {
            let table = root.child(node, "columns")?;
            for (key, node) in table.entries() {
                columns.push(column_rules(&table, key, node)?);
            }
        }
        let mut conditions = Vec::new();
        if let Some((_, node)) = root.get("conditions") {
            let path = "conditions".to_owned();
            let items = doc.array(node, &path, "an array of tables ([[conditions]])")?;
            for (i, item) in items.iter().enumerate() {
                let path = format!("conditions[{}]", i + 1);
                let table = Reader::of(&doc, item, path)?;
                conditions.push(condition(&table, i + 1, doc.pos(item.span()))?);
            }
        }
        let flags = match root.get("flags") {
            Some((_, node)) => flag_thresholds(&root.child(node, "flags")?)?,
            None => FlagThresholds::default(),
        };

        let mut rules = RuleSet {
            columns,
            conditions,
            flags,
            names: Vec::new(),
        };
        rules.check_ids()?;
        let mut refs: Vec<&ColumnRef> = rules.column_refs().collect();
        refs.sort_by_key(|r| (r.pos.line, r.pos.column));
        let mut seen = HashSet::new();
        let names = refs
            .into_iter()
            .filter(|r| seen.insert(r.name.as_str()))
            .map(|r| r.name.clone())
            .collect();
        rules.names = names;
        Ok(rules)
    }

    /// The id of every rule the file declares, in file order within columns then
    /// conditions: `ph.type`, `ph.hard`, …, then each condition's id.
    ///
    /// ```
    /// use emend::checks::RuleSet;
    /// let rules = RuleSet::parse("[columns.ph]\nhard = { min = 0, max = 14 }\n").unwrap();
    /// assert_eq!(rules.rule_ids(), ["ph.hard"]);
    /// ```
    pub fn rule_ids(&self) -> Vec<String> {
        let mut ids = Vec::new();
        for c in &self.columns {
            let declared = [
                c.value_type.is_some(),
                c.required.is_some(),
                c.unique.is_some(),
                c.levels.is_some(),
                c.pattern.is_some(),
                c.hard.is_some(),
                c.soft.is_some(),
            ];
            for (kind, _) in ColumnRules::KINDS.iter().zip(declared).filter(|(_, d)| *d) {
                ids.push(format!("{}.{kind}", c.column.name));
            }
        }
        ids.extend(self.conditions.iter().map(|c| c.id.clone()));
        ids
    }

    /// Every column the rules name (column tables, condition clauses and `value_of`), each
    /// once, in order of first mention in the file.
    pub fn columns(&self) -> impl Iterator<Item = &str> {
        self.names.iter().map(String::as_str)
    }

    /// Every place a column is named, in no particular order.
    pub(crate) fn column_refs(&self) -> impl Iterator<Item = &ColumnRef> {
        let in_columns = self.columns.iter().map(|c| &c.column);
        let in_conditions = self.conditions.iter().flat_map(|c| {
            c.when.iter().chain(&c.then).flat_map(|clause| {
                let other = match &clause.operand {
                    Operand::Column(other) => Some(other),
                    _ => None,
                };
                std::iter::once(&clause.column).chain(other)
            })
        });
        in_columns.chain(in_conditions)
    }

    /// The rules of `column`, when it has a `[columns.NAME]` table.
    pub(crate) fn column_rules(&self, column: &str) -> Option<&ColumnRules> {
        self.columns.iter().find(|c| c.column.name == column)
    }

    /// Refuses a condition id that repeats another rule's id.
    fn check_ids(&self) -> Result<(), RuleError> {
        let mut ids: HashSet<String> = HashSet::new();
        for column in &self.columns {
            for kind in ColumnRules::KINDS {
                ids.insert(format!("{}.{kind}", column.column.name));
            }
        }
        for condition in &self.conditions {
            if !ids.insert(condition.id.clone()) {
                let message = format!("rule id `{}` is used twice", condition.id);
                let (pos, key) = &condition.id_at;
                return Err(pos.error(Some(key), message));
            }
        }
        Ok(())
    }
}

impl ColumnRules {
    /// The rule kinds of a column table, in the order they are reported.
    pub(crate) const KINDS: [&'static str; 7] = [
        "type", "required", "unique", "levels", "pattern", "hard", "soft",
    ];
}

/// The rules file text, for turning byte spans into lines.
struct Doc<'t> {
    text: &'t str,
}

impl Doc<'_> {
    fn pos(&self, span: Range<usize>) -> Pos {
        Pos::at(self.text, span.start)
    }

    fn error(&self, span: Range<usize>, key: &str, message: impl Into<String>) -> RuleError {
        let key = (!key.is_empty()).then_some(key);
        self.pos(span).error(key, message)
    }

    fn wrong_type(&self, node: &Node<'_>, key: &str, expected: &str) -> RuleError {
        let found = node.get_ref().type_str();
        self.error(
            node.span(),
            key,
            format!("expected {expected}, found {}", article(found)),
        )
    }

    fn string<'n>(&self, node: &'n Node<'_>, key: &str) -> Result<&'n str, RuleError> {
        node.get_ref()
            .as_str()
            .ok_or_else(|| self.wrong_type(node, key, "a string"))
    }

    fn boolean(&self, node: &Node<'_>, key: &str) -> Result<bool, RuleError> {
        node.get_ref()
            .as_bool()
            .ok_or_else(|| self.wrong_type(node, key, "true or false"))
    }

    fn number(&self, node: &Node<'_>, key: &str) -> Result<f64, RuleError> {
        let value = match node.get_ref() {
            DeValue::Integer(i) => i64::from_str_radix(i.as_str(), i.radix())
                .ok()
                .map(|i| i as f64),
            DeValue::Float(f) => f.as_str().parse::<f64>().ok().filter(|x| x.is_finite()),
            _ => return Err(self.wrong_type(node, key, "a number")),
        };
        value.ok_or_else(|| self.error(node.span(), key, "expected a finite number"))
    }

    fn array<'n, 'i>(
        &self,
        node: &'n Node<'i>,
        key: &str,
        expected: &str,
    ) -> Result<&'n [Node<'i>], RuleError> {
        match node.get_ref() {
            DeValue::Array(items) => Ok(items),
            _ => Err(self.wrong_type(node, key, expected)),
        }
    }

    /// An array of strings or integers, read as trimmed text (`levels`, `missing_codes`):
    /// cells are compared after trimming, so untrimmed entries could never match.
    fn text_list(&self, node: &Node<'_>, key: &str) -> Result<Vec<String>, RuleError> {
        let items = self.array(node, key, "an array of strings")?;
        items
            .iter()
            .map(|item| match item.get_ref() {
                DeValue::String(s) => Ok(s.trim().to_owned()),
                DeValue::Integer(i) => i64::from_str_radix(i.as_str(), i.radix())
                    .map(|n| n.to_string())
                    .map_err(|_| self.error(item.span(), key, "integer out of range")),
                _ => Err(self.wrong_type(item, key, "a string or an integer")),
            })
            .collect()
    }

    /// A literal for a condition clause.
    fn literal(&self, node: &Node<'_>, key: &str) -> Result<Literal, RuleError> {
        Ok(match node.get_ref() {
            DeValue::String(s) => Literal {
                text: s.to_string(),
                domain: None,
            },
            DeValue::Integer(_) | DeValue::Float(_) => Literal {
                text: format_number(self.number(node, key)?),
                domain: Some(Domain::Number),
            },
            DeValue::Boolean(b) => Literal {
                text: b.to_string(),
                domain: Some(Domain::Bool),
            },
            DeValue::Datetime(_) => Literal {
                text: self.toml_date(node, key)?.to_string(),
                domain: Some(Domain::Date),
            },
            _ => return Err(self.wrong_type(node, key, "a string, number, boolean or date")),
        })
    }

    /// A TOML local date (`2024-05-01` without quotes).
    fn toml_date(&self, node: &Node<'_>, key: &str) -> Result<Date, RuleError> {
        let not_a_date =
            || self.error(node.span(), key, "expected a date without a time or offset");
        let DeValue::Datetime(dt) = node.get_ref() else {
            return Err(not_a_date());
        };
        match (dt.date, dt.time, dt.offset) {
            (Some(d), None, None) => Date::new(d.year, d.month, d.day).ok_or_else(not_a_date),
            _ => Err(not_a_date()),
        }
    }
}

/// A spanned TOML value.
type Node<'i> = Spanned<DeValue<'i>>;

/// One TOML table being read, with its dotted path for error messages.
struct Reader<'d, 'a, 'i> {
    doc: &'d Doc<'d>,
    table: &'a DeTable<'i>,
    path: String,
    /// Where the table itself is written, for errors about an empty table.
    span: Range<usize>,
}

impl<'d, 'a, 'i> Reader<'d, 'a, 'i> {
    /// Reads `node` as a table at `path`.
    fn of(doc: &'d Doc<'d>, node: &'a Node<'i>, path: String) -> Result<Self, RuleError> {
        match node.get_ref() {
            DeValue::Table(table) => Ok(Reader {
                doc,
                table,
                path,
                span: node.span(),
            }),
            _ => Err(doc.wrong_type(node, &path, "a table")),
        }
    }

    /// Reads the value of `key` in this table as a table.
    fn child(&self, node: &'a Node<'i>, key: &str) -> Result<Reader<'d, 'a, 'i>, RuleError> {
        Reader::of(self.doc, node, self.key(key))
    }

    /// The dotted path of `key` in this table.
    fn key(&self, key: &str) -> String {
        let bare = !key.is_empty()
            && key
                .bytes()
                .all(|b| b.is_ascii_alphanumeric() || b == b'_' || b == b'-');
        let key = if bare {
            key.to_owned()
        } else {
            format!("{key:?}")
        };
        if self.path.is_empty() {
            key
        } else {
            format!("{}.{key}", self.path)
        }
    }

    /// The entries in the order they appear in the file.
    fn entries(&self) -> Vec<(&'a Spanned<DeString<'i>>, &'a Node<'i>)> {
        let mut entries: Vec<_> = self.table.iter().collect();
        entries.sort_by_key(|(key, _)| key.span().start);
        entries
    }

    /// Refuses the first key (in file order) that is not in `allowed`.
    fn allow(&self, allowed: &[&str]) -> Result<(), RuleError> {
        for (key, _) in self.entries() {
            if !allowed.contains(&key.get_ref().as_ref()) {
                let message = format!("unknown key; expected one of: {}", allowed.join(", "));
                return Err(self
                    .doc
                    .error(key.span(), &self.key(key.get_ref()), message));
            }
        }
        Ok(())
    }

    /// The key and value of `key`, when present.
    fn get(&self, key: &str) -> Option<(&'a Spanned<DeString<'i>>, &'a Node<'i>)> {
        self.table.get_key_value(key)
    }

    /// The place of the whole table (its header, or its first key for dotted tables).
    fn first_pos(&self) -> Option<Pos> {
        // An empty table (`hard = {}`) has no first key: name where the table is written.
        // (Found by fuzzing: the error used to say line 0.)
        self.entries()
            .first()
            .map(|(key, _)| self.doc.pos(key.span()))
            .or_else(|| Some(self.doc.pos(self.span.clone())))
    }
}

/// One `[columns.NAME]` table.
fn column_rules(
    columns: &Reader<'_, '_, '_>,
    key: &Spanned<DeString<'_>>,
    node: &Node<'_>,
) -> Result<ColumnRules, RuleError> {
    let doc = columns.doc;
    let name = key.get_ref().to_string();
    let table = columns.child(node, &name)?;
    table.allow(&[
        "type",
        "required",
        "unique",
        "levels",
        "pattern",
        "hard",
        "soft",
        "missing_codes",
    ])?;
    let at = |key: &Spanned<DeString<'_>>| doc.pos(key.span());
    let mut rules = ColumnRules {
        column: ColumnRef {
            name: name.clone(),
            pos: doc.pos(key.span()),
            key: table.path.clone(),
        },
        value_type: None,
        required: None,
        unique: None,
        levels: None,
        pattern: None,
        hard: None,
        soft: None,
        missing_codes: Vec::new(),
    };
    if let Some((k, v)) = table.get("type") {
        let path = table.key("type");
        let word = doc.string(v, &path)?;
        let value = ValueType::from_word(word).ok_or_else(|| {
            let message = format!(
                "unknown type `{word}`; expected one of: {}",
                ValueType::WORDS
            );
            doc.error(v.span(), &path, message)
        })?;
        rules.value_type = Some(Located { value, pos: at(k) });
    }
    if let Some((k, v)) = table.get("required") {
        rules.required = doc.boolean(v, &table.key("required"))?.then(|| at(k));
    }
    if let Some((k, v)) = table.get("unique") {
        rules.unique = doc.boolean(v, &table.key("unique"))?.then(|| at(k));
    }
    if let Some((k, v)) = table.get("levels") {
        let path = table.key("levels");
        let value = doc.text_list(v, &path)?;
        if value.is_empty() {
            return Err(doc.error(
                v.span(),
                &path,
                "levels is empty; list at least one allowed value",
            ));
        }
        rules.levels = Some(Located { value, pos: at(k) });
    }
    if let Some((k, v)) = table.get("pattern") {
        let path = table.key("pattern");
        let source = doc.string(v, &path)?.to_owned();
        let regex = Regex::new(&format!("^(?:{source})$")).map_err(|err| {
            doc.error(
                v.span(),
                &path,
                format!("pattern does not compile: {}", regex_message(&err)),
            )
        })?;
        rules.pattern = Some(Located {
            value: Pattern { source, regex },
            pos: at(k),
        });
    }
    if let Some((_, v)) = table.get("missing_codes") {
        rules.missing_codes = doc.text_list(v, &table.key("missing_codes"))?;
    }
    let declared = rules.value_type.as_ref().map(|t| t.value);
    for (name, severity_word) in [("hard", "hard"), ("soft", "soft")] {
        let Some((k, v)) = table.get(name) else {
            continue;
        };
        let bounds_table = table.child(v, name)?;
        let bounds = bounds(&bounds_table, declared)?;
        let located = Some(Located {
            value: bounds,
            pos: at(k),
        });
        if severity_word == "hard" {
            rules.hard = located;
        } else {
            rules.soft = located;
        }
    }
    if let (Some(hard), Some(soft)) = (&rules.hard, &rules.soft)
        && std::mem::discriminant(&hard.value) != std::mem::discriminant(&soft.value)
    {
        let message = "hard and soft bounds must both be numbers or both be dates";
        return Err(soft.pos.error(Some(&table.key("soft")), message));
    }
    Ok(rules)
}

/// A `hard` or `soft` table: `min`, `max` or both.
fn bounds(table: &Reader<'_, '_, '_>, declared: Option<ValueType>) -> Result<Bounds, RuleError> {
    let doc = table.doc;
    table.allow(&["min", "max"])?;
    let read = |key: &str| -> Result<Option<(Bound, Range<usize>)>, RuleError> {
        let Some((_, v)) = table.get(key) else {
            return Ok(None);
        };
        let path = table.key(key);
        let bound = match v.get_ref() {
            DeValue::Integer(_) | DeValue::Float(_) => Bound::Number(doc.number(v, &path)?),
            DeValue::Datetime(_) => Bound::Date(doc.toml_date(v, &path)?),
            DeValue::String(s) => Bound::Date(Date::parse_iso(s).ok_or_else(|| {
                doc.error(
                    v.span(),
                    &path,
                    format!("expected a number or a date written \"yyyy-mm-dd\", found \"{s}\""),
                )
            })?),
            _ => return Err(doc.wrong_type(v, &path, "a number or a date")),
        };
        let wanted = declared.map(ValueType::domain);
        let fits = matches!(
            (wanted, &bound),
            (None, _)
                | (Some(Domain::Number), Bound::Number(_))
                | (Some(Domain::Date), Bound::Date(_))
        );
        if !fits {
            let message = match wanted {
                Some(Domain::Number) => "a number column needs number bounds".to_owned(),
                Some(Domain::Date) => {
                    "a date column needs date bounds written \"yyyy-mm-dd\"".to_owned()
                }
                _ => "bounds apply only to integer, decimal and date columns".to_owned(),
            };
            return Err(doc.error(v.span(), &path, message));
        }
        Ok(Some((bound, v.span())))
    };
    let min = read("min")?;
    let max = read("max")?;
    let here = || table.first_pos().unwrap_or_default();
    let bounds = match (min, max) {
        (None, None) => {
            return Err(here().error(Some(&table.path), "give min, max or both"));
        }
        (Some((Bound::Number(_), _)), Some((Bound::Date(_), span)))
        | (Some((Bound::Date(_), _)), Some((Bound::Number(_), span))) => {
            let message = "min and max must both be numbers or both be dates";
            return Err(doc.error(span, &table.key("max"), message));
        }
        (min, max) => {
            let number = |b: &Option<(Bound, Range<usize>)>| match b {
                Some((Bound::Number(x), _)) => Some(*x),
                _ => None,
            };
            let date = |b: &Option<(Bound, Range<usize>)>| match b {
                Some((Bound::Date(d), _)) => Some(*d),
                _ => None,
            };
            let is_date = matches!(min, Some((Bound::Date(_), _)))
                || matches!(max, Some((Bound::Date(_), _)));
            if is_date {
                Bounds::Date {
                    min: date(&min),
                    max: date(&max),
                }
            } else {
                Bounds::Number {
                    min: number(&min),
                    max: number(&max),
                }
            }
        }
    };
    let inverted = match bounds {
        Bounds::Number {
            min: Some(lo),
            max: Some(hi),
        } => (lo > hi).then(|| (format_number(lo), format_number(hi))),
        Bounds::Date {
            min: Some(lo),
            max: Some(hi),
        } => (lo > hi).then(|| (lo.to_string(), hi.to_string())),
        _ => None,
    };
    if let Some((lo, hi)) = inverted {
        return Err(here().error(Some(&table.path), format!("min {lo} is above max {hi}")));
    }
    Ok(bounds)
}

/// One bound as read, before `min` and `max` are paired.
enum Bound {
    Number(f64),
    Date(Date),
}

/// One `[[conditions]]` entry; `number` is its 1-based place.
fn condition(table: &Reader<'_, '_, '_>, number: usize, pos: Pos) -> Result<Condition, RuleError> {
    let doc = table.doc;
    table.allow(&["id", "description", "severity", "when", "then"])?;
    let id_key = table.key("id");
    let (id, id_pos) = match table.get("id") {
        Some((_, v)) => {
            let id = doc.string(v, &id_key)?;
            if id.is_empty() || id.chars().any(char::is_whitespace) {
                let message = "an id must be non-empty and have no spaces";
                return Err(doc.error(v.span(), &id_key, message));
            }
            (id.to_owned(), doc.pos(v.span()))
        }
        None => (format!("when#{number}"), pos),
    };
    let description = match table.get("description") {
        Some((_, v)) => {
            let path = table.key("description");
            let text = doc.string(v, &path)?;
            if text.contains('\n') {
                return Err(doc.error(v.span(), &path, "a description must be one line"));
            }
            Some(text.to_owned())
        }
        None => None,
    };
    let severity = match table.get("severity") {
        Some((_, v)) => {
            let path = table.key("severity");
            match doc.string(v, &path)? {
                "error" => Severity::Error,
                "warning" => Severity::Warning,
                other => {
                    let message =
                        format!("unknown severity `{other}`; expected one of: error, warning");
                    return Err(doc.error(v.span(), &path, message));
                }
            }
        }
        None => Severity::Error,
    };
    let mut sides = [Vec::new(), Vec::new()];
    for (side, name) in sides.iter_mut().zip(["when", "then"]) {
        let path = table.key(name);
        let Some((_, v)) = table.get(name) else {
            return Err(pos.error(Some(&table.path), format!("missing key `{name}`")));
        };
        let nodes: Vec<&Node<'_>> = match v.get_ref() {
            DeValue::Table(_) => vec![v],
            DeValue::Array(items) if !items.is_empty() => items.iter().collect(),
            DeValue::Array(_) => {
                return Err(doc.error(v.span(), &path, "expected at least one clause"));
            }
            _ => return Err(doc.wrong_type(v, &path, "a table or an array of tables")),
        };
        for (i, node) in nodes.into_iter().enumerate() {
            let clause_path = if matches!(v.get_ref(), DeValue::Array(_)) {
                format!("{path}[{}]", i + 1)
            } else {
                path.clone()
            };
            side.push(clause(&Reader::of(doc, node, clause_path)?)?);
        }
    }
    let [when, then] = sides;
    Ok(Condition {
        id,
        id_at: (id_pos, id_key),
        description,
        severity,
        pos,
        when,
        then,
    })
}

/// One clause: `{ column = "...", test = "...", value = ... }` or `value_of = "..."`.
fn clause(table: &Reader<'_, '_, '_>) -> Result<Clause, RuleError> {
    let doc = table.doc;
    table.allow(&["column", "test", "value", "value_of"])?;
    let here = table.first_pos().unwrap_or_default();
    let required = |key: &str| {
        table
            .get(key)
            .ok_or_else(|| here.error(Some(&table.path), format!("missing key `{key}`")))
    };
    let (_, column_node) = required("column")?;
    let column_path = table.key("column");
    let column = ColumnRef {
        name: doc.string(column_node, &column_path)?.to_owned(),
        pos: doc.pos(column_node.span()),
        key: column_path,
    };
    let (_, test_node) = required("test")?;
    let test_path = table.key("test");
    let word = doc.string(test_node, &test_path)?;
    let test = Test::from_word(word).ok_or_else(|| {
        let message = format!(
            "unknown comparison `{word}`; expected one of: {}",
            Test::WORDS
        );
        doc.error(test_node.span(), &test_path, message)
    })?;
    let value = table.get("value").map(|(_, v)| v);
    let value_of = table.get("value_of").map(|(_, v)| v);
    let value_path = table.key("value");
    let operand = match (test, value, value_of) {
        (Test::IsMissing | Test::IsPresent, None, None) => Operand::Nothing,
        (Test::IsMissing | Test::IsPresent, Some(v), _)
        | (Test::IsMissing | Test::IsPresent, None, Some(v)) => {
            let message = format!("`{}` takes no value", test.word());
            return Err(doc.error(v.span(), &test_path, message));
        }
        (_, Some(_), Some(v)) => {
            return Err(doc.error(
                v.span(),
                &table.key("value_of"),
                "give value or value_of, not both",
            ));
        }
        (_, None, None) => {
            let message = format!("`{}` needs a value or value_of", test.word());
            return Err(here.error(Some(&table.path), message));
        }
        (Test::In, Some(v), None) => {
            let items = doc.array(v, &value_path, "an array of values for `one of`")?;
            if items.is_empty() {
                return Err(doc.error(
                    v.span(),
                    &value_path,
                    "expected at least one value for `one of`",
                ));
            }
            let literals = items
                .iter()
                .map(|item| doc.literal(item, &value_path))
                .collect::<Result<Vec<_>, _>>()?;
            Operand::Values(literals)
        }
        (Test::In, None, Some(v)) => {
            return Err(doc.error(
                v.span(),
                &table.key("value_of"),
                "`one of` needs a list in value",
            ));
        }
        (_, Some(v), None) => {
            let literal = doc.literal(v, &value_path)?;
            if test.orders() && literal.domain == Some(Domain::Bool) {
                let message = format!(
                    "booleans have no order, so `{}` cannot compare them; use eq or ne",
                    test.word()
                );
                return Err(doc.error(v.span(), &value_path, message));
            }
            Operand::Value(literal)
        }
        (_, None, Some(v)) => {
            let path = table.key("value_of");
            Operand::Column(ColumnRef {
                name: doc.string(v, &path)?.to_owned(),
                pos: doc.pos(v.span()),
                key: path,
            })
        }
    };
    Ok(Clause {
        column,
        test,
        operand,
    })
}

/// The `[flags]` table.
fn flag_thresholds(table: &Reader<'_, '_, '_>) -> Result<FlagThresholds, RuleError> {
    let doc = table.doc;
    table.allow(&["mostly_missing", "near_constant"])?;
    let read = |key: &str| -> Result<Option<Located<f64>>, RuleError> {
        let Some((k, v)) = table.get(key) else {
            return Ok(None);
        };
        let path = table.key(key);
        let share = doc.number(v, &path)?;
        if !(0.0..=1.0).contains(&share) {
            return Err(doc.error(
                v.span(),
                &path,
                format!(
                    "a share lies between 0 and 1, found {}",
                    format_number(share)
                ),
            ));
        }
        Ok(Some(Located {
            value: share,
            pos: doc.pos(k.span()),
        }))
    };
    Ok(FlagThresholds {
        mostly_missing: read("mostly_missing")?,
        near_constant: read("near_constant")?,
    })
}

/// "a string", "an integer", "an array".
fn article(word: &str) -> String {
    let vowel = word.starts_with(['a', 'e', 'i', 'o', 'u']);
    format!("{} {word}", if vowel { "an" } else { "a" })
}

/// A number as short as it reads back exactly: `14`, `5.5`.
pub(crate) fn format_number(x: f64) -> String {
    format!("{x}")
}

/// The one-line reason of a regex error (its `Display` spans several lines).
fn regex_message(err: &regex::Error) -> String {
    let text = err.to_string();
    text.lines()
        .rev()
        .find_map(|line| line.trim().strip_prefix("error: "))
        .map_or_else(
            || text.lines().next().unwrap_or_default().to_owned(),
            str::to_owned,
        )
}

#[cfg(test)]
mod tests {
    #[test]
    fn an_empty_bounds_table_names_its_line() {
        // Found by fuzzing (fuzz/fuzz_targets/rules_parser.rs): the error said line 0.
        let err = super::RuleSet::parse("[columns.ph]\nhard ={ }\n").unwrap_err();
        assert_eq!(err.line, 2, "{err}");
        assert!(err.to_string().contains("give min, max or both"));
    }

    use super::*;

    /// Parses `text` and asserts the error's `Display`.
    fn check_err(text: &str, expected: &str) {
        match RuleSet::parse(text) {
            Ok(_) => panic!("parsed, expected: {expected}"),
            Err(err) => assert_eq!(err.to_string(), expected, "for {text:?}"),
        }
    }

    #[test]
    fn unknown_keys_name_line_and_key() {
        check_err(
            "[columns.ph]\ntype = \"decimal\"\nmaximum = 14\n",
            "line 3, key columns.ph.maximum: unknown key; expected one of: type, required, unique, \
             levels, pattern, hard, soft, missing_codes",
        );
        check_err(
            "# rules\n[colums.ph]\n",
            "line 2, key colums: unknown key; expected one of: columns, conditions, flags",
        );
        check_err(
            "[columns.ph]\nhard = { min = 0, maxi = 14 }\n",
            "line 2, key columns.ph.hard.maxi: unknown key; expected one of: min, max",
        );
        check_err(
            "[[conditions]]\nwhen = { column = \"a\", test = \"is missing\" }\n\
             then = { column = \"b\", op = \"is missing\" }\n",
            "line 3, key conditions[1].then.op: unknown key; expected one of: column, test, value, value_of",
        );
        check_err(
            "[flags]\nmostly_missing = 0.5\nconstant = 1\n",
            "line 3, key flags.constant: unknown key; expected one of: mostly_missing, near_constant",
        );
        check_err(
            "[columns.\"water temp\"]\nunit = \"C\"\n",
            "line 2, key columns.\"water temp\".unit: unknown key; expected one of: type, required, \
             unique, levels, pattern, hard, soft, missing_codes",
        );
    }

    #[test]
    fn wrong_types_name_line_and_key() {
        check_err(
            "[columns.site]\nrequired = \"yes\"\n",
            "line 2, key columns.site.required: expected true or false, found a string",
        );
        check_err(
            "columns = 3\n",
            "line 1, key columns: expected a table, found an integer",
        );
        check_err(
            "[columns.site]\nlevels = \"A\"\n",
            "line 2, key columns.site.levels: expected an array of strings, found a string",
        );
        check_err(
            "[columns.site]\nlevels = [\"A\", 1.5]\n",
            "line 2, key columns.site.levels: expected a string or an integer, found a float",
        );
        check_err(
            "[columns.ph]\ntype = \"float\"\n",
            "line 2, key columns.ph.type: unknown type `float`; expected one of: integer, decimal, \
             date, boolean, text",
        );
        check_err(
            "[columns.ph]\nhard = { min = \"zero\" }\n",
            "line 2, key columns.ph.hard.min: expected a number or a date written \"yyyy-mm-dd\", \
             found \"zero\"",
        );
        check_err(
            "[columns.ph]\ntype = \"decimal\"\nsoft = { max = 2020-01-01 }\n",
            "line 3, key columns.ph.soft.max: a number column needs number bounds",
        );
        check_err(
            "[columns.on]\ntype = \"date\"\nhard = { min = 0 }\n",
            "line 3, key columns.on.hard.min: a date column needs date bounds written \"yyyy-mm-dd\"",
        );
        check_err(
            "[columns.w]\ntype = \"text\"\nhard = { min = 0 }\n",
            "line 3, key columns.w.hard.min: bounds apply only to integer, decimal and date columns",
        );
        check_err(
            "[flags]\nnear_constant = 95\n",
            "line 2, key flags.near_constant: a share lies between 0 and 1, found 95",
        );
        check_err(
            "[[conditions]]\nseverity = \"fatal\"\n",
            "line 2, key conditions[1].severity: unknown severity `fatal`; expected one of: error, warning",
        );
    }

    #[test]
    fn bad_regex_names_line_and_key() {
        check_err(
            "[columns.id]\n\npattern = 'RM-([0-9]{5}'\n",
            "line 3, key columns.id.pattern: pattern does not compile: unclosed group",
        );
    }

    #[test]
    fn inverted_and_empty_bounds_are_refused() {
        check_err(
            "[columns.ph]\nhard = { min = 14, max = 0 }\n",
            "line 2, key columns.ph.hard: min 14 is above max 0",
        );
        check_err(
            "[columns.on]\n[columns.on.soft]\nmin = \"2020-01-02\"\nmax = 2020-01-01\n",
            "line 3, key columns.on.soft: min 2020-01-02 is above max 2020-01-01",
        );
        check_err(
            "[columns.x]\nhard = { min = 0, max = \"2020-01-01\" }\n",
            "line 2, key columns.x.hard.max: min and max must both be numbers or both be dates",
        );
        check_err(
            "[columns.x]\nhard = { min = 0 }\nsoft = { max = \"2020-01-01\" }\n",
            "line 3, key columns.x.soft: hard and soft bounds must both be numbers or both be dates",
        );
        assert!(RuleSet::parse("[columns.ph]\nhard = { min = 7, max = 7 }\n").is_ok());
    }

    #[test]
    fn condition_mistakes_name_line_and_key() {
        let when = "when = { column = \"a\", test = \"is present\" }\n";
        check_err(
            &format!(
                "[[conditions]]\n{when}then = {{ column = \"b\", test = \">=\", value = 1 }}\n"
            ),
            "line 3, key conditions[1].then.test: unknown comparison `>=`; expected one of: \
             equals, not, below, at most, above, at least, one of, is missing, is present",
        );
        check_err(
            "[[conditions]]\nwhen = { column = \"a\", test = \"missing\" }\n",
            "line 2, key conditions[1].when.test: unknown comparison `missing`; expected one of: \
             equals, not, below, at most, above, at least, one of, is missing, is present",
        );
        check_err(
            &format!(
                "[[conditions]]\n{when}then = {{ column = \"b\", test = \"is missing\", value = 1 }}\n"
            ),
            "line 3, key conditions[1].then.test: `is missing` takes no value",
        );
        check_err(
            &format!("[[conditions]]\n{when}then = {{ column = \"b\", test = \"ge\" }}\n"),
            "line 3, key conditions[1].then: `at least` needs a value or value_of",
        );
        check_err(
            &format!(
                "[[conditions]]\n{when}then = {{ column = \"b\", test = \"ge\", value = 1, value_of = \"c\" }}\n"
            ),
            "line 3, key conditions[1].then.value_of: give value or value_of, not both",
        );
        check_err(
            &format!(
                "[[conditions]]\n{when}then = {{ column = \"b\", test = \"in\", value = \"x\" }}\n"
            ),
            "line 3, key conditions[1].then.value: expected an array of values for `one of`, found a string",
        );
        check_err(
            &format!(
                "[[conditions]]\n{when}then = {{ column = \"b\", test = \"lt\", value = true }}\n"
            ),
            "line 3, key conditions[1].then.value: booleans have no order, so `below` cannot compare \
             them; use eq or ne",
        );
        check_err(
            &format!("[[conditions]]\n{when}"),
            "line 1, key conditions[1]: missing key `then`",
        );
        check_err(
            &format!("[[conditions]]\n{when}then = []\n"),
            "line 3, key conditions[1].then: expected at least one clause",
        );
        check_err(
            &format!("[[conditions]]\n{when}then = {{ test = \"is missing\" }}\n"),
            "line 3, key conditions[1].then: missing key `column`",
        );
        check_err(
            &format!(
                "[[conditions]]\nid = \"x\"\n{when}then = {when}\
                 [[conditions]]\nid = \"x\"\n{when}then = {when}"
            )
            .replace("then = when = ", "then = "),
            "line 6, key conditions[2].id: rule id `x` is used twice",
        );
    }

    #[test]
    fn toml_syntax_errors_name_the_line() {
        check_err(
            "[columns.ph]\ntype = \"decimal\n",
            "line 2: invalid basic string, expected `\"`",
        );
        check_err(
            "[columns.ph]\nrequired = true\nrequired = false\n",
            "line 3: duplicate key",
        );
    }

    #[test]
    fn columns_lists_every_named_column_once_in_file_order() {
        let rules = RuleSet::parse(
            "[columns.b]\nrequired = true\n[columns.a]\n\
             [[conditions]]\nwhen = { column = \"c\", test = \"is present\" }\n\
             then = [{ column = \"a\", test = \"ge\", value_of = \"d\" }]\n",
        )
        .unwrap();
        assert_eq!(rules.columns().collect::<Vec<_>>(), ["b", "a", "c", "d"]);
        assert_eq!(RuleSet::parse("").unwrap().columns().count(), 0);
    }

    #[test]
    fn literals_keep_their_toml_type() {
        let rules = RuleSet::parse(
            "[[conditions]]\nwhen = { column = \"a\", test = \"in\", value = [1, 2.5, true, \"x\", 2020-01-02] }\n\
             then = { column = \"a\", test = \"is present\" }\n",
        )
        .unwrap();
        let Operand::Values(values) = &rules.conditions[0].when[0].operand else {
            panic!("in takes a list");
        };
        let found: Vec<_> = values.iter().map(|l| (l.text.as_str(), l.domain)).collect();
        assert_eq!(
            found,
            [
                ("1", Some(Domain::Number)),
                ("2.5", Some(Domain::Number)),
                ("true", Some(Domain::Bool)),
                ("x", None),
                ("2020-01-02", Some(Domain::Date)),
            ]
        );
    }
}
