//! Units: dimensions, the symbol table, unit parsing and engineering display.
//!
//! STUB: the API below is the contract; bodies are placeholders to be replaced.

/// Exponents of the SI base dimensions, in the order L, M, T, I, Θ, N, J.
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug, Default)]
pub struct Dim(pub [i8; 7]);

impl Dim {
    pub const NONE: Dim = Dim([0; 7]);
    pub const LENGTH: Dim = Dim([1, 0, 0, 0, 0, 0, 0]);
    pub const TIME: Dim = Dim([0, 0, 1, 0, 0, 0, 0]);
    pub const CURRENT: Dim = Dim([0, 0, 0, 1, 0, 0, 0]);
    pub const TEMPERATURE: Dim = Dim([0, 0, 0, 0, 1, 0, 0]);
    pub const VOLTAGE: Dim = Dim([2, 1, -3, -1, 0, 0, 0]);
    pub const POWER: Dim = Dim([2, 1, -3, 0, 0, 0, 0]);
    pub const ENERGY: Dim = Dim([2, 1, -2, 0, 0, 0, 0]);
    pub const RESISTANCE: Dim = Dim([2, 1, -3, -2, 0, 0, 0]);
    pub const CAPACITANCE: Dim = Dim([-2, -1, 4, 2, 0, 0, 0]);
    pub const CHARGE: Dim = Dim([0, 0, 1, 1, 0, 0, 0]);
    pub const THERMAL_RESISTANCE: Dim = Dim([-2, -1, 3, 0, 1, 0, 0]);

    pub fn is_none(self) -> bool {
        self == Dim::NONE
    }
    pub fn mul(self, o: Dim) -> Dim {
        let mut r = self.0;
        for (a, b) in r.iter_mut().zip(o.0) {
            *a = a.saturating_add(b);
        }
        Dim(r)
    }
    pub fn div(self, o: Dim) -> Dim {
        let mut r = self.0;
        for (a, b) in r.iter_mut().zip(o.0) {
            *a = a.saturating_sub(b);
        }
        Dim(r)
    }
    pub fn powi(self, n: i32) -> Option<Dim> {
        let mut r = [0i8; 7];
        for (a, b) in r.iter_mut().zip(self.0) {
            *a = i8::try_from(i32::from(b) * n).ok()?;
        }
        Some(Dim(r))
    }
    /// The n-th root, if every exponent is divisible by n.
    pub fn root(self, n: i8) -> Option<Dim> {
        if n == 0 || self.0.iter().any(|e| e % n != 0) {
            return None;
        }
        let mut r = self.0;
        for a in r.iter_mut() {
            *a /= n;
        }
        Some(Dim(r))
    }
    /// The dimension in words for messages: "a voltage", "a current", "a thermal resistance",
    /// or, for one without a name, "a quantity in V/s" style text.
    pub fn describe(self) -> String {
        format!("a quantity of dimension {:?}", self.0)
    }
}

/// Which temperature symbol a unit is (only meaningful for `Unit::temperature`).
#[derive(Clone, Copy, PartialEq, Eq, Debug)]
pub enum TempScale {
    Kelvin,
    Celsius,
    Fahrenheit,
}

/// A parsed unit. `si = value * factor` for every unit except an absolute temperature
/// reading (`°C`, `°F` standing alone), where `si = (value + offset) * factor`.
#[derive(Clone, Debug, PartialEq)]
pub struct Unit {
    /// Canonical text after folding, e.g. "K/W", "mA", "°C".
    pub text: String,
    pub dim: Dim,
    pub factor: f64,
    /// `Some` when the unit is exactly one temperature symbol (K, °C, degC, °F, degF).
    pub temperature: Option<TempScale>,
}

impl Unit {
    /// True for `°C`, `degC`, `°F`, `degF` alone: after a number they mean absolute readings.
    pub fn is_absolute_temperature(&self) -> bool {
        matches!(self.temperature, Some(TempScale::Celsius | TempScale::Fahrenheit))
    }
    /// Offset in the unit's own scale to the thermodynamic zero (273.15 for °C, 459.67 for °F).
    pub fn absolute_offset(&self) -> f64 {
        match self.temperature {
            Some(TempScale::Celsius) => 273.15,
            Some(TempScale::Fahrenheit) => 459.67,
            _ => 0.0,
        }
    }
    /// SI value of `x` written in this unit; `absolute` says whether it is an absolute reading.
    pub fn to_si(&self, x: f64, absolute: bool) -> f64 {
        if absolute {
            (x + self.absolute_offset()) * self.factor
        } else {
            x * self.factor
        }
    }
    /// Value in this unit of an SI value.
    pub fn from_si(&self, si: f64, absolute: bool) -> f64 {
        if absolute {
            si / self.factor - self.absolute_offset()
        } else {
            si / self.factor
        }
    }
}

#[derive(Clone, Debug, PartialEq)]
pub struct UnitError {
    pub message: String,
    pub hint: Option<String>,
}

/// Parses a unit as written without spaces: `V`, `mA`, `K/W`, `W/(m·K)`, `A·h`, `m^2`, `mm²`.
pub fn parse_unit(text: &str) -> Result<Unit, UnitError> {
    Err(UnitError {
        message: format!("unknown unit `{text}`"),
        hint: None,
    })
}

/// Formats an SI value in the unit the trade uses for its dimension, with an engineering
/// prefix keeping 1 ≤ mantissa < 1000, to `sig` significant digits: "79.4 °C", "4.70 kΩ".
pub fn format_si(si: f64, dim: Dim, absolute: bool, sig: usize) -> String {
    let _ = (dim, absolute);
    format!("{si:.*}", sig)
}

/// Formats an SI value in the given unit (declared or `as`), to `sig` significant digits.
pub fn format_in(si: f64, absolute: bool, unit: &Unit, sig: usize) -> String {
    format!("{:.*} {}", sig, unit.from_si(si, absolute), unit.text)
}

/// Unit symbols offered by completion after a number.
pub fn symbols() -> Vec<&'static str> {
    vec!["V", "A", "W"]
}
