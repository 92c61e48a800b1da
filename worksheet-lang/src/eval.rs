//! Evaluation of expressions in one pass of the worst-case analysis.
//!
//! A *pass* evaluates every definition, check and shown expression of the worksheet under
//! one assignment of the uncertain inputs (see `analysis`). The nominal pass discovers the
//! inputs (each tolerance, range or `tol` site, each chosen part) and the scalars to be
//! analysed; every later pass walks the same code and looks them up.

use crate::ast::{Arg, BinOp, CodeKind, Expr, ExprKind, Span};
use crate::builtins::{self, CallCtx, CallError, CallHost, PartLabel, WarnRule};
use crate::diagnostic::{DiagKind, Diagnostic};
use crate::num::{Dual, Interval};
use crate::units::{self, Dim};
use crate::value::{Num, Record, Value};
use rustc_hash::FxHashMap as HashMap;
use std::sync::Arc;

/// Deepest nesting of user-function calls.
pub const MAX_CALL_DEPTH: usize = 32;
/// When less stack than this is left, evaluation continues on a new segment of this size.
const STACK_RED_ZONE: usize = 128 * 1024;
/// The stack is checked (and grown if short) at every this many levels of nested
/// expressions, not at each: the check and the closure it runs in cost about as much as
/// evaluating a number. Eight levels of evaluation take a few KiB, well inside the red zone.
const STACK_CHECK_EVERY: u32 = 8;
const STACK_GROWTH: usize = 4 * 1024 * 1024;

/// Most user-function calls one statement may make in one evaluation.
pub const MAX_CALLS: usize = 50_000;

/// Longest list a worksheet may build.
pub const MAX_LIST_LEN: usize = 10_000;

/// An evaluation error, turned into a diagnostic at the statement that met it. Boxed: every
/// evaluation step returns a `Result` with it, which stays the size of a value this way.
#[derive(Debug, Clone, PartialEq)]
pub struct EvalError(Box<EvalErrorData>);

/// What an `EvalError` holds (its fields are read and set through the error).
#[derive(Debug, Clone, PartialEq)]
pub struct EvalErrorData {
    pub kind: DiagKind,
    pub span: Span,
    pub message: String,
    pub hint: Option<String>,
    /// For an error that a failed definition caused (`DependencyFailed`): that failure, so
    /// the definitions further down name it rather than the whole chain.
    pub cause: Option<Failed>,
}

/// Why a definition has no value, as the statements that read it report it.
#[derive(Debug, Clone, PartialEq)]
pub struct Failed {
    /// The definition whose own evaluation failed: this one, or one it depends on.
    pub root: String,
    /// That definition's error.
    pub message: String,
}

impl EvalError {
    // Errors are the rare path: kept out of the evaluator's hot code.
    #[cold]
    pub fn new(kind: DiagKind, span: &Span, message: impl Into<String>) -> Self {
        EvalError(Box::new(EvalErrorData {
            kind,
            span: span.clone(),
            message: message.into(),
            hint: None,
            cause: None,
        }))
    }
    pub fn hint(mut self, h: impl Into<String>) -> Self {
        self.hint = Some(h.into());
        self
    }
    pub fn into_diagnostic(self) -> Diagnostic {
        let e = *self.0;
        let mut d = Diagnostic::error(e.kind, e.span, e.message);
        d.hint = e.hint;
        d
    }
}

impl std::ops::Deref for EvalError {
    type Target = EvalErrorData;
    fn deref(&self) -> &EvalErrorData {
        &self.0
    }
}

impl std::ops::DerefMut for EvalError {
    fn deref_mut(&mut self) -> &mut EvalErrorData {
        &mut self.0
    }
}

type R<T> = Result<T, EvalError>;

/// One uncertain input of the worksheet: a perturbation variable with its range.
#[derive(Debug, Clone, PartialEq)]
pub struct InputInfo {
    pub key: String,
    /// Who it belongs to, for shares and corner descriptions (`InputLabel::text`).
    pub label: InputLabel,
    pub nominal: f64,
    pub lo: f64,
    pub hi: f64,
}

/// What an uncertain input is called in shares and corner descriptions, made into text
/// only when one is shown.
#[derive(Debug, Clone, PartialEq)]
pub enum InputLabel {
    /// A given's tolerance or range: "vin".
    Given(String),
    /// A tolerance written inside a definition: "tolerance in R7".
    Tolerance(String),
    /// A chosen part's tolerance, in its statement: "r = 390 Ω ± 5 % in R7".
    Part(PartLabel, String),
}

impl InputLabel {
    pub fn text(&self) -> String {
        match self {
            InputLabel::Given(name) => name.clone(),
            InputLabel::Tolerance(name) => join(&["tolerance in ", name]),
            InputLabel::Part(part, name) => format!("{} in {name}", part.text()),
        }
    }
}

/// A probed value whose worst case decides a warning.
#[derive(Debug, Clone, PartialEq)]
pub struct ProbeInfo {
    pub scalar: usize,
    /// The statement it belongs to (for the warning's source).
    pub source: String,
    /// The key of that statement.
    pub stmt: String,
    pub rule: WarnRule,
}

/// What the nominal pass discovers, shared by every later pass.
#[derive(Debug, Default, Clone)]
pub struct Registry {
    pub inputs: Vec<InputInfo>,
    input_index: HashMap<String, usize>,
    /// The scalar each input's site produces (its value, for describing corners).
    pub input_scalars: Vec<usize>,
    /// Scalar ids by key; ids are handed out in order, so the map's length is the count.
    scalar_index: HashMap<String, usize>,
    pub(crate) choices: HashMap<String, f64>,
    pub probes: Vec<ProbeInfo>,
    /// Unconditional warnings of built-ins: (statement label, statement key, text).
    pub warnings: Vec<(String, String, String)>,
    /// What built-ins said their statements work with: (statement key, hazard), each once.
    pub hazards: Vec<(String, crate::results::Hazard)>,
    /// The argument ranges of each built-in call seen in a box pass (by call key).
    pub observed: HashMap<String, Vec<Option<Interval>>>,
    /// Argument ranges known from an earlier round, for choices that need them.
    pub known: HashMap<String, Vec<Option<Interval>>>,
    /// Set when a built-in asked for an argument range that was not known yet.
    pub wanted_ranges: std::cell::Cell<bool>,
    units: units::UnitCache,
    /// Buffers for building keys, lent to each built-in call in turn: its own key, and the
    /// keys of its choices and probes.
    call_buf: String,
    key_buf: String,
    /// The buffer for the keys of tolerance sites.
    site_buf: String,
    /// Each built-in call's `CallSite`, by its call key (`sites` indexes `call_sites`).
    sites: HashMap<String, usize>,
    call_sites: Vec<CallSite>,
}

/// What the passes found of one built-in call, by the key the built-in gives each of its
/// choices, parts and probes: the choices and scalar ids that would otherwise be found by
/// building the full key and hashing it, once per pass. A call has a few of each, so a scan
/// beats a map. It only caches lookups: the nominal pass registers as it always does.
#[derive(Debug, Default, Clone)]
struct CallSite {
    choices: Vec<(&'static str, f64)>,
    probes: Vec<(&'static str, usize)>,
    /// A part's input and the scalar of its value.
    parts: Vec<(&'static str, usize, usize)>,
}

impl Registry {
    /// An empty registry with room for the scalars of `definitions` definitions (a few
    /// each: a record has a field per scalar), so the index grows once or not at all.
    pub fn for_definitions(definitions: usize) -> Self {
        Registry {
            scalar_index: HashMap::with_capacity_and_hasher(8 * definitions, Default::default()),
            sites: HashMap::with_capacity_and_hasher(definitions, Default::default()),
            input_index: HashMap::with_capacity_and_hasher(definitions, Default::default()),
            choices: HashMap::with_capacity_and_hasher(definitions, Default::default()),
            observed: HashMap::with_capacity_and_hasher(definitions, Default::default()),
            ..Registry::default()
        }
    }

    /// A unit by its text, parsed once per evaluation.
    pub fn unit(&mut self, text: &str) -> Result<&units::Unit, units::UnitError> {
        self.units.get(text)
    }

    pub fn scalar_id(&mut self, key: &str) -> usize {
        if let Some(&i) = self.scalar_index.get(key) {
            return i;
        }
        let i = self.scalar_index.len();
        self.scalar_index.insert(key.to_string(), i);
        i
    }
    /// How many scalars the nominal pass registered.
    pub fn scalar_count(&self) -> usize {
        self.scalar_index.len()
    }
    pub fn find_scalar(&self, key: &str) -> Option<usize> {
        self.scalar_index.get(key).copied()
    }
    /// The index of the call site with key `call_key` in `call_sites`, added when new.
    fn call_site(&mut self, call_key: &str) -> usize {
        if let Some(&i) = self.sites.get(call_key) {
            return i;
        }
        let i = self.call_sites.len();
        self.call_sites.push(CallSite::default());
        self.sites.insert(call_key.to_string(), i);
        i
    }
}

/// A key made of `parts`, joined. Keys are built in every pass, so without the formatting
/// machinery.
pub(crate) fn join(parts: &[&str]) -> String {
    let mut s = String::with_capacity(parts.iter().map(|p| p.len()).sum());
    for p in parts {
        s.push_str(p);
    }
    s
}

/// How the inputs are set in a pass.
#[derive(Debug, Clone, PartialEq)]
pub enum Mode {
    /// Every input at its nominal point; inputs, scalars and choices are registered.
    Nominal,
    /// Every input over its range; the derivative of input `seed` is carried (if any).
    Box { seed: Option<usize> },
    /// Each input at the given interval (points for corners); the derivative of input
    /// `seed` is carried (if any).
    Assign {
        values: Vec<Interval>,
        seed: Option<usize>,
    },
}

/// The values of one pass.
#[derive(Debug)]
pub struct Pass {
    pub mode: Mode,
    /// Scalar values by scalar id (None where not reached).
    pub scalars: Vec<Option<Num>>,
    /// The scalar ids in the order they were set (to see what one statement recorded),
    /// while the pass runs.
    pub touched: Vec<usize>,
    /// The pass evaluated only the statements some scalars needed
    /// (`analysis::Evaluate::pass_needing`): a scalar it lacks was not evaluated, rather
    /// than failed.
    pub partial: bool,
}

impl Pass {
    pub fn new(mode: Mode, n_scalars: usize) -> Self {
        Pass {
            mode,
            scalars: vec![None; n_scalars],
            touched: Vec::new(),
            partial: false,
        }
    }
    /// Sets a scalar without noting it in `touched` (for values taken over whole from an
    /// earlier pass, whose statement is not evaluated).
    pub(crate) fn put_scalar(&mut self, id: usize, n: Num) {
        if id >= self.scalars.len() {
            self.scalars.resize(id + 1, None);
        }
        self.scalars[id] = Some(n);
    }
    pub(crate) fn set_scalar(&mut self, id: usize, n: Num) {
        self.put_scalar(id, n);
        self.touched.push(id);
    }
}

/// A user function.
#[derive(Debug, Clone)]
pub struct Function {
    pub params: Vec<String>,
    pub body: Expr,
    pub unit: Option<units::Unit>,
}

/// What names resolve to during a pass.
pub trait Names {
    /// The value of a definition in this pass; `Err` when it failed or is not defined.
    fn lookup(&self, name: &str) -> Option<Result<Value, Failed>>;
    fn function(&self, name: &str) -> Option<&Function>;
    /// The name's value is exact in every pass (see `is_certain`); false when unsure.
    fn certain(&self, _name: &str) -> bool {
        false
    }
    /// Every name in scope, for "did you mean".
    fn all_names(&self) -> Vec<String>;
}

/// The evaluator for one statement in one pass.
pub struct Evaluator<'a> {
    pub names: &'a dyn Names,
    pub reg: &'a mut Registry,
    pub pass: &'a mut Pass,
    /// Key of the statement being evaluated ("cell:3"), prefix of site keys.
    pub stmt_key: &'a str,
    /// Human name of the statement (definition name, or "check"), for labels.
    pub stmt_label: &'a str,
    /// Label given to this statement's tolerance sites when it is a `given`.
    pub given: bool,
    pub locals: Vec<(String, Value)>,
    pub depth: usize,
    /// User-function calls made for this statement in this pass (capped: recursion that
    /// fans out would otherwise run for ever within the depth cap).
    pub calls: usize,
    /// Warnings (unit read as a unit although a name exists) met in the nominal pass.
    pub notes: Vec<Diagnostic>,
    /// How deeply `eval` is nested now; the stack is checked every `STACK_CHECK_EVERY`
    /// levels.
    pub nest: u32,
}

impl<'a> Evaluator<'a> {
    fn nominal(&self) -> bool {
        matches!(self.pass.mode, Mode::Nominal)
    }

    /// Records a scalar (a value, a record field) of the current pass under `key`.
    pub fn record(&mut self, key: &str, n: Num) {
        let id = if self.nominal() {
            self.reg.scalar_id(key)
        } else {
            match self.reg.find_scalar(key) {
                Some(id) => id,
                None => return,
            }
        };
        self.pass.set_scalar(id, n);
    }

    /// Records every numeric leaf of a value under `key` (records as `key.field`).
    pub fn record_value(&mut self, key: &str, v: &Value) {
        match v {
            Value::Num(n) => self.record(key, *n),
            Value::Record(_) => {
                // One buffer for every field's key, nested records included.
                let mut buf = String::with_capacity(key.len() + 16);
                buf.push_str(key);
                self.record_fields(&mut buf, v);
            }
            _ => {}
        }
    }

    /// `record_value` with the key in `buf`, which it leaves as it found it.
    fn record_fields(&mut self, buf: &mut String, v: &Value) {
        match v {
            Value::Num(n) => self.record(buf, *n),
            Value::Record(r) => {
                let len = buf.len();
                for f in &r.fields {
                    buf.push('.');
                    buf.push_str(f.name);
                    self.record_fields(buf, &f.value);
                    buf.truncate(len);
                }
            }
            _ => {}
        }
    }

    /// The value of an input site in this pass, registering it in the nominal pass.
    /// `label` is called where the input is registered, in the nominal pass.
    fn input(
        &mut self,
        key: &str,
        label: impl FnOnce() -> InputLabel,
        nominal: f64,
        lo: f64,
        hi: f64,
    ) -> R<Dual> {
        // A site of zero width (`± 0 %`, `5 V .. 5 V`, a part of tolerance 0) is exact: it is
        // no input, in every pass alike (its numbers come from the text or a fixed choice).
        if lo == hi && lo == nominal {
            return Ok(Dual::constant(nominal));
        }
        let id = match self.reg.input_index.get(key) {
            Some(&id) => id,
            None if self.nominal() => {
                let id = self.reg.inputs.len();
                self.reg.inputs.push(InputInfo {
                    key: key.to_string(),
                    label: label(),
                    nominal,
                    lo,
                    hi,
                });
                self.reg.input_index.insert(key.to_string(), id);
                id
            }
            None => {
                return Err(EvalError::new(
                    DiagKind::DomainError,
                    &(0..0),
                    "internal: an uncertain input appeared outside the nominal pass",
                ))
            }
        };
        Ok(self.input_value(id))
    }

    /// The value of input `id` in this pass.
    fn input_value(&self, id: usize) -> Dual {
        let info = &self.reg.inputs[id];
        match &self.pass.mode {
            Mode::Nominal => Dual::constant(info.nominal),
            Mode::Box { seed } => Dual::input(Interval::new(info.lo, info.hi), *seed == Some(id)),
            Mode::Assign { values, seed } => Dual::input(
                values
                    .get(id)
                    .copied()
                    .unwrap_or(Interval::point(info.nominal)),
                *seed == Some(id),
            ),
        }
    }

    fn input_site(
        &mut self,
        span: &Span,
        nominal: f64,
        lo: f64,
        hi: f64,
        site_value: impl Fn(Dual) -> R<Num>,
    ) -> R<Num> {
        let mut offset = itoa::Buffer::new();
        // "input:statement@offset": the scalar of the site; the site's key is what follows
        // "input:". Built in the registry's buffer (lost, harmlessly, on an error).
        const SCALAR: &str = "input:";
        let mut skey = std::mem::take(&mut self.reg.site_buf);
        fill(
            &mut skey,
            &[SCALAR, self.stmt_key, "@", offset.format(span.start)],
        );
        let key = &skey[SCALAR.len()..];
        let (given, name) = (self.given, self.stmt_label);
        let label = || {
            if given {
                InputLabel::Given(name.to_string())
            } else {
                InputLabel::Tolerance(name.to_string())
            }
        };
        let e = self.input(key, label, nominal, lo, hi)?;
        let n = site_value(e)?;
        if self.nominal() {
            let sid = self.reg.scalar_id(&skey);
            // A site of zero width is exact and registered no input.
            if let Some(&iid) = self.reg.input_index.get(key) {
                if self.reg.input_scalars.len() <= iid {
                    self.reg.input_scalars.resize(iid + 1, usize::MAX);
                }
                self.reg.input_scalars[iid] = sid;
            }
        }
        self.record(&skey, n);
        self.reg.site_buf = skey;
        Ok(n)
    }

    pub fn eval(&mut self, e: &Expr) -> R<Value> {
        // Numbers and names, about half the nodes, skip the large frame of the general case:
        // they nest nothing, a number checks its own value, and every value a name holds is
        // finite (evaluation checks what it makes below, and a sweep's pinned points are
        // checked where they are set, in the worksheet's runner).
        match &e.kind {
            ExprKind::Number { value, unit } => {
                return self
                    .number(*value, unit.as_ref(), &e.span, false)
                    .map(Value::Num)
            }
            ExprKind::Name(n) => return self.name(n, &e.span),
            _ => {}
        }
        self.nest += 1;
        let v = if self.nest.is_multiple_of(STACK_CHECK_EVERY) {
            stacker::maybe_grow(STACK_RED_ZONE, STACK_GROWTH, || self.eval_inner(e))
        } else {
            self.eval_inner(e)
        };
        self.nest -= 1;
        let v = v?;
        if let Value::Num(n) = &v {
            if !n.x.is_finite() {
                return Err(not_finite(&e.span));
            }
        }
        Ok(v)
    }

    fn num(&mut self, e: &Expr) -> R<Num> {
        match self.eval(e)? {
            Value::Num(n) => Ok(n),
            other => Err(EvalError::new(
                DiagKind::TypeMismatch,
                &e.span,
                format!("expected a number here, found {}", other.type_name()),
            )),
        }
    }

    fn eval_inner(&mut self, e: &Expr) -> R<Value> {
        match &e.kind {
            ExprKind::Number { value, unit } => self
                .number(*value, unit.as_ref(), &e.span, false)
                .map(Value::Num),
            ExprKind::Code { value, kind, .. } => Ok(Value::Num(Num::constant(
                *value,
                match kind {
                    CodeKind::Resistance => Dim::RESISTANCE,
                    CodeKind::Capacitance => Dim::CAPACITANCE,
                },
            ))),
            ExprKind::Str(s) => Ok(Value::Str(Arc::from(s.as_str()))),
            ExprKind::Name(n) => self.name(n, &e.span),
            ExprKind::Neg(x) => {
                let n = self.num(x)?;
                if n.abs {
                    return Err(abs_error(&e.span, "negate"));
                }
                Ok(Value::Num(Num { x: -n.x, ..n }))
            }
            ExprKind::Binary { op, lhs, rhs } => {
                let a = self.num(lhs)?;
                let b = self.num(rhs)?;
                let r = binary(*op, a, b, &e.span, &rhs.span)?;
                // An expression divided by itself is exactly one. Interval arithmetic alone
                // cannot see that (the dependency problem), so say it here.
                if *op == BinOp::Div && same_function(lhs, rhs) {
                    return Ok(Value::Num(Num::constant(1.0, r.dim)));
                }
                Ok(Value::Num(r))
            }
            ExprKind::PlusMinus { base, spread } => self.plus_minus(base, spread, &e.span),
            ExprKind::Range { lo, hi } => self.range(lo, hi, &e.span),
            ExprKind::Call { callee, args } => self.call(callee, args, &e.span),
            ExprKind::Field { base, field } => {
                if let Some(b) = builtins::lookup_expr(e) {
                    return Err(EvalError::new(
                        DiagKind::TypeMismatch,
                        &e.span,
                        format!(
                            "`{}` is a built-in function; call it with arguments",
                            b.path
                        ),
                    )
                    .hint(format!("write `{}`", b.doc.signature)));
                }
                match self.eval(base)? {
                    Value::Record(r) => match r.get(&field.name) {
                        Some(f) => Ok(f.value.clone()),
                        None => {
                            let names: Vec<String> =
                                r.fields.iter().map(|f| f.name.to_string()).collect();
                            let mut err = EvalError::new(
                                DiagKind::UnknownName,
                                &field.span,
                                format!("a `{}` result has no field `{}`", r.kind, field.name),
                            );
                            err = match nearest(&field.name, &names) {
                                Some(n) => err.hint(format!(
                                    "did you mean `{n}`? fields: {}",
                                    names.join(", ")
                                )),
                                None => err.hint(format!("its fields are {}", names.join(", "))),
                            };
                            Err(err)
                        }
                    },
                    other => Err(EvalError::new(
                        DiagKind::TypeMismatch,
                        &field.span,
                        format!("only a record has fields; this is {}", other.type_name()),
                    )),
                }
            }
            ExprKind::List(items) => {
                if items.len() > MAX_LIST_LEN {
                    return Err(EvalError::new(
                        DiagKind::Limit,
                        &e.span,
                        format!("a list may hold at most {MAX_LIST_LEN} items"),
                    ));
                }
                let vals = items.iter().map(|i| self.eval(i)).collect::<R<Vec<_>>>()?;
                // Lists of lists multiply: the cap counts every item a list holds.
                let total: usize = vals.iter().map(weight).sum();
                if total > MAX_LIST_LEN {
                    return Err(EvalError::new(
                        DiagKind::Limit,
                        &e.span,
                        format!("a list may hold at most {MAX_LIST_LEN} items in all, nested lists included; this one holds {total}"),
                    ));
                }
                Ok(Value::List(Arc::from(vals)))
            }
            ExprKind::Error => Err(EvalError::new(
                DiagKind::UnexpectedToken,
                &e.span,
                "this part did not parse",
            )),
        }
    }

    /// A number literal; `difference` reads a lone °C/°F as a temperature difference.
    fn number(
        &mut self,
        value: f64,
        unit: Option<&crate::ast::UnitExpr>,
        span: &Span,
        difference: bool,
    ) -> R<Num> {
        let Some(u) = unit else {
            if !value.is_finite() {
                return Err(not_finite(span));
            }
            return Ok(Num::constant(value, Dim::NONE));
        };
        let parsed = match &u.parsed {
            Some(p) => p,
            None => self.reg.unit(&u.text).map_err(|err| {
                let mut e = EvalError::new(DiagKind::UnknownUnit, &u.span, err.message);
                e.hint = err.hint;
                e
            })?,
        };
        let absolute = parsed.is_absolute_temperature() && !difference;
        let num = Num {
            x: Dual::constant(parsed.to_si(value, absolute)),
            dim: parsed.dim,
            abs: absolute,
        };
        // `9e307 kV` overflows on the way to SI.
        if !num.x.is_finite() {
            return Err(not_finite(span));
        }
        if self.nominal() && self.depth == 0 && self.names.lookup(&u.text).is_some() {
            self.note_unit_shadows(u, value, span);
        }
        Ok(num)
    }

    /// Warns that the unit after a number is read as a unit although a name is spelled
    /// the same.
    #[cold]
    fn note_unit_shadows(&mut self, u: &crate::ast::UnitExpr, value: f64, span: &Span) {
        let parsed_text = self
            .reg
            .unit(&u.text)
            .map(|p| p.text.clone())
            .unwrap_or_default();
        self.notes.push(
            Diagnostic::warning(
                DiagKind::UnitShadowsName,
                span.clone(),
                format!(
                    "`{}` after a number is read as the unit {}, not as your `{}`",
                    u.text, parsed_text, u.text
                ),
            )
            .hint(format!(
                "to multiply by the name, write `{value} * {}`",
                u.text
            )),
        );
    }

    fn name(&mut self, n: &str, span: &Span) -> R<Value> {
        if let Some((_, v)) = self.locals.iter().rev().find(|(k, _)| k == n) {
            return Ok(v.clone());
        }
        match self.names.lookup(n) {
            Some(Ok(v)) => return Ok(v),
            Some(Err(failed)) => {
                let message = if failed.root == n {
                    format!("`{n}` has no value: {}", failed.message)
                } else {
                    format!(
                        "`{n}` has no value: it depends on `{}`, which failed: {}",
                        failed.root, failed.message
                    )
                };
                let mut e = EvalError::new(DiagKind::DependencyFailed, span, message);
                e.cause = Some(failed);
                return Err(e);
            }
            None => {}
        }
        if let Some(c) = builtins::constant(n) {
            return Ok(c);
        }
        Err(self.unknown_name(n, span))
    }

    #[cold]
    fn unknown_name(&self, n: &str, span: &Span) -> EvalError {
        let mut err = EvalError::new(DiagKind::UnknownName, span, format!("unknown name `{n}`"));
        if units::parse_unit(n).is_ok() {
            return err.hint(format!(
                "`{n}` is a unit; a unit follows a number: write `1 {n}`"
            ));
        }
        if let Some(code) = reversed_code(n) {
            return err.hint(format!("did you mean `{code}`?"));
        }
        let mut names = self.names.all_names();
        names.extend(self.locals.iter().map(|(k, _)| k.clone()));
        names.extend(builtins::namespaces().iter().map(|s| s.to_string()));
        if let Some(best) = nearest(n, &names) {
            err = err.hint(format!("did you mean `{best}`?"));
        }
        err
    }

    fn plus_minus(&mut self, base: &Expr, spread: &Expr, span: &Span) -> R<Value> {
        let b = self.num(base)?;
        let relative = is_relative_literal(spread);
        let s = match &spread.kind {
            ExprKind::Number { value, unit } => {
                self.number(*value, unit.as_ref(), &spread.span, true)?
            }
            _ => self.num(spread)?,
        };
        if s.abs {
            return Err(abs_error(&spread.span, "use as a tolerance"));
        }
        let sv = s.x.v.hi;
        if !s.x.v.is_point() {
            return Err(EvalError::new(
                DiagKind::TypeMismatch,
                &spread.span,
                "a tolerance must be a known number, not an uncertain one",
            ));
        }
        if sv < 0.0 {
            return Err(EvalError::new(
                DiagKind::DomainError,
                &spread.span,
                "a tolerance cannot be negative",
            )
            .hint("write the size of the tolerance: `± 5 %`"));
        }
        if relative {
            if b.abs {
                return Err(EvalError::new(
                    DiagKind::Temperature,
                    &spread.span,
                    "a relative tolerance on an absolute temperature has no meaning (it depends on the scale)",
                )
                .hint("give the tolerance as a temperature difference: `50 °C ± 2 K`"));
            }
            let n = self.input_site(span, 0.0, -sv, sv, |eps| {
                Ok(Num {
                    x: b.x * (Dual::constant(1.0) + eps),
                    ..b
                })
            })?;
            return Ok(Value::Num(n));
        }
        if s.dim != b.dim {
            return Err(EvalError::new(
                DiagKind::DimensionMismatch,
                &spread.span,
                format!(
                    "the tolerance is {} but the value is {}",
                    s.dim.describe(),
                    b.dim.describe()
                ),
            )
            .hint(
                "give an absolute tolerance in the value's unit, or a relative one in % or ppm",
            ));
        }
        let n = self.input_site(span, 0.0, -sv, sv, |d| Ok(Num { x: b.x + d, ..b }))?;
        Ok(Value::Num(n))
    }

    fn range(&mut self, lo: &Expr, hi: &Expr, span: &Span) -> R<Value> {
        let a = self.num(lo)?;
        let b = self.num(hi)?;
        if a.dim != b.dim || a.abs != b.abs {
            let mut err = EvalError::new(
                DiagKind::DimensionMismatch,
                span,
                format!(
                    "the ends of a range must agree: {} and {}",
                    units::describe_quantity(a.dim, a.abs),
                    units::describe_quantity(b.dim, b.abs)
                ),
            );
            if a.dim.is_none() && !b.dim.is_none() {
                err = err.hint("each end carries its own unit: `10.8 V .. 13.2 V`");
            }
            return Err(err);
        }
        if !a.x.v.is_point() || !b.x.v.is_point() {
            return Err(EvalError::new(
                DiagKind::TypeMismatch,
                span,
                "the ends of a range must be known numbers",
            ));
        }
        let (l, h) = (a.x.value(), b.x.value());
        if l > h {
            return Err(
                EvalError::new(DiagKind::DomainError, span, "this range runs downward")
                    .hint("write the smaller end first"),
            );
        }
        let mid = 0.5 * (l + h);
        let half = 0.5 * (h - l);
        let n = self.input_site(span, 0.0, -half, half, |d| {
            Ok(Num {
                x: Dual::constant(mid) + d,
                ..a
            })
        })?;
        Ok(Value::Num(n))
    }

    fn call(&mut self, callee: &Expr, args: &[Arg], span: &Span) -> R<Value> {
        // A dotted path names a built-in (functions the worksheet defines have plain names).
        if let Some(b) = builtins::lookup_expr(callee) {
            return self.builtin_call(b, args, span);
        }
        let Some(path) = callee.path() else {
            return Err(EvalError::new(
                DiagKind::TypeMismatch,
                &callee.span,
                "only functions can be called",
            ));
        };
        if let Some(f) = self.names.function(&path) {
            let f = f.clone();
            return self.user_call(&path, &f, args, span);
        }
        if let Some(v) = self.math(&path, args, span)? {
            return Ok(v);
        }
        let mut err = EvalError::new(
            DiagKind::UnknownFunction,
            &callee.span,
            format!("unknown function `{path}`"),
        );
        let mut known: Vec<String> = builtins::all().iter().map(|b| b.path.to_string()).collect();
        known.extend(MATH.iter().map(|s| s.to_string()));
        if let Some(best) = nearest(&path, &known) {
            err = err.hint(format!("did you mean `{best}`?"));
        }
        Err(err)
    }

    fn user_call(&mut self, name: &str, f: &Function, args: &[Arg], span: &Span) -> R<Value> {
        self.calls += 1;
        if self.calls > MAX_CALLS {
            return Err(EvalError::new(
                DiagKind::Limit,
                span,
                format!("more than {MAX_CALLS} function calls for one value (does `{name}` call itself more than once?)"),
            ));
        }
        if self.depth >= MAX_CALL_DEPTH {
            return Err(EvalError::new(
                DiagKind::Limit,
                span,
                format!("calls nest deeper than {MAX_CALL_DEPTH} (does `{name}` call itself?)"),
            ));
        }
        if let Some(a) = args.iter().find(|a| a.name.is_some()) {
            return Err(EvalError::new(
                DiagKind::Argument,
                &a.value.span,
                format!("`{name}` takes its arguments by position"),
            ));
        }
        if args.len() != f.params.len() {
            return Err(EvalError::new(
                DiagKind::Argument,
                span,
                format!(
                    "`{name}` takes {} argument(s), {} given",
                    f.params.len(),
                    args.len()
                ),
            )
            .hint(format!("{name}({})", f.params.join(", "))));
        }
        let vals = args
            .iter()
            .map(|a| self.eval(&a.value))
            .collect::<R<Vec<_>>>()?;
        let saved = std::mem::take(&mut self.locals);
        self.locals = f.params.iter().cloned().zip(vals).collect();
        self.depth += 1;
        let r = self.eval(&f.body);
        self.depth -= 1;
        self.locals = saved;
        let v = r?;
        if let Some(u) = &f.unit {
            check_declared(&v, u, span)?;
        }
        Ok(v)
    }

    fn builtin_call(
        &mut self,
        b: &'static builtins::Builtin,
        args: &[Arg],
        span: &Span,
    ) -> R<Value> {
        // On the stack: a call is made in every pass (every built-in has at most
        // MAX_PARAMS parameters, which a test checks).
        let n = b.params.len().min(builtins::MAX_PARAMS);
        let mut slots: [Option<Value>; builtins::MAX_PARAMS] = Default::default();
        // Which argument filled each parameter (for the span of an error), NO_ARG if none.
        const NO_ARG: usize = usize::MAX;
        let mut arg_of = [NO_ARG; builtins::MAX_PARAMS];
        let mut positional = 0;
        for (ai, a) in args.iter().enumerate() {
            let idx = match &a.name {
                None => {
                    if positional >= n {
                        return Err(EvalError::new(
                            DiagKind::Argument,
                            &a.value.span,
                            format!("`{}` takes at most {} arguments", b.path, b.params.len()),
                        )
                        .hint(b.doc.signature));
                    }
                    positional += 1;
                    positional - 1
                }
                Some(nm) => match b.params[..n].iter().position(|p| p.name == nm.name) {
                    Some(i) => i,
                    None => {
                        let names: Vec<String> =
                            b.params.iter().map(|p| p.name.to_string()).collect();
                        let mut err = EvalError::new(
                            DiagKind::Argument,
                            &nm.span,
                            format!("`{}` has no parameter `{}`", b.path, nm.name),
                        );
                        err = match nearest(&nm.name, &names) {
                            Some(best) => {
                                err.hint(format!("did you mean `{best}`? ({})", b.doc.signature))
                            }
                            None => err.hint(b.doc.signature),
                        };
                        return Err(err);
                    }
                },
            };
            if slots[idx].is_some() {
                return Err(EvalError::new(
                    DiagKind::Argument,
                    &a.value.span,
                    format!("`{}` is given twice", b.params[idx].name),
                ));
            }
            slots[idx] = Some(self.eval(&a.value)?);
            arg_of[idx] = ai;
        }
        if let Some((i, p)) = b
            .params
            .iter()
            .take(n)
            .enumerate()
            .find(|(i, p)| p.required && slots[*i].is_none())
        {
            let _ = i;
            return Err(EvalError::new(
                DiagKind::Argument,
                span,
                format!("`{}` needs `{}`", b.path, p.name),
            )
            .hint(b.doc.signature));
        }
        // "statement#offset": the call's key, under which its choices, parts and probes
        // are known from pass to pass.
        let mut offset = itoa::Buffer::new();
        let mut call_key = std::mem::take(&mut self.reg.call_buf);
        fill(
            &mut call_key,
            &[self.stmt_key, "#", offset.format(span.start)],
        );
        if matches!(self.pass.mode, Mode::Box { .. }) && !self.reg.observed.contains_key(&call_key)
        {
            let ranges = slots[..n]
                .iter()
                .map(|v| match v {
                    Some(Value::Num(n)) => Some(n.x.v),
                    _ => None,
                })
                .collect();
            self.reg.observed.insert(call_key.clone(), ranges);
        }
        let site = self.reg.call_site(&call_key);
        let buf = std::mem::take(&mut self.reg.key_buf);
        let in_function = !self.locals.is_empty();
        let mut host = Host {
            ev: self,
            call_key,
            site,
            args,
            slots: &slots[..n],
            in_function,
            certain: std::cell::Cell::new(None),
            buf,
        };
        let mut ctx = CallCtx { host: &mut host };
        let result = (b.call)(&mut ctx, &slots[..n]);
        host.ev.reg.key_buf = host.buf;
        host.ev.reg.call_buf = host.call_key;
        result.map_err(|e: CallError| {
            let at = e
                .param
                .and_then(|i| args.get(*arg_of.get(i)?))
                .map_or(span.clone(), |a| a.value.span.clone());
            let mut err = EvalError::new(
                DiagKind::Argument,
                &at,
                format!("{}: {}", b.path, e.message),
            );
            err.hint = e.into_inner().hint;
            err
        })
    }

    fn math(&mut self, path: &str, args: &[Arg], span: &Span) -> R<Option<Value>> {
        if !MATH.contains(&path) {
            return Ok(None);
        }
        if let Some(a) = args.iter().find(|a| a.name.is_some()) {
            return Err(EvalError::new(
                DiagKind::Argument,
                &a.value.span,
                format!("`{path}` takes its arguments by position"),
            ));
        }
        let want = match path {
            "min" | "max" => 0,
            "tol" => 3,
            _ => 1,
        };
        if (want > 0 && args.len() != want) || (want == 0 && args.len() < 2) {
            return Err(EvalError::new(
                DiagKind::Argument,
                span,
                match want {
                    0 => format!("`{path}` takes two or more arguments"),
                    1 => format!("`{path}` takes one argument"),
                    n => format!("`{path}` takes {n} arguments"),
                },
            ));
        }
        if path == "tol" {
            return self.tol(args, span).map(Some);
        }
        let vals = args
            .iter()
            .map(|a| self.num(&a.value))
            .collect::<R<Vec<_>>>()?;
        let a = vals[0];
        let dimensionless = |what: &str| -> R<()> {
            if !a.dim.is_none() || a.abs {
                Err(EvalError::new(
                    DiagKind::DimensionMismatch,
                    &args[0].value.span,
                    format!(
                        "`{what}` needs a dimensionless number, not {}",
                        units::describe_quantity(a.dim, a.abs)
                    ),
                )
                .hint("divide by a reference value to make it dimensionless"))
            } else {
                Ok(())
            }
        };
        let r = match path {
            "sqrt" => {
                if a.abs {
                    return Err(abs_error(&args[0].value.span, "take the square root of"));
                }
                let Some(dim) = a.dim.root(2) else {
                    return Err(EvalError::new(
                        DiagKind::DimensionMismatch,
                        &args[0].value.span,
                        format!("the square root of {} has no unit", a.dim.describe()),
                    ));
                };
                if a.x.v.lo < 0.0 {
                    return Err(domain(
                        &args[0].value.span,
                        "the square root of a negative value",
                        a,
                    ));
                }
                Num::new(a.x.sqrt(), dim)
            }
            "exp" => {
                dimensionless("exp")?;
                Num::new(a.x.exp(), Dim::NONE)
            }
            "ln" | "log10" => {
                dimensionless(path)?;
                if a.x.v.lo <= 0.0 {
                    return Err(domain(
                        &args[0].value.span,
                        "the logarithm of a value that is not positive",
                        a,
                    ));
                }
                Num::new(if path == "ln" { a.x.ln() } else { a.x.log10() }, Dim::NONE)
            }
            "abs" => {
                if a.abs {
                    return Err(abs_error(&args[0].value.span, "take the magnitude of"));
                }
                Num { x: a.x.abs(), ..a }
            }
            "kelvin" => {
                if a.dim != Dim::TEMPERATURE || !a.abs {
                    return Err(EvalError::new(
                        DiagKind::Temperature,
                        &args[0].value.span,
                        format!(
                            "`kelvin` takes an absolute temperature, not {}",
                            units::describe_quantity(a.dim, a.abs)
                        ),
                    ));
                }
                Num { abs: false, ..a }
            }
            _ => {
                // min / max
                let mut acc = a;
                for (i, b) in vals.iter().enumerate().skip(1) {
                    if b.dim != acc.dim || b.abs != acc.abs {
                        return Err(EvalError::new(
                            DiagKind::DimensionMismatch,
                            &args[i].value.span,
                            format!(
                                "`{path}` compares like with like: {} and {}",
                                units::describe_quantity(acc.dim, acc.abs),
                                units::describe_quantity(b.dim, b.abs)
                            ),
                        ));
                    }
                    acc.x = if path == "min" {
                        acc.x.min(b.x)
                    } else {
                        acc.x.max(b.x)
                    };
                }
                acc
            }
        };
        Ok(Some(Value::Num(r)))
    }

    /// `tol(x, lo, hi)`: an asymmetric tolerance, relative (%, ppm) or absolute.
    fn tol(&mut self, args: &[Arg], span: &Span) -> R<Value> {
        let b = self.num(&args[0].value)?;
        let relative = is_relative_literal(&args[1].value) && is_relative_literal(&args[2].value);
        let lo = self.num(&args[1].value)?;
        let hi = self.num(&args[2].value)?;
        for (n, a) in [(lo, &args[1]), (hi, &args[2])] {
            if !n.x.v.is_point() {
                return Err(EvalError::new(
                    DiagKind::TypeMismatch,
                    &a.value.span,
                    "a tolerance must be a known number",
                ));
            }
            if !relative && (n.dim != b.dim || n.abs) {
                return Err(EvalError::new(
                    DiagKind::DimensionMismatch,
                    &a.value.span,
                    format!(
                        "the tolerance is {} but the value is {}",
                        n.dim.describe(),
                        b.dim.describe()
                    ),
                )
                .hint("give both ends in % (`tol(x, -20 %, +80 %)`) or in the value's unit"));
            }
        }
        let (l, h) = (lo.x.value(), hi.x.value());
        if l > 0.0 || h < 0.0 {
            return Err(EvalError::new(
                DiagKind::DomainError,
                span,
                "`tol` takes the downward deviation (≤ 0) then the upward one (≥ 0)",
            )
            .hint("for example `tol(10 µF, -20 %, +80 %)`"));
        }
        if relative && b.abs {
            return Err(EvalError::new(
                DiagKind::Temperature,
                span,
                "a relative tolerance on an absolute temperature has no meaning",
            ));
        }
        let n = if relative {
            self.input_site(span, 0.0, l, h, |e| {
                Ok(Num {
                    x: b.x * (Dual::constant(1.0) + e),
                    ..b
                })
            })?
        } else {
            self.input_site(span, 0.0, l, h, |d| Ok(Num { x: b.x + d, ..b }))?
        };
        Ok(Value::Num(n))
    }
}

/// True when two expressions compute the same function of the same inputs: equal apart
/// from their spans, and free of tolerance sites and calls (each site is an input of its
/// own, so `(1 V ± 1 %) / (1 V ± 1 %)` is not one).
pub(crate) fn same_function(a: &Expr, b: &Expr) -> bool {
    match (&a.kind, &b.kind) {
        (ExprKind::Number { value: x, unit: u }, ExprKind::Number { value: y, unit: v }) => {
            x == y && u.as_ref().map(|u| &u.text) == v.as_ref().map(|v| &v.text)
        }
        (ExprKind::Code { value: x, .. }, ExprKind::Code { value: y, .. }) => x == y,
        (ExprKind::Name(x), ExprKind::Name(y)) => x == y,
        (ExprKind::Neg(x), ExprKind::Neg(y)) => same_function(x, y),
        (
            ExprKind::Binary {
                op: o,
                lhs: a1,
                rhs: b1,
            },
            ExprKind::Binary {
                op: p,
                lhs: a2,
                rhs: b2,
            },
        ) => o == p && same_function(a1, a2) && same_function(b1, b2),
        (ExprKind::Field { base: x, field: f }, ExprKind::Field { base: y, field: g }) => {
            f.name == g.name && same_function(x, y)
        }
        _ => false,
    }
}

/// How many items a value stands for: one, or for a list all the items it holds.
fn weight(v: &Value) -> usize {
    match v {
        Value::List(items) => items.iter().map(weight).sum::<usize>().max(1),
        _ => 1,
    }
}

/// The math functions of the language.
pub const MATH: &[&str] = &[
    "sqrt", "exp", "ln", "log10", "abs", "min", "max", "kelvin", "tol",
];

/// The evaluator as the built-ins' host.
struct Host<'e, 'a> {
    ev: &'e mut Evaluator<'a>,
    /// "statement#offset" of the call.
    call_key: String,
    /// Its index in the registry's `call_sites`.
    site: usize,
    /// The call's arguments, as written and as evaluated.
    args: &'e [Arg],
    slots: &'e [Option<Value>],
    /// Made inside a worksheet function (whose parameters may be uncertain).
    in_function: bool,
    /// Whether every argument is exact (`is_certain`), worked out at the first range asked.
    certain: std::cell::Cell<Option<bool>>,
    /// Where the keys of its choices and probes are built (the registry's buffer, lent for
    /// the call).
    buf: String,
}

/// `parts`, joined into `buf`.
fn fill(buf: &mut String, parts: &[&str]) {
    buf.clear();
    buf.reserve(parts.iter().map(|p| p.len()).sum());
    for p in parts {
        buf.push_str(p);
    }
}

impl CallHost for Host<'_, '_> {
    fn is_nominal(&self) -> bool {
        self.ev.nominal()
    }
    fn choose(
        &mut self,
        key: &'static str,
        pick: &mut dyn FnMut() -> Result<f64, CallError>,
    ) -> Result<f64, CallError> {
        let site = &mut self.ev.reg.call_sites[self.site];
        if let Some(&(_, v)) = site.choices.iter().find(|(k, _)| *k == key) {
            return Ok(v);
        }
        fill(&mut self.buf, &[&self.call_key, ":", key]);
        let v = match self.ev.reg.choices.get(self.buf.as_str()) {
            Some(&v) => v,
            None if !self.ev.nominal() => {
                return Err(CallError::new(
                    "internal: a choice was not made in the nominal pass",
                ))
            }
            None => {
                let v = pick()?;
                self.ev.reg.choices.insert(self.buf.clone(), v);
                v
            }
        };
        self.ev.reg.call_sites[self.site].choices.push((key, v));
        Ok(v)
    }
    fn part_input(
        &mut self,
        key: &'static str,
        label: PartLabel,
        nominal: f64,
        lo: f64,
        hi: f64,
        dim: Dim,
    ) -> Dual {
        if !self.ev.nominal() {
            let site = &self.ev.reg.call_sites[self.site];
            if let Some(&(_, input, scalar)) = site.parts.iter().find(|(k, ..)| *k == key) {
                let x = self.ev.input_value(input);
                self.ev.pass.set_scalar(scalar, Num::new(x, dim));
                return x;
            }
        }
        // "input:call:key", built in the registry's site buffer (a part is met in every
        // pass); the input's own key is what follows "input:".
        const SCALAR: &str = "input:";
        let mut skey = std::mem::take(&mut self.ev.reg.site_buf);
        fill(&mut skey, &[SCALAR, &self.call_key, ":", key]);
        let k = &skey[SCALAR.len()..];
        let name = self.ev.stmt_label;
        let label = || InputLabel::Part(label, name.to_string());
        let x = match self.ev.input(k, label, nominal, lo, hi) {
            Ok(x) => {
                let nominal_pass = self.ev.nominal();
                let reg = &mut *self.ev.reg;
                // Registered by the nominal pass; a later pass records only what it registered.
                let scalar = if nominal_pass {
                    Some(reg.scalar_id(&skey))
                } else {
                    reg.find_scalar(&skey)
                };
                let input = reg.input_index.get(&skey[SCALAR.len()..]).copied();
                if let (true, Some(iid), Some(sid)) = (nominal_pass, input, scalar) {
                    if reg.input_scalars.len() <= iid {
                        reg.input_scalars.resize(iid + 1, usize::MAX);
                    }
                    reg.input_scalars[iid] = sid;
                }
                if let Some(sid) = scalar {
                    self.ev.pass.set_scalar(sid, Num::new(x, dim));
                }
                if let (Some(iid), Some(sid)) = (input, scalar) {
                    self.ev.reg.call_sites[self.site]
                        .parts
                        .push((key, iid, sid));
                }
                x
            }
            Err(_) => Dual::constant(nominal),
        };
        self.ev.reg.site_buf = skey;
        x
    }
    fn probe(&mut self, key: &'static str, value: Num, rule: WarnRule) {
        let nominal = self.ev.nominal();
        if !nominal {
            let site = &self.ev.reg.call_sites[self.site];
            if let Some(&(_, id)) = site.probes.iter().find(|(k, _)| *k == key) {
                self.ev.pass.set_scalar(id, value);
                return;
            }
        }
        fill(&mut self.buf, &["probe:", &self.call_key, ":", key]);
        // Registered by the nominal pass; a later pass records only what it registered.
        let scalar = if nominal {
            let scalar = self.ev.reg.scalar_id(&self.buf);
            if !self
                .ev
                .reg
                .probes
                .iter()
                .any(|p| p.scalar == scalar && p.rule == rule)
            {
                self.ev.reg.probes.push(ProbeInfo {
                    scalar,
                    source: self.ev.stmt_label.to_string(),
                    stmt: self.ev.stmt_key.to_string(),
                    rule,
                });
            }
            scalar
        } else {
            match self.ev.reg.find_scalar(&self.buf) {
                Some(scalar) => scalar,
                None => return,
            }
        };
        self.ev.pass.set_scalar(scalar, value);
        self.ev.reg.call_sites[self.site].probes.push((key, scalar));
    }
    fn arg_range(&self, param: usize) -> Option<Interval> {
        // Arguments that no tolerance, range or part can reach have point ranges in every
        // pass: a choice that asks for them needs no box pass to learn them.
        let names = self.ev.names;
        let certain = self.certain.get().unwrap_or_else(|| {
            let c = !self.in_function
                && self
                    .args
                    .iter()
                    .all(|a| is_certain(&a.value, &|n| names.certain(n)));
            self.certain.set(Some(c));
            c
        });
        if certain {
            return match self.slots.get(param) {
                Some(Some(Value::Num(n))) => Some(n.x.v),
                _ => None,
            };
        }
        let key = &self.call_key;
        // Once a box pass has seen this call, every argument's range is known; one that
        // is not a number (or not given) has none.
        let Some(ranges) = self.ev.reg.known.get(key) else {
            self.ev.reg.wanted_ranges.set(true);
            return None;
        };
        ranges.get(param).copied().flatten()
    }
    fn warn(&mut self, text: String) {
        let src = self.ev.stmt_label.to_string();
        let key = self.ev.stmt_key.to_string();
        if !self
            .ev
            .reg
            .warnings
            .iter()
            .any(|(_, k, t)| *k == key && *t == text)
        {
            self.ev.reg.warnings.push((src, key, text));
        }
    }
    fn hazard(&mut self, hazard: crate::results::Hazard) {
        let seen = self
            .ev
            .reg
            .hazards
            .iter()
            .any(|(k, h)| *k == self.ev.stmt_key && *h == hazard);
        if !seen {
            self.ev
                .reg
                .hazards
                .push((self.ev.stmt_key.to_string(), hazard));
        }
    }
}

/// True when the expression's value is exact in every pass, seen from its text alone:
/// numbers, codes, texts and lists of them, arithmetic, and names whose definitions are
/// exact (`name_certain`). A tolerance, a range, `tol(…)` and every call of a built-in or a
/// worksheet function count as uncertain (a built-in may bring in a part's tolerance).
pub(crate) fn is_certain(e: &Expr, name_certain: &dyn Fn(&str) -> bool) -> bool {
    match &e.kind {
        ExprKind::Number { .. } | ExprKind::Code { .. } | ExprKind::Str(_) => true,
        ExprKind::Name(n) => name_certain(n),
        ExprKind::Neg(x) => is_certain(x, name_certain),
        ExprKind::Binary { lhs, rhs, .. } => {
            is_certain(lhs, name_certain) && is_certain(rhs, name_certain)
        }
        ExprKind::List(items) => items.iter().all(|x| is_certain(x, name_certain)),
        ExprKind::PlusMinus { .. }
        | ExprKind::Range { .. }
        | ExprKind::Call { .. }
        | ExprKind::Field { .. }
        | ExprKind::Error => false,
    }
}

/// True when the expression is a `%` or `ppm` literal (only those make a tolerance relative).
pub(crate) fn is_relative_literal(e: &Expr) -> bool {
    match &e.kind {
        ExprKind::Number { unit: Some(u), .. } => u.text == "%" || u.text == "ppm",
        ExprKind::Neg(x) => is_relative_literal(x),
        _ => false,
    }
}

#[cold]
pub(crate) fn not_finite(span: &Span) -> EvalError {
    EvalError::new(
        DiagKind::DomainError,
        span,
        "this has no finite value (an overflow or a division by zero)",
    )
}

#[cold]
fn abs_error(span: &Span, what: &str) -> EvalError {
    EvalError::new(
        DiagKind::Temperature,
        span,
        format!("cannot {what} an absolute temperature"),
    )
    .hint("absolute temperatures only take a difference added or subtracted; `kelvin(t)` gives the thermodynamic value in K for formulas")
}

#[cold]
fn domain(span: &Span, what: &str, n: Num) -> EvalError {
    let text = if n.x.v.is_point() {
        format!("{what}: {}", units::format_si(n.x.value(), n.dim, n.abs, 3))
    } else {
        format!(
            "{what} at the worst case: it ranges over {} … {}",
            units::format_si(n.x.v.lo, n.dim, n.abs, 3),
            units::format_si(n.x.v.hi, n.dim, n.abs, 3)
        )
    };
    EvalError::new(DiagKind::DomainError, span, text)
}

/// Arithmetic with the dimension and temperature rules of the language.
pub fn binary(op: BinOp, a: Num, b: Num, span: &Span, rhs_span: &Span) -> R<Num> {
    let mismatch = |verb: &str| {
        EvalError::new(
            DiagKind::DimensionMismatch,
            span,
            format!(
                "cannot {verb} {} and {}",
                units::describe_quantity(a.dim, a.abs),
                units::describe_quantity(b.dim, b.abs)
            ),
        )
    };
    match op {
        BinOp::Add | BinOp::Sub => {
            if a.dim != b.dim {
                let mut e = mismatch(if op == BinOp::Add { "add" } else { "subtract" });
                e.message = format!(
                    "{} {} {}: the dimensions differ",
                    capital(&units::describe_quantity(a.dim, a.abs)),
                    if op == BinOp::Add { "plus" } else { "minus" },
                    units::describe_quantity(b.dim, b.abs)
                );
                return Err(e.hint(
                    "`+` and `-` join quantities of one kind: check the units of both sides, \
                     or whether a factor is missing",
                ));
            }
            let abs = match (op, a.abs, b.abs) {
                (BinOp::Add, true, true) => {
                    return Err(EvalError::new(
                        DiagKind::Temperature,
                        span,
                        "two absolute temperatures cannot be added",
                    )
                    .hint("add a temperature difference in K (`25 °C + 10 K`), or use `kelvin(t)` for thermodynamic values"))
                }
                (BinOp::Sub, false, true) => {
                    return Err(EvalError::new(
                        DiagKind::Temperature,
                        span,
                        "an absolute temperature cannot be subtracted from a difference",
                    )
                    .hint("write the absolute temperature first: `t - 10 K`"))
                }
                (BinOp::Add, x, y) => x || y,
                (BinOp::Sub, true, true) => false,
                (BinOp::Sub, x, _) => x,
                _ => false,
            };
            let x = if op == BinOp::Add {
                a.x + b.x
            } else {
                a.x - b.x
            };
            Ok(Num { x, dim: a.dim, abs })
        }
        BinOp::Mul | BinOp::Div => {
            if a.abs || b.abs {
                return Err(abs_error(
                    span,
                    if op == BinOp::Mul {
                        "multiply"
                    } else {
                        "divide"
                    },
                ));
            }
            if op == BinOp::Mul {
                return Ok(Num::new(a.x * b.x, a.dim.mul(b.dim)));
            }
            divisor_check(b, rhs_span)?;
            Ok(Num::new(a.x / b.x, a.dim.div(b.dim)))
        }
        BinOp::Parallel => {
            if a.dim != b.dim {
                return Err(mismatch("combine in parallel"));
            }
            if a.abs || b.abs {
                return Err(abs_error(span, "combine in parallel"));
            }
            if a.x.v.lo <= 0.0 || b.x.v.lo <= 0.0 {
                return Err(EvalError::new(
                    DiagKind::DomainError,
                    span,
                    "a parallel combination needs two positive values",
                ));
            }
            // 1/(1/a + 1/b): each operand appears once, so interval bounds stay exact.
            Ok(Num::new((a.x.recip() + b.x.recip()).recip(), a.dim))
        }
        BinOp::Pow => {
            if a.abs {
                return Err(abs_error(span, "raise to a power"));
            }
            if !b.dim.is_none() || b.abs {
                return Err(EvalError::new(
                    DiagKind::DimensionMismatch,
                    rhs_span,
                    "an exponent must be a dimensionless number",
                ));
            }
            if !b.x.v.is_point() {
                if !a.dim.is_none() {
                    return Err(EvalError::new(
                        DiagKind::DimensionMismatch,
                        rhs_span,
                        "a quantity with a unit can only be raised to a known exponent",
                    ));
                }
                if a.x.v.lo <= 0.0 {
                    return Err(domain(
                        span,
                        "a power with an uncertain exponent needs a positive base",
                        a,
                    ));
                }
                return Ok(Num::new(a.x.powf(b.x), Dim::NONE));
            }
            let p = b.x.value();
            if p.fract() == 0.0 && p.abs() <= 64.0 {
                let n = p as i32;
                let Some(dim) = a.dim.powi(n) else {
                    return Err(EvalError::new(
                        DiagKind::Limit,
                        span,
                        "the unit's exponent grows too large",
                    ));
                };
                if n < 0 {
                    divisor_check(a, span)?;
                }
                return Ok(Num::new(a.x.powi(n), dim));
            }
            if (p * 2.0).fract() == 0.0 && p.abs() <= 64.0 {
                let Some(dim) = a.dim.root(2).and_then(|d| d.powi((p * 2.0) as i32)) else {
                    return Err(EvalError::new(
                        DiagKind::DimensionMismatch,
                        span,
                        format!("{} has no square root", a.dim.describe()),
                    ));
                };
                if a.x.v.lo < 0.0 {
                    return Err(domain(span, "a fractional power of a negative value", a));
                }
                return Ok(Num::new(a.x.sqrt().powi((p * 2.0) as i32), dim));
            }
            if !a.dim.is_none() {
                return Err(EvalError::new(
                    DiagKind::DimensionMismatch,
                    rhs_span,
                    "a quantity with a unit takes only whole or half exponents",
                ));
            }
            if a.x.v.lo <= 0.0 {
                return Err(domain(span, "a fractional power needs a positive base", a));
            }
            Ok(Num::new(a.x.powf(b.x), Dim::NONE))
        }
    }
}

fn divisor_check(b: Num, span: &Span) -> R<()> {
    if b.x.v.contains_zero() {
        if b.x.v.is_point() {
            return Err(EvalError::new(
                DiagKind::DomainError,
                span,
                "division by zero",
            ));
        }
        return Err(EvalError::new(
            DiagKind::DivisorSpansZero,
            span,
            format!(
                "the divisor ranges over {} … {}, which includes zero",
                units::format_si(b.x.v.lo, b.dim, false, 3),
                units::format_si(b.x.v.hi, b.dim, false, 3)
            ),
        )
        .hint("narrow the tolerances so that the divisor keeps one sign"));
    }
    Ok(())
}

fn capital(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().collect::<String>() + c.as_str(),
        None => String::new(),
    }
}

/// Checks a value against a declared unit: same dimension; °C/°F need an absolute temperature.
pub fn check_declared(v: &Value, u: &units::Unit, span: &Span) -> R<()> {
    let Value::Num(n) = v else {
        if let Value::Record(_) = v {
            return Err(EvalError::new(
                DiagKind::TypeMismatch,
                span,
                format!(
                    "a record cannot be shown in `{}`; declare the unit of one of its fields",
                    u.text
                ),
            ));
        }
        return Err(EvalError::new(
            DiagKind::TypeMismatch,
            span,
            format!("{} has no unit", v.type_name()),
        ));
    };
    if n.dim != u.dim {
        let mut e = EvalError::new(
            DiagKind::DimensionMismatch,
            span,
            format!(
                "declared as `{}` ({}) but the value is {}",
                u.text,
                u.dim.describe(),
                units::describe_quantity(n.dim, n.abs)
            ),
        );
        // The unit the value comes out in, as it would be written in the brackets.
        e.hint = Some(if n.dim.is_none() {
            "the formula gives a plain number: write its numbers with their units \
             (`3 V`), or declare no unit"
                .to_string()
        } else {
            format!(
                "the formula gives {}: declare `[{}]`, or check the formula",
                units::describe_quantity(n.dim, n.abs),
                units::display_unit(n.dim, n.abs)
            )
        });
        return Err(e);
    }
    if u.is_absolute_temperature() && !n.abs {
        return Err(EvalError::new(
            DiagKind::Temperature,
            span,
            format!("declared as `{}`, an absolute temperature, but the value is a temperature difference", u.text),
        )
        .hint("declare a difference as `[K]`"));
    }
    if n.abs && u.temperature.is_none() {
        return Err(EvalError::new(
            DiagKind::Temperature,
            span,
            format!("an absolute temperature cannot be shown in `{}`", u.text),
        ));
    }
    Ok(())
}

/// A component-value code written the wrong way round (`R47` → `0R47`).
fn reversed_code(n: &str) -> Option<String> {
    let mut chars = n.chars();
    let first = chars.next()?;
    let rest: String = chars.collect();
    if matches!(first, 'R' | 'k' | 'M' | 'G' | 'n' | 'p' | 'u' | 'µ')
        && !rest.is_empty()
        && rest.chars().all(|c| c.is_ascii_digit())
    {
        return Some(format!("0{n}"));
    }
    None
}

/// The closest of `names` to `n`, if it is close enough to be a plausible typo.
pub fn nearest(n: &str, names: &[String]) -> Option<String> {
    let mut best: Option<(f64, &String)> = None;
    for c in names {
        if c == n {
            continue;
        }
        let s = strsim::jaro_winkler(n, c);
        if s > 0.8 && best.is_none_or(|(b, _)| s > b) {
            best = Some((s, c));
        }
    }
    best.map(|(_, c)| c.clone())
}

impl Record {
    /// A record as a language value.
    pub fn into_value(self) -> Value {
        Value::Record(Arc::new(self))
    }
}

/// True when the expression holds a part that did not parse.
pub fn has_error(e: &Expr) -> bool {
    let mut stack = vec![e];
    while let Some(e) = stack.pop() {
        match &e.kind {
            ExprKind::Error => return true,
            ExprKind::Neg(x) => stack.push(x),
            ExprKind::Binary { lhs, rhs, .. } => stack.extend([&**lhs, &**rhs]),
            ExprKind::PlusMinus { base, spread } => stack.extend([&**base, &**spread]),
            ExprKind::Range { lo, hi } => stack.extend([&**lo, &**hi]),
            ExprKind::Call { callee, args } => {
                stack.push(callee);
                stack.extend(args.iter().map(|a| &a.value));
            }
            ExprKind::Field { base, .. } => stack.push(base),
            ExprKind::List(items) => stack.extend(items.iter()),
            ExprKind::Number { .. }
            | ExprKind::Code { .. }
            | ExprKind::Str(_)
            | ExprKind::Name(_) => {}
        }
    }
    false
}

/// All dependencies (free names) of an expression, excluding `bound` names.
pub fn free_names(e: &Expr, bound: &[String], out: &mut Vec<String>) {
    // An explicit stack: expressions can nest deeply.
    let mut stack = vec![e];
    while let Some(e) = stack.pop() {
        match &e.kind {
            ExprKind::Name(n) => {
                if !bound.contains(n) && !out.contains(n) {
                    out.push(n.clone());
                }
            }
            ExprKind::Neg(x) => stack.push(x),
            ExprKind::Binary { lhs, rhs, .. } => {
                stack.push(lhs);
                stack.push(rhs);
            }
            ExprKind::PlusMinus { base, spread } => {
                stack.push(base);
                stack.push(spread);
            }
            ExprKind::Range { lo, hi } => {
                stack.push(lo);
                stack.push(hi);
            }
            ExprKind::Call { callee, args } => {
                match callee.path() {
                    Some(p) if !p.contains('.') => {
                        if !bound.iter().any(|b| *b == *p) && !out.iter().any(|o| *o == *p) {
                            out.push(p.into_owned());
                        }
                    }
                    Some(_) => {}
                    None => stack.push(callee),
                }
                for a in args {
                    stack.push(&a.value);
                }
            }
            ExprKind::Field { base, .. } => {
                if builtins::lookup_expr(e).is_none() {
                    stack.push(base);
                }
            }
            ExprKind::List(items) => stack.extend(items.iter()),
            ExprKind::Number { .. }
            | ExprKind::Code { .. }
            | ExprKind::Str(_)
            | ExprKind::Error => {}
        }
    }
}
