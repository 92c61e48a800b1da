//! The one boundary between the language's dynamic values and `uom` typed quantities.

use crate::builtins::CallError;
use crate::num::Dual;
use crate::units::Dim;
use crate::value::{Num, Value};
use uom::si::SI;
use uom::typenum::Integer;

/// A quantity of dimension `D` stored (in SI base units) as a `Dual`.
pub type Q<D> = uom::si::Quantity<D, SI<Dual>, Dual>;

pub type Voltage = uom::si::electric_potential::ElectricPotential<SI<Dual>, Dual>;
pub type Current = uom::si::electric_current::ElectricCurrent<SI<Dual>, Dual>;
pub type Power = uom::si::power::Power<SI<Dual>, Dual>;
pub type Resistance = uom::si::electrical_resistance::ElectricalResistance<SI<Dual>, Dual>;
pub type Time = uom::si::time::Time<SI<Dual>, Dual>;
pub type Charge = uom::si::electric_charge::ElectricCharge<SI<Dual>, Dual>;
pub type Energy = uom::si::energy::Energy<SI<Dual>, Dual>;
pub type Ratio = uom::si::ratio::Ratio<SI<Dual>, Dual>;
pub type TemperatureInterval = uom::si::temperature_interval::TemperatureInterval<SI<Dual>, Dual>;
pub type Temperature = uom::si::thermodynamic_temperature::ThermodynamicTemperature<SI<Dual>, Dual>;
pub type ThermalResistance = Q<
    uom::si::ISQ<
        uom::typenum::N2,
        uom::typenum::N1,
        uom::typenum::P3,
        uom::typenum::Z0,
        uom::typenum::P1,
        uom::typenum::Z0,
        uom::typenum::Z0,
    >,
>;

/// The language's `Dim` of a `uom` dimension.
pub fn dim_of<D: uom::si::Dimension + ?Sized>() -> Dim {
    let e = |x: i32| x as i8;
    Dim([
        e(D::L::to_i32()),
        e(D::M::to_i32()),
        e(D::T::to_i32()),
        e(D::I::to_i32()),
        e(D::Th::to_i32()),
        e(D::N::to_i32()),
        e(D::J::to_i32()),
    ])
}

fn wrap<D: uom::si::Dimension + ?Sized>(x: Dual) -> Q<D> {
    uom::si::Quantity {
        dimension: std::marker::PhantomData,
        units: std::marker::PhantomData,
        value: x,
    }
}

/// The typed quantity of an argument, checking its dimension. `name` is the parameter's
/// name for the message; absolute temperatures are refused (use `temperature`).
pub fn arg<D: uom::si::Dimension + ?Sized>(v: &Value, name: &str) -> Result<Q<D>, CallError> {
    let want = dim_of::<D>();
    match v {
        Value::Num(n) if n.dim == want && !n.abs => Ok(wrap(n.x)),
        Value::Num(n) if n.abs => Err(CallError::new(format!(
            "`{name}` must be {}, not an absolute temperature",
            want.describe()
        ))
        .hint("a temperature difference is written in K (`10 K`)")),
        Value::Num(n) => Err(CallError::new(format!(
            "`{name}` must be {}, but this is {}",
            want.describe(),
            n.dim.describe()
        ))),
        other => Err(CallError::new(format!(
            "`{name}` must be {}, but this is {}",
            want.describe(),
            other.type_name()
        ))),
    }
}

/// An absolute temperature argument (`25 °C`).
pub fn temperature(v: &Value, name: &str) -> Result<Temperature, CallError> {
    match v {
        Value::Num(n) if n.dim == Dim::TEMPERATURE && n.abs => Ok(wrap(n.x)),
        Value::Num(n) if n.dim == Dim::TEMPERATURE => Err(CallError::new(format!(
            "`{name}` must be an absolute temperature, but this is a temperature difference"
        ))
        .hint("write a temperature reading in °C (`50 °C`)")),
        other => Err(CallError::new(format!(
            "`{name}` must be an absolute temperature, but this is {}",
            match other {
                Value::Num(n) => n.dim.describe(),
                v => v.type_name().to_string(),
            }
        ))),
    }
}

/// A typed quantity as a language value.
pub fn out<D: uom::si::Dimension + ?Sized>(q: Q<D>) -> Value {
    Value::Num(Num::new(q.value, dim_of::<D>()))
}

/// An absolute temperature as a language value.
pub fn out_temperature(t: Temperature) -> Value {
    Value::Num(Num::absolute(t.value))
}

/// A typed quantity from a plain SI number (a constant of a formula).
pub fn si<D: uom::si::Dimension + ?Sized>(x: f64) -> Q<D> {
    wrap(Dual::constant(x))
}

/// A typed quantity from a `Dual` in SI.
pub fn from_dual<D: uom::si::Dimension + ?Sized>(x: Dual) -> Q<D> {
    wrap(x)
}

/// The smaller of two quantities, for piecewise behaviour written once for every pass.
pub fn min<D: uom::si::Dimension + ?Sized>(a: Q<D>, b: Q<D>) -> Q<D> {
    wrap(a.value.min(b.value))
}

/// The larger of two quantities.
pub fn max<D: uom::si::Dimension + ?Sized>(a: Q<D>, b: Q<D>) -> Q<D> {
    wrap(a.value.max(b.value))
}

/// The difference of two absolute temperatures (`uom` keeps absolute temperatures apart
/// from differences and offers no subtraction of two of them).
pub fn difference(a: Temperature, b: Temperature) -> TemperatureInterval {
    wrap(a.value - b.value)
}

/// A built-in's record: `fields` are (name, value, display unit).
pub fn record(
    kind: &'static str,
    fields: Vec<(&'static str, Value, Option<&'static str>)>,
) -> Value {
    Value::Record(std::sync::Arc::new(crate::value::Record {
        kind,
        fields: fields
            .into_iter()
            .map(|(name, value, display)| crate::value::Field {
                name,
                value,
                display,
            })
            .collect(),
    }))
}
