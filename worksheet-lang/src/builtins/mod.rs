//! The built-in power-design library: regulators, heat, resistors, batteries.
//!
//! Each built-in is data (`Builtin`): its parameters, its documentation (shown by the
//! kernel on inspection) and a function that computes its record. The functions are
//! written on `uom` quantities (see `quantity`), so a dimensionally wrong formula does
//! not compile; dynamic values convert at that boundary only.
//!
//! A built-in is called once per evaluation pass of the worst-case analysis, with
//! arguments that are points (nominal, corners) or intervals (box passes). It must be
//! written so that the same code is right for both: use the arithmetic of `Dual`, and
//! `CallCtx::choose` for discrete choices, which are made once from nominal values.

mod args;
pub mod heat;
pub mod power;
pub mod quantity;
pub mod reg;
pub mod res;
pub mod series;

use crate::num::{Dual, Interval};
use crate::units::Dim;
use crate::value::{Num, Value};

/// A built-in function of the library.
/// The most parameters a built-in has (its arguments are gathered on the stack).
pub const MAX_PARAMS: usize = 12;

pub struct Builtin {
    /// Full path, e.g. "reg.linear".
    pub path: &'static str,
    pub params: &'static [Param],
    pub doc: Doc,
    /// Computes the result. `args[i]` is the argument for `params[i]` (None when omitted;
    /// the function applies its default).
    pub call: fn(&mut CallCtx<'_>, &[Option<Value>]) -> Result<Value, CallError>,
}

pub struct Param {
    pub name: &'static str,
    pub required: bool,
    /// The default as the language would write it ("0 A"), or "" when required or computed.
    pub default: &'static str,
}

/// Documentation shown on inspection.
pub struct Doc {
    pub summary: &'static str,
    /// e.g. "reg.linear(vin, vout, iout, iq: 0 A, dropout: 0 V, vin_max?, iout_max?)"
    pub signature: &'static str,
    /// The relations, in their usual published form.
    pub formula: &'static str,
    /// Each argument with its unit and meaning, in parameter order.
    pub arguments: &'static [FieldDoc],
    pub fields: &'static [FieldDoc],
    /// Where the relation comes from.
    pub source: &'static str,
    pub caveats: &'static str,
}

pub struct FieldDoc {
    pub name: &'static str,
    pub unit: &'static str,
    pub meaning: &'static str,
}

/// An error in a call: a bad argument value, a missing argument, an impossible design.
/// Boxed, so the results of the built-ins and their argument readers stay small.
#[derive(Debug, Clone, PartialEq)]
pub struct CallError(Box<CallErrorData>);

/// What a `CallError` holds (its fields are read through the error).
#[derive(Debug, Clone, PartialEq)]
pub struct CallErrorData {
    pub message: String,
    pub hint: Option<String>,
    /// The parameter the error is about (its index in `params`), to point at its span.
    pub param: Option<usize>,
}

impl CallError {
    // Errors are the rare path: kept out of the evaluator's hot code.
    #[cold]
    pub fn new(message: impl Into<String>) -> Self {
        CallError(Box::new(CallErrorData {
            message: message.into(),
            hint: None,
            param: None,
        }))
    }
    pub fn at(mut self, param: usize) -> Self {
        self.param = Some(param);
        self
    }
    pub fn hint(mut self, hint: impl Into<String>) -> Self {
        self.hint = Some(hint.into());
        self
    }
    /// Its fields, by value.
    pub fn into_inner(self) -> CallErrorData {
        *self.0
    }
}

impl std::ops::Deref for CallError {
    type Target = CallErrorData;
    fn deref(&self) -> &CallErrorData {
        &self.0
    }
}

impl std::ops::DerefMut for CallError {
    fn deref_mut(&mut self) -> &mut CallErrorData {
        &mut self.0
    }
}

/// When a warning fires, judged by the worst-case analysis of a probed value.
#[derive(Debug, Clone, PartialEq)]
pub enum WarnWhen {
    /// The value's worst-case maximum exceeds the limit (SI).
    MaxAbove(f64),
    /// The value's worst-case minimum falls below the limit (SI).
    MinBelow(f64),
}

/// A warning rule on a probed value: the analysis finds the value's extreme and the
/// corner of the inputs where it occurs, and words the warning with those numbers.
#[derive(Debug, Clone, PartialEq)]
pub struct WarnRule {
    pub when: WarnWhen,
    /// What it means, e.g. "in dropout: the output sags". (Usually a literal: a rule is
    /// built in every pass, and only the nominal pass keeps it.)
    pub message: std::borrow::Cow<'static, str>,
    /// What the probed value is called in the text, e.g. "headroom".
    pub label: std::borrow::Cow<'static, str>,
}

/// What a chosen part is called where its tolerance is listed: `name`, `between`, its
/// value and its tolerance ("E24" " " 390 Ω ± 5 %, "r" " = " 390 Ω ± 5 %). Kept as numbers
/// and made into text only when shown.
#[derive(Debug, Clone, PartialEq)]
pub struct PartLabel {
    pub name: &'static str,
    pub between: &'static str,
    /// SI, in `dim`.
    pub value: f64,
    pub dim: Dim,
    /// A fraction (0.05 for 5 %).
    pub tolerance: f64,
}

impl PartLabel {
    pub fn text(&self) -> String {
        format!(
            "{}{}{} ± {} %",
            self.name,
            self.between,
            args::show(self.value, self.dim),
            crate::units::format_number(self.tolerance * 100.0, 3)
        )
    }
}

/// What a built-in may ask of the evaluator during a call.
pub trait CallHost {
    fn is_nominal(&self) -> bool;
    fn choose(
        &mut self,
        key: &'static str,
        pick: &mut dyn FnMut() -> Result<f64, CallError>,
    ) -> Result<f64, CallError>;
    fn part_input(
        &mut self,
        key: &'static str,
        label: PartLabel,
        nominal: f64,
        lo: f64,
        hi: f64,
        dim: Dim,
    ) -> Dual;
    fn probe(&mut self, key: &'static str, value: Num, rule: WarnRule);
    fn warn(&mut self, text: String);
    /// Notes that the call's statement works with `hazard` (only kept from the nominal pass).
    fn hazard(&mut self, hazard: crate::results::Hazard);
    /// The worst-case range (SI) of argument `param` over the whole input box, where the
    /// evaluator knows it before the nominal pass. Choices made by a worst-case rule
    /// (`res.led(rule: "worst")`, the power rating of `res.led`) use it; without it they
    /// fall back to the nominal value, and a probe still warns when the worst case breaks
    /// the rule.
    fn arg_range(&self, param: usize) -> Option<Interval> {
        let _ = param;
        None
    }
}

/// The evaluator's side of a call, as the built-ins see it.
pub struct CallCtx<'a> {
    pub host: &'a mut dyn CallHost,
}

impl CallCtx<'_> {
    /// True in the nominal pass, where arguments are their nominal points.
    pub fn is_nominal(&self) -> bool {
        self.host.is_nominal()
    }
    /// A discrete choice (a preferred value), made once from the nominal arguments and
    /// reused in every other pass. `key` distinguishes choices within one call.
    pub fn choose(
        &mut self,
        key: &'static str,
        mut pick: impl FnMut() -> Result<f64, CallError>,
    ) -> Result<f64, CallError> {
        self.host.choose(key, &mut pick)
    }
    /// A new uncertain input, e.g. the tolerance of a chosen resistor: `lo ..= hi` around
    /// `nominal` (SI). Returns its value in the current pass.
    pub fn part_input(
        &mut self,
        key: &'static str,
        label: PartLabel,
        nominal: f64,
        lo: f64,
        hi: f64,
        dim: Dim,
    ) -> Dual {
        self.host.part_input(key, label, nominal, lo, hi, dim)
    }
    /// Records a value whose worst case decides a warning.
    pub fn probe(&mut self, key: &'static str, value: Num, rule: WarnRule) {
        self.host.probe(key, value, rule)
    }
    /// The worst-case range of argument `param`, if the evaluator knows it.
    pub fn arg_range(&self, param: usize) -> Option<Interval> {
        self.host.arg_range(param)
    }
    /// An unconditional warning (only kept from the nominal pass).
    pub fn warn(&mut self, text: impl Into<String>) {
        if self.host.is_nominal() {
            self.host.warn(text.into())
        }
    }
    /// Says what the call models can hurt someone (a battery), so the results carry a
    /// caution about it. Only kept from the nominal pass.
    pub fn hazard(&mut self, hazard: crate::results::Hazard) {
        if self.host.is_nominal() {
            self.host.hazard(hazard)
        }
    }
}

impl Builtin {
    /// True for the sizing results (`heat.sink_for`, `heat.max_power`, `heat.max_ambient`)
    /// whose display leads with the worst-case minimum: the smallest θ or power, or the
    /// lowest ambient, that the design must meet. Their data keeps nominal, min and max.
    pub fn leads_with_minimum(&self) -> bool {
        matches!(
            self.path,
            "heat.sink_for" | "heat.max_power" | "heat.max_ambient"
        )
    }
}

static ALL: [&Builtin; 12] = [
    &reg::LINEAR,
    &reg::SWITCHING,
    &heat::JUNCTION,
    &heat::SINK_FOR,
    &heat::MAX_POWER,
    &heat::MAX_AMBIENT,
    &heat::PULSE,
    &res::PICK,
    &res::LED,
    &res::DIVIDER,
    &res::DERATE,
    &power::BATTERY_HOURS,
];

/// Every built-in, for lookup and completion.
pub fn all() -> &'static [&'static Builtin] {
    &ALL
}

/// The built-in at `path` ("reg.linear"), if any.
pub fn lookup(path: &str) -> Option<&'static Builtin> {
    all().iter().copied().find(|b| b.path == path)
}

/// The built-in `namespace.name`, if any (`lookup` without building the path).
pub fn lookup_parts(namespace: &str, name: &str) -> Option<&'static Builtin> {
    // Compared in place: this runs for every call and field access of every pass.
    let len = namespace.len() + 1 + name.len();
    all().iter().copied().find(|b| {
        b.path.len() == len
            && b.path.as_bytes()[namespace.len()] == b'.'
            && b.path.starts_with(namespace)
            && b.path.ends_with(name)
    })
}

/// The built-in a callee expression names, if any.
pub fn lookup_expr(callee: &crate::ast::Expr) -> Option<&'static Builtin> {
    let (ns, name) = callee.two_part_path()?;
    lookup_parts(ns, name)
}

/// The namespaces (`reg`, `heat`, `res`, `power`).
pub fn namespaces() -> Vec<&'static str> {
    let mut ns: Vec<&str> = all()
        .iter()
        .filter_map(|b| b.path.split('.').next())
        .collect();
    ns.sort_unstable();
    ns.dedup();
    ns
}

/// A named constant of the library (`E24`), if any.
pub fn constant(name: &str) -> Option<Value> {
    series::by_name(name).map(Value::Series)
}
