//! The look-alike fold applied before lexing.
//!
//! Text pasted from datasheets and PDFs carries characters that look like the ones the
//! language uses but are different code points: the Greek small mu for the micro sign, the
//! ohm sign for the Greek capital omega, a typographic minus, no-break spaces between a
//! number and its unit. The fold maps each of them, by an explicit table, to the one
//! character the lexer knows. It keeps a map back to the original text, so every span the
//! lexer and parser report is a byte range into what the user typed.

use crate::ast::Span;

/// The canonical micro sign every micro look-alike folds to.
pub const MICRO: char = '\u{00B5}';
/// The product dot of compound units (`A·h`, `W/(m·K)`).
pub const UNIT_DOT: char = '\u{00B7}';

/// The fold table: what one character of the source becomes, or `None` to keep it.
pub fn fold_char(c: char) -> Option<&'static str> {
    Some(match c {
        // GREEK SMALL LETTER MU → MICRO SIGN (U+00B5 itself is kept).
        '\u{03BC}' => "\u{00B5}",
        // OHM SIGN → GREEK CAPITAL LETTER OMEGA.
        '\u{2126}' => "\u{03A9}",
        // KELVIN SIGN → LATIN CAPITAL LETTER K.
        '\u{212A}' => "K",
        // DEGREE CELSIUS / DEGREE FAHRENHEIT → degree sign and letter.
        '\u{2103}' => "\u{00B0}C",
        '\u{2109}' => "\u{00B0}F",
        // MASCULINE ORDINAL INDICATOR, often typed for the degree sign.
        '\u{00BA}' => "\u{00B0}",
        // MINUS SIGN → HYPHEN-MINUS.
        '\u{2212}' => "-",
        // MULTIPLICATION SIGN → asterisk.
        '\u{00D7}' => "*",
        // DOT OPERATOR → MIDDLE DOT, the unit product dot (U+00B7 itself is kept).
        '\u{22C5}' => "\u{00B7}",
        // No-break, narrow no-break, thin, hair, figure, en/em and the other fixed-width
        // spaces, the medium mathematical space and the ideographic space → space.
        '\u{00A0}' | '\u{2000}'..='\u{200A}' | '\u{202F}' | '\u{205F}' | '\u{3000}' => " ",
        // Zero-width space, word joiner and byte-order mark: invisible, dropped.
        '\u{200B}' | '\u{2060}' | '\u{FEFF}' => "",
        _ => return None,
    })
}

/// Folded text with the map back to the original source.
#[derive(Debug, Clone)]
pub struct Folded {
    text: String,
    /// For each byte of `text` (and one past the end): where the original character it came
    /// from starts. Empty when nothing was folded (every offset maps to itself).
    starts: Vec<usize>,
    /// For each byte of `text`: where the original character it came from ends (empty as
    /// `starts`).
    ends: Vec<usize>,
}

impl Folded {
    /// The folded text.
    pub fn text(&self) -> &str {
        &self.text
    }

    /// The original byte offset of a folded offset taken as the start of a span.
    pub fn start(&self, folded: usize) -> usize {
        let folded = folded.min(self.text.len());
        if self.starts.is_empty() {
            return floor_boundary(&self.text, folded);
        }
        self.starts[folded]
    }

    /// The original byte range of a folded byte range. Both ends land on character
    /// boundaries of the original; a folded character that came from a larger original one
    /// (`℃` → `°C`) maps to the whole original character.
    pub fn span(&self, folded: Span) -> Span {
        let start = self.start(folded.start);
        if folded.end <= folded.start {
            return start..start;
        }
        // A span past the end of an empty text has nothing to end on.
        let Some(last) = folded.end.min(self.text.len()).checked_sub(1) else {
            return start..start;
        };
        let end = if self.ends.is_empty() {
            let at = floor_boundary(&self.text, last);
            at + self.text[at..].chars().next().map_or(1, char::len_utf8)
        } else {
            self.ends[last]
        };
        start..end.max(start)
    }
}

/// The start of the character that holds byte `at`.
fn floor_boundary(text: &str, mut at: usize) -> usize {
    while at > 0 && !text.is_char_boundary(at) {
        at -= 1;
    }
    at
}

/// Applies the fold table to a whole source text.
pub fn fold(source: &str) -> Folded {
    // Most sources hold nothing to fold: then the text is the source and the map is the
    // identity, kept implicitly.
    if source.chars().all(|c| fold_char(c).is_none()) {
        return Folded {
            text: source.to_string(),
            starts: Vec::new(),
            ends: Vec::new(),
        };
    }
    fold_with_map(source)
}

/// The fold with its explicit map back to the source.
fn fold_with_map(source: &str) -> Folded {
    let mut text = String::with_capacity(source.len());
    let mut starts = Vec::with_capacity(source.len() + 1);
    let mut ends = Vec::with_capacity(source.len());
    for (at, c) in source.char_indices() {
        let end = at + c.len_utf8();
        let before = text.len();
        match fold_char(c) {
            Some(replacement) => text.push_str(replacement),
            None => text.push(c),
        }
        for _ in before..text.len() {
            starts.push(at);
            ends.push(end);
        }
    }
    starts.push(source.len());
    Folded { text, starts, ends }
}

/// Folds a short text without keeping the map (for unit texts and lookups).
pub fn fold_str(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match fold_char(c) {
            Some(replacement) => out.push_str(replacement),
            None => out.push(c),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Without anything to fold, the implicit identity map answers as the explicit one.
    #[test]
    fn the_identity_map_answers_as_the_explicit_map() {
        for src in [
            "",
            "x = 1",
            "θ = 6 K/W ± 5 %",
            "tj [°C] = a || b",
            "R7 = 4k7 Ω\n",
        ] {
            let (fast, slow) = (fold(src), fold_with_map(src));
            assert!(fast.starts.is_empty(), "{src}");
            assert_eq!(fast.text(), slow.text());
            for a in 0..=src.len() + 1 {
                assert_eq!(fast.start(a), slow.start(a), "{src:?} start {a}");
            }
            for a in 0..=src.len() {
                for b in a..=src.len() {
                    assert_eq!(fast.span(a..b), slow.span(a..b), "{src:?} {a}..{b}");
                }
            }
        }
    }

    #[test]
    fn a_span_past_the_end_of_an_empty_text_is_empty() {
        assert_eq!(fold("").span(0..1), 0..0);
        assert_eq!(fold_with_map("").span(0..1), 0..0);
    }

    #[test]
    fn folded_text_keeps_the_way_back() {
        let f = fold("2 \u{03BC}A");
        assert_eq!(f.text(), "2 \u{00B5}A");
        assert_eq!(f.span(2..4), 2..4);
    }
}
