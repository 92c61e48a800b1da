//! The parser: tokens to a [`Program`]. `parse` never fails; `is_complete` drives Jupyter's
//! is_complete_request.
//!
//! One statement per line. A statement continues on the next line while a `(` or `[` is
//! open, or when the line ends with a token that needs a right-hand side (a binary operator,
//! `=`, `:`, a comparison, a comma). Expressions are read by operator precedence on
//! explicit stacks, and the depth of the built tree is limited, so no input can overflow
//! the stack, here or in whatever walks the tree later.
//!
//! After an error the parser skips to the end of the statement and goes on. A statement
//! still yields what could be read: a definition whose value is broken keeps its name (the
//! value is `ExprKind::Error`), so later statements see a failed definition rather than an
//! unknown name. Every error has a diagnostic; its span lies inside the statement's span.

use crate::ast::{
    Arg, BinOp, CmpOp, Definition, Expr, ExprKind, Ident, Note, Program, Span, Stmt, StmtKind,
    SweepStep, SweepVar, UnitExpr,
};
use crate::diagnostic::{DiagKind, Diagnostic};
use crate::lexer::{self, Keyword, Token, TokenKind};
use crate::units;

/// Deepest nesting of the syntax tree, and most brackets and operators pending at once.
pub const MAX_DEPTH: u32 = 256;

/// Parses one cell.
pub fn parse(source: &str) -> Program {
    let lexed = lexer::lex(source);
    let matches = match_brackets(&lexed.tokens).0;
    let mut p = Parser {
        src: source,
        ftext: lexed.folded.text(),
        folded: &lexed.folded,
        toks: &lexed.tokens,
        matches,
        pos: 0,
        diags: Vec::new(),
        quiet: Vec::new(),
        brackets: Vec::new(),
        err_at: 0,
        stmt_diags: 0,
        head: None,
    };
    let mut stmts = Vec::new();
    loop {
        while matches!(p.toks[p.pos].kind, TokenKind::Newline) {
            p.pos += 1;
        }
        if matches!(p.toks[p.pos].kind, TokenKind::Eof) {
            break;
        }
        stmts.push(p.statement());
    }
    let quiet = std::mem::take(&mut p.quiet);
    let mut diagnostics: Vec<Diagnostic> = lexed
        .diagnostics
        .iter()
        .filter(|d| {
            !quiet
                .iter()
                .any(|q| q.start <= d.span.start && d.span.end <= q.end)
        })
        .cloned()
        .collect();
    diagnostics.append(&mut p.diags);
    diagnostics.sort_by_key(|d| d.span.start);
    Program { stmts, diagnostics }
}

#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Completeness {
    Complete,
    /// More lines are needed (an open bracket, a trailing operator or comma).
    Incomplete {
        indent: String,
    },
    /// Cannot become valid by adding lines (e.g. an unmatched closing bracket).
    Invalid,
}

/// Whether a cell is ready to run: `Invalid` for an unterminated string or a closing bracket
/// without its opening one, `Incomplete` while a bracket is open or the last line ends with
/// a token that continues the statement, `Complete` otherwise.
pub fn is_complete(source: &str) -> Completeness {
    let lexed = lexer::lex(source);
    if lexed
        .diagnostics
        .iter()
        .any(|d| d.kind == DiagKind::UnterminatedString)
    {
        return Completeness::Invalid;
    }
    let (_, stray_closer, open_at_end) = match_brackets(&lexed.tokens);
    if stray_closer {
        return Completeness::Invalid;
    }
    let last = lexed
        .tokens
        .iter()
        .rev()
        .find(|t| !matches!(t.kind, TokenKind::Newline | TokenKind::Eof));
    if open_at_end || last.is_some_and(|t| t.kind.continues_line()) {
        return Completeness::Incomplete {
            indent: "    ".to_string(),
        };
    }
    Completeness::Complete
}

/// Pairs every bracket with its partner: `(` with `)`, `[` with `]`. A closer that does not
/// fit the innermost opener closes the nearest fitting one (the openers in between stay
/// unmatched) or, without one, is stray. Returns the partner of every token (brackets
/// only), whether a stray or mismatched closer exists, and whether an opener is left open.
fn match_brackets(toks: &[Token]) -> (Vec<Option<usize>>, bool, bool) {
    let mut partner = vec![None; toks.len()];
    let mut stack: Vec<usize> = Vec::new();
    let mut bad = false;
    for (i, t) in toks.iter().enumerate() {
        let opener = match t.kind {
            TokenKind::LParen | TokenKind::LBracket => {
                stack.push(i);
                continue;
            }
            TokenKind::RParen => TokenKind::LParen,
            TokenKind::RBracket => TokenKind::LBracket,
            _ => continue,
        };
        // Only look a little way down for a fitting opener, so that a run of mismatched
        // closers stays linear.
        let floor = stack.len().saturating_sub(16);
        match stack[floor..]
            .iter()
            .rposition(|&o| toks[o].kind == opener)
            .map(|at| at + floor)
        {
            Some(at) => {
                if at + 1 != stack.len() {
                    bad = true;
                }
                let o = stack[at];
                stack.truncate(at);
                partner[o] = Some(i);
                partner[i] = Some(o);
            }
            None => bad = true,
        }
    }
    let open = !stack.is_empty();
    (partner, bad, open)
}

/// A parse that stopped; its diagnostic is already recorded (or was the lexer's).
struct Stop;

type PResult<T> = Result<T, Stop>;

/// An expression with the depth of its tree.
struct Node {
    e: Expr,
    d: u32,
    /// A tolerance or range not in parentheses (these do not chain).
    tol: bool,
}

const PREC_SUM: u8 = 1;
const PREC_PARALLEL: u8 = 2;
const PREC_PRODUCT: u8 = 3;
const PREC_TOL: u8 = 4;
const PREC_PREFIX: u8 = 5;
const PREC_POW: u8 = 6;

/// An operator waiting for its right operand, or an open bracket.
enum Op {
    Bin { op: BinOp, prec: u8, tok: usize },
    Tol { range: bool, tok: usize },
    Prefix { neg: bool, tok: usize },
    Pow { tok: usize },
    Group(Group),
}

impl Op {
    fn bin(op: BinOp, tok: usize) -> Op {
        let prec = match op {
            BinOp::Add | BinOp::Sub => PREC_SUM,
            BinOp::Parallel => PREC_PARALLEL,
            _ => PREC_PRODUCT,
        };
        Op::Bin { op, prec, tok }
    }

    /// Binding strength; `None` for a bracket, which operators never reduce across.
    fn prec(&self) -> Option<u8> {
        match self {
            Op::Bin { prec, .. } => Some(*prec),
            Op::Tol { .. } => Some(PREC_TOL),
            Op::Prefix { .. } => Some(PREC_PREFIX),
            Op::Pow { .. } => Some(PREC_POW),
            Op::Group(_) => None,
        }
    }
}

/// An open bracket and what has been read inside it.
enum Group {
    Paren {
        open: usize,
    },
    Call {
        callee: Node,
        args: Vec<Arg>,
        d: u32,
        /// The first named argument, for the error on a positional one after it.
        first_named: Option<Ident>,
        /// The name of the argument being read.
        name: Option<Ident>,
        /// An error was reported inside (a positional argument after a named one).
        broken: bool,
    },
    List {
        open: usize,
        items: Vec<Expr>,
        d: u32,
    },
}

fn innermost_group(ops: &[Op]) -> Option<&Group> {
    ops.iter().rev().find_map(|o| match o {
        Op::Group(g) => Some(g),
        _ => None,
    })
}

/// What was read of a statement before its value, so a broken value still yields a
/// definition of the name.
enum Head {
    Given(Ident, Option<UnitExpr>),
    Define(Ident, Option<UnitExpr>),
    Function(Ident, Vec<Ident>, Option<UnitExpr>),
}

struct Parser<'a> {
    src: &'a str,
    ftext: &'a str,
    folded: &'a crate::fold::Folded,
    toks: &'a [Token],
    matches: Vec<Option<usize>>,
    pos: usize,
    diags: Vec<Diagnostic>,
    /// Original ranges read as unit text, where the lexer's errors do not apply (the unit
    /// is judged as a whole when it is resolved).
    quiet: Vec<Span>,
    /// Open brackets the parser is inside (token indices), innermost last.
    brackets: Vec<usize>,
    /// The token at which the last error was detected.
    err_at: usize,
    /// How many diagnostics there were when the current statement began.
    stmt_diags: usize,
    head: Option<(Head, usize)>,
}

fn comparison(kind: &TokenKind) -> Option<CmpOp> {
    Some(match kind {
        TokenKind::Lt => CmpOp::Lt,
        TokenKind::Le => CmpOp::Le,
        TokenKind::Gt => CmpOp::Gt,
        TokenKind::Ge => CmpOp::Ge,
        _ => return None,
    })
}

fn starts_operand(kind: &TokenKind) -> bool {
    matches!(
        kind,
        TokenKind::Number { .. }
            | TokenKind::Code { .. }
            | TokenKind::Name(_)
            | TokenKind::Str(_)
            | TokenKind::LParen
            | TokenKind::LBracket
            | TokenKind::BadValue
    )
}

impl<'a> Parser<'a> {
    // ---- tokens -------------------------------------------------------------------------

    /// The previous token that is not a line break.
    fn prev_token(&self, i: usize) -> Option<&'a Token> {
        self.toks[..i]
            .iter()
            .rev()
            .find(|t| !matches!(t.kind, TokenKind::Newline))
    }

    /// Moves over line breaks that do not end the statement.
    fn skip_joined_lines(&mut self) {
        if !matches!(self.toks[self.pos].kind, TokenKind::Newline) {
            return;
        }
        let joined = !self.brackets.is_empty()
            || self
                .prev_token(self.pos)
                .is_some_and(|t| t.kind.continues_line());
        if joined {
            while matches!(self.toks[self.pos].kind, TokenKind::Newline) {
                self.pos += 1;
            }
        }
    }

    fn peek(&mut self) -> &'a TokenKind {
        self.skip_joined_lines();
        &self.toks[self.pos].kind
    }

    fn tok(&mut self) -> &'a Token {
        self.skip_joined_lines();
        &self.toks[self.pos]
    }

    /// The kind of the token `n` places after the current one, line breaks skipped.
    fn peek_after(&mut self, n: usize) -> &'a TokenKind {
        self.skip_joined_lines();
        let mut i = self.pos;
        let mut left = n;
        while left > 0 && i + 1 < self.toks.len() {
            i += 1;
            if !matches!(self.toks[i].kind, TokenKind::Newline) {
                left -= 1;
            }
        }
        &self.toks[i].kind
    }

    fn at_end(&mut self) -> bool {
        matches!(self.peek(), TokenKind::Newline | TokenKind::Eof)
    }

    /// Consumes the current token, keeping track of brackets.
    fn bump(&mut self) -> usize {
        self.skip_joined_lines();
        let i = self.pos;
        match self.toks[i].kind {
            TokenKind::LParen | TokenKind::LBracket => self.brackets.push(i),
            TokenKind::RParen | TokenKind::RBracket => {
                self.brackets.pop();
            }
            TokenKind::Eof => return i,
            _ => {}
        }
        self.pos += 1;
        i
    }

    fn text(&self, span: &Span) -> &'a str {
        self.src.get(span.clone()).unwrap_or("")
    }

    /// How a token is named in "found …".
    fn describe(&self, t: &Token) -> String {
        match &t.kind {
            TokenKind::Newline => "end of line".to_string(),
            TokenKind::Eof => "end of input".to_string(),
            TokenKind::Keyword(k) => format!("the keyword `{}`", k.as_str()),
            TokenKind::Name(_) => format!("the name `{}`", self.text(&t.span)),
            TokenKind::Number { .. } | TokenKind::Code { .. } => {
                format!("the number `{}`", self.text(&t.span))
            }
            TokenKind::Str(_) => "a string".to_string(),
            _ => format!("`{}`", self.text(&t.span)),
        }
    }

    /// Where a diagnostic about the current token points: the token, or just after the
    /// previous token at the end of a line.
    fn here(&mut self) -> Span {
        let t = self.tok();
        match t.kind {
            TokenKind::Newline | TokenKind::Eof => {
                let at = self
                    .prev_token(self.pos)
                    .map_or(t.span.start, |p| p.span.end);
                at..at
            }
            _ => t.span.clone(),
        }
    }

    // ---- errors -------------------------------------------------------------------------

    /// Records an error about the current token ("expected …, found …"). Inside a bracket
    /// that is never closed, an error at the end of input or on a later line is reported
    /// as the unclosed bracket instead.
    fn fail(&mut self, expected: &str, hint: Option<String>) -> Stop {
        let t = self.tok();
        if let Some(stop) = self.unclosed(t) {
            return stop;
        }
        if matches!(t.kind, TokenKind::Invalid) {
            // The lexer has reported this character.
            self.err_at = self.pos;
            return Stop;
        }
        let found = self.describe(t);
        let mut d = Diagnostic::error(
            DiagKind::UnexpectedToken,
            self.here(),
            format!("expected {expected}, found {found}"),
        )
        .expected(expected, found);
        if let Some(h) = hint {
            d = d.hint(h);
        }
        self.report(d)
    }

    fn unclosed(&mut self, t: &Token) -> Option<Stop> {
        let &b = self.brackets.last()?;
        if self.matches[b].is_some() {
            return None;
        }
        if !matches!(t.kind, TokenKind::Eof) && t.line == self.toks[b].line {
            return None;
        }
        let d = self.unclosed_diag(b, self.describe(t));
        Some(self.report(d))
    }

    fn unclosed_diag(&self, b: usize, found: String) -> Diagnostic {
        let open = &self.toks[b];
        let (c, close) = match open.kind {
            TokenKind::LBracket => ("[", "]"),
            _ => ("(", ")"),
        };
        Diagnostic::error(
            DiagKind::UnclosedDelimiter,
            open.span.clone(),
            format!("this `{c}` is never closed"),
        )
        .expected(format!("`{close}`"), found)
        .hint(format!("close the `{c}` opened here"))
    }

    fn report(&mut self, d: Diagnostic) -> Stop {
        self.diags.push(d);
        self.err_at = self.pos;
        Stop
    }

    /// An error for a token that follows a complete expression where something else was
    /// expected, with a hint for the usual slips (`2 x`, `(a + b) V`, `x²`).
    fn fail_after(&mut self, prev: &Expr, expected: &str) -> Stop {
        let t = self.tok();
        let prev = rightmost(prev);
        let prev_text = self.text(&prev.span);
        let hint = match &t.kind {
            TokenKind::Name(n) if units::parse_unit(n).is_ok() => match &prev.kind {
                ExprKind::Number { unit: None, .. } => Some(format!(
                    "write the unit after the number with at most one space: `{prev_text} {n}`"
                )),
                _ => Some(format!("write the unit after a number: `1 {n}`")),
            },
            k if starts_operand(k) && expected.contains("`,`") => {
                Some("separate the items with `,`".to_string())
            }
            TokenKind::Name(n) if matches!(prev.kind, ExprKind::Number { unit: None, .. }) => {
                // `10KΩ`, `5 v`: a unit in the wrong case.
                // A word of letters only near a unit symbol is most likely a mistyped unit;
                // a designator such as `V1` is a name.
                let near = units::nearest_symbol(n).filter(|_| n.chars().all(char::is_alphabetic));
                let case_only = near
                    .as_ref()
                    .filter(|u| u.to_lowercase() == n.to_lowercase());
                let product = format!("write `{prev_text} * {n}`");
                Some(match (case_only, &near) {
                    (Some(u), _) => format!(
                        "{product} for a product, or `{prev_text} {u}` for the unit \
                         (units are case-sensitive)"
                    ),
                    // `12 Vv`: most likely a mistyped unit.
                    (None, Some(u)) => format!(
                        "`{n}` is not a unit; did you mean `{prev_text} {u}`? \
                         (for a product, {product})"
                    ),
                    (None, None) => product,
                })
            }
            k if starts_operand(k) => {
                let next_text = self.text(&t.span);
                Some(format!("write `{prev_text} * {next_text}`"))
            }
            TokenKind::UnitSymbol(c) => Some(symbol_hint(*c)),
            TokenKind::Eq => Some(
                "`=` defines a value (`name = …`); a check compares with `<`, `<=`, `>` or `>=`"
                    .to_string(),
            ),
            TokenKind::Keyword(Keyword::As) => {
                Some("`as UNIT` may only end a statement that shows a value".to_string())
            }
            TokenKind::PlusMinus | TokenKind::DotDot => {
                Some("tolerances do not chain; put one in parentheses: `(a ± b) ± c`".to_string())
            }
            TokenKind::RParen | TokenKind::RBracket
                if self.matches[self.pos].is_none() && self.brackets.is_empty() =>
            {
                Some("this closing bracket has no opening one".to_string())
            }
            TokenKind::RParen | TokenKind::RBracket => Some(format!(
                "the bracket open here is closed with `{}`",
                match self.brackets.last().map(|&b| &self.toks[b].kind) {
                    Some(TokenKind::LBracket) => "]",
                    _ => ")",
                }
            )),
            _ => None,
        };
        self.fail(expected, hint)
    }

    fn too_deep(&mut self) -> Stop {
        let d = Diagnostic::error(
            DiagKind::TooDeep,
            self.here(),
            format!("the expression is nested too deeply (more than {MAX_DEPTH} levels)"),
        )
        .hint("split it into named intermediate values");
        self.report(d)
    }

    // ---- statements ---------------------------------------------------------------------

    fn statement(&mut self) -> Stmt {
        let start = self.pos;
        self.stmt_diags = self.diags.len();
        self.brackets.clear();
        self.head = None;
        let outcome = match self.statement_kind() {
            Ok(kind) => {
                if self.at_end() {
                    Ok(kind)
                } else {
                    // Only reached for forms that end in a note or a unit.
                    let _ = self.fail("the end of the statement", None);
                    Err(Stop)
                }
            }
            Err(stop) => Err(stop),
        };
        let kind = match outcome {
            Ok(kind) => kind,
            Err(Stop) => {
                let resume = self.recover(start).max(start + 1);
                self.pos = resume;
                let end = self.last_end(start, resume);
                self.broken(end)
            }
        };
        let end = self.last_end(start, self.pos);
        Stmt {
            kind,
            span: self.toks[start].span.start..end,
        }
    }

    /// The end of the last token before `pos` (not before `start`).
    fn last_end(&self, start: usize, pos: usize) -> usize {
        self.toks[start..pos.min(self.toks.len())]
            .iter()
            .rev()
            .find(|t| !matches!(t.kind, TokenKind::Newline | TokenKind::Eof))
            .map_or(self.toks[start].span.end, |t| t.span.end)
    }

    /// What a statement that stopped with an error becomes.
    fn broken(&mut self, end: usize) -> StmtKind {
        let Some((head, value_tok)) = self.head.take() else {
            return StmtKind::Error;
        };
        let at = self.toks[value_tok].span.start.min(end);
        let value = Expr {
            kind: ExprKind::Error,
            span: at..end,
        };
        match head {
            Head::Given(name, unit) => StmtKind::Given(Definition {
                name,
                unit,
                value,
                note: None,
            }),
            Head::Define(name, unit) => StmtKind::Define(Definition {
                name,
                unit,
                value,
                note: None,
            }),
            Head::Function(name, params, unit) => StmtKind::Function {
                name,
                params,
                unit,
                body: value,
            },
        }
    }

    fn statement_kind(&mut self) -> PResult<StmtKind> {
        match self.peek() {
            TokenKind::Keyword(Keyword::Given) => {
                self.bump();
                let name = self.name("the name of the input after `given`")?;
                let (unit, value, note) = self.definition_tail(&name, true)?;
                Ok(StmtKind::Given(Definition {
                    name,
                    unit,
                    value,
                    note,
                }))
            }
            TokenKind::Keyword(Keyword::Check) => self.check(),
            TokenKind::Keyword(Keyword::Sweep) => self.sweep(),
            TokenKind::Name(_) => match &self.toks[self.pos + 1].kind {
                TokenKind::Eq | TokenKind::LBracket => {
                    let name = self.name("a name")?;
                    let (unit, value, note) = self.definition_tail(&name, false)?;
                    Ok(StmtKind::Define(Definition {
                        name,
                        unit,
                        value,
                        note,
                    }))
                }
                TokenKind::LParen if self.is_function_definition() => self.function(),
                _ => self.show(),
            },
            _ => self.show(),
        }
    }

    /// `NAME(…) =` or `NAME(…) [`: the head of a user function.
    fn is_function_definition(&mut self) -> bool {
        let open = self.pos + 1;
        if self.toks.get(open).map(|t| &t.kind) != Some(&TokenKind::LParen) {
            return false;
        }
        match self.matches[open] {
            Some(close) => matches!(
                self.toks.get(close + 1).map(|t| &t.kind),
                Some(TokenKind::Eq | TokenKind::LBracket)
            ),
            None => false,
        }
    }

    fn name(&mut self, expected: &str) -> PResult<Ident> {
        let t = self.tok();
        match &t.kind {
            TokenKind::Name(n) => {
                self.bump();
                Ok(Ident {
                    name: n.clone(),
                    span: t.span.clone(),
                })
            }
            TokenKind::Keyword(k) => {
                let hint = format!("`{}` is a keyword and cannot be a name", k.as_str());
                Err(self.fail(expected, Some(hint)))
            }
            _ => Err(self.fail(expected, None)),
        }
    }

    /// `[UNIT]? = EXPR "note"?` after the name of a definition.
    fn definition_tail(
        &mut self,
        name: &Ident,
        given: bool,
    ) -> PResult<(Option<UnitExpr>, Expr, Option<Note>)> {
        let unit = if matches!(self.peek(), TokenKind::LBracket) {
            Some(self.unit_in_brackets()?)
        } else {
            None
        };
        if !matches!(self.peek(), TokenKind::Eq) {
            let hint = match self.peek() {
                TokenKind::LParen if given => {
                    Some("an input is a value; define a function without `given`".to_string())
                }
                _ => Some(format!("a definition reads `{} = …`", name.name)),
            };
            return Err(self.fail("`=`", hint));
        }
        self.bump();
        let head = if given {
            Head::Given(name.clone(), unit.clone())
        } else {
            Head::Define(name.clone(), unit.clone())
        };
        self.skip_joined_lines();
        self.head = Some((head, self.pos));
        let value = self.expr()?.e;
        let note = self.note();
        if !self.at_end() {
            let hint = match self.peek() {
                TokenKind::Keyword(Keyword::As) => Some(format!(
                    "`as` only ends a statement that shows a value; to fix the unit of `{0}` \
                     write `{0} [UNIT] = …`",
                    name.name
                )),
                _ if note.is_some() => Some("a note ends the statement".to_string()),
                _ => None,
            };
            return Err(match hint {
                Some(h) => self.fail("the end of the statement", Some(h)),
                None => self.fail_after(&value, "an operator or the end of the statement"),
            });
        }
        Ok((unit, value, note))
    }

    fn note(&mut self) -> Option<Note> {
        let t = self.tok();
        match &t.kind {
            TokenKind::Str(s) => {
                self.bump();
                Some(Note {
                    text: s.clone(),
                    span: t.span.clone(),
                })
            }
            _ => None,
        }
    }

    /// `[UNIT]`: the text between the brackets, as written, checked by the unit parser.
    fn unit_in_brackets(&mut self) -> PResult<UnitExpr> {
        let open = self.pos;
        let Some(close) = self.matches[open] else {
            self.bump();
            let t = self.tok();
            return Err(self
                .unclosed(t)
                .unwrap_or_else(|| self.fail("`]` after the unit", None)));
        };
        let from = self.toks[open].folded.end;
        let to = self.toks[close].folded.start;
        self.pos = close + 1;
        let unit = self.unit_text(from, to);
        if unit.text.is_empty() {
            let span = self.toks[open].span.start..self.toks[close].span.end;
            let d = Diagnostic::error(
                DiagKind::UnexpectedToken,
                span,
                "no unit between `[` and `]`",
            )
            .expected("a unit", "`[]`")
            .hint("write the unit the value must have, e.g. `[mW]`, or drop the brackets");
            return Err(self.report(d));
        }
        Ok(unit)
    }

    /// The unit written in the folded range, trimmed, parsed if it is one. What is wrong with
    /// it is for the evaluator to say (it resolves every declared and `as` unit and reports
    /// on it).
    fn unit_text(&mut self, from: usize, to: usize) -> UnitExpr {
        let raw = self.ftext.get(from..to).unwrap_or("");
        let lead = raw.len() - raw.trim_start().len();
        let text = raw.trim();
        let span = self.folded.span(from + lead..from + lead + text.len());
        self.quiet.push(span.clone());
        UnitExpr {
            text: text.to_string(),
            span,
            parsed: crate::units::parse_unit(text).ok().map(Box::new),
        }
    }

    fn function(&mut self) -> PResult<StmtKind> {
        let name = self.name("the function name")?;
        self.bump(); // `(`
        let mut params = Vec::new();
        if !matches!(self.peek(), TokenKind::RParen) {
            loop {
                params.push(self.name("a parameter name")?);
                match self.peek() {
                    TokenKind::Comma => {
                        self.bump();
                    }
                    TokenKind::RParen => break,
                    _ => {
                        return Err(self.fail(
                            "`,` or `)`",
                            Some("a function's parameters are names: `f(a, b) = …`".into()),
                        ))
                    }
                }
            }
        }
        self.bump(); // `)`
        let unit = if matches!(self.peek(), TokenKind::LBracket) {
            Some(self.unit_in_brackets()?)
        } else {
            None
        };
        if !matches!(self.peek(), TokenKind::Eq) {
            return Err(self.fail("`=`", None));
        }
        self.bump();
        self.skip_joined_lines();
        self.head = Some((
            Head::Function(name.clone(), params.clone(), unit.clone()),
            self.pos,
        ));
        let body = self.expr()?.e;
        if !self.at_end() {
            let hint = match self.peek() {
                TokenKind::Str(_) => Some("a function takes no note; write a comment: `# …`"),
                _ => None,
            };
            return Err(match hint {
                Some(h) => self.fail("the end of the statement", Some(h.to_string())),
                None => self.fail_after(&body, "an operator or the end of the statement"),
            });
        }
        Ok(StmtKind::Function {
            name,
            params,
            unit,
            body,
        })
    }

    fn check(&mut self) -> PResult<StmtKind> {
        self.bump();
        let lhs = self.expr()?.e;
        let Some(op) = comparison(self.peek()) else {
            return Err(self.fail_after(&lhs, "a comparison `<`, `<=`, `>` or `>=`"));
        };
        self.bump();
        let rhs = self.expr()?.e;
        let note = self.note();
        if !self.at_end() {
            if comparison(self.peek()).is_some() {
                let hint = "a check has one comparison; write one check per condition";
                return Err(self.fail("the end of the check", Some(hint.to_string())));
            }
            return Err(self.fail_after(&rhs, "an operator, a note or the end of the check"));
        }
        Ok(StmtKind::Check { lhs, op, rhs, note })
    }

    fn sweep(&mut self) -> PResult<StmtKind> {
        self.bump();
        let mut vars = Vec::new();
        loop {
            let name = self.name("the name to sweep")?;
            if self.peek() != &TokenKind::Keyword(Keyword::Over) {
                let hint = format!("a sweep reads `sweep {} over A .. B: …`", name.name);
                return Err(self.fail("`over`", Some(hint)));
            }
            self.bump();
            let range = self.expr()?.e;
            let (from, to) = match range.kind {
                ExprKind::Range { lo, hi } => (*lo, *hi),
                ExprKind::Error => return Err(Stop),
                _ => {
                    let d = Diagnostic::error(
                        DiagKind::UnexpectedToken,
                        range.span.clone(),
                        "a sweep runs over a range",
                    )
                    .expected("a range `A .. B`", format!("`{}`", self.text(&range.span)))
                    .hint("write both ends: `over 50 mA .. 300 mA`");
                    return Err(self.report(d));
                }
            };
            let step = match self.peek() {
                TokenKind::Keyword(Keyword::Steps) => {
                    self.bump();
                    Some(SweepStep::Steps(self.expr()?.e))
                }
                TokenKind::Keyword(Keyword::By) => {
                    self.bump();
                    Some(SweepStep::By(self.expr()?.e))
                }
                _ => None,
            };
            vars.push(SweepVar {
                name,
                from,
                to,
                step,
            });
            match self.peek() {
                TokenKind::Comma => {
                    self.bump();
                }
                TokenKind::Colon => {
                    self.bump();
                    break;
                }
                _ => {
                    let hint = "list what to show after a colon: `sweep x over 1 .. 2: y, z`";
                    return Err(self.fail("`steps`, `by`, `,` or `:`", Some(hint.to_string())));
                }
            }
        }
        let mut exprs = Vec::new();
        loop {
            let e = self.expr()?.e;
            match self.peek() {
                TokenKind::Comma => {
                    self.bump();
                    exprs.push(e);
                }
                TokenKind::Newline | TokenKind::Eof => {
                    exprs.push(e);
                    break;
                }
                _ => return Err(self.fail_after(&e, "`,` or the end of the sweep")),
            }
        }
        Ok(StmtKind::Sweep { vars, exprs })
    }

    fn show(&mut self) -> PResult<StmtKind> {
        let expr = self.expr()?.e;
        let as_unit = if self.peek() == &TokenKind::Keyword(Keyword::As) {
            self.bump();
            Some(self.unit_after_as()?)
        } else {
            None
        };
        if !self.at_end() {
            return Err(match self.peek() {
                TokenKind::Str(_) if as_unit.is_none() => self.fail(
                    "an operator or the end of the statement",
                    Some("only definitions and checks take a note; write a comment: `# …`".into()),
                ),
                _ => self.fail_after(&expr, "an operator or the end of the statement"),
            });
        }
        Ok(StmtKind::Show { expr, as_unit })
    }

    /// The unit after `as`: the rest of the line, as written.
    fn unit_after_as(&mut self) -> PResult<UnitExpr> {
        let first = self.pos;
        let mut last = None;
        let mut i = first;
        while !matches!(self.toks[i].kind, TokenKind::Newline | TokenKind::Eof) {
            last = Some(i);
            i += 1;
        }
        let Some(last) = last else {
            return Err(self.fail("a unit after `as`", Some("for example `x as mW`".into())));
        };
        self.pos = i;
        Ok(self.unit_text(self.toks[first].folded.start, self.toks[last].folded.end))
    }

    // ---- recovery -----------------------------------------------------------------------

    /// Where to go on after an error in the statement that began at `start`.
    fn recover(&mut self, start: usize) -> usize {
        let e = self.err_at.max(start);
        // The error is on a line that was read as a continuation but begins a statement of
        // its own: the line before ended with an operator, or left a bracket open. Go on
        // there; what is wrong on that line is reported when it is read on its own.
        let line = self.line_start(start, e);
        if line > start && self.begins_statement(line) {
            let (open, unmatched) = self.open_at(start, line);
            if open == 0
                && self
                    .prev_token(line)
                    .is_some_and(|t| t.kind.continues_line())
            {
                self.dangling_operator(line);
                return line;
            }
            if let Some(b) = unmatched {
                self.forget_from(line);
                let reported = self.diags[self.stmt_diags..]
                    .iter()
                    .any(|d| d.kind == DiagKind::UnclosedDelimiter && d.span == self.toks[b].span);
                if !reported {
                    let found = "a new statement on the next line".to_string();
                    let d = self.unclosed_diag(b, found);
                    self.diags.push(d);
                }
                return line;
            }
        }
        // Otherwise skip to the end of the statement: out of the brackets the error is in,
        // then to the first line break that ends it.
        let mut p = e;
        let mut unclosed = self.brackets.iter().any(|&b| self.matches[b].is_none());
        if let Some(close) = self.brackets.first().and_then(|&b| self.matches[b]) {
            p = p.max(close + 1);
        }
        while !unclosed {
            match &self.toks[p].kind {
                TokenKind::Eof => return p,
                TokenKind::Newline => {
                    if !self.prev_token(p).is_some_and(|t| t.kind.continues_line()) {
                        return p;
                    }
                    while matches!(self.toks[p].kind, TokenKind::Newline) {
                        p += 1;
                    }
                }
                TokenKind::LParen | TokenKind::LBracket => match self.matches[p] {
                    Some(close) if close > p => p = close + 1,
                    _ => unclosed = true,
                },
                _ => p += 1,
            }
        }
        // A bracket that is never closed would make the rest of the cell this statement;
        // go on at the next line instead.
        self.next_line(e)
    }

    /// How many brackets opened in `start..line` are still open at `line`, and the
    /// innermost of them that is never closed.
    fn open_at(&self, start: usize, line: usize) -> (usize, Option<usize>) {
        let mut open = 0;
        let mut unmatched = None;
        for i in start..line {
            if matches!(self.toks[i].kind, TokenKind::LParen | TokenKind::LBracket) {
                match self.matches[i] {
                    Some(close) if close < line => {}
                    Some(_) => open += 1,
                    None => {
                        open += 1;
                        unmatched = Some(i);
                    }
                }
            }
        }
        (open, unmatched)
    }

    /// Drops this statement's diagnostics that point at or after token `line`.
    fn forget_from(&mut self, line: usize) {
        let from = self.toks[line].span.start;
        let mut i = self.stmt_diags;
        while i < self.diags.len() {
            if self.diags[i].span.start >= from {
                self.diags.remove(i);
            } else {
                i += 1;
            }
        }
    }

    /// The statement ended with an operator and the next line, read as its continuation,
    /// begins a statement of its own. What went wrong on that line is reported when it is
    /// read again on its own; here the error is the operator with nothing after it.
    #[cold]
    fn dangling_operator(&mut self, line: usize) {
        let Some(op) = self.prev_token(line) else {
            return;
        };
        self.forget_from(line);
        let t = self.text(&op.span);
        let d = Diagnostic::error(
            DiagKind::UnexpectedToken,
            op.span.clone(),
            format!("`{t}` ends the line but has nothing after it"),
        )
        .expected(
            format!("an expression after `{t}`"),
            "a new statement on the next line",
        )
        .hint(format!(
            "finish the expression, or remove the `{t}`; a line ending in `{t}` continues on \
             the next line"
        ));
        self.diags.push(d);
    }

    /// The first token of the line holding token `e` (not before `start`).
    fn line_start(&self, start: usize, e: usize) -> usize {
        let mut i = e.min(self.toks.len() - 1);
        while i > start && !matches!(self.toks[i - 1].kind, TokenKind::Newline) {
            i -= 1;
        }
        i
    }

    /// The first token after the line holding token `e`.
    fn next_line(&self, e: usize) -> usize {
        let mut i = e;
        while !matches!(self.toks[i].kind, TokenKind::Newline | TokenKind::Eof) {
            i += 1;
        }
        while matches!(self.toks[i].kind, TokenKind::Newline) {
            i += 1;
        }
        i
    }

    /// Whether the tokens at `i` read like the start of a statement of their own.
    fn begins_statement(&self, i: usize) -> bool {
        match &self.toks[i].kind {
            TokenKind::Keyword(Keyword::Given | Keyword::Check | Keyword::Sweep) => true,
            TokenKind::Name(_) => matches!(
                self.toks.get(i + 1).map(|t| &t.kind),
                Some(TokenKind::Eq | TokenKind::LBracket)
            ),
            _ => false,
        }
    }

    // ---- expressions --------------------------------------------------------------------
    //
    // Expressions are read by operator precedence with explicit stacks (operands, and
    // operators interleaved with open brackets), so the parser's own stack use does not
    // grow with the input. Binding strength, loosest first: `+ -` · `||` · `* /` ·
    // tolerance (`±`, `+/-`, `..`) · unary `-` · `^` (right-associative) · calls and fields.

    fn expr(&mut self) -> PResult<Node> {
        let mut vals: Vec<Node> = Vec::new();
        let mut ops: Vec<Op> = Vec::new();
        loop {
            self.operand(&mut vals, &mut ops)?;
            if !self.operator(&mut vals, &mut ops)? {
                break;
            }
        }
        while !ops.is_empty() {
            self.reduce(&mut vals, &mut ops)?;
        }
        vals.pop().ok_or(Stop)
    }

    /// Refuses to open one more level beyond the limit.
    fn room(&mut self, ops: &[Op]) -> PResult<()> {
        if ops.len() as u32 >= MAX_DEPTH {
            return Err(self.too_deep());
        }
        Ok(())
    }

    /// Reads prefix signs and one primary (or opens a bracket and returns to read inside).
    fn operand(&mut self, vals: &mut Vec<Node>, ops: &mut Vec<Op>) -> PResult<()> {
        loop {
            let t = self.tok();
            let leaf = |kind| Node {
                e: Expr {
                    kind,
                    span: t.span.clone(),
                },
                d: 1,
                tol: false,
            };
            let node = match &t.kind {
                TokenKind::Minus | TokenKind::Plus => {
                    self.room(ops)?;
                    let neg = matches!(t.kind, TokenKind::Minus);
                    ops.push(Op::Prefix {
                        neg,
                        tok: self.bump(),
                    });
                    continue;
                }
                TokenKind::LParen => {
                    self.room(ops)?;
                    ops.push(Op::Group(Group::Paren { open: self.bump() }));
                    continue;
                }
                TokenKind::LBracket => {
                    self.room(ops)?;
                    let open = self.bump();
                    if matches!(self.peek(), TokenKind::RBracket) {
                        let close = self.bump();
                        Node {
                            e: Expr {
                                kind: ExprKind::List(Vec::new()),
                                span: t.span.start..self.toks[close].span.end,
                            },
                            d: 1,
                            tol: false,
                        }
                    } else {
                        ops.push(Op::Group(Group::List {
                            open,
                            items: Vec::new(),
                            d: 0,
                        }));
                        continue;
                    }
                }
                TokenKind::Number { value, unit } => leaf(ExprKind::Number {
                    value: *value,
                    unit: unit.clone(),
                }),
                TokenKind::Code { value, kind, text } => leaf(ExprKind::Code {
                    value: *value,
                    kind: *kind,
                    text: text.clone(),
                }),
                TokenKind::Str(s) => leaf(ExprKind::Str(s.clone())),
                TokenKind::Name(n) => leaf(ExprKind::Name(n.clone())),
                // Already reported by the lexer.
                TokenKind::BadValue => leaf(ExprKind::Error),
                _ => return Err(self.operand_error()),
            };
            if matches!(
                t.kind,
                TokenKind::Number { .. }
                    | TokenKind::Code { .. }
                    | TokenKind::Str(_)
                    | TokenKind::Name(_)
                    | TokenKind::BadValue
            ) {
                self.bump();
            }
            vals.push(node);
            return Ok(());
        }
    }

    #[cold]
    fn operand_error(&mut self) -> Stop {
        let t = self.tok();
        let hint = match &t.kind {
            TokenKind::Dot
                if matches!(
                    self.toks.get(self.pos + 1).map(|t| &t.kind),
                    Some(TokenKind::Number { .. })
                ) =>
            {
                Some("write a leading zero: `0.5`".to_string())
            }
            TokenKind::UnitSymbol(c) => Some(symbol_hint(*c)),
            TokenKind::Star | TokenKind::Slash | TokenKind::Caret => {
                Some("an operator needs a value on each side".to_string())
            }
            TokenKind::Keyword(k) => Some(format!(
                "`{}` is a keyword and cannot be a name",
                k.as_str()
            )),
            TokenKind::RParen | TokenKind::RBracket if self.matches[self.pos].is_none() => {
                Some("this closing bracket has no opening one".to_string())
            }
            _ => None,
        };
        self.fail("an expression", hint)
    }

    /// After an operand: applies calls and fields, closes brackets, and pushes the next
    /// operator. Returns false at the end of the expression.
    fn operator(&mut self, vals: &mut Vec<Node>, ops: &mut Vec<Op>) -> PResult<bool> {
        loop {
            let kind = self.peek();
            let (op, prec) = match kind {
                TokenKind::Dot => {
                    let dot = self.bump();
                    let field = self.name("a field name after `.`")?;
                    let Some(base) = vals.pop() else {
                        return Err(Stop);
                    };
                    let d = base.d + 1;
                    if d > MAX_DEPTH {
                        self.pos = dot;
                        return Err(self.too_deep());
                    }
                    let span = base.e.span.start..field.span.end;
                    vals.push(Node {
                        e: Expr {
                            kind: ExprKind::Field {
                                base: Box::new(base.e),
                                field,
                            },
                            span,
                        },
                        d,
                        tol: false,
                    });
                    continue;
                }
                TokenKind::LParen if vals.last().is_some_and(|v| v.e.path().is_some()) => {
                    self.room(ops)?;
                    self.bump();
                    let Some(callee) = vals.pop() else {
                        return Err(Stop);
                    };
                    if matches!(self.peek(), TokenKind::RParen) {
                        let close = self.bump();
                        let node = self.call_node(callee, Vec::new(), 0, close)?;
                        vals.push(node);
                        continue;
                    }
                    let name = self.argument_name()?;
                    ops.push(Op::Group(Group::Call {
                        callee,
                        args: Vec::new(),
                        d: 0,
                        first_named: name.clone(),
                        name,
                        broken: false,
                    }));
                    return Ok(true);
                }
                TokenKind::Comma => match innermost_group(ops) {
                    Some(Group::Call { .. } | Group::List { .. }) => {
                        self.finish_item(vals, ops)?;
                        self.bump();
                        let closer = match innermost_group(ops) {
                            Some(Group::Call { .. }) => TokenKind::RParen,
                            _ => TokenKind::RBracket,
                        };
                        if self.peek() == &closer {
                            // A trailing comma.
                            self.close_group(vals, ops)?;
                            continue;
                        }
                        if let Some(Group::Call { .. }) = innermost_group(ops) {
                            let name = self.argument_name()?;
                            if let Some(Op::Group(Group::Call {
                                name: slot,
                                first_named,
                                ..
                            })) = ops.last_mut()
                            {
                                if first_named.is_none() {
                                    first_named.clone_from(&name);
                                }
                                *slot = name;
                            }
                        }
                        return Ok(true);
                    }
                    Some(Group::Paren { .. }) => return Err(self.group_error(vals, ops)),
                    None => return Ok(false),
                },
                TokenKind::RParen | TokenKind::RBracket => {
                    let fits = match innermost_group(ops) {
                        Some(Group::Paren { .. } | Group::Call { .. }) => {
                            matches!(kind, TokenKind::RParen)
                        }
                        Some(Group::List { .. }) => matches!(kind, TokenKind::RBracket),
                        None => return Ok(false),
                    };
                    if !fits {
                        return Err(self.group_error(vals, ops));
                    }
                    self.finish_item(vals, ops)?;
                    self.close_group(vals, ops)?;
                    continue;
                }
                TokenKind::Caret => (Op::Pow { tok: self.pos }, PREC_POW),
                TokenKind::PlusMinus | TokenKind::DotDot => (
                    Op::Tol {
                        range: matches!(kind, TokenKind::DotDot),
                        tok: self.pos,
                    },
                    PREC_TOL,
                ),
                TokenKind::Plus => (Op::bin(BinOp::Add, self.pos), PREC_SUM),
                TokenKind::Minus => (Op::bin(BinOp::Sub, self.pos), PREC_SUM),
                TokenKind::Parallel => (Op::bin(BinOp::Parallel, self.pos), PREC_PARALLEL),
                TokenKind::Star => (Op::bin(BinOp::Mul, self.pos), PREC_PRODUCT),
                TokenKind::Slash => (Op::bin(BinOp::Div, self.pos), PREC_PRODUCT),
                _ if innermost_group(ops).is_some() => {
                    return Err(self.group_error(vals, ops));
                }
                _ => return Ok(false),
            };
            // Left-associative operators first reduce what binds at least as tightly;
            // `^` is right-associative and reduces nothing (nothing binds tighter).
            if prec != PREC_POW {
                while ops.last().and_then(Op::prec).is_some_and(|p| p >= prec) {
                    self.reduce(vals, ops)?;
                }
            }
            if prec == PREC_TOL && vals.last().is_some_and(|v| v.tol) {
                return Err(self.chained_tolerance(vals));
            }
            self.room(ops)?;
            let op_tok = self.bump();
            if matches!(self.toks[op_tok].kind, TokenKind::Star)
                && matches!(self.peek(), TokenKind::Star)
            {
                let hint = "write a power with `^`: `x^2`".to_string();
                return Err(self.fail("an expression", Some(hint)));
            }
            ops.push(op);
            return Ok(true);
        }
    }

    /// `name:` at the start of a call argument.
    fn argument_name(&mut self) -> PResult<Option<Ident>> {
        if matches!(self.peek(), TokenKind::Name(_))
            && matches!(self.peek_after(1), TokenKind::Colon)
        {
            let name = self.name("an argument name")?;
            self.bump(); // `:`
            return Ok(Some(name));
        }
        Ok(None)
    }

    /// Reduces the operators of the current bracket and files its value as an argument or
    /// list item (for parentheses the value stays on the operand stack).
    fn finish_item(&mut self, vals: &mut Vec<Node>, ops: &mut Vec<Op>) -> PResult<()> {
        while ops.last().is_some_and(|o| !matches!(o, Op::Group(_))) {
            self.reduce(vals, ops)?;
        }
        if let Some(Op::Group(Group::Paren { .. })) = ops.last() {
            return Ok(());
        }
        let Some(item) = vals.pop() else {
            return Err(Stop);
        };
        let mut late_positional = None;
        match ops.last_mut() {
            Some(Op::Group(Group::Call {
                args,
                d,
                first_named,
                name,
                broken,
                ..
            })) => {
                *d = (*d).max(item.d);
                let name = name.take();
                if name.is_none() && first_named.is_some() {
                    late_positional = first_named.clone();
                    *broken = true;
                }
                args.push(Arg {
                    name,
                    value: item.e,
                });
            }
            Some(Op::Group(Group::List { items, d, .. })) => {
                *d = (*d).max(item.d);
                items.push(item.e);
            }
            _ => return Err(Stop),
        }
        if let Some(first) = late_positional {
            self.positional_after_named(ops, &first);
        }
        Ok(())
    }

    #[cold]
    fn positional_after_named(&mut self, ops: &[Op], first: &Ident) {
        let Some(Op::Group(Group::Call { args, .. })) = ops.last() else {
            return;
        };
        let Some(arg) = args.last() else {
            return;
        };
        let d = Diagnostic::error(
            DiagKind::UnexpectedToken,
            arg.value.span.clone(),
            "a positional argument after a named one",
        )
        .expected("a named argument (`name: value`)", "a positional one")
        .hint(format!(
            "name this argument, or move it before `{}:`",
            first.name
        ));
        self.diags.push(d);
    }

    /// Consumes the closing bracket of the innermost group and pushes its value.
    fn close_group(&mut self, vals: &mut Vec<Node>, ops: &mut Vec<Op>) -> PResult<()> {
        let close = self.bump();
        let end = self.toks[close].span.end;
        let node = match ops.pop() {
            Some(Op::Group(Group::Paren { open })) => {
                let Some(mut inner) = vals.pop() else {
                    return Err(Stop);
                };
                inner.e.span = self.toks[open].span.start..end;
                inner.tol = false;
                inner
            }
            Some(Op::Group(Group::Call {
                callee,
                broken: true,
                ..
            })) => Node {
                e: Expr {
                    kind: ExprKind::Error,
                    span: callee.e.span.start..end,
                },
                d: 1,
                tol: false,
            },
            Some(Op::Group(Group::Call {
                callee, args, d, ..
            })) => self.call_node(callee, args, d, close)?,
            Some(Op::Group(Group::List { open, items, d })) => {
                let d = d + 1;
                if d > MAX_DEPTH {
                    self.pos = close;
                    return Err(self.too_deep());
                }
                Node {
                    e: Expr {
                        kind: ExprKind::List(items),
                        span: self.toks[open].span.start..end,
                    },
                    d,
                    tol: false,
                }
            }
            _ => return Err(Stop),
        };
        vals.push(node);
        Ok(())
    }

    fn call_node(&mut self, callee: Node, args: Vec<Arg>, d: u32, close: usize) -> PResult<Node> {
        let d = callee.d.max(d) + 1;
        if d > MAX_DEPTH {
            self.pos = close;
            return Err(self.too_deep());
        }
        let span = callee.e.span.start..self.toks[close].span.end;
        Ok(Node {
            e: Expr {
                kind: ExprKind::Call {
                    callee: Box::new(callee.e),
                    args,
                },
                span,
            },
            d,
            tol: false,
        })
    }

    /// An unexpected token inside a bracket.
    #[cold]
    fn group_error(&mut self, vals: &[Node], ops: &[Op]) -> Stop {
        let expected = match innermost_group(ops) {
            Some(Group::Paren { .. }) => "`)`",
            Some(Group::Call { .. }) => "`,` or `)`",
            _ => "`,` or `]`",
        };
        match vals.last() {
            Some(v) => self.fail_after(&v.e.clone(), expected),
            None => self.fail(expected, None),
        }
    }

    #[cold]
    fn chained_tolerance(&mut self, vals: &[Node]) -> Stop {
        let text = vals.last().map_or("", |v| self.text(&v.e.span)).to_string();
        let found = self.describe(&self.toks[self.pos]);
        let d = Diagnostic::error(
            DiagKind::UnexpectedToken,
            self.here(),
            "tolerance operators do not chain",
        )
        .expected("an operator or the end of the expression", found)
        .hint(format!(
            "give one tolerance, or group the first in parentheses: `({text}) …`"
        ));
        self.report(d)
    }

    /// Applies the operator on top of the stack to its operands.
    fn reduce(&mut self, vals: &mut Vec<Node>, ops: &mut Vec<Op>) -> PResult<()> {
        let Some(op) = ops.pop() else {
            return Err(Stop);
        };
        let (tok, two) = match &op {
            Op::Bin { tok, .. } | Op::Pow { tok } | Op::Tol { tok, .. } => (*tok, true),
            Op::Prefix { tok, .. } => (*tok, false),
            Op::Group(_) => return Err(Stop),
        };
        let rhs = vals.pop().ok_or(Stop)?;
        let lhs = if two {
            Some(vals.pop().ok_or(Stop)?)
        } else {
            None
        };
        let d = rhs.d.max(lhs.as_ref().map_or(0, |l| l.d)) + 1;
        let start = lhs
            .as_ref()
            .map_or(self.toks[tok].span.start, |l| l.e.span.start);
        let span = start..rhs.e.span.end;
        if let (Op::Prefix { neg: false, .. }, None) = (&op, &lhs) {
            // Unary plus changes nothing but the span.
            let mut node = rhs;
            node.e.span = span;
            vals.push(node);
            return Ok(());
        }
        if d > MAX_DEPTH {
            self.pos = tok;
            return Err(self.too_deep());
        }
        let mut tol = false;
        let kind = match (op, lhs) {
            (Op::Bin { op, .. }, Some(l)) => ExprKind::Binary {
                op,
                lhs: Box::new(l.e),
                rhs: Box::new(rhs.e),
            },
            (Op::Pow { .. }, Some(l)) => ExprKind::Binary {
                op: BinOp::Pow,
                lhs: Box::new(l.e),
                rhs: Box::new(rhs.e),
            },
            (Op::Tol { range, .. }, Some(l)) => {
                tol = true;
                if range && self.range_lacks_units(&l.e, &rhs.e) {
                    ExprKind::Error
                } else if range {
                    ExprKind::Range {
                        lo: Box::new(l.e),
                        hi: Box::new(rhs.e),
                    }
                } else {
                    ExprKind::PlusMinus {
                        base: Box::new(l.e),
                        spread: Box::new(rhs.e),
                    }
                }
            }
            (Op::Prefix { .. }, None) => ExprKind::Neg(Box::new(rhs.e)),
            _ => return Err(Stop),
        };
        vals.push(Node {
            e: Expr { kind, span },
            d,
            tol,
        });
        Ok(())
    }

    /// `10.8 .. 13.2 V`: each end of a range carries its own unit. True when reported.
    fn range_lacks_units(&mut self, lo: &Expr, hi: &Expr) -> bool {
        fn literal(mut e: &Expr) -> Option<(&Expr, Option<&UnitExpr>)> {
            loop {
                match &e.kind {
                    ExprKind::Number { unit, .. } => return Some((e, unit.as_ref())),
                    ExprKind::Neg(inner) => e = inner,
                    _ => return None,
                }
            }
        }
        let (Some((lo_n, lo_u)), Some((hi_n, hi_u))) = (literal(lo), literal(hi)) else {
            return false;
        };
        let unit = match (lo_u, hi_u) {
            (None, Some(u)) | (Some(u), None) => u.text.clone(),
            _ => return false,
        };
        let bare = |e: &Expr, n: &Expr, u: Option<&UnitExpr>| match u {
            Some(_) => self.text(&e.span).to_string(),
            None => format!("{} {unit}", self.text(&(e.span.start..n.span.end))),
        };
        let fixed = format!("{} .. {}", bare(lo, lo_n, lo_u), bare(hi, hi_n, hi_u));
        let d = Diagnostic::error(
            DiagKind::RangeNeedsUnits,
            lo.span.start..hi.span.end,
            "each end of a range carries its own unit",
        )
        .hint(format!("write `{fixed}`"));
        self.diags.push(d);
        true
    }
}

fn symbol_hint(c: char) -> String {
    match c {
        '°' => "write the unit after a number: `25 °C`".to_string(),
        '%' => "write the unit after a number: `10 %`".to_string(),
        _ => "write a power with `^`: `x^2`".to_string(),
    }
}

/// The last operand of an expression (`3` in `1 + 2 * 3`, but `(1 + 2)` as a whole): what
/// a following token touches.
fn rightmost(mut e: &Expr) -> &Expr {
    loop {
        let next = match &e.kind {
            ExprKind::Binary { rhs, .. } => rhs,
            ExprKind::PlusMinus { spread, .. } => spread,
            ExprKind::Range { hi, .. } => hi,
            _ => return e,
        };
        // A parenthesised operand ends at its `)`, after its last operand.
        if next.span.end != e.span.end {
            return e;
        }
        e = next;
    }
}
