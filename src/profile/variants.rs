//! Level variants across every level of a column: spacing, case, punctuation, lost spaces,
//! legal-form suffixes, abbreviations and rare misspellings of a frequent form.
//!
//! Precision comes first: an analyst who is offered one wrong merge stops trusting all of them.
//! So a group is only *certain* (offered as a ready `recode`) when the spellings differ in
//! nothing that could tell two things apart: letter case, diacritics, punctuation or spacing
//! ([`fold_key`]), or a lost space when one side is rare against a frequent form. Everything
//! else is a finding to review, and a pair is not even offered for review when the difference
//! is a distinct token (a digit, a one-letter code suffix, a direction word, a whole word).
//!
//! The method is the usual one of record linkage: exact blocking on normalisation keys, then
//! candidate pairs compared by edit distance (Levenshtein 1966) within blocks, here the rare
//! levels of a column against its frequent ones, so the work is near-linear in the levels.
//! Fellegi and Sunter (1969) and Christen, *Data Matching* (Springer, 2012), describe blocking
//! and comparison this way (from memory). The thresholds are our own choices, checked on the
//! labelled corpus in `bench/findings/`.

use std::collections::HashMap;

use serde::{Deserialize, Serialize};

use super::levels::{LevelCount, LevelGroup, fold_key, levenshtein};

/// How the spellings of a group differ.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum VariantBasis {
    /// Only in letter case, diacritics, punctuation or spacing.
    Fold,
    /// A space lost or added between words, one side rare.
    Joined,
    /// A legal-form suffix (`Inc`, `Ltd`, `Corporation`, …) added or dropped.
    LegalForm,
    /// A common abbreviation (`St` / `Saint`, `Mt` / `Mount`, `Ft` / `Fort`).
    Abbreviation,
    /// One word misspelt by one or two edits, rare against a frequent form.
    Misspelling,
}

impl VariantBasis {
    /// Words for people.
    pub fn phrase(self) -> &'static str {
        match self {
            VariantBasis::Fold => "differ only in case, accents, punctuation or spacing",
            VariantBasis::Joined => "differ only by a lost space",
            VariantBasis::LegalForm => "differ only by a legal-form suffix",
            VariantBasis::Abbreviation => "differ only by a common abbreviation",
            VariantBasis::Misspelling => "differ by one misspelt word, and are rare",
        }
    }

    /// Whether a merge is near-certain from the text alone.
    pub fn certain(self) -> bool {
        matches!(self, VariantBasis::Fold | VariantBasis::Joined)
    }
}

/// A level whose spacing or punctuation is off, and the same text written cleanly.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Respelling {
    /// The value as written.
    pub from: String,
    /// The value cleaned.
    pub to: String,
    /// How many cells hold it.
    pub count: u64,
}

/// A frequent level holds at least this many cells before a rare one is measured against it.
const FREQUENT_MIN: u64 = 20;
/// A rare variant holds at most this many cells.
const RARE_MAX: u64 = 3;
/// And at most this share of its frequent form.
const RARE_RATIO: u64 = 20;

/// Words that name a direction or side: two names that differ by one of them are two places
/// or two species (North Fork / South Fork, Eastern / Western meadowlark).
const DIRECTION_WORDS: &[&str] = &[
    "north",
    "south",
    "east",
    "west",
    "northern",
    "southern",
    "eastern",
    "western",
    "upper",
    "lower",
    "inner",
    "outer",
    "left",
    "right",
    "old",
    "new",
    "great",
    "little",
    "big",
    "small",
    "northeast",
    "northwest",
    "southeast",
    "southwest",
    "ne",
    "nw",
    "se",
    "sw",
    "n",
    "s",
    "e",
    "w",
];

/// Legal-form words at the end of an organisation's name (common practice in name
/// standardisation for record linkage; from memory).
const LEGAL_FORMS: &[&str] = &[
    "inc",
    "incorporated",
    "corp",
    "corporation",
    "company",
    "ltd",
    "limited",
    "llc",
    "plc",
    "gmbh",
    "ag",
    "sa",
    "spa",
    "srl",
    "bv",
    "nv",
    "industrie",
    "industries",
];

/// Abbreviations and their long forms, from the US Postal Service's Publication 28
/// (Postal Addressing Standards), as remembered.
const ABBREVIATIONS: &[(&str, &str)] = &[("st", "saint"), ("mt", "mount"), ("ft", "fort")];

fn words(key: &str) -> Vec<&str> {
    key.split(' ').filter(|w| !w.is_empty()).collect()
}

fn strip_legal_forms(key: &str) -> String {
    let mut w = words(key);
    while w.len() > 1 && w.last().is_some_and(|l| LEGAL_FORMS.contains(l)) {
        w.pop();
    }
    w.join(" ")
}

fn expand_abbreviations(key: &str) -> String {
    words(key)
        .iter()
        .map(|w| {
            ABBREVIATIONS
                .iter()
                .find(|(short, _)| short == w)
                .map_or(*w, |(_, long)| long)
        })
        .collect::<Vec<_>>()
        .join(" ")
}

/// Whether two folded keys differ in exactly one word, by a misspelling rather than by a
/// distinct token: same number of words, one pair of words differs, neither holds a digit,
/// neither is a direction word, both have at least 4 letters and the same first letter, and
/// they are 1 edit apart (2 from 8 letters on).
fn one_word_misspelt(a: &str, b: &str) -> bool {
    let (wa, wb) = (words(a), words(b));
    if wa.len() != wb.len() || wa.is_empty() {
        return false;
    }
    let differing: Vec<(&str, &str)> = wa
        .iter()
        .zip(&wb)
        .filter(|(x, y)| x != y)
        .map(|(x, y)| (*x, *y))
        .collect();
    let [(x, y)] = differing.as_slice() else {
        return false;
    };
    let letters = |w: &str| w.chars().all(char::is_alphabetic);
    let (nx, ny) = (x.chars().count(), y.chars().count());
    if !letters(x) || !letters(y) || nx.min(ny) < 4 {
        return false;
    }
    if DIRECTION_WORDS.contains(x) || DIRECTION_WORDS.contains(y) {
        return false;
    }
    if x.chars().next() != y.chars().next() {
        return false;
    }
    let allowed = if nx.min(ny) >= 8 { 2 } else { 1 };
    levenshtein(x, y) <= allowed
}

fn group_of(members: Vec<LevelCount>, basis: VariantBasis) -> LevelGroup {
    let mut members = members;
    members.sort_by(|a, b| b.count.cmp(&a.count).then_with(|| a.value.cmp(&b.value)));
    let total = members.iter().map(|m| m.count).sum();
    LevelGroup {
        canonical: members[0].value.clone(),
        members,
        total,
        basis,
    }
}

/// Every variant group among `levels` (text levels with their counts, any number), strongest
/// basis first: a level joins at most one group.
///
/// ```
/// use emend::profile::variants::{find_variants, VariantBasis};
/// let levels = [("Mill Creek", 250), ("mill creek", 3), ("Mill Craek", 1), ("Fox Run", 90)];
/// let groups = find_variants(&levels);
/// assert_eq!(groups[0].basis, VariantBasis::Fold);
/// assert_eq!(groups[0].canonical, "Mill Creek");
/// assert_eq!(groups[1].basis, VariantBasis::Misspelling);
/// ```
pub fn find_variants(levels: &[(&str, u64)]) -> Vec<LevelGroup> {
    let mut out = Vec::new();
    // In a column whose levels mostly occur once (a register of names: towns, airports),
    // every level is its own thing, and two that fold together may still be two places
    // ("St. George" in one state, "St George" in another; "LaFayette" and "Lafayette").
    // Spellings are compared only where values repeat, as categories do.
    let mut counts: Vec<u64> = levels.iter().map(|(_, c)| *c).collect();
    counts.sort_unstable();
    let median = counts.get(counts.len() / 2).copied().unwrap_or(0);
    let repeats = median >= 2;
    let keys: Vec<String> = levels.iter().map(|(v, _)| fold_key(v)).collect();
    let mut taken = vec![false; levels.len()];
    let member = |i: usize| LevelCount {
        value: levels[i].0.to_owned(),
        count: levels[i].1,
    };

    // Blocking by a key: levels that share it form a group when `accept` says so.
    let block = |key_of: &dyn Fn(usize) -> Option<String>,
                 basis: VariantBasis,
                 accept: &dyn Fn(&[usize]) -> bool,
                 taken: &mut Vec<bool>,
                 out: &mut Vec<LevelGroup>| {
        let mut blocks: HashMap<String, Vec<usize>> = HashMap::new();
        for i in 0..levels.len() {
            if taken[i] || keys[i].is_empty() {
                continue;
            }
            if let Some(k) = key_of(i) {
                blocks.entry(k).or_default().push(i);
            }
        }
        let mut found: Vec<Vec<usize>> = blocks
            .into_values()
            .filter(|ix| ix.len() >= 2 && accept(ix))
            .collect();
        found.sort();
        for ix in found {
            for &i in &ix {
                taken[i] = true;
            }
            out.push(group_of(ix.into_iter().map(member).collect(), basis));
        }
    };

    // 1. Case, diacritics, punctuation, spacing.
    block(
        &|i| repeats.then(|| keys[i].clone()),
        VariantBasis::Fold,
        &|_| true,
        &mut taken,
        &mut out,
    );
    // 2. A lost space: only when every other spelling is rare against the most frequent one,
    // since two real names may differ by a space (Easthampton and East Hampton).
    let rare_against_top = |ix: &[usize]| {
        let top = ix.iter().map(|&i| levels[i].1).max().unwrap_or(0);
        top >= FREQUENT_MIN
            && ix
                .iter()
                .filter(|&&i| levels[i].1 != top)
                .all(|&i| levels[i].1 <= RARE_MAX && levels[i].1 * RARE_RATIO <= top)
            && ix.iter().filter(|&&i| levels[i].1 == top).count() == 1
    };
    block(
        &|i| repeats.then(|| keys[i].replace(' ', "")),
        VariantBasis::Joined,
        &rare_against_top,
        &mut taken,
        &mut out,
    );
    // 3. Legal-form suffixes, and 4. abbreviations: to review.
    block(
        &|i| {
            let k = strip_legal_forms(&keys[i]);
            (k.len() >= 3).then_some(k)
        },
        VariantBasis::LegalForm,
        &|ix| ix.iter().any(|&i| strip_legal_forms(&keys[i]) != keys[i]),
        &mut taken,
        &mut out,
    );
    block(
        &|i| repeats.then(|| expand_abbreviations(&keys[i])),
        VariantBasis::Abbreviation,
        &|_| true,
        &mut taken,
        &mut out,
    );

    // 5. Rare misspellings of a frequent form: each rare level against the frequent levels of
    // similar length only.
    let frequent: Vec<usize> = (0..levels.len())
        .filter(|&i| levels[i].1 >= FREQUENT_MIN)
        .collect();
    let mut joined: HashMap<usize, Vec<usize>> = HashMap::new();
    for i in 0..levels.len() {
        let (_, count) = levels[i];
        // A misspelling is rare against what the column's values usually hold, not only
        // against its own frequent form: in a list where most levels are small (counties of a
        // postal register), a rare level is ordinary.
        if !repeats
            || taken[i]
            || count > RARE_MAX
            || count * 10 > median
            || keys[i].chars().count() < 4
        {
            continue;
        }
        let len = keys[i].chars().count();
        let best = frequent
            .iter()
            .copied()
            .filter(|&f| {
                levels[f].1 >= count * RARE_RATIO && keys[f].chars().count().abs_diff(len) <= 2
            })
            .find(|&f| one_word_misspelt(&keys[f], &keys[i]));
        if let Some(f) = best {
            joined.entry(f).or_default().push(i);
        }
    }
    let mut joined: Vec<(usize, Vec<usize>)> = joined.into_iter().collect();
    joined.sort();
    for (f, rare) in joined {
        let mut members = vec![member(f)];
        members.extend(rare.into_iter().map(member));
        out.push(group_of(members, VariantBasis::Misspelling));
    }
    out.sort_by(|a, b| {
        (!a.basis.certain(), b.total, &a.canonical).cmp(&(
            !b.basis.certain(),
            a.total,
            &b.canonical,
        ))
    });
    out
}

/// A hyphen between words spaced on one side only ("Campbell -Corsicana") gets a space on
/// both ("Campbell - Corsicana"); hyphens inside words ("Aberdeen-Amory") and signs of
/// numbers ("-5") are left alone.
fn space_hyphens(text: &str) -> String {
    let chars: Vec<char> = text.chars().collect();
    let mut out = String::with_capacity(text.len() + 2);
    for (i, &c) in chars.iter().enumerate() {
        if c == '-' {
            let before = i.checked_sub(1).map(|j| chars[j]);
            let after = chars.get(i + 1).copied();
            let letter = |c: Option<char>| c.is_some_and(char::is_alphabetic);
            let word_before = i >= 2 && letter(Some(chars[i - 2]));
            let word_after = letter(chars.get(i + 2).copied());
            if before == Some(' ') && letter(after) && word_before {
                out.push_str("- ");
                continue;
            }
            if after == Some(' ') && letter(before) && word_after {
                out.push_str(" -");
                continue;
            }
        }
        out.push(c);
    }
    out
}

/// Cleans spacing and stray punctuation: surrounding whitespace, runs of whitespace inside,
/// and one final full stop when the same text without it is also a level.
fn cleaned(value: &str, has_level: &dyn Fn(&str) -> bool) -> String {
    let b = value.as_bytes();
    let suspect = value.contains("  ")
        || value.contains(" -")
        || value.contains("- ")
        || value.ends_with('.')
        || b.first().is_some_and(u8::is_ascii_whitespace)
        || b.last().is_some_and(u8::is_ascii_whitespace)
        || value.contains(['\t', '\u{a0}']);
    if !suspect {
        return value.to_owned();
    }
    let collapsed = space_hyphens(&value.split_whitespace().collect::<Vec<_>>().join(" "));
    if let Some(stripped) = collapsed.strip_suffix('.')
        && !stripped.ends_with('.')
        && !stripped.is_empty()
        && has_level(stripped)
    {
        return stripped.to_owned();
    }
    collapsed
}

/// Levels whose spacing is off (leading, trailing or doubled whitespace) or that end in a
/// stray full stop while the same text without it is another level; each with its clean form.
///
/// ```
/// use emend::profile::variants::respellings;
/// let r = respellings(&[("Brown  Municipal", 1), ("Abilene", 4), ("Abilene.", 1), ("St.", 2)]);
/// let pairs: Vec<(&str, &str)> = r.iter().map(|r| (r.from.as_str(), r.to.as_str())).collect();
/// assert_eq!(pairs, [("Brown  Municipal", "Brown Municipal"), ("Abilene.", "Abilene")]);
/// ```
pub fn respellings(levels: &[(&str, u64)]) -> Vec<Respelling> {
    let all: std::collections::HashSet<&str> = levels.iter().map(|(v, _)| *v).collect();
    let has = |s: &str| all.contains(s);
    levels
        .iter()
        .filter_map(|&(value, count)| {
            let to = cleaned(value, &has);
            (to != value && !to.is_empty()).then(|| Respelling {
                from: value.to_owned(),
                to,
                count,
            })
        })
        .collect()
}

/// Words written with different capitalisation across levels ("Isle Of Wight" beside
/// "Isle of Man"): where one capitalisation of a word holds at least four in five of the
/// levels that use the word, in at least five levels, each level using the rarer form gets
/// that word respelt. Words at the start of a level are left out (they are capitalised by
/// position), and so are words written in capitals throughout (codes, acronyms).
///
/// ```
/// use emend::profile::variants::case_respellings;
/// let levels = [("Isle of Man", 1), ("Bay of Plenty", 1), ("Vale of Glamorgan", 1),
///               ("Isle of Skye", 1), ("Firth of Forth", 1), ("Isle Of Wight", 1)];
/// let r = case_respellings(&levels);
/// assert_eq!(r[0].to, "Isle of Wight");
/// ```
pub fn case_respellings(levels: &[(&str, u64)]) -> Vec<Respelling> {
    // word (lowercase) -> written form -> levels using it
    let mut forms: HashMap<String, HashMap<&str, u64>> = HashMap::new();
    for (value, _) in levels {
        for w in value.split(' ').skip(1) {
            if w.is_empty() || !w.chars().any(char::is_lowercase) && w.chars().count() > 1 {
                continue;
            }
            if !w.chars().all(char::is_alphabetic) {
                continue;
            }
            *forms
                .entry(w.to_lowercase())
                .or_default()
                .entry(w)
                .or_default() += 1;
        }
    }
    let mut preferred: HashMap<&str, &str> = HashMap::new();
    for written in forms.values() {
        let total: u64 = written.values().sum();
        if written.len() < 2 || total < 5 {
            continue;
        }
        let (best, n) = written
            .iter()
            .max_by(|a, b| a.1.cmp(b.1).then_with(|| b.0.cmp(a.0)))
            .expect("two forms");
        if n * 5 >= total * 4 {
            for form in written.keys().filter(|f| *f != best) {
                preferred.insert(form, best);
            }
        }
    }
    levels
        .iter()
        .filter_map(|&(value, count)| {
            let mut changed = false;
            let to: Vec<&str> = value
                .split(' ')
                .enumerate()
                .map(|(i, w)| match preferred.get(w) {
                    Some(p) if i > 0 => {
                        changed = true;
                        *p
                    }
                    _ => w,
                })
                .collect();
            changed.then(|| Respelling {
                from: value.to_owned(),
                to: to.join(" "),
                count,
            })
        })
        .collect()
}

/// Short function words that headline style writes in lower case inside a title: articles,
/// coordinating conjunctions and prepositions (The Chicago Manual of Style, 17th ed., 8.159,
/// from memory). "A" and "An" are left out: inside names a lone "A" is usually an initial.
const MINOR_WORDS: &[&str] = &[
    "of", "and", "the", "in", "on", "at", "by", "or", "for", "to", "upon", "nor", "but",
];

fn capitalised(word: &str) -> bool {
    word.chars().next().is_some_and(char::is_uppercase)
}

/// Values title-cased by a program: where every word of at least 19 in 20 of the column's
/// many-word levels (at least 20 of them) starts with a capital, and no level writes a short
/// function word ("of", "and", "the", …) in lower case after its first word, each level that
/// capitalises one there gets it in lower case, as headline style has it ("District Of
/// Columbia" → "District of Columbia"). Names are not all English and an official form may
/// be hyphenated ("Put-in-Bay"), so these are for review, not a ready command.
///
/// ```
/// use emend::profile::variants::title_case_respellings;
/// let mut levels: Vec<(String, u64)> =
///     (0..20).map(|i| (format!("Green Valley {}", ["North", "Mills"][i % 2]) + &"x".repeat(i), 1)).collect();
/// levels.push(("Isle Of Wight".into(), 3));
/// let refs: Vec<(&str, u64)> = levels.iter().map(|(v, n)| (v.as_str(), *n)).collect();
/// let r = title_case_respellings(&refs);
/// assert_eq!((r[0].from.as_str(), r[0].to.as_str()), ("Isle Of Wight", "Isle of Wight"));
/// ```
pub fn title_case_respellings(levels: &[(&str, u64)]) -> Vec<Respelling> {
    let mut many_word = 0u64;
    let mut all_capitals = 0u64;
    for (value, _) in levels {
        let words: Vec<&str> = value.split_whitespace().collect();
        if words.len() < 2 {
            continue;
        }
        many_word += 1;
        let mut lettered = words
            .iter()
            .filter(|w| w.chars().next().is_some_and(char::is_alphabetic));
        if lettered.all(|w| capitalised(w)) {
            all_capitals += 1;
        }
        // A function word in lower case anywhere after the first word: the column has a
        // house style of its own, which `case_respellings` weighs instead.
        if words[1..].iter().any(|w| MINOR_WORDS.contains(w)) {
            return Vec::new();
        }
    }
    if many_word < 20 || all_capitals * 20 < many_word * 19 {
        return Vec::new();
    }
    levels
        .iter()
        .filter_map(|&(value, count)| {
            let words: Vec<&str> = value.split(' ').collect();
            let mut changed = false;
            let to: Vec<String> = words
                .iter()
                .enumerate()
                .map(|(i, w)| {
                    let lower = w.to_lowercase();
                    if i > 0 && capitalised(w) && MINOR_WORDS.contains(&lower.as_str()) {
                        changed = true;
                        lower
                    } else {
                        (*w).to_owned()
                    }
                })
                .collect();
            changed.then(|| Respelling {
                from: value.to_owned(),
                to: to.join(" "),
                count,
            })
        })
        .collect()
}

/// One word written both abbreviated and in full across the levels of a column ("St Thomas"
/// among thirty names that write "Saint"): where one form holds at least four in five of the
/// levels that use either (at least five levels), each level using the other form gets the
/// usual one. The pairs are [`ABBREVIATIONS`]. For review: "St" is also "Street".
///
/// ```
/// use emend::profile::variants::abbreviation_respellings;
/// let levels = [("Saint Paul", 9), ("Saint Cloud", 2), ("Saint Joseph", 1), ("Saint Louis", 4),
///               ("St Thomas", 1)];
/// let r = abbreviation_respellings(&levels);
/// assert_eq!((r[0].from.as_str(), r[0].to.as_str()), ("St Thomas", "Saint Thomas"));
/// ```
pub fn abbreviation_respellings(levels: &[(&str, u64)]) -> Vec<Respelling> {
    let bare = |w: &str| w.trim_end_matches('.').to_lowercase();
    let mut out = Vec::new();
    for &(short, long) in ABBREVIATIONS {
        // Levels using each form, and how the form is written (as "Ft." or "Ft").
        let mut uses: [Vec<usize>; 2] = [Vec::new(), Vec::new()];
        let mut written: [HashMap<&str, u64>; 2] = [HashMap::new(), HashMap::new()];
        for (i, (value, _)) in levels.iter().enumerate() {
            for side in 0..2 {
                let form = [short, long][side];
                let hits: Vec<&str> = value.split(' ').filter(|w| bare(w) == form).collect();
                if !hits.is_empty() {
                    uses[side].push(i);
                    for w in hits {
                        *written[side].entry(w).or_default() += 1;
                    }
                }
            }
        }
        let (a, b) = (uses[0].len() as u64, uses[1].len() as u64);
        let total = a + b;
        if a == 0 || b == 0 || total < 5 {
            continue;
        }
        let (usual, rare) = if a * 5 >= total * 4 {
            (0, 1)
        } else if b * 5 >= total * 4 {
            (1, 0)
        } else {
            continue;
        };
        let usual_form = written[usual]
            .iter()
            .max_by(|x, y| x.1.cmp(y.1).then_with(|| y.0.cmp(x.0)))
            .map(|(w, _)| *w)
            .expect("a used form");
        let rare_form = [short, long][rare];
        for &i in &uses[rare] {
            let (value, count) = levels[i];
            let to: Vec<String> = value
                .split(' ')
                .map(|w| {
                    if bare(w) != rare_form {
                        w.to_owned()
                    } else if w.chars().any(char::is_lowercase) {
                        usual_form.to_owned()
                    } else {
                        usual_form.to_uppercase()
                    }
                })
                .collect();
            out.push(Respelling {
                from: value.to_owned(),
                to: to.join(" "),
                count,
            });
        }
    }
    out
}

/// Short codes among written-out names: where at least 20 levels are words (they hold a lower-case
/// letter) and fill at least nine in ten present cells, up to three levels written as a bare
/// code (no lower-case letter, at most four characters, no space: "DC" among state names,
/// "KBWD" among airport names) are another scheme's values. Our own rule, checked on the
/// labelled corpus; the levels are returned most frequent first, as given.
///
/// ```
/// use emend::profile::variants::codes_among_names;
/// let names: Vec<String> = (0..25).map(|i| format!("Place{i}")).collect();
/// let mut levels: Vec<(&str, u64)> = names.iter().map(|n| (n.as_str(), 10)).collect();
/// levels.push(("DC", 12));
/// assert_eq!(codes_among_names(&levels), ["DC"]);
/// ```
pub fn codes_among_names<'a>(levels: &[(&'a str, u64)]) -> Vec<&'a str> {
    let is_word = |v: &str| v.chars().any(char::is_lowercase);
    let is_code = |v: &str| {
        !is_word(v)
            && v.chars().count() <= 4
            && !v.contains(char::is_whitespace)
            && v.chars().any(char::is_uppercase)
    };
    let (mut word_levels, mut word_cells, mut all) = (0u64, 0u64, 0u64);
    let mut codes = Vec::new();
    for &(v, n) in levels {
        all += n;
        if is_word(v) {
            word_levels += 1;
            word_cells += n;
        } else if is_code(v) {
            codes.push(v);
        }
    }
    if word_levels < 20 || word_cells * 10 < all * 9 || codes.is_empty() || codes.len() > 3 {
        return Vec::new();
    }
    codes
}

#[cfg(test)]
mod tests {
    use super::*;

    fn groups(levels: &[(&str, u64)]) -> Vec<(VariantBasis, String, Vec<String>)> {
        find_variants(levels)
            .into_iter()
            .map(|g| {
                let variants = g.variants().map(|m| m.value.clone()).collect();
                (g.basis, g.canonical, variants)
            })
            .collect()
    }

    #[test]
    fn distinct_names_are_never_grouped() {
        // Each pair below names two different things; the kinds of difference are the ones
        // seen on real registries: a direction word, a digit, a one-letter model suffix, a
        // whole word, two towns that share a stem, and frequencies too even for a typo.
        let levels = [
            ("NORTHWEST AIRLINES", 256),
            ("SOUTHWEST AIRLINES", 900),
            ("Eastern meadowlark", 40),
            ("Western meadowlark", 19),
            ("Site 1", 50),
            ("Site 2", 48),
            ("C-130E", 22),
            ("C-130H", 300),
            ("Douglas", 30),
            ("Douglas City", 2),
            ("Columbia", 5),
            ("Columbus", 6),
            ("Easthampton", 1),
            ("East Hampton", 1),
            ("Lincoln Co", 1),
            ("Lincoln", 9),
        ];
        assert_eq!(groups(&levels), []);
    }

    #[test]
    fn spellings_of_one_name_are_grouped_by_how_they_differ() {
        let levels = [
            ("ALLEGHENY AIRLINES", 120),
            ("ALLEGHENYAIRLINES", 2),
            ("AIRBUS", 400),
            ("AIRBUS INDUSTRIE", 300),
            ("Saint Thomas", 10),
            ("St Thomas", 4),
            ("FALCON XP", 3),
            ("FALCON-XP", 1),
            ("Mill Creek", 250),
            ("Mill Craek", 1),
        ];
        let got = groups(&levels);
        let find = |canonical: &str| got.iter().find(|g| g.1 == canonical).unwrap();
        assert_eq!(find("FALCON XP").0, VariantBasis::Fold);
        assert_eq!(find("ALLEGHENY AIRLINES").0, VariantBasis::Joined);
        assert_eq!(find("AIRBUS").0, VariantBasis::LegalForm);
        assert_eq!(find("Saint Thomas").0, VariantBasis::Abbreviation);
        assert_eq!(find("Mill Creek").0, VariantBasis::Misspelling);
        assert_eq!(find("Mill Creek").2, ["Mill Craek"]);
        // Certain groups sort first.
        assert!(got[0].0.certain() && got[1].0.certain());
        assert!(!got[2].0.certain());
    }

    #[test]
    fn folded_spellings_group_and_a_rare_typo_joins_the_frequent_form() {
        let got = groups(&[
            ("Mill Creek", 120),
            ("Oak Flat", 80),
            ("mill creek", 7),
            ("Mill  Creek ", 3),
            ("mill craek", 1),
            ("Oak flat", 2),
            ("Pine Ridge", 50),
            ("São Paulo", 10),
            ("Sao Paulo", 30),
            ("sao-paulo", 1),
            ("Springfield", 40),
            ("Springfeild", 1),
            ("A", 50),
            ("B", 50),
            ("male", 60),
            ("female", 1),
        ]);
        let want = |basis, canonical: &str, variants: &[&str]| {
            (
                basis,
                canonical.to_owned(),
                variants.iter().map(|v| v.to_string()).collect::<Vec<_>>(),
            )
        };
        assert_eq!(
            got,
            [
                want(
                    VariantBasis::Fold,
                    "Mill Creek",
                    &["mill creek", "Mill  Creek "]
                ),
                want(VariantBasis::Fold, "Oak Flat", &["Oak flat"]),
                want(VariantBasis::Fold, "Sao Paulo", &["São Paulo", "sao-paulo"]),
                want(VariantBasis::Misspelling, "Mill Creek", &["mill craek"]),
                want(VariantBasis::Misspelling, "Springfield", &["Springfeild"]),
            ]
        );
    }

    #[test]
    fn spacing_and_stray_stops_are_cleaned_but_abbreviations_keep_their_stop() {
        let r = respellings(&[
            (" Fox Run", 2),
            ("Fox  Run ", 1),
            ("Fox Run", 90),
            ("Inc.", 3),
            ("Abilene.", 1),
            ("Abilene", 9),
            ("C Davis Campbell -Corsicana Muni", 1),
            ("Aberdeen-Amory", 1),
            ("Detroit Lakes- Wething", 1),
            ("Temp -5", 1),
        ]);
        let pairs: Vec<(&str, &str)> = r.iter().map(|r| (r.from.as_str(), r.to.as_str())).collect();
        assert_eq!(
            pairs,
            [
                (" Fox Run", "Fox Run"),
                ("Fox  Run ", "Fox Run"),
                ("Abilene.", "Abilene"),
                (
                    "C Davis Campbell -Corsicana Muni",
                    "C Davis Campbell - Corsicana Muni"
                ),
                ("Detroit Lakes- Wething", "Detroit Lakes - Wething"),
            ]
        );
    }

    #[test]
    fn a_register_of_names_is_not_searched_for_spellings() {
        // Most levels occur once: each is its own place, and folding may join two of them.
        let mut levels = vec![
            ("St. George", 1),
            ("St George", 2),
            ("LaFayette", 1),
            ("Lafayette", 3),
        ];
        levels.extend([
            ("Abbeville", 1),
            ("Aberdeen", 1),
            ("Abilene", 1),
            ("Ada", 1),
            ("Adak", 1),
        ]);
        assert_eq!(groups(&levels), []);
    }

    #[test]
    fn capitals_and_codes_are_not_case_variants() {
        let levels = [
            ("NORTH OF TOWN", 1),
            ("Isle of Man", 1),
            ("Bay of Plenty", 1),
            ("Vale of Glamorgan", 1),
            ("Isle of Skye", 1),
            ("Firth Of Forth", 1),
            ("Of Course", 1),
        ];
        let r = case_respellings(&levels);
        let pairs: Vec<(&str, &str)> = r.iter().map(|r| (r.from.as_str(), r.to.as_str())).collect();
        assert_eq!(pairs, [("Firth Of Forth", "Firth of Forth")]);
    }

    #[test]
    fn title_casing_is_found_only_where_every_word_is_capitalised() {
        // Headline style (The Chicago Manual of Style 8.159, from memory) lower-cases "of",
        // "and" and "the" inside a title: "Lake of the Woods", "King and Queen".
        let base: Vec<String> = (0..24)
            .map(|i| format!("Green Hollow {}", ["Mills", "Ford", "Bend"][i % 3]) + &"e".repeat(i))
            .collect();
        let mut levels: Vec<(&str, u64)> = base.iter().map(|v| (v.as_str(), 2)).collect();
        levels.extend([
            ("Lake Of The Woods", 1),
            ("King And Queen", 4),
            ("C A Moore", 1),
            ("Of Mice", 1),
        ]);
        let r = title_case_respellings(&levels);
        let pairs: Vec<(&str, &str)> = r.iter().map(|r| (r.from.as_str(), r.to.as_str())).collect();
        // A lone "A" is an initial, and a first word is capitalised by position.
        assert_eq!(
            pairs,
            [
                ("Lake Of The Woods", "Lake of the Woods"),
                ("King And Queen", "King and Queen")
            ]
        );

        // One lower-case "of" anywhere: the column has a house style; no title-casing finding.
        levels.push(("Isle of Man", 1));
        assert!(title_case_respellings(&levels).is_empty());

        // Too few many-word levels to call it a program's doing.
        let few = [("Lake Of The Woods", 1), ("Green Bend", 1)];
        assert!(title_case_respellings(&few).is_empty());
    }

    #[test]
    fn abbreviations_need_a_clear_usual_form() {
        // "Mt" in six levels against "Mount" in eight: no usual form, nothing respelt.
        let even = [
            ("Mt Carmel", 1),
            ("Mt Olive", 1),
            ("Mt Pleasant", 1),
            ("Mt. Gilead", 1),
            ("Mt Airy", 1),
            ("Mt Hope", 1),
            ("Mount Vernon", 1),
            ("Mount Dora", 1),
            ("Mount Ida", 1),
            ("Mount Joy", 1),
            ("Mount Union", 1),
            ("Mount Hood", 1),
            ("Mount Holly", 1),
            ("Mount Morris", 1),
        ];
        assert!(abbreviation_respellings(&even).is_empty());
        // The rare form follows the usual one's spelling, capitals kept.
        let levels = [
            ("FORT WORTH", 1),
            ("Fort Myers", 1),
            ("Fort Pierce", 1),
            ("Fort Dodge", 1),
            ("Fort Smith", 1),
            ("Fort Collins", 1),
            ("Fort Bragg", 1),
            ("Fort Kent", 1),
            ("FT. LEE", 1),
            ("Ft. Wayne", 2),
        ];
        let r = abbreviation_respellings(&levels);
        let pairs: Vec<(&str, &str)> = r.iter().map(|r| (r.from.as_str(), r.to.as_str())).collect();
        assert_eq!(
            pairs,
            [("FT. LEE", "FORT LEE"), ("Ft. Wayne", "Fort Wayne")]
        );
    }

    #[test]
    fn bare_codes_only_among_many_names() {
        let names: Vec<String> = (0..20).map(|i| format!("Riverside{i}")).collect();
        let mut levels: Vec<(&str, u64)> = names.iter().map(|n| (n.as_str(), 5)).collect();
        levels.push(("KBWD", 1));
        assert_eq!(codes_among_names(&levels), ["KBWD"]);
        // Four codes: the column mixes two schemes on purpose; not a few strays.
        levels.extend([("TX", 1), ("OK", 1), ("NM", 1)]);
        assert!(codes_among_names(&levels).is_empty());
        // Nineteen names are too few to know the column writes names.
        let few: Vec<(&str, u64)> = names
            .iter()
            .take(19)
            .map(|n| (n.as_str(), 5))
            .chain([("DC", 1)])
            .collect();
        assert!(codes_among_names(&few).is_empty());
        // Codes that fill more than a tenth of the cells are a scheme of the column.
        let mut heavy: Vec<(&str, u64)> = names.iter().map(|n| (n.as_str(), 5)).collect();
        heavy.push(("DC", 20));
        assert!(codes_among_names(&heavy).is_empty());
    }
}
