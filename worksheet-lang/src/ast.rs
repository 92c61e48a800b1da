//! The syntax tree of a worksheet cell.
//!
//! Every span is a byte range into the *original* cell source (before the look-alike
//! fold), so diagnostics and editor positions always point at what the user typed.

/// A byte range into the original source of a cell.
pub type Span = std::ops::Range<usize>;

/// A parsed cell: every statement that could be recognised, plus every diagnostic.
/// Parsing never fails; a statement that could not be understood is `StmtKind::Error`.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Program {
    pub stmts: Vec<Stmt>,
    pub diagnostics: Vec<crate::diagnostic::Diagnostic>,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Stmt {
    pub kind: StmtKind,
    /// The whole statement, continuation lines included, without a trailing comment.
    pub span: Span,
}

#[derive(Debug, Clone, PartialEq)]
pub enum StmtKind {
    /// `given NAME [UNIT]? = EXPR "note"?`
    Given(Definition),
    /// `NAME [UNIT]? = EXPR "note"?`
    Define(Definition),
    /// `NAME(a, b) [UNIT]? = EXPR`
    Function {
        name: Ident,
        params: Vec<Ident>,
        unit: Option<UnitExpr>,
        body: Expr,
    },
    /// `check EXPR OP EXPR "note"?`
    Check {
        lhs: Expr,
        op: CmpOp,
        rhs: Expr,
        note: Option<Note>,
    },
    /// `sweep NAME over A .. B (steps N | by STEP)?[, NAME over …]: EXPR, …`
    Sweep {
        vars: Vec<SweepVar>,
        exprs: Vec<Expr>,
    },
    /// `EXPR` or `EXPR as UNIT`
    Show {
        expr: Expr,
        as_unit: Option<UnitExpr>,
    },
    /// A statement that did not parse; its diagnostics are in `Program::diagnostics`.
    Error,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Definition {
    pub name: Ident,
    pub unit: Option<UnitExpr>,
    pub value: Expr,
    pub note: Option<Note>,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Ident {
    /// NFKC-normalised name.
    pub name: String,
    pub span: Span,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Note {
    pub text: String,
    pub span: Span,
}

/// A unit as written (after folding, e.g. `K/W`, `mA`, `°C`); resolved by `units::parse_unit`.
#[derive(Debug, Clone, PartialEq)]
pub struct UnitExpr {
    pub text: String,
    pub span: Span,
    /// The unit, when the lexer has already parsed it (a number's unit); otherwise the
    /// evaluator parses `text` and reports what is wrong with it.
    pub parsed: Option<Box<crate::units::Unit>>,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CmpOp {
    Lt,
    Le,
    Gt,
    Ge,
}

impl CmpOp {
    pub fn symbol(self) -> &'static str {
        match self {
            CmpOp::Lt => "<",
            CmpOp::Le => "<=",
            CmpOp::Gt => ">",
            CmpOp::Ge => ">=",
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
pub struct SweepVar {
    pub name: Ident,
    pub from: Expr,
    pub to: Expr,
    pub step: Option<SweepStep>,
}

#[derive(Debug, Clone, PartialEq)]
pub enum SweepStep {
    Steps(Expr),
    By(Expr),
}

#[derive(Debug, Clone, PartialEq)]
pub struct Expr {
    pub kind: ExprKind,
    pub span: Span,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BinOp {
    Add,
    Sub,
    Mul,
    Div,
    Pow,
    /// `a || b`, the parallel combination.
    Parallel,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CodeKind {
    /// IEC 60062 resistance code (`4k7`, `0R47`): the value is in ohms.
    Resistance,
    /// IEC 60062 capacitance code (`4n7`, `2u2`): the value is in farads.
    Capacitance,
}

#[derive(Debug, Clone, PartialEq)]
pub enum ExprKind {
    /// A number with an optional unit written directly after it (`12 V`, `0.5 K/W`, `12`).
    Number {
        value: f64,
        unit: Option<UnitExpr>,
    },
    /// An IEC 60062 component-value code; `value` is already in ohms or farads.
    Code {
        value: f64,
        kind: CodeKind,
        text: String,
    },
    Str(String),
    Name(String),
    Neg(Box<Expr>),
    Binary {
        op: BinOp,
        lhs: Box<Expr>,
        rhs: Box<Expr>,
    },
    /// `base ± spread` or `base +/- spread`.
    PlusMinus {
        base: Box<Expr>,
        spread: Box<Expr>,
    },
    /// `lo .. hi`.
    Range {
        lo: Box<Expr>,
        hi: Box<Expr>,
    },
    /// `callee(args)`; the callee is a `Name` or a `Field` path such as `reg.linear`.
    Call {
        callee: Box<Expr>,
        args: Vec<Arg>,
    },
    /// `base.field`
    Field {
        base: Box<Expr>,
        field: Ident,
    },
    /// `[a, b, …]`
    List(Vec<Expr>),
    /// An expression that did not parse.
    Error,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Arg {
    /// `Some` for a named argument (`vout: 5 V`).
    pub name: Option<Ident>,
    pub value: Expr,
}

impl Expr {
    /// The dotted path of a `Name` or `Field` chain (`reg.linear`), if it is one.
    /// A plain name is borrowed; only a dotted path is built.
    pub fn path(&self) -> Option<std::borrow::Cow<'_, str>> {
        match &self.kind {
            ExprKind::Name(n) => Some(std::borrow::Cow::Borrowed(n)),
            ExprKind::Field { base, field } => base
                .path()
                .map(|p| std::borrow::Cow::Owned(format!("{p}.{}", field.name))),
            _ => None,
        }
    }

    /// The two names of a `namespace.name` path (the form of every built-in), without
    /// building the path.
    pub fn two_part_path(&self) -> Option<(&str, &str)> {
        match &self.kind {
            ExprKind::Field { base, field } => match &base.kind {
                ExprKind::Name(ns) => Some((ns, &field.name)),
                _ => None,
            },
            _ => None,
        }
    }
}
