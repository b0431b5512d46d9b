//! The building blocks of level variants: the folding key (case, diacritics of Latin-1 and
//! Latin Extended-A, punctuation, doubled or surrounding whitespace), string distances (from
//! the `strsim` crate, counted in Unicode code points as the reference values are), and the
//! group of spellings that [`super::variants`] forms.

use serde::{Deserialize, Serialize};

/// Base letters of U+00C0..=U+00FF. Digits stand for two-letter folds (see [`expand`]);
/// a space marks × and ÷, which fold to a separator.
const LATIN1: &[u8; 64] = b"aaaaaa1ceeeeiiiidnooooo ouuuuy23aaaaaa1ceeeeiiiidnooooo ouuuuy2y";

/// Base letters of U+0100..=U+017F (Latin Extended-A); digits as in [`LATIN1`].
const LATIN_EXT_A: &[u8; 128] = b"aaaaaaccccccccddddeeeeeeeeeegggggggghhhhiiiiiiiiii55jjkkkllllllllllnnnnnnnnnoooooo44rrrrrrssssssssttttttuuuuuuuuuuuuwwyyyzzzzzzs";

fn expand(code: u8) -> &'static str {
    match code {
        b'1' => "ae",
        b'2' => "th",
        b'3' => "ss",
        b'4' => "oe",
        b'5' => "ij",
        _ => unreachable!("fold tables hold letters, a space or the codes 1-5"),
    }
}

/// The base form of one character for folding: `Some(str)` for a letter with a diacritic
/// from Latin-1 or Latin Extended-A (or a ligature), `None` when no fold applies.
fn fold_char(c: char) -> Option<&'static str> {
    let code = u32::from(c);
    let byte = match code {
        0xC0..=0xFF => LATIN1[(code - 0xC0) as usize],
        0x100..=0x17F => LATIN_EXT_A[(code - 0x100) as usize],
        _ => return None,
    };
    Some(match byte {
        b'1'..=b'5' => expand(byte),
        b' ' => " ",
        // A one-letter fold: index a static alphabet to get a `&'static str`.
        b'a'..=b'z' => {
            const ALPHABET: &str = "abcdefghijklmnopqrstuvwxyz";
            let i = usize::from(byte - b'a');
            &ALPHABET[i..=i]
        }
        _ => unreachable!("fold tables hold letters, a space or the codes 1-5"),
    })
}

/// Folds a level to the key under which spellings of one value meet: lowercase, diacritics
/// removed (Latin-1 and Latin Extended-A), apostrophes dropped, other punctuation and all
/// whitespace runs turned into single spaces, trimmed.
///
/// ```
/// use emend::profile::levels::fold_key;
/// assert_eq!(fold_key("  Mill-Creek  "), "mill creek");
/// assert_eq!(fold_key("St. Mary's"), "st marys");
/// assert_eq!(fold_key("Ñandú"), "nandu");
/// ```
pub fn fold_key(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    let mut pending_space = false;
    let push = |out: &mut String, piece: &str, pending: &mut bool| {
        if *pending && !out.is_empty() {
            out.push(' ');
        }
        *pending = false;
        out.push_str(piece);
    };
    for c in text.chars() {
        if matches!(c, '\'' | '\u{2019}' | '`' | '\u{00B4}') {
            continue;
        }
        if c.is_whitespace() || (c.is_ascii_punctuation()) {
            pending_space = true;
            continue;
        }
        if let Some(folded) = fold_char(c) {
            if folded == " " {
                pending_space = true;
            } else {
                push(&mut out, folded, &mut pending_space);
            }
            continue;
        }
        let mut buf = [0u8; 4];
        for lower in c.to_lowercase() {
            push(&mut out, lower.encode_utf8(&mut buf), &mut pending_space);
        }
    }
    out
}

/// Levenshtein distance in Unicode code points (insertions, deletions, substitutions), from
/// the `strsim` crate.
///
/// ```
/// use emend::profile::levels::levenshtein;
/// assert_eq!(levenshtein("kitten", "sitting"), 3);
/// ```
pub fn levenshtein(a: &str, b: &str) -> usize {
    strsim::levenshtein(a, b)
}

/// Jaro similarity in [0, 1] (Jaro 1989), from the `strsim` crate; two empty strings give 1.
pub fn jaro(a: &str, b: &str) -> f64 {
    strsim::jaro(a, b)
}

/// Jaro–Winkler similarity (Winkler 1990): `J + l·0.1·(1 − J)` with `l` the common prefix
/// length capped at 4, applied only when `J > 0.7`; from the `strsim` crate.
///
/// ```
/// use emend::profile::levels::jaro_winkler;
/// assert!((jaro_winkler("MARTHA", "MARHTA") - 0.9611).abs() < 1e-4);
/// ```
pub fn jaro_winkler(a: &str, b: &str) -> f64 {
    strsim::jaro_winkler(a, b)
}

/// A level with how many cells hold it.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct LevelCount {
    /// The value exactly as written.
    pub value: String,
    /// How many cells hold it.
    pub count: u64,
}

/// Spellings that look like one value, with the spelling to keep.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct LevelGroup {
    /// The suggested canonical form: the most frequent spelling (ties: the smaller string).
    pub canonical: String,
    /// Every spelling in the group, most frequent first; the canonical one included.
    pub members: Vec<LevelCount>,
    /// Cells over all members.
    pub total: u64,
    /// How the spellings differ.
    pub basis: super::variants::VariantBasis,
}

impl LevelGroup {
    /// The members other than the canonical form: the ones a recode would change.
    pub fn variants(&self) -> impl Iterator<Item = &LevelCount> {
        self.members.iter().filter(|m| m.value != self.canonical)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testdata::reference;

    #[test]
    fn fold_tables_cover_their_blocks() {
        // Every table entry folds to ASCII letters or a separator.
        for code in 0xC0u32..=0x17F {
            let c = char::from_u32(code).unwrap();
            let folded = fold_char(c).unwrap();
            assert!(
                folded == " " || folded.bytes().all(|b| b.is_ascii_lowercase()),
                "U+{code:04X} folds to {folded:?}"
            );
        }
    }

    fn check_fold(input: &str, expected: &str) {
        assert_eq!(fold_key(input), expected, "input {input:?}");
    }

    #[test]
    fn folding() {
        check_fold("Mill Creek", "mill creek");
        check_fold("  MILL   CREEK ", "mill creek");
        check_fold("Mill_Creek.", "mill creek");
        check_fold("São Tomé", "sao tome");
        check_fold("Straße", "strasse");
        check_fold("Łódź", "lodz");
        check_fold("Œuvre Ĳssel", "oeuvre ijssel");
        check_fold("Dvořák", "dvorak");
        check_fold("O'Brien", "obrien");
        check_fold("3×4", "3 4");
        check_fold("ΑΒΓ", "αβγ");
        check_fold("---", "");
    }

    #[test]
    fn levenshtein_reference() {
        // Source: Levenshtein (1966); values in tests/reference/string_distance.json,
        // `levenshtein_family` (rapidfuzz 3.14.6 and jellyfish 1.3.0 agree; exact integers,
        // counted in code points).
        let json = reference("string_distance.json");
        let rows = json["levenshtein_family"].as_array().unwrap();
        assert_eq!(rows.len(), 15);
        for row in rows {
            let (a, b) = (row["a"].as_str().unwrap(), row["b"].as_str().unwrap());
            let want = row["levenshtein"].as_u64().unwrap() as usize;
            assert_eq!(levenshtein(a, b), want, "{a:?} / {b:?}");
        }
    }

    #[test]
    fn jaro_winkler_reference() {
        // Source: Winkler (1990) table as remembered in tests/reference/string_distance.json
        // `jaro_and_jaro_winkler`: rows with rounded_3dp_matches_published = true are checked
        // against the published 3-decimal values; every row is checked against the
        // jellyfish 1.3.0 / rapidfuzz 3.14.6 computed values to 1e-12.
        let json = reference("string_distance.json");
        let rows = json["jaro_and_jaro_winkler"].as_array().unwrap();
        let mut published = 0;
        for row in rows {
            let (a, b) = (row["a"].as_str().unwrap(), row["b"].as_str().unwrap());
            let (j, jw) = (jaro(a, b), jaro_winkler(a, b));
            let cj = row["computed_jaro"].as_f64().unwrap();
            let cjw = row["computed_jaro_winkler"].as_f64().unwrap();
            assert!((j - cj).abs() < 1e-12, "jaro {a}/{b}: {j} vs {cj}");
            assert!(
                (jw - cjw).abs() < 1e-12,
                "jaro-winkler {a}/{b}: {jw} vs {cjw}"
            );
            if row["rounded_3dp_matches_published"].as_bool().unwrap() {
                published += 1;
                let pj = row["published_jaro_from_memory"].as_f64().unwrap();
                let pjw = row["published_jaro_winkler_from_memory"].as_f64().unwrap();
                assert!((j - pj).abs() <= 0.0005 + 1e-12, "published jaro {a}/{b}");
                assert!((jw - pjw).abs() <= 0.0005 + 1e-12, "published jw {a}/{b}");
            }
        }
        assert_eq!(published, 23);
        // Source: same file, `boost_threshold_examples` (bonus only when J > 0.7).
        for row in json["boost_threshold_examples"].as_array().unwrap() {
            let (a, b) = (row["a"].as_str().unwrap(), row["b"].as_str().unwrap());
            let want = row["computed_jaro_winkler"].as_f64().unwrap();
            assert!((jaro_winkler(a, b) - want).abs() < 1e-12, "{a}/{b}");
        }
    }

    #[test]
    fn jaro_edges() {
        assert_eq!(jaro("", ""), 1.0);
        assert_eq!(jaro("abc", ""), 0.0);
        assert_eq!(jaro("abc", "xyz"), 0.0);
        assert_eq!(jaro_winkler("same", "same"), 1.0);
    }
}
