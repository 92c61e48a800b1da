//! Reading and checking the arguments of a built-in call.
//!
//! Every check looks at the whole interval of the pass, so an impossible input is caught
//! in whichever pass first shows it (the nominal point, a box, a corner).

use crate::builtins::quantity::{arg, dim_of, si, temperature, Temperature, Q};
use crate::builtins::series::{self, Series};
use crate::builtins::{CallError, Param};
use crate::num::Dual;
use crate::units::{format_si, Dim};
use crate::value::Value;

/// The arguments of one call, by parameter index.
pub struct Args<'a> {
    params: &'static [Param],
    vals: &'a [Option<Value>],
}

/// A required parameter.
pub const fn req(name: &'static str) -> Param {
    Param {
        name,
        required: true,
        default: "",
    }
}

/// An optional parameter with its default as the language writes it ("" when computed or
/// absent).
pub const fn opt(name: &'static str, default: &'static str) -> Param {
    Param {
        name,
        required: false,
        default,
    }
}

/// `x ≥ limit`, false for NaN (so a NaN never passes a check).
pub fn at_least(x: f64, limit: f64) -> bool {
    x >= limit
}

/// `x > limit`, false for NaN.
pub fn above(x: f64, limit: f64) -> bool {
    x > limit
}

/// A value with its unit, for messages (three significant digits).
pub fn show(si: f64, dim: Dim) -> String {
    format_si(si, dim, false, 3)
}

impl<'a> Args<'a> {
    pub fn new(params: &'static [Param], vals: &'a [Option<Value>]) -> Self {
        Args { params, vals }
    }

    pub fn name(&self, i: usize) -> &'static str {
        self.params.get(i).map_or("?", |p| p.name)
    }

    pub fn value(&self, i: usize) -> Option<&'a Value> {
        self.vals.get(i).and_then(Option::as_ref)
    }

    #[cold]
    fn missing(&self, i: usize) -> CallError {
        let name = self.name(i);
        CallError::new(format!("`{name}` is required")).hint(format!("add `{name}: …` to the call"))
    }

    /// A required quantity.
    pub fn q<D: uom::si::Dimension + ?Sized>(&self, i: usize) -> Result<Q<D>, CallError> {
        let v = self.value(i).ok_or_else(|| self.missing(i))?;
        arg::<D>(v, self.name(i)).map_err(|e| e.at(i))
    }

    /// A quantity with a default (SI).
    pub fn q_or<D: uom::si::Dimension + ?Sized>(
        &self,
        i: usize,
        default: f64,
    ) -> Result<Q<D>, CallError> {
        Ok(self.q_opt(i)?.unwrap_or_else(|| si(default)))
    }

    /// An optional quantity.
    pub fn q_opt<D: uom::si::Dimension + ?Sized>(
        &self,
        i: usize,
    ) -> Result<Option<Q<D>>, CallError> {
        match self.value(i) {
            None => Ok(None),
            Some(v) => arg::<D>(v, self.name(i)).map(Some).map_err(|e| e.at(i)),
        }
    }

    /// A required absolute temperature.
    pub fn temp(&self, i: usize) -> Result<Temperature, CallError> {
        let v = self.value(i).ok_or_else(|| self.missing(i))?;
        temperature(v, self.name(i)).map_err(|e| e.at(i))
    }

    /// An absolute temperature with a default (kelvin).
    pub fn temp_or(&self, i: usize, kelvin: f64) -> Result<Temperature, CallError> {
        match self.value(i) {
            None => Ok(crate::builtins::quantity::from_dual(Dual::constant(kelvin))),
            Some(v) => temperature(v, self.name(i)).map_err(|e| e.at(i)),
        }
    }

    /// An optional absolute temperature.
    pub fn temp_opt(&self, i: usize) -> Result<Option<Temperature>, CallError> {
        match self.value(i) {
            None => Ok(None),
            Some(v) => temperature(v, self.name(i)).map(Some).map_err(|e| e.at(i)),
        }
    }

    /// One of a fixed set of words (`mode: "up"`), with a default.
    pub fn word_or(
        &self,
        i: usize,
        default: &'static str,
        choices: &[&'static str],
    ) -> Result<&'static str, CallError> {
        let list = || {
            choices
                .iter()
                .map(|c| format!("\"{c}\""))
                .collect::<Vec<_>>()
                .join(", ")
        };
        match self.value(i) {
            None => Ok(default),
            Some(Value::Str(s)) => choices.iter().copied().find(|c| **c == **s).ok_or_else(|| {
                CallError::new(format!(
                    "`{}` must be one of {}, not \"{s}\"",
                    self.name(i),
                    list()
                ))
                .at(i)
            }),
            Some(other) => Err(CallError::new(format!(
                "`{}` must be a text, one of {}, but this is {}",
                self.name(i),
                list(),
                other.type_name()
            ))
            .at(i)
            .hint(format!(
                "write the word in quotes: `{}: \"{default}\"`",
                self.name(i)
            ))),
        }
    }

    /// A preferred-number series (`E24`, or its name as text), with a default.
    pub fn series_or(
        &self,
        i: usize,
        default: &'static Series,
    ) -> Result<&'static Series, CallError> {
        let names = || {
            series::ALL
                .iter()
                .map(|s| s.name)
                .collect::<Vec<_>>()
                .join(" ")
        };
        match self.value(i) {
            None => Ok(default),
            Some(Value::Series(s)) => Ok(s),
            Some(Value::Str(s)) => series::by_name(s).ok_or_else(|| {
                CallError::new(format!("\"{s}\" is not a preferred-number series"))
                    .at(i)
                    .hint(format!("one of {}", names()))
            }),
            Some(other) => Err(CallError::new(format!(
                "`{}` must be a preferred-number series, but this is {}",
                self.name(i),
                other.type_name()
            ))
            .at(i)
            .hint(format!("one of {}", names()))),
        }
    }

    /// A dimensionless number that must be known exactly (a count, a tolerance), with a
    /// default. Returns its value.
    pub fn exact_or(&self, i: usize, default: f64) -> Result<f64, CallError> {
        match self.value(i) {
            None => Ok(default),
            Some(Value::Num(n)) if n.dim == Dim::NONE && !n.abs => {
                if n.x.v.is_point() && n.x.v.lo.is_finite() {
                    Ok(n.x.v.lo)
                } else {
                    Err(CallError::new(format!(
                        "`{}` must be a single known number, not a range",
                        self.name(i)
                    ))
                    .at(i)
                    .hint("give it without a tolerance"))
                }
            }
            Some(v) => Err(arg::<uom::si::ratio::Dimension>(v, self.name(i))
                .err()
                .unwrap_or_else(|| {
                    CallError::new(format!("`{}` must be a plain number", self.name(i)))
                })
                .at(i)),
        }
    }

    /// A required list.
    pub fn list(&self, i: usize) -> Result<&'a [Value], CallError> {
        match self.value(i) {
            None => Err(self.missing(i)),
            Some(Value::List(items)) => Ok(items),
            Some(other) => Err(CallError::new(format!(
                "`{}` must be a list, but this is {}",
                self.name(i),
                other.type_name()
            ))
            .at(i)),
        }
    }

    /// Checks that a quantity is above zero over the whole pass.
    pub fn positive<D: uom::si::Dimension + ?Sized>(
        &self,
        i: usize,
        q: &Q<D>,
    ) -> Result<(), CallError> {
        let x = q.value;
        if above(x.v.lo, 0.0) {
            Ok(())
        } else {
            Err(CallError::new(format!(
                "`{}` must be positive, but it reaches {}",
                self.name(i),
                show(x.v.lo, dim_of::<D>())
            ))
            .at(i))
        }
    }

    /// Checks that a quantity is zero or above over the whole pass.
    pub fn not_negative<D: uom::si::Dimension + ?Sized>(
        &self,
        i: usize,
        q: &Q<D>,
    ) -> Result<(), CallError> {
        let x = q.value;
        if at_least(x.v.lo, 0.0) {
            Ok(())
        } else {
            Err(CallError::new(format!(
                "`{}` must not be negative, but it reaches {}",
                self.name(i),
                show(x.v.lo, dim_of::<D>())
            ))
            .at(i))
        }
    }
}
