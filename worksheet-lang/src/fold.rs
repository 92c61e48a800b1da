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
    /// from starts.
    starts: Vec<usize>,
    /// For each byte of `text`: where the original character it came from ends.
    ends: Vec<usize>,
}

impl Folded {
    /// The folded text.
    pub fn text(&self) -> &str {
        &self.text
    }

    /// The original byte offset of a folded offset taken as the start of a span.
    pub fn start(&self, folded: usize) -> usize {
        self.starts[folded.min(self.text.len())]
    }

    /// The original byte range of a folded byte range. Both ends land on character
    /// boundaries of the original; a folded character that came from a larger original one
    /// (`℃` → `°C`) maps to the whole original character.
    pub fn span(&self, folded: Span) -> Span {
        let start = self.start(folded.start);
        if folded.end <= folded.start {
            return start..start;
        }
        let end = self.ends[folded.end.min(self.text.len()) - 1];
        start..end.max(start)
    }
}

/// Applies the fold table to a whole source text.
pub fn fold(source: &str) -> Folded {
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
