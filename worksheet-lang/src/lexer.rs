//! The lexer: source text to tokens whose spans are byte ranges into the original source.
//!
//! The source is folded first (see [`crate::fold`]); the lexer reads the folded text and maps
//! every position back. Besides the usual tokens it decides what follows a number: a unit
//! (`12 V`, `85mA`, `0.5 K/W`), a component-value code (`4k7`, `100n`), or nothing. Whether
//! a text is a unit is the unit parser's call ([`crate::units::parse_unit`]).

use crate::ast::{CodeKind, Span, UnitExpr};
use crate::diagnostic::{DiagKind, Diagnostic};
use crate::fold::{self, Folded, UNIT_DOT};
use crate::units::{self, UnitError};
use unicode_normalization::char::is_combining_mark;
use unicode_normalization::UnicodeNormalization;

/// Longest unit text looked at after a number, in bytes; real units are far shorter.
const MAX_UNIT_LEN: usize = 96;
/// Deepest parenthesis nesting inside a unit (`W/(m·K)` needs one).
const MAX_UNIT_DEPTH: usize = 4;

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Keyword {
    Given,
    Check,
    Sweep,
    Over,
    Steps,
    By,
    As,
}

impl Keyword {
    pub fn from_name(name: &str) -> Option<Keyword> {
        Some(match name {
            "given" => Keyword::Given,
            "check" => Keyword::Check,
            "sweep" => Keyword::Sweep,
            "over" => Keyword::Over,
            "steps" => Keyword::Steps,
            "by" => Keyword::By,
            "as" => Keyword::As,
            _ => return None,
        })
    }

    pub fn as_str(self) -> &'static str {
        match self {
            Keyword::Given => "given",
            Keyword::Check => "check",
            Keyword::Sweep => "sweep",
            Keyword::Over => "over",
            Keyword::Steps => "steps",
            Keyword::By => "by",
            Keyword::As => "as",
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
pub enum TokenKind {
    /// A number with the unit written after it, if any.
    Number {
        value: f64,
        unit: Option<UnitExpr>,
    },
    /// An IEC 60062 component-value code; `value` in ohms or farads.
    Code {
        value: f64,
        kind: CodeKind,
        text: String,
    },
    /// A string; the text between the quotes exactly as typed (not folded).
    Str(String),
    /// A name, NFKC-normalised.
    Name(String),
    Keyword(Keyword),
    Plus,
    Minus,
    /// `*`, `×` and, between expressions, `·`.
    Star,
    Slash,
    Caret,
    /// `||`
    Parallel,
    /// `±` or `+/-`
    PlusMinus,
    /// `..`
    DotDot,
    LParen,
    RParen,
    LBracket,
    RBracket,
    Comma,
    Colon,
    Eq,
    Dot,
    Lt,
    Le,
    Gt,
    Ge,
    /// A character that only belongs in a unit (`°`, `%`, `²`) found where no number
    /// precedes it. Inside `[UNIT]` and after `as` the parser reads it as unit text;
    /// elsewhere it is an error.
    UnitSymbol(char),
    /// A value whose error the lexer already reported (bad digits, unknown unit, a unit
    /// after a code). The parser turns it into `ExprKind::Error` without a second message.
    BadValue,
    /// A character that is not part of the language; already reported.
    Invalid,
    Newline,
    Eof,
}

impl TokenKind {
    /// True for tokens after which a line break continues the statement: binary operators,
    /// `=`, `:`, comparisons and the comma.
    pub fn continues_line(&self) -> bool {
        use TokenKind::*;
        matches!(
            self,
            Plus | Minus
                | Star
                | Slash
                | Caret
                | Parallel
                | PlusMinus
                | DotDot
                | Comma
                | Colon
                | Eq
                | Lt
                | Le
                | Gt
                | Ge
        )
    }
}

#[derive(Debug, Clone, PartialEq)]
pub struct Token {
    pub kind: TokenKind,
    /// Byte range in the original source.
    pub span: Span,
    /// Byte range in the folded text.
    pub folded: Span,
    /// 0-based line of the token's start.
    pub line: usize,
}

/// The result of lexing one cell.
#[derive(Debug, Clone)]
pub struct Lexed {
    /// The tokens, ending with one `Eof`.
    pub tokens: Vec<Token>,
    /// Lexical errors, with spans into the original source.
    pub diagnostics: Vec<Diagnostic>,
    pub folded: Folded,
}

/// Lexes a cell. Never fails; problems are diagnostics.
pub fn lex(source: &str) -> Lexed {
    let folded = fold::fold(source);
    let (tokens, diagnostics) = {
        let mut lx = Lexer {
            src: source,
            f: &folded,
            s: folded.text(),
            pos: 0,
            line: 0,
            tokens: Vec::new(),
            diags: Vec::new(),
            units: units::UnitCache::default(),
        };
        lx.run();
        (lx.tokens, lx.diags)
    };
    Lexed {
        tokens,
        diagnostics,
        folded,
    }
}

/// A name starts with a letter (any script, Greek included) or `_`.
pub fn is_name_start(c: char) -> bool {
    c.is_alphabetic() || c == '_'
}

/// A name continues with letters, ASCII digits, `_`, combining marks (a decomposed accent)
/// and subscript digits (`R₁`, which NFKC makes `R1`).
pub fn is_name_continue(c: char) -> bool {
    c.is_alphabetic()
        || c.is_ascii_digit()
        || c == '_'
        || is_combining_mark(c)
        || ('\u{2080}'..='\u{2089}').contains(&c)
}

/// Characters that only occur in units: degree, percent, superscript digits and minus.
pub fn is_unit_symbol(c: char) -> bool {
    matches!(
        c,
        '°' | '%' | '\u{00B2}' | '\u{00B3}' | '\u{00B9}' | '\u{2070}' | '\u{2074}'
            ..='\u{2079}' | '\u{207B}'
    )
}

fn is_unit_start(c: char) -> bool {
    c.is_alphabetic() || c == '°' || c == '%'
}

fn is_joiner(c: char) -> bool {
    matches!(c, '/' | '*' | '^' | UNIT_DOT)
}

/// NFKC form of a name as written (after folding).
pub fn normalize_name(text: &str) -> String {
    // NFKC leaves ASCII as it is.
    if text.is_ascii() {
        return text.to_string();
    }
    text.nfkc().collect()
}

/// What follows a number, as far as units go.
enum UnitScan {
    /// Not a unit: the text is an ordinary word (or nothing unit-like).
    NotUnit,
    /// A unit ending at this folded offset, as parsed.
    Unit { end: usize, unit: Box<units::Unit> },
    /// Text that can only have been meant as a unit, but is none.
    Unknown { end: usize, error: UnitError },
}

#[derive(Clone, Copy, PartialEq)]
enum Exponent {
    No,
    AfterCaret,
    AfterMinus,
    Digits,
}

/// Decides whether the folded text at `start` begins with a unit. The candidate is the
/// longest run of unit characters (letters, `°`, `%`, superscripts, digits right after `^`
/// or `^-`, the joiners `/ · * ^` and balanced parentheses); the unit is the longest prefix
/// of it that parses and ends at the end or before a `/` or `*` outside parentheses, with
/// no `·` in the rest. So `V/s` is one unit, `V*x` is the unit `V` followed by `*x`, and
/// `W/m·K` is an unknown unit (the unit parser says why).
fn scan_unit(s: &str, start: usize, memo: &mut units::UnitCache) -> UnitScan {
    let rest = &s[start..];
    if !rest.chars().next().is_some_and(is_unit_start) {
        return UnitScan::NotUnit;
    }
    let word = rest
        .split(|c: char| !is_name_continue(c))
        .next()
        .unwrap_or("");
    if Keyword::from_name(word).is_some() {
        return UnitScan::NotUnit;
    }
    let mut depth = 0usize;
    let mut balanced_end = start;
    let mut cuts = Vec::new();
    let mut first_star = None;
    let mut exp = Exponent::No;
    for (off, c) in rest.char_indices() {
        if off >= MAX_UNIT_LEN {
            break;
        }
        let at = start + off;
        let ok = match c {
            '/' | '*' | '^' | UNIT_DOT => {
                if depth == 0 && (c == '/' || c == '*') {
                    cuts.push(at);
                    if c == '*' && first_star.is_none() {
                        first_star = Some(at);
                    }
                }
                exp = if c == '^' {
                    Exponent::AfterCaret
                } else {
                    Exponent::No
                };
                true
            }
            '-' if exp == Exponent::AfterCaret => {
                exp = Exponent::AfterMinus;
                true
            }
            '0'..='9' if exp != Exponent::No => {
                exp = Exponent::Digits;
                true
            }
            '(' if depth < MAX_UNIT_DEPTH => {
                depth += 1;
                exp = Exponent::No;
                true
            }
            ')' if depth > 0 => {
                depth -= 1;
                exp = Exponent::No;
                true
            }
            c if c.is_alphabetic() || is_unit_symbol(c) => {
                exp = Exponent::No;
                true
            }
            _ => false,
        };
        if !ok {
            break;
        }
        if depth == 0 {
            balanced_end = at + c.len_utf8();
        }
    }
    let end = trim_joiners(s, start, balanced_end);
    if end == start {
        return UnitScan::NotUnit;
    }
    let mut cuts: Vec<usize> = cuts.into_iter().filter(|&c| c > start && c < end).collect();
    cuts.push(end);
    for &cut in cuts.iter().rev() {
        // `V1`, `mA_max`: a name, not a unit followed by more name.
        if cut == end && s[end..].chars().next().is_some_and(is_name_continue) {
            continue;
        }
        // The unit dot only joins units: `W/m·K` is a malformed unit, not `W/m` times `K`.
        if s[cut..end].contains(UNIT_DOT) {
            continue;
        }
        if let Ok(unit) = memo.get(&s[start..cut]).cloned() {
            return UnitScan::Unit {
                end: cut,
                unit: Box::new(unit),
            };
        }
    }
    // Nothing parsed. A plain word is a name (`2 x` is then a syntax error); text with a
    // unit-only character before any `*` can only have been meant as a unit.
    let seg_end = trim_joiners(s, start, first_star.map_or(end, |p| p.min(end)));
    let seg = &s[start..seg_end];
    if seg.chars().all(char::is_alphabetic) {
        return UnitScan::NotUnit;
    }
    let mut bad_end = seg_end;
    if seg_end == end {
        bad_end += s[end..]
            .char_indices()
            .find(|&(_, c)| !is_name_continue(c))
            .map_or(s.len() - end, |(i, _)| i);
    }
    let error = match units::parse_unit(&s[start..bad_end]) {
        Err(e) => e,
        Ok(_) => UnitError {
            message: format!("unknown unit `{}`", &s[start..bad_end]),
            hint: None,
        },
    };
    UnitScan::Unknown {
        end: bad_end,
        error,
    }
}

/// `end` moved back over trailing joiners and a dangling `^-`.
fn trim_joiners(s: &str, start: usize, mut end: usize) -> usize {
    while end > start {
        match s[start..end].chars().next_back() {
            Some(c) if is_joiner(c) || c == '-' => end -= c.len_utf8(),
            _ => break,
        }
    }
    end
}

/// A component-value code found after the digits of a number.
struct CodeMatch {
    end: usize,
    letter: char,
    frac_start: usize,
}

fn code_letter(c: char) -> Option<(CodeKind, i32, &'static str)> {
    Some(match c {
        'R' => (CodeKind::Resistance, 0, ""),
        'k' | 'K' => (CodeKind::Resistance, 3, "k"),
        'M' => (CodeKind::Resistance, 6, "M"),
        'G' => (CodeKind::Resistance, 9, "G"),
        'p' => (CodeKind::Capacitance, -12, "p"),
        'n' => (CodeKind::Capacitance, -9, "n"),
        'u' | 'µ' => (CodeKind::Capacitance, -6, "µ"),
        _ => return None,
    })
}

struct Lexer<'a> {
    src: &'a str,
    f: &'a Folded,
    s: &'a str,
    pos: usize,
    line: usize,
    tokens: Vec<Token>,
    diags: Vec<Diagnostic>,
    /// The units met so far in this source.
    units: units::UnitCache,
}

impl Lexer<'_> {
    fn char_at(&self, at: usize) -> Option<char> {
        self.s.get(at..).and_then(|r| r.chars().next())
    }

    fn push(&mut self, kind: TokenKind, start: usize, end: usize) {
        self.tokens.push(Token {
            kind,
            span: self.f.span(start..end),
            folded: start..end,
            line: self.line,
        });
        self.pos = end;
    }

    fn diag(&mut self, d: Diagnostic) {
        self.diags.push(d);
    }

    fn run(&mut self) {
        while let Some(c) = self.char_at(self.pos) {
            let start = self.pos;
            let next = self.char_at(start + c.len_utf8());
            use TokenKind::*;
            let one = |k| (k, c.len_utf8());
            let (kind, len) = match c {
                '\n' => {
                    self.push(Newline, start, start + 1);
                    self.line += 1;
                    continue;
                }
                '#' => {
                    self.pos = self.s[start..]
                        .find('\n')
                        .map_or(self.s.len(), |i| start + i);
                    continue;
                }
                c if c.is_whitespace() => {
                    self.pos += c.len_utf8();
                    continue;
                }
                '"' => {
                    self.string();
                    continue;
                }
                '0'..='9' => {
                    self.number();
                    continue;
                }
                c if is_name_start(c) => {
                    self.name();
                    continue;
                }
                '+' if self.s[start..].starts_with("+/-") => (PlusMinus, 3),
                '+' => one(Plus),
                '-' => one(Minus),
                '*' | UNIT_DOT => one(Star),
                '/' => one(Slash),
                '^' => one(Caret),
                '|' if next == Some('|') => (Parallel, 2),
                '±' => one(PlusMinus),
                '.' if next == Some('.') => (DotDot, 2),
                '.' => one(Dot),
                '(' => one(LParen),
                ')' => one(RParen),
                '[' => one(LBracket),
                ']' => one(RBracket),
                ',' => one(Comma),
                ':' => one(Colon),
                '=' => one(Eq),
                '<' if next == Some('=') => (Le, 2),
                '<' => one(Lt),
                '>' if next == Some('=') => (Ge, 2),
                '>' => one(Gt),
                '≤' => one(Le),
                '≥' => one(Ge),
                c if is_unit_symbol(c) => one(UnitSymbol(c)),
                c => {
                    self.invalid(c);
                    continue;
                }
            };
            self.push(kind, start, start + len);
        }
        let end = self.s.len();
        self.push(TokenKind::Eof, end, end);
    }

    fn invalid(&mut self, c: char) {
        let start = self.pos;
        let end = start + c.len_utf8();
        let hint = match c {
            '|' => Some("`||` is the parallel combination: `R1 || R2`"),
            '–' | '—' => {
                Some("write `-` for a minus sign, or `..` for a range: `10 V .. 12 V`")
            }
            '!' | '≠' => Some("a check compares with `<`, `<=`, `>` or `>=`"),
            '\'' | '‘' | '’' | '“' | '”' => {
                Some("write a note in straight double quotes: `\"…\"`")
            }
            ';' => Some("write one statement per line"),
            '{' | '}' => Some("group with `(` and `)`"),
            '÷' => Some("write `/` for a division"),
            '∥' => Some("write `||` for the parallel combination"),
            _ => None,
        };
        let shown = if c.is_control() {
            format!("U+{:04X}", u32::from(c))
        } else {
            format!("`{c}` (U+{:04X})", u32::from(c))
        };
        let mut d = Diagnostic::error(
            DiagKind::InvalidCharacter,
            self.f.span(start..end),
            format!("the character {shown} is not part of the language"),
        );
        if let Some(h) = hint {
            d = d.hint(h);
        }
        self.diag(d);
        self.push(TokenKind::Invalid, start, end);
    }

    fn string(&mut self) {
        let start = self.pos;
        let body = start + 1;
        let stop = self.s[body..]
            .find(['"', '\n'])
            .map_or(self.s.len(), |i| body + i);
        if self.s[stop..].starts_with('"') {
            let text = self.original(body..stop);
            self.push(TokenKind::Str(text), start, stop + 1);
            return;
        }
        let end = body + self.s[body..stop].trim_end().len();
        let text = self.original(body..end);
        self.diag(
            Diagnostic::error(
                DiagKind::UnterminatedString,
                self.f.span(start..end),
                "this string is not closed",
            )
            .expected("`\"`", "end of line")
            .hint("end it with `\"` on the same line; a string cannot span lines"),
        );
        self.push(TokenKind::Str(text), start, end);
    }

    /// The original text of a folded range.
    fn original(&self, folded: Span) -> String {
        let span = self.f.span(folded);
        self.src.get(span).unwrap_or("").to_string()
    }

    fn name(&mut self) {
        let start = self.pos;
        let len = self.s[start..]
            .char_indices()
            .find(|&(_, c)| !is_name_continue(c))
            .map_or(self.s.len() - start, |(i, _)| i);
        let end = start + len;
        let name = normalize_name(&self.s[start..end]);
        let kind = match Keyword::from_name(&name) {
            Some(k) => TokenKind::Keyword(k),
            None => TokenKind::Name(name),
        };
        self.push(kind, start, end);
    }

    fn number(&mut self) {
        let s = self.s;
        let b = s.as_bytes();
        let start = self.pos;
        let digits = |mut i: usize| {
            while i < b.len() && (b[i].is_ascii_digit() || b[i] == b'_') {
                i += 1;
            }
            i
        };
        let int_end = digits(start);
        let mut end = int_end;
        let mut plain = true;
        // `1..2` is a range: a fraction needs a digit right after the point.
        if end + 1 < b.len() && b[end] == b'.' && b[end + 1].is_ascii_digit() {
            end = digits(end + 1);
            plain = false;
        }
        if end < b.len() && (b[end] == b'e' || b[end] == b'E') {
            let mut j = end + 1;
            if j < b.len() && (b[j] == b'+' || b[j] == b'-') {
                j += 1;
            }
            if j < b.len() && b[j].is_ascii_digit() {
                while j < b.len() && b[j].is_ascii_digit() {
                    j += 1;
                }
                end = j;
                plain = false;
            }
        }
        let raw = &s[start..end];
        if raw
            .split(['.', 'e', 'E'])
            .any(|g| g.ends_with('_') || g.contains("__"))
        {
            self.diag(
                Diagnostic::error(
                    DiagKind::InvalidNumber,
                    self.f.span(start..end),
                    format!("misplaced `_` in the number `{raw}`"),
                )
                .hint("`_` groups digits and stands between two of them: `1_000`"),
            );
            self.push(TokenKind::BadValue, start, end);
            return;
        }
        let plain = plain && !raw.contains('_');
        let value = raw
            .replace('_', "")
            .parse::<f64>()
            .ok()
            .filter(|v| v.is_finite());
        if value.is_none() {
            self.diag(
                Diagnostic::error(
                    DiagKind::InvalidNumber,
                    self.f.span(start..end),
                    format!("the number `{raw}` is too large"),
                )
                .hint("write it with a unit prefix (`4.7 GΩ`) or a smaller exponent"),
            );
        }
        let next = self.char_at(end);
        // A unit written directly after the number: `85mA`, `10K`, `25°C`.
        if next.is_some_and(is_unit_start) {
            match scan_unit(s, end, &mut self.units) {
                UnitScan::Unit {
                    end: unit_end,
                    unit,
                } => {
                    return self.number_with_unit(start, value, end, unit_end, unit);
                }
                UnitScan::Unknown {
                    end: unit_end,
                    error,
                } => return self.unknown_unit(start, end, unit_end, error),
                UnitScan::NotUnit => {}
            }
            if let Some(letter) = next.filter(|&c| code_letter(c).is_some()) {
                if plain {
                    if let Some(code) = self.code_at(end, letter) {
                        return self.code(start, int_end, code);
                    }
                } else if self.looks_like_decimal_code(end, letter) {
                    return self.decimal_code(start, end, letter);
                }
            }
        }
        // A unit after exactly one space: `12 V`, `0.5 K/W`.
        if next == Some(' ') && self.char_at(end + 1).is_some_and(is_unit_start) {
            match scan_unit(s, end + 1, &mut self.units) {
                UnitScan::Unit {
                    end: unit_end,
                    unit,
                } => {
                    return self.number_with_unit(start, value, end + 1, unit_end, unit);
                }
                UnitScan::Unknown {
                    end: unit_end,
                    error,
                } => return self.unknown_unit(start, end + 1, unit_end, error),
                UnitScan::NotUnit => {}
            }
        }
        match value {
            Some(value) => self.push(TokenKind::Number { value, unit: None }, start, end),
            None => self.push(TokenKind::BadValue, start, end),
        }
    }

    fn number_with_unit(
        &mut self,
        start: usize,
        value: Option<f64>,
        unit_start: usize,
        unit_end: usize,
        unit: Box<units::Unit>,
    ) {
        let kind = match value {
            Some(value) => TokenKind::Number {
                value,
                unit: Some(UnitExpr {
                    text: self.s[unit_start..unit_end].to_string(),
                    span: self.f.span(unit_start..unit_end),
                    parsed: Some(unit),
                }),
            },
            None => TokenKind::BadValue,
        };
        self.push(kind, start, unit_end);
    }

    fn unknown_unit(&mut self, start: usize, unit_start: usize, unit_end: usize, e: UnitError) {
        let mut d = Diagnostic::error(
            DiagKind::UnknownUnit,
            self.f.span(unit_start..unit_end),
            e.message,
        );
        if let Some(h) = e.hint {
            d = d.hint(h);
        }
        self.diag(d);
        self.push(TokenKind::BadValue, start, unit_end);
    }

    /// A code letter at `at` (right after integer digits), then digits, then no more name:
    /// `4k7`, `47R`, `100n`. `K` only stands between digits (`4K7`); `10K` is ten kelvin.
    fn code_at(&self, at: usize, letter: char) -> Option<CodeMatch> {
        let frac_start = at + letter.len_utf8();
        let b = self.s.as_bytes();
        let mut end = frac_start;
        while end < b.len() && b[end].is_ascii_digit() {
            end += 1;
        }
        if letter == 'K' && end == frac_start {
            return None;
        }
        // `4k7x` is no code; `4k7Ω` is a code with a unit after it (reported).
        if self.char_at(end).is_some_and(is_name_continue)
            && !matches!(
                scan_unit(self.s, end, &mut units::UnitCache::default()),
                UnitScan::Unit { .. }
            )
        {
            return None;
        }
        Some(CodeMatch {
            end,
            letter,
            frac_start,
        })
    }

    fn code(&mut self, start: usize, int_end: usize, code: CodeMatch) {
        let Some((kind, exp, prefix)) = code_letter(code.letter) else {
            return;
        };
        let int = &self.s[start..int_end];
        let frac = &self.s[code.frac_start..code.end];
        let mantissa = if frac.is_empty() {
            int.to_string()
        } else {
            format!("{int}.{frac}")
        };
        let text = self.s[start..code.end].to_string();
        let symbol = match kind {
            CodeKind::Resistance => "Ω",
            CodeKind::Capacitance => "F",
        };
        let value = format!("{mantissa}e{exp}")
            .parse::<f64>()
            .ok()
            .filter(|v| v.is_finite());
        // A unit after the code, attached or after one space.
        let unit_at = match self.char_at(code.end) {
            Some(c) if is_unit_start(c) => Some(code.end),
            Some(' ') if self.char_at(code.end + 1).is_some_and(is_unit_start) => {
                Some(code.end + 1)
            }
            _ => None,
        };
        if let Some(u) = unit_at {
            match scan_unit(self.s, u, &mut self.units) {
                UnitScan::Unit { end, .. } => {
                    self.diag(
                        Diagnostic::error(
                            DiagKind::UnitAfterCode,
                            self.f.span(u..end),
                            format!("a unit after the component-value code `{text}`"),
                        )
                        .hint(format!(
                            "`{text}` already means {mantissa} {prefix}{symbol}; drop the unit, \
                             or write `{mantissa} {prefix}{symbol}`"
                        )),
                    );
                    self.push(TokenKind::BadValue, start, end);
                    return;
                }
                UnitScan::Unknown { end, error } => return self.unknown_unit(start, u, end, error),
                UnitScan::NotUnit => {}
            }
        }
        match value {
            Some(value) => self.push(TokenKind::Code { value, kind, text }, start, code.end),
            None => {
                self.diag(Diagnostic::error(
                    DiagKind::InvalidNumber,
                    self.f.span(start..code.end),
                    format!("the value `{text}` is too large"),
                ));
                self.push(TokenKind::BadValue, start, code.end);
            }
        }
    }

    /// `4.7k`: a code letter after a number with a decimal point or exponent.
    fn looks_like_decimal_code(&self, at: usize, letter: char) -> bool {
        let mut end = at + letter.len_utf8();
        let b = self.s.as_bytes();
        while end < b.len() && b[end].is_ascii_digit() {
            end += 1;
        }
        !self.char_at(end).is_some_and(is_name_continue)
    }

    fn decimal_code(&mut self, start: usize, at: usize, letter: char) {
        let mut end = at + letter.len_utf8();
        let b = self.s.as_bytes();
        while end < b.len() && b[end].is_ascii_digit() {
            end += 1;
        }
        let number = &self.s[start..at];
        let written = &self.s[start..end];
        let (unit, code) = match code_letter(letter) {
            Some((CodeKind::Resistance, _, p)) => (format!("{p}Ω"), "`4k7`"),
            Some((CodeKind::Capacitance, _, p)) => (format!("{p}F"), "`4n7`"),
            None => (String::new(), ""),
        };
        self.diag(
            Diagnostic::error(
                DiagKind::InvalidNumber,
                self.f.span(start..end),
                format!("`{written}` is neither a number with a unit nor a component-value code"),
            )
            .hint(format!(
                "a code puts its letter where the decimal point would be ({code}); \
                 or write the unit: `{number} {unit}`"
            )),
        );
        self.push(TokenKind::BadValue, start, end);
    }
}
