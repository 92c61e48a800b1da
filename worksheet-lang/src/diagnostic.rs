//! Diagnostics: what went wrong, where, and how to fix it.

use crate::ast::Span;

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Severity {
    Error,
    Warning,
}

/// The kind of a diagnostic. `code()` is stable and appears in the kernel's `ename`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum DiagKind {
    // lexical and syntax
    InvalidCharacter,
    UnterminatedString,
    InvalidNumber,
    UnitAfterCode,
    UnknownUnit,
    UnexpectedToken,
    UnclosedDelimiter,
    TooDeep,
    RangeNeedsUnits,
    // meaning
    UnknownName,
    UnknownFunction,
    DimensionMismatch,
    Temperature,
    DomainError,
    DivisorSpansZero,
    Cycle,
    Argument,
    TypeMismatch,
    Redefinition,
    Limit,
    Interrupted,
    DependencyFailed,
    UnitShadowsName,
}

impl DiagKind {
    pub fn code(self) -> &'static str {
        use DiagKind::*;
        match self {
            InvalidCharacter => "InvalidCharacter",
            UnterminatedString => "UnterminatedString",
            InvalidNumber => "InvalidNumber",
            UnitAfterCode => "UnitAfterCode",
            UnknownUnit => "UnknownUnit",
            UnexpectedToken => "SyntaxError",
            UnclosedDelimiter => "UnclosedDelimiter",
            TooDeep => "TooDeep",
            RangeNeedsUnits => "RangeNeedsUnits",
            UnknownName => "UnknownName",
            UnknownFunction => "UnknownFunction",
            DimensionMismatch => "DimensionMismatch",
            Temperature => "TemperatureError",
            DomainError => "DomainError",
            DivisorSpansZero => "DivisorSpansZero",
            Cycle => "CycleError",
            Argument => "ArgumentError",
            TypeMismatch => "TypeMismatch",
            Redefinition => "Redefinition",
            Limit => "LimitExceeded",
            Interrupted => "Interrupted",
            DependencyFailed => "DependencyFailed",
            UnitShadowsName => "UnitShadowsName",
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
pub struct Diagnostic {
    pub kind: DiagKind,
    pub severity: Severity,
    /// Byte range into the original cell source.
    pub span: Span,
    pub message: String,
    pub expected: Option<String>,
    pub found: Option<String>,
    pub hint: Option<String>,
}

impl Diagnostic {
    // Errors are the rare path: kept out of the evaluator's hot code.
    #[cold]
    pub fn error(kind: DiagKind, span: Span, message: impl Into<String>) -> Self {
        Diagnostic {
            kind,
            severity: Severity::Error,
            span,
            message: message.into(),
            expected: None,
            found: None,
            hint: None,
        }
    }

    // Errors are the rare path: kept out of the evaluator's hot code.
    #[cold]
    pub fn warning(kind: DiagKind, span: Span, message: impl Into<String>) -> Self {
        Diagnostic {
            severity: Severity::Warning,
            ..Diagnostic::error(kind, span, message)
        }
    }

    pub fn expected(mut self, expected: impl Into<String>, found: impl Into<String>) -> Self {
        self.expected = Some(expected.into());
        self.found = Some(found.into());
        self
    }

    pub fn hint(mut self, hint: impl Into<String>) -> Self {
        self.hint = Some(hint.into());
        self
    }

    pub fn is_error(&self) -> bool {
        self.severity == Severity::Error
    }
}

/// Line and column (both 1-based; the column counts Unicode code points) of a byte offset.
pub fn line_col(source: &str, offset: usize) -> (usize, usize) {
    let offset = floor_char_boundary(source, offset.min(source.len()));
    let before = &source[..offset];
    let line = before.matches('\n').count() + 1;
    let line_start = before.rfind('\n').map_or(0, |i| i + 1);
    let col = source[line_start..offset].chars().count() + 1;
    (line, col)
}

fn floor_char_boundary(s: &str, mut i: usize) -> usize {
    while i > 0 && !s.is_char_boundary(i) {
        i -= 1;
    }
    i
}

/// A caret excerpt of the first line of `span`:
///
/// ```text
///   --> line 3, column 9
///    |
///  3 | x = 12 V + 3 A
///    |     ^^^^^^^^^^
/// ```
pub fn excerpt(source: &str, span: &Span) -> String {
    let start = floor_char_boundary(source, span.start.min(source.len()));
    let end = floor_char_boundary(source, span.end.min(source.len())).max(start);
    let (line, col) = line_col(source, start);
    let line_start = source[..start].rfind('\n').map_or(0, |i| i + 1);
    let line_end = source[start..]
        .find('\n')
        .map_or(source.len(), |i| start + i);
    let text = &source[line_start..line_end];
    let caret_len = source[start..end.min(line_end)].chars().count().max(1);
    let gutter = line.to_string().len();
    let pad = " ".repeat(gutter);
    format!(
        "{pad}--> line {line}, column {col}\n{pad} |\n{line} | {text}\n{pad} | {}{}",
        " ".repeat(col - 1),
        "^".repeat(caret_len)
    )
}

/// The full text of a diagnostic: kind, message, caret excerpt, expectation and hint.
pub fn render(source: &str, d: &Diagnostic) -> String {
    let mut out = format!(
        "{}: {}: {}\n{}",
        match d.severity {
            Severity::Error => "error",
            Severity::Warning => "warning",
        },
        d.kind.code(),
        d.message,
        excerpt(source, &d.span)
    );
    if let (Some(e), Some(f)) = (&d.expected, &d.found) {
        out.push_str(&format!("\n  expected {e}, found {f}"));
    }
    if let Some(h) = &d.hint {
        out.push_str(&format!("\n  hint: {h}"));
    }
    out
}
