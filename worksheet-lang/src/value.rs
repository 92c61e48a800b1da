//! The dynamic values of the language.

use crate::num::Dual;
use crate::units::Dim;
use std::sync::Arc;

/// A number with its dimension. `abs` marks an absolute temperature (stored in kelvin);
/// every other temperature is a difference.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Num {
    pub x: Dual,
    pub dim: Dim,
    pub abs: bool,
}

impl Num {
    pub fn new(x: Dual, dim: Dim) -> Self {
        Num { x, dim, abs: false }
    }
    pub fn constant(si: f64, dim: Dim) -> Self {
        Num::new(Dual::constant(si), dim)
    }
    pub fn absolute(x: Dual) -> Self {
        Num {
            x,
            dim: Dim::TEMPERATURE,
            abs: true,
        }
    }
}

#[derive(Clone, Debug, PartialEq)]
pub enum Value {
    Num(Num),
    Str(Arc<str>),
    List(Arc<[Value]>),
    Record(Arc<Record>),
    /// A preferred-number series constant (`E24`).
    Series(&'static crate::builtins::series::Series),
}

impl Value {
    pub fn type_name(&self) -> &'static str {
        match self {
            Value::Num(_) => "a number",
            Value::Str(_) => "a text",
            Value::List(_) => "a list",
            Value::Record(_) => "a record",
            Value::Series(_) => "a preferred-number series",
        }
    }
    pub fn as_num(&self) -> Option<&Num> {
        match self {
            Value::Num(n) => Some(n),
            _ => None,
        }
    }
}

/// The result of a built-in: named fields, shown as a table.
#[derive(Clone, Debug, PartialEq)]
pub struct Record {
    /// The built-in that made it (`reg.linear`).
    pub kind: &'static str,
    pub fields: Vec<Field>,
}

impl Record {
    pub fn get(&self, name: &str) -> Option<&Field> {
        self.fields.iter().find(|f| f.name == name)
    }
}

#[derive(Clone, Debug, PartialEq)]
pub struct Field {
    pub name: &'static str,
    pub value: Value,
    /// The unit this field is shown in when the user declares none (e.g. "%"), if any.
    pub display: Option<&'static str>,
}
