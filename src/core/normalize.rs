//! Name normalization: the forms a place name is typed in, reduced to one
//! key so that "Doña Ana", "DONA ANA", "DoÃ±a Ana" (UTF-8 read as Latin-1),
//! "Prince Georges", "De Kalb" and "St. Louis" / "Saint Louis" compare equal.
//!
//! The steps, in order:
//!
//! 1. [`repair_mojibake`]: text that was UTF-8 decoded as Latin-1 or
//!    Windows-1252 ("DoÃ±a") is turned back into what was meant ("Doña").
//! 2. [`tokens`]: Unicode compatibility decomposition, combining marks
//!    (diacritics) dropped, lower case; apostrophes (straight, curly,
//!    backtick) and the Hawaiian ʻokina dropped so "Prince George's" and
//!    "Prince Georges" agree; `&` becomes the word `and`; every other
//!    non-alphanumeric character separates words. "St", "Ste", "Sainte"
//!    become `saint`, "Ft" becomes `fort` (common practice in US place
//!    names).
//! 3. [`compact`]: the words joined without spaces, so spacing inside a name
//!    does not matter ("De Kalb" = "DeKalb", "La Salle" = "LaSalle").
//!
//! Each word remembers whether a strong separator (comma, colon, semicolon,
//! slash, parenthesis, or a dash with a space beside it) came before it;
//! the matcher uses this to tell "Nome CA" (census area) from "Nome, CA".

use std::borrow::Cow;

use unicode_normalization::char::is_combining_mark;
use unicode_normalization::UnicodeNormalization;

/// A word of a normalized name.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Token {
    /// The word: lower case ASCII letters and digits (other letters kept as
    /// they are after removing diacritics).
    pub text: String,
    /// True when a strong separator (`,` `:` `;` `/` `(` `)` `|` or a dash
    /// next to a space) stood between this word and the one before it.
    pub after_separator: bool,
    /// True when a period followed the word ("N." "Mt."): a mark of an
    /// abbreviation.
    pub dotted: bool,
    /// True when every letter of the word was written upper case ("E").
    pub upper: bool,
}

/// Windows-1252 bytes 0x80..=0x9F and the characters they decode to.
const CP1252_HIGH: [char; 32] = [
    '\u{20AC}', '\u{81}', '\u{201A}', '\u{0192}', '\u{201E}', '\u{2026}', '\u{2020}', '\u{2021}',
    '\u{02C6}', '\u{2030}', '\u{0160}', '\u{2039}', '\u{0152}', '\u{8D}', '\u{017D}', '\u{8F}',
    '\u{90}', '\u{2018}', '\u{2019}', '\u{201C}', '\u{201D}', '\u{2022}', '\u{2013}', '\u{2014}',
    '\u{02DC}', '\u{2122}', '\u{0161}', '\u{203A}', '\u{0153}', '\u{9D}', '\u{017E}', '\u{0178}',
];

fn cp1252_byte(c: char) -> Option<u8> {
    let n = c as u32;
    if n < 0x80 || (0xA0..=0xFF).contains(&n) {
        return Some(n as u8);
    }
    CP1252_HIGH
        .iter()
        .position(|&h| h == c)
        .map(|i| 0x80 + i as u8)
}

/// Repairs text that was UTF-8 but decoded as Latin-1 / Windows-1252
/// ("DoÃ±a Ana" -> "Doña Ana", "MayagÃ¼ez" -> "Mayagüez"). Text that does
/// not look like such a mis-decoding is returned unchanged.
pub fn repair_mojibake(text: &str) -> Cow<'_, str> {
    // A mis-decoded multi-byte sequence starts with a lead byte 0xC2..=0xF4,
    // which Latin-1 shows as one of "Â".."ô".
    if !text.chars().any(|c| ('\u{C2}'..='\u{F4}').contains(&c)) {
        return Cow::Borrowed(text);
    }
    let mut bytes = Vec::with_capacity(text.len());
    for c in text.chars() {
        match cp1252_byte(c) {
            Some(b) => bytes.push(b),
            None => return Cow::Borrowed(text),
        }
    }
    match String::from_utf8(bytes) {
        Ok(repaired) if repaired != text => Cow::Owned(repaired),
        _ => Cow::Borrowed(text),
    }
}

fn is_apostrophe(c: char) -> bool {
    matches!(
        c,
        '\'' | '\u{2018}'
            | '\u{2019}'
            | '\u{02BB}'
            | '\u{02BC}'
            | '\u{0060}'
            | '\u{00B4}'
            | '\u{02B9}'
    )
}

fn is_dash(c: char) -> bool {
    matches!(c, '-' | '\u{2010}'..='\u{2015}' | '\u{2212}')
}

fn is_strong_separator(c: char) -> bool {
    matches!(c, ',' | ':' | ';' | '/' | '(' | ')' | '|' | '[' | ']')
}

/// Rewrites a word to its usual long form (common practice for US place
/// names): St/Ste/Sainte -> saint, Ft -> fort.
fn canonical_word(word: String) -> String {
    match word.as_str() {
        "st" | "ste" | "sainte" | "saint" => "saint".to_string(),
        "ft" => "fort".to_string(),
        _ => word,
    }
}

/// Splits a name into normalized words (see the module documentation).
pub fn tokens(text: &str) -> Vec<Token> {
    // ASCII needs neither repair nor decomposition (the common case).
    let chars: Vec<char> = if text.is_ascii() {
        text.chars().collect()
    } else {
        repair_mojibake(text)
            .nfkd()
            .filter(|c| !is_combining_mark(*c))
            .collect()
    };
    let mut out: Vec<Token> = Vec::new();
    let mut word = String::new();
    let mut separator = false;
    // Every letter of the word so far upper case (and at least one letter).
    let mut upper = true;
    let flush = |word: &mut String,
                 separator: &mut bool,
                 upper: &mut bool,
                 dotted: bool,
                 out: &mut Vec<Token>| {
        if !word.is_empty() {
            out.push(Token {
                text: canonical_word(std::mem::take(word)),
                after_separator: *separator,
                dotted,
                upper: *upper,
            });
            *separator = false;
        }
        *upper = true;
    };
    for (i, &c) in chars.iter().enumerate() {
        if is_apostrophe(c) {
            // Dropped inside a word: "George's" = "Georges", "Hawaiʻi" = "Hawaii".
            // (Checked first: the ʻokina is a modifier letter, alphanumeric.)
            // A French or Italian elision ("l'Ain", "d'Oise") ends its
            // one-letter word, so "de l'Ain" reads as "de", "l", "ain"; the
            // compact key is the same either way.
            let elided = matches!(word.as_str(), "l" | "d")
                && chars.get(i + 1).is_some_and(|n| n.is_alphabetic());
            if elided {
                flush(&mut word, &mut separator, &mut upper, false, &mut out);
            }
        } else if c.is_ascii_alphanumeric() {
            upper &= !c.is_ascii_lowercase();
            word.push(c.to_ascii_lowercase());
        } else if c.is_alphanumeric() {
            upper &= !c.is_lowercase();
            word.extend(c.to_lowercase());
        } else if c == '&' {
            flush(&mut word, &mut separator, &mut upper, false, &mut out);
            out.push(Token {
                text: "and".to_string(),
                after_separator: separator,
                ..Token::default()
            });
            separator = false;
        } else {
            flush(&mut word, &mut separator, &mut upper, c == '.', &mut out);
            let spaced = |j: Option<usize>| {
                j.and_then(|j| chars.get(j))
                    .is_some_and(|c| c.is_whitespace())
            };
            if is_strong_separator(c)
                || (is_dash(c) && (spaced(i.checked_sub(1)) || spaced(Some(i + 1))))
            {
                // A leading separator (", Cook") separates nothing.
                separator = !out.is_empty();
            }
        }
    }
    flush(&mut word, &mut separator, &mut upper, false, &mut out);
    out
}

/// The words joined without spaces: the key names are compared by.
pub fn compact<'a>(words: impl IntoIterator<Item = &'a Token>) -> String {
    let mut s = String::new();
    for w in words {
        s.push_str(&w.text);
    }
    s
}

/// The compact key of a text: `compact(&tokens(text))`.
pub fn key(text: &str) -> String {
    compact(&tokens(text))
}

/// When an abbreviation of [`abbreviations`] is read as its long form.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum AbbreviationUse {
    /// Wherever the word stands ("Mt", "Spgs").
    Always,
    /// Only when written upper case or with a period ("E. Orange",
    /// "E BATON ROUGE", not the Italian "e" of "Pesaro e Urbino").
    UpperOrDot,
    /// Only when written with a period ("No. Platte", not the word "no").
    Dot,
}

/// A word abbreviated inside place names and its long form ("mt" ->
/// "mount"), from `reference/abbreviations.csv` (which names the source of
/// each pair).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Abbreviation {
    /// The abbreviation, as a normalized word ("mt").
    pub short: &'static str,
    /// The long form, as a normalized word ("mount").
    pub long: &'static str,
    /// When the short form is read as the long one.
    pub when: AbbreviationUse,
}

impl Abbreviation {
    /// True when the written word `t` is this abbreviation.
    pub fn applies_to(&self, t: &Token) -> bool {
        t.text == self.short
            && match self.when {
                AbbreviationUse::Always => true,
                AbbreviationUse::UpperOrDot => t.upper || t.dotted,
                AbbreviationUse::Dot => t.dotted,
            }
    }
}

const ABBREVIATIONS_CSV: &str = include_str!("../../reference/abbreviations.csv");

/// The table of abbreviated words (`reference/abbreviations.csv`: columns
/// `short,long,when,source`). A malformed row is a build defect, caught by
/// this module's tests.
pub fn abbreviations() -> &'static [Abbreviation] {
    static TABLE: std::sync::OnceLock<Vec<Abbreviation>> = std::sync::OnceLock::new();
    TABLE.get_or_init(|| {
        ABBREVIATIONS_CSV
            .lines()
            .skip(1)
            .filter(|l| !l.trim().is_empty())
            .filter_map(|l| {
                let mut f = l.splitn(4, ',');
                let short = f.next()?.trim();
                let long = f.next()?.trim();
                let when = match f.next()?.trim() {
                    "always" => AbbreviationUse::Always,
                    "upper-or-dot" => AbbreviationUse::UpperOrDot,
                    "dot" => AbbreviationUse::Dot,
                    _ => return None,
                };
                Some(Abbreviation { short, long, when })
            })
            .collect()
    })
}

/// The optimal-string-alignment edit distance (insertions, deletions,
/// substitutions and transpositions of adjacent letters, each one edit)
/// between `a` and `b`, counted up to `cap`: any distance above `cap` is
/// reported as `cap + 1`. "cuonty" -> "county" is one edit.
pub fn edits(a: &str, b: &str, cap: usize) -> usize {
    if a.is_ascii() && b.is_ascii() {
        edits_of(a.as_bytes(), b.as_bytes(), cap)
    } else {
        let a: Vec<char> = a.chars().collect();
        let b: Vec<char> = b.chars().collect();
        edits_of(&a, &b, cap)
    }
}

fn edits_of<T: PartialEq>(a: &[T], b: &[T], cap: usize) -> usize {
    let over = cap + 1;
    if a.len().abs_diff(b.len()) > cap {
        return over;
    }
    let w = b.len() + 1;
    // Three rows of the dynamic programme (row i in slot i % 3), on the
    // stack for names of up to 63 letters: this runs for every unit of a
    // block for every name that has no exact match.
    const ON_STACK: usize = 3 * 64;
    let mut stack = [0u32; ON_STACK];
    let mut heap: Vec<u32> = Vec::new();
    let rows: &mut [u32] = if 3 * w <= ON_STACK {
        &mut stack[..3 * w]
    } else {
        heap.resize(3 * w, 0);
        &mut heap
    };
    let slot = |i: usize| (i % 3) * w;
    for (j, x) in rows[..w].iter_mut().enumerate() {
        *x = j as u32;
    }
    let cap32 = cap.min(u32::MAX as usize - 1) as u32;
    for i in 1..=a.len() {
        let (cur, back1, back2) = (slot(i), slot(i - 1), slot(i + 1));
        rows[cur] = i as u32;
        let mut row_min = rows[cur];
        for j in 1..=b.len() {
            let cost = u32::from(a[i - 1] != b[j - 1]);
            let mut d = (rows[back1 + j] + 1)
                .min(rows[cur + j - 1] + 1)
                .min(rows[back1 + j - 1] + cost);
            if i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] {
                // Slot (i + 1) % 3 still holds row i - 2.
                d = d.min(rows[back2 + j - 2] + 1);
            }
            rows[cur + j] = d;
            row_min = row_min.min(d);
        }
        if row_min > cap32 {
            return over;
        }
    }
    (rows[slot(a.len()) + b.len()] as usize).min(over)
}

/// Words that stand for "no place" in agency tables: totals, unknowns,
/// out-of-state rows, empty cells. Compared by [`key`]. (Common practice;
/// the list is ours.)
pub const PLACEHOLDERS: &[&str] = &[
    "",
    "statewide",
    "state wide",
    "state total",
    "total",
    "totals",
    "grand total",
    "all",
    "all counties",
    "unknown",
    "unk",
    "unknown county",
    "county unknown",
    "out of state",
    "out of county",
    "outside state",
    "non resident",
    "nonresident",
    "other",
    "others",
    "other county",
    "n a",
    "na",
    "none",
    "null",
    "nil",
    "missing",
    "not reported",
    "not available",
    "not stated",
    "not specified",
    "unspecified",
    "unassigned",
    "unallocated",
    "pending",
    "various",
    "multiple",
    "multiple counties",
    "foreign",
    "international",
    "redacted",
    "suppressed",
    "?",
    "-",
];

/// True when the text is a placeholder rather than a place (see
/// [`PLACEHOLDERS`]).
pub fn is_placeholder(text: &str) -> bool {
    static KEYS: std::sync::OnceLock<std::collections::HashSet<String>> =
        std::sync::OnceLock::new();
    KEYS.get_or_init(|| PLACEHOLDERS.iter().map(|p| key(p)).collect())
        .contains(&key(text))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn words(text: &str) -> Vec<String> {
        tokens(text).into_iter().map(|t| t.text).collect()
    }

    #[test]
    fn diacritics_and_case_do_not_matter() {
        assert_eq!(key("Doña Ana"), key("DONA ANA"));
        assert_eq!(key("Mayagüez"), "mayaguez");
        assert_eq!(key("Doña Ana"), "donaana");
    }

    #[test]
    fn utf8_read_as_latin1_is_repaired() {
        assert_eq!(repair_mojibake("DoÃ±a Ana"), "Doña Ana");
        assert_eq!(repair_mojibake("MayagÃ¼ez"), "Mayagüez");
        assert_eq!(key("DoÃ±a Ana"), "donaana");
        // Genuine Latin-1 letters that do not form UTF-8 are left alone.
        assert_eq!(repair_mojibake("Ãx"), "Ãx");
        assert_eq!(repair_mojibake("Doña Ana"), "Doña Ana");
    }

    #[test]
    fn okina_and_apostrophes_in_every_form_are_dropped() {
        assert_eq!(key("Hawaiʻi"), "hawaii");
        assert_eq!(key("Hawai'i"), "hawaii");
        assert_eq!(key("Prince George’s"), key("Prince Georges"));
        assert_eq!(key("Prince George's"), "princegeorges");
        assert_eq!(key("St. Mary`s"), key("Saint Marys"));
    }

    #[test]
    fn saint_forms_and_fort_agree() {
        assert_eq!(key("St. Louis"), "saintlouis");
        assert_eq!(key("St Louis"), "saintlouis");
        assert_eq!(key("Saint Louis"), "saintlouis");
        assert_eq!(key("Ste. Genevieve"), key("Sainte Genevieve"));
        assert_eq!(key("Ft. Bend"), key("Fort Bend"));
    }

    #[test]
    fn spacing_hyphens_and_ampersands_inside_names_do_not_matter() {
        assert_eq!(key("De Kalb"), key("DeKalb"));
        assert_eq!(key("Miami-Dade"), key("Miami Dade"));
        assert_eq!(key("Miami–Dade"), key("MiamiDade"));
        assert_eq!(key("Lake & Peninsula"), key("Lake and Peninsula"));
        assert_eq!(words("  Lake&Peninsula  "), ["lake", "and", "peninsula"]);
    }

    #[test]
    fn strong_separators_are_remembered_but_hyphens_inside_names_are_not() {
        let t = tokens("Cook County, IL");
        assert_eq!(
            t.iter().map(|t| t.after_separator).collect::<Vec<_>>(),
            [false, false, true]
        );
        let t = tokens("IL - Cook County");
        assert!(t[1].after_separator);
        let t = tokens("Miami-Dade");
        assert!(!t[1].after_separator);
        let t = tokens("TX: Harris");
        assert!(t[1].after_separator);
        assert!(!tokens(", Cook")[0].after_separator);
    }

    #[test]
    fn the_abbreviation_table_parses_and_names_a_source_for_every_pair() {
        let table = abbreviations();
        let rows = ABBREVIATIONS_CSV
            .lines()
            .skip(1)
            .filter(|l| !l.trim().is_empty());
        assert_eq!(table.len(), rows.clone().count(), "a malformed row");
        for row in rows {
            let source = row.splitn(4, ',').nth(3).unwrap_or("");
            assert!(
                source.contains("USPS Publication 28") || source.contains("common practice"),
                "{row}"
            );
        }
        // Normalized words on both sides, and no short form used twice.
        let mut shorts = std::collections::HashSet::new();
        for a in table {
            // ("ft" is read as "fort" by the tokenizer already.)
            assert!(
                key(a.short) == a.short || key(a.short) == a.long,
                "{}",
                a.short
            );
            assert_eq!(key(a.long), a.long);
            assert!(shorts.insert(a.short), "{} twice", a.short);
        }
        let mt = table.iter().find(|a| a.short == "mt").unwrap();
        assert_eq!((mt.long, mt.when), ("mount", AbbreviationUse::Always));
    }

    #[test]
    fn single_letter_compass_words_need_capitals_or_a_period() {
        let e = abbreviations().iter().find(|a| a.short == "e").unwrap();
        let t = tokens("E. Orange");
        assert!(t[0].dotted && e.applies_to(&t[0]));
        assert!(e.applies_to(&tokens("E BATON ROUGE")[0]));
        // The Italian "e" (and) of "Pesaro e Urbino" is no compass word.
        assert!(!e.applies_to(&tokens("Pesaro e Urbino")[1]));
        let no = abbreviations().iter().find(|a| a.short == "no").unwrap();
        assert!(no.applies_to(&tokens("No. Platte")[0]));
        assert!(!no.applies_to(&tokens("NO PLATTE")[0]));
    }

    #[test]
    fn a_french_elision_ends_its_one_letter_word_but_keeps_the_key() {
        assert_eq!(
            words("Département de l'Ain"),
            ["departement", "de", "l", "ain"]
        );
        assert_eq!(key("Val-d'Oise"), "valdoise");
        assert_eq!(words("Prince George's"), ["prince", "georges"]);
    }

    #[test]
    fn placeholders_are_recognized_in_any_spelling() {
        for p in [
            "Statewide",
            "UNKNOWN",
            "Out of State",
            "out-of-state",
            "Total",
            "N/A",
            "",
            "  ",
            "n.a.",
        ] {
            assert!(is_placeholder(p), "{p:?}");
        }
        for p in ["Cook", "Washington", "Otero"] {
            assert!(!is_placeholder(p), "{p:?}");
        }
    }
}

#[cfg(test)]
mod edit_tests {
    use super::*;

    /// Naive twin: the textbook optimal-string-alignment distance, uncapped.
    fn osa(a: &str, b: &str) -> usize {
        let a: Vec<char> = a.chars().collect();
        let b: Vec<char> = b.chars().collect();
        let mut d = vec![vec![0usize; b.len() + 1]; a.len() + 1];
        for (i, row) in d.iter_mut().enumerate() {
            row[0] = i;
        }
        for (j, x) in d[0].iter_mut().enumerate() {
            *x = j;
        }
        for i in 1..=a.len() {
            for j in 1..=b.len() {
                let cost = usize::from(a[i - 1] != b[j - 1]);
                d[i][j] = (d[i - 1][j] + 1)
                    .min(d[i][j - 1] + 1)
                    .min(d[i - 1][j - 1] + cost);
                if i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] {
                    d[i][j] = d[i][j].min(d[i - 2][j - 2] + 1);
                }
            }
        }
        d[a.len()][b.len()]
    }

    #[test]
    fn capped_edits_agree_with_the_textbook_distance() {
        let words = [
            "",
            "a",
            "ravenna",
            "ravnna",
            "bergamo",
            "beragmo",
            "county",
            "cuonty",
            "countey",
            "parish",
            "parrish",
            "borough",
            "burrough",
            "municipio",
            "munisipio",
            "mayagüez",
            "mayaguez",
            "ab",
            "ba",
            "abc",
            "ca",
        ];
        for a in words {
            for b in words {
                for cap in 0..5 {
                    let want = osa(a, b).min(cap + 1);
                    assert_eq!(edits(a, b, cap), want, "{a} {b} cap {cap}");
                }
            }
        }
    }
}
