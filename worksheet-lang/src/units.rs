//! Units: dimensions, the symbol table, unit parsing and engineering display.
//!
//! Every value is stored in coherent SI. A [`Unit`] says how a number written in that unit
//! maps to SI (`factor`, and for a lone `°C`/`°F` an offset); [`Dim`] carries the exponents
//! of the seven base dimensions so every operation can be checked.
//!
//! Compound units follow NIST SP 811 (2008) §6.1.6 (section number from memory): a solidus
//! is not followed by another solidus or a product sign unless parentheses make the meaning
//! plain, so `W/(m·K)` is accepted and `W/m·K` is an error with a hint.

use std::sync::OnceLock;

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
    pub const MASS: Dim = Dim([0, 1, 0, 0, 0, 0, 0]);
    pub const AREA: Dim = Dim([2, 0, 0, 0, 0, 0, 0]);
    pub const VOLUME: Dim = Dim([3, 0, 0, 0, 0, 0, 0]);
    pub const FREQUENCY: Dim = Dim([0, 0, -1, 0, 0, 0, 0]);
    pub const CONDUCTANCE: Dim = Dim([-2, -1, 3, 2, 0, 0, 0]);
    pub const INDUCTANCE: Dim = Dim([2, 1, -2, -2, 0, 0, 0]);
    /// W/K.
    pub const THERMAL_CONDUCTANCE: Dim = Dim([2, 1, -3, 0, -1, 0, 0]);
    /// 1/K, e.g. a resistor's temperature coefficient.
    pub const TEMPERATURE_COEFFICIENT: Dim = Dim([0, 0, 0, 0, -1, 0, 0]);

    pub fn is_none(self) -> bool {
        self == Dim::NONE
    }
    // The method names are part of the module's contract; `*` works too (trait impl below).
    #[allow(clippy::should_implement_trait)]
    pub fn mul(self, o: Dim) -> Dim {
        let mut r = self.0;
        for (a, b) in r.iter_mut().zip(o.0) {
            *a = a.saturating_add(b);
        }
        Dim(r)
    }
    // The method names are part of the module's contract; `/` works too (trait impl below).
    #[allow(clippy::should_implement_trait)]
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
            *a = i8::try_from(i32::from(b).checked_mul(n)?).ok()?;
        }
        Some(Dim(r))
    }
    /// The n-th root, if every exponent is divisible by n.
    pub fn root(self, n: i8) -> Option<Dim> {
        if n == 0 || self.0.iter().any(|e| e.checked_rem(n) != Some(0)) {
            return None;
        }
        let mut r = self.0;
        for a in r.iter_mut() {
            *a = a.checked_div(n)?;
        }
        Some(Dim(r))
    }
    /// The dimension in words for messages: "a voltage", "a current", "a thermal resistance",
    /// or, for one without a name, "a quantity in m²·kg/s³" (SI base units).
    pub fn describe(self) -> String {
        match named(self) {
            Some(n) => n.words.to_string(),
            None => format!("a quantity in {}", base_text(self)),
        }
    }
    /// The coherent SI unit of this dimension as text, for data output: "V", "K/W", "1" when
    /// dimensionless, "K" for temperature. Named derived units are preferred; otherwise the
    /// text is built from base units ("m²·kg/(s³·A)"). The text is accepted by [`parse_unit`]
    /// whenever the dimension can be written with the symbol table (no mol or cd).
    pub fn symbol_text(self) -> String {
        match named(self) {
            Some(n) => n.symbol.to_string(),
            None => base_text(self),
        }
    }
}

impl std::ops::Mul for Dim {
    type Output = Dim;
    fn mul(self, o: Dim) -> Dim {
        Dim::mul(self, o)
    }
}

impl std::ops::Div for Dim {
    type Output = Dim;
    fn div(self, o: Dim) -> Dim {
        Dim::div(self, o)
    }
}

/// The kind of quantity in words, telling an absolute temperature ("an absolute temperature")
/// from a temperature difference; otherwise the same as [`Dim::describe`].
pub fn describe_quantity(dim: Dim, absolute: bool) -> String {
    if absolute && dim == Dim::TEMPERATURE {
        "an absolute temperature".to_string()
    } else {
        dim.describe()
    }
}

/// A dimension with a name: words for messages, its coherent SI symbol text, and how a value
/// of it is displayed (unit text, SI value of one display unit, decimal exponents of the
/// prefixes the display may use; 0 stands for no prefix).
struct Named {
    dim: Dim,
    words: &'static str,
    symbol: &'static str,
    shown: &'static str,
    scale: f64,
    prefixes: &'static [i32],
}

const NO_PREFIX: &[i32] = &[0];

const NAMED: &[Named] = &[
    named_entry(Dim::NONE, "a dimensionless number", "1", "", 1.0, NO_PREFIX),
    named_entry(
        Dim::VOLTAGE,
        "a voltage",
        "V",
        "V",
        1.0,
        &[-9, -6, -3, 0, 3, 6],
    ),
    named_entry(
        Dim::CURRENT,
        "a current",
        "A",
        "A",
        1.0,
        &[-12, -9, -6, -3, 0, 3],
    ),
    named_entry(Dim::POWER, "a power", "W", "W", 1.0, &[-9, -6, -3, 0, 3, 6]),
    named_entry(
        Dim::RESISTANCE,
        "a resistance",
        "Ω",
        "Ω",
        1.0,
        &[-6, -3, 0, 3, 6, 9],
    ),
    named_entry(
        Dim::CONDUCTANCE,
        "a conductance",
        "S",
        "S",
        1.0,
        &[-12, -9, -6, -3, 0],
    ),
    // Capacitors are marked in pF, nF and µF; "4700 µF" reads better than "4.70 mF".
    named_entry(
        Dim::CAPACITANCE,
        "a capacitance",
        "F",
        "F",
        1.0,
        &[-12, -9, -6, 0],
    ),
    named_entry(
        Dim::INDUCTANCE,
        "an inductance",
        "H",
        "H",
        1.0,
        &[-9, -6, -3, 0],
    ),
    named_entry(
        Dim::FREQUENCY,
        "a frequency",
        "Hz",
        "Hz",
        1.0,
        &[0, 3, 6, 9],
    ),
    // Time is displayed by `format_time`; the prefixes here apply below one second.
    named_entry(Dim::TIME, "a time", "s", "s", 1.0, &[-12, -9, -6, -3, 0]),
    named_entry(
        Dim::ENERGY,
        "an energy",
        "J",
        "J",
        1.0,
        &[-9, -6, -3, 0, 3, 6],
    ),
    named_entry(
        Dim::CHARGE,
        "a charge",
        "C",
        "C",
        1.0,
        &[-12, -9, -6, -3, 0],
    ),
    named_entry(
        Dim::TEMPERATURE,
        "a temperature difference",
        "K",
        "K",
        1.0,
        NO_PREFIX,
    ),
    named_entry(
        Dim::THERMAL_RESISTANCE,
        "a thermal resistance",
        "K/W",
        "K/W",
        1.0,
        NO_PREFIX,
    ),
    named_entry(
        Dim::THERMAL_CONDUCTANCE,
        "a thermal conductance",
        "W/K",
        "W/K",
        1.0,
        NO_PREFIX,
    ),
    named_entry(Dim::LENGTH, "a length", "m", "m", 1.0, &[-9, -6, -3, 0, 3]),
    named_entry(Dim::AREA, "an area", "m²", "m²", 1.0, NO_PREFIX),
    named_entry(Dim::VOLUME, "a volume", "m³", "m³", 1.0, NO_PREFIX),
    named_entry(Dim::MASS, "a mass", "kg", "g", 1e-3, &[-6, -3, 0, 3]),
    named_entry(
        Dim([2, 1, -4, -1, 0, 0, 0]),
        "a voltage per time",
        "V/s",
        "V/s",
        1.0,
        NO_PREFIX,
    ),
    named_entry(
        Dim([0, 0, -1, 1, 0, 0, 0]),
        "a current per time",
        "A/s",
        "A/s",
        1.0,
        NO_PREFIX,
    ),
    // Temperature drifts of voltages are quoted in mV/K and µV/K.
    named_entry(
        Dim([2, 1, -3, -1, -1, 0, 0]),
        "a voltage per temperature",
        "V/K",
        "V/K",
        1.0,
        &[-6, -3, 0],
    ),
    named_entry(
        Dim([0, 0, -1, 0, 1, 0, 0]),
        "a temperature difference per time",
        "K/s",
        "K/s",
        1.0,
        NO_PREFIX,
    ),
    // Temperature coefficients are quoted in ppm/K on datasheets.
    named_entry(
        Dim::TEMPERATURE_COEFFICIENT,
        "a temperature coefficient",
        "1/K",
        "ppm/K",
        1e-6,
        NO_PREFIX,
    ),
    named_entry(
        Dim([1, 1, -3, 0, -1, 0, 0]),
        "a thermal conductivity",
        "W/(m·K)",
        "W/(m·K)",
        1.0,
        NO_PREFIX,
    ),
    named_entry(
        Dim([2, 1, -2, 0, -1, 0, 0]),
        "a heat capacity",
        "J/K",
        "J/K",
        1.0,
        NO_PREFIX,
    ),
    named_entry(
        Dim([0, 1, -3, 0, 0, 0, 0]),
        "a power per area",
        "W/m²",
        "W/m²",
        1.0,
        NO_PREFIX,
    ),
    named_entry(
        Dim([-2, 0, 0, 1, 0, 0, 0]),
        "a current density",
        "A/m²",
        "A/m²",
        1.0,
        NO_PREFIX,
    ),
    named_entry(
        Dim([1, 0, -1, 0, 0, 0, 0]),
        "a speed",
        "m/s",
        "m/s",
        1.0,
        NO_PREFIX,
    ),
    named_entry(
        Dim([3, 1, -3, -2, 0, 0, 0]),
        "a resistivity",
        "Ω·m",
        "Ω·m",
        1.0,
        NO_PREFIX,
    ),
    named_entry(
        Dim([2, 1, -2, -1, 0, 0, 0]),
        "a magnetic flux",
        "V·s",
        "V·s",
        1.0,
        NO_PREFIX,
    ),
];

const fn named_entry(
    dim: Dim,
    words: &'static str,
    symbol: &'static str,
    shown: &'static str,
    scale: f64,
    prefixes: &'static [i32],
) -> Named {
    Named {
        dim,
        words,
        symbol,
        shown,
        scale,
        prefixes,
    }
}

fn named(dim: Dim) -> Option<&'static Named> {
    NAMED.iter().find(|n| n.dim == dim)
}

/// The text of a dimension without a name of its own: SI base units when they are at most
/// two (`1/s²`), else a power, quotient or product of the electrical and thermal units the
/// trade writes (`V²`, `F/V`) where one fits, else SI base units. Either form is coherent, so no value changes, and `parse_unit` reads it.
fn base_text(dim: Dim) -> String {
    // Base units read well while they are few (`1/s²`, `m²`); beyond that, a named form.
    if dim.0.iter().filter(|e| **e != 0).count() <= 2 {
        return si_base_text(dim);
    }
    composite_text(dim).unwrap_or_else(|| si_base_text(dim))
}

/// `dim` as aᵖ, aᵖ/bᵠ or aᵖ·bᵠ of the common named units (p, q ≤ 2; the first fit in that
/// order of preference), if one fits.
fn composite_text(dim: Dim) -> Option<String> {
    const UNITS: [(&str, Dim); 11] = [
        ("V", Dim::VOLTAGE),
        ("A", Dim::CURRENT),
        ("W", Dim::POWER),
        ("Ω", Dim::RESISTANCE),
        ("F", Dim::CAPACITANCE),
        ("s", Dim::TIME),
        ("K", Dim::TEMPERATURE),
        ("J", Dim::ENERGY),
        ("C", Dim::CHARGE),
        ("H", Dim([2, 1, -2, -2, 0, 0, 0])),
        ("m", Dim::LENGTH),
    ];
    let pow = |d: Dim, p: i32| d.powi(p);
    let text = |u: &str, p: i32| format!("{u}{}", superscript(p));
    for p in [2, 3] {
        for (u, d) in UNITS {
            if pow(d, p) == Some(dim) {
                return Some(text(u, p));
            }
        }
    }
    for p in 1..=2 {
        for q in 1..=2 {
            for (a, da) in UNITS {
                for (b, db) in UNITS {
                    if a == b {
                        continue;
                    }
                    let (Some(x), Some(y)) = (pow(da, p), pow(db, q)) else {
                        continue;
                    };
                    if x.div(y) == dim {
                        return Some(format!("{}/{}", text(a, p), text(b, q)));
                    }
                    if a < b && x.mul(y) == dim {
                        return Some(format!("{}·{}", text(a, p), text(b, q)));
                    }
                }
            }
        }
    }
    None
}

/// Base-unit text of a dimension: numerator factors, then `/` and the denominator
/// (parenthesised when it has more than one factor), "1" for dimensionless.
fn si_base_text(dim: Dim) -> String {
    const BASE: [&str; 7] = ["m", "kg", "s", "A", "K", "mol", "cd"];
    let part = |negative: bool| -> Vec<String> {
        BASE.iter()
            .zip(dim.0)
            .filter(|(_, e)| if negative { *e < 0 } else { *e > 0 })
            .map(|(s, e)| format!("{s}{}", superscript(i32::from(e).abs())))
            .collect()
    };
    let num = part(false);
    let den = part(true);
    let num_text = if num.is_empty() {
        "1".to_string()
    } else {
        num.join("·")
    };
    match den.len() {
        0 => num_text,
        1 => format!("{num_text}/{}", den[0]),
        _ => format!("{num_text}/({})", den.join("·")),
    }
}

/// An exponent as superscript digits; empty for 1.
fn superscript(n: i32) -> String {
    if n == 1 {
        return String::new();
    }
    n.to_string()
        .chars()
        .map(|c| match c {
            '-' => '⁻',
            '0' => '⁰',
            '1' => '¹',
            '2' => '²',
            '3' => '³',
            '4' => '⁴',
            '5' => '⁵',
            '6' => '⁶',
            '7' => '⁷',
            '8' => '⁸',
            _ => '⁹',
        })
        .collect()
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
        matches!(
            self.temperature,
            Some(TempScale::Celsius | TempScale::Fahrenheit)
        )
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

impl std::fmt::Display for UnitError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.message)?;
        if let Some(h) = &self.hint {
            write!(f, " ({h})")?;
        }
        Ok(())
    }
}

impl std::error::Error for UnitError {}

#[cold]
fn error(message: String, hint: Option<String>) -> UnitError {
    UnitError { message, hint }
}

/// One entry of the symbol table.
struct Symbol {
    /// As written in a worksheet.
    text: &'static str,
    /// As shown in canonical text (`ohm` → `Ω`, `degC` → `°C`).
    shown: &'static str,
    dim: Dim,
    /// SI value of one unit; for `°C`/`°F` also the size of one degree of difference.
    factor: f64,
    /// The SI prefixes the trade uses with this symbol.
    prefixes: &'static [char],
    temperature: Option<TempScale>,
}

/// SI prefixes (SI Brochure, 9th ed., Table 7; table number from memory); `c` is offered on
/// the metre only (cm²).
const PREFIXES: &[(char, i32)] = &[
    ('p', -12),
    ('n', -9),
    ('µ', -6),
    ('m', -3),
    ('c', -2),
    ('k', 3),
    ('M', 6),
    ('G', 9),
];

const fn sym(
    text: &'static str,
    shown: &'static str,
    dim: Dim,
    factor: f64,
    prefixes: &'static [char],
    temperature: Option<TempScale>,
) -> Symbol {
    Symbol {
        text,
        shown,
        dim,
        factor,
        prefixes,
        temperature,
    }
}

const VOLT_PREFIXES: &[char] = &['n', 'µ', 'm', 'k', 'M'];
const OHM_PREFIXES: &[char] = &['µ', 'm', 'k', 'M', 'G'];
const SMALL_PREFIXES: &[char] = &['p', 'n', 'µ', 'm'];

/// The symbol table (table and section numbers from memory). Factors: SI Brochure (9th ed.)
/// Table 8 for min, h; NIST SP 811 (2008)
/// Appendix B for mil (2.54e-5 m), W·h (3.6e3 J), A·h (3.6e3 C), °F interval (5/9 K).
const SYMBOLS: &[Symbol] = &[
    sym("V", "V", Dim::VOLTAGE, 1.0, VOLT_PREFIXES, None),
    sym(
        "A",
        "A",
        Dim::CURRENT,
        1.0,
        &['p', 'n', 'µ', 'm', 'k'],
        None,
    ),
    sym("W", "W", Dim::POWER, 1.0, VOLT_PREFIXES, None),
    sym("Ω", "Ω", Dim::RESISTANCE, 1.0, OHM_PREFIXES, None),
    sym("ohm", "Ω", Dim::RESISTANCE, 1.0, OHM_PREFIXES, None),
    sym("S", "S", Dim::CONDUCTANCE, 1.0, SMALL_PREFIXES, None),
    sym("F", "F", Dim::CAPACITANCE, 1.0, SMALL_PREFIXES, None),
    sym("H", "H", Dim::INDUCTANCE, 1.0, &['n', 'µ', 'm'], None),
    sym("Hz", "Hz", Dim::FREQUENCY, 1.0, &['m', 'k', 'M', 'G'], None),
    sym("s", "s", Dim::TIME, 1.0, SMALL_PREFIXES, None),
    sym("min", "min", Dim::TIME, 60.0, &[], None),
    sym("h", "h", Dim::TIME, 3600.0, &[], None),
    sym("J", "J", Dim::ENERGY, 1.0, VOLT_PREFIXES, None),
    sym(
        "Wh",
        "Wh",
        Dim::ENERGY,
        3600.0,
        &['µ', 'm', 'k', 'M', 'G'],
        None,
    ),
    sym("Ah", "Ah", Dim::CHARGE, 3600.0, &['µ', 'm', 'k'], None),
    sym("C", "C", Dim::CHARGE, 1.0, SMALL_PREFIXES, None),
    sym(
        "K",
        "K",
        Dim::TEMPERATURE,
        1.0,
        &[],
        Some(TempScale::Kelvin),
    ),
    sym(
        "°C",
        "°C",
        Dim::TEMPERATURE,
        1.0,
        &[],
        Some(TempScale::Celsius),
    ),
    sym(
        "degC",
        "°C",
        Dim::TEMPERATURE,
        1.0,
        &[],
        Some(TempScale::Celsius),
    ),
    sym(
        "°F",
        "°F",
        Dim::TEMPERATURE,
        5.0 / 9.0,
        &[],
        Some(TempScale::Fahrenheit),
    ),
    sym(
        "degF",
        "°F",
        Dim::TEMPERATURE,
        5.0 / 9.0,
        &[],
        Some(TempScale::Fahrenheit),
    ),
    sym("m", "m", Dim::LENGTH, 1.0, &['n', 'µ', 'm', 'c', 'k'], None),
    sym("mil", "mil", Dim::LENGTH, 2.54e-5, &[], None),
    sym("g", "g", Dim::MASS, 1e-3, &['µ', 'm', 'k'], None),
    sym("%", "%", Dim::NONE, 0.01, &[], None),
    sym("ppm", "ppm", Dim::NONE, 1e-6, &[], None),
];

/// Exact powers of ten for the prefix exponents (all exactly representable in f64).
fn pow10(e: i32) -> f64 {
    match e {
        2 => 1e2,
        3 => 1e3,
        6 => 1e6,
        9 => 1e9,
        12 => 1e12,
        _ => 1.0,
    }
}

/// `base` scaled by 10^e. Small prefixes divide by an exact power of ten so that e.g.
/// mAh = 3600/1000 is the double nearest to 3.6.
fn scaled(base: f64, e: i32) -> f64 {
    if e < 0 {
        base / pow10(-e)
    } else {
        base * pow10(e)
    }
}

fn prefix_exponent(c: char) -> Option<i32> {
    PREFIXES.iter().find(|(p, _)| *p == c).map(|(_, e)| *e)
}

/// A resolved single symbol (possibly prefixed).
struct Atom {
    text: String,
    dim: Dim,
    factor: f64,
    temperature: Option<TempScale>,
}

/// Every single-symbol form the table accepts, with `µ` for micro (not `u`).
fn forms() -> &'static [String] {
    static FORMS: OnceLock<Vec<String>> = OnceLock::new();
    FORMS.get_or_init(|| {
        let mut v = Vec::new();
        for s in SYMBOLS {
            v.push(s.text.to_string());
            for p in s.prefixes {
                v.push(format!("{p}{}", s.text));
            }
        }
        v
    })
}

/// The nearest known unit symbol to `text`: a case-insensitive match first, otherwise the
/// closest by edit distance (at most 2 edits, and fewer edits than the text has characters).
pub fn nearest_symbol(text: &str) -> Option<String> {
    if let Some(f) = same_but_case(text) {
        return Some(f);
    }
    let len = text.chars().count();
    let mut best: Option<(usize, &String)> = None;
    for f in forms() {
        let d = strsim::levenshtein(text, f);
        if d == 0 || d > 2 || d >= len {
            continue;
        }
        if best.is_none_or(|(bd, _)| d < bd) {
            best = Some((d, f));
        }
    }
    best.map(|(_, f)| f.clone())
}

/// A known form that differs from `text` only in letter case (or `u` for `µ`); of several,
/// the one with the most characters in the same case (`Ms` → `ms` before `mS`).
fn same_but_case(text: &str) -> Option<String> {
    let lower = text.replace('u', "µ").to_lowercase();
    let same = |f: &str| f.chars().zip(text.chars()).filter(|(a, b)| a == b).count();
    forms()
        .iter()
        .filter(|f| f.as_str() != text && f.to_lowercase() == lower)
        .max_by_key(|f| (same(f), std::cmp::Reverse(f.len())))
        .cloned()
}

fn resolve_atom(raw: &str) -> Result<Atom, UnitError> {
    // Tolerate look-alikes the fold table would have mapped, so a direct caller gets the
    // same answer as the lexer.
    let word: String = raw
        .chars()
        .map(|c| match c {
            '\u{03bc}' => 'µ',
            '\u{2126}' => 'Ω',
            '\u{212a}' => 'K',
            c => c,
        })
        .collect();
    if let Some(s) = SYMBOLS.iter().find(|s| s.text == word) {
        return Ok(Atom {
            text: s.shown.to_string(),
            dim: s.dim,
            factor: s.factor,
            temperature: s.temperature,
        });
    }
    let mut chars = word.chars();
    let first = chars.next();
    let rest = chars.as_str();
    let prefix = match first {
        Some('u') => Some('µ'),
        other => other,
    };
    if let (Some(p), Some(e)) = (prefix, prefix.and_then(prefix_exponent)) {
        if let Some(s) = SYMBOLS.iter().find(|s| s.text == rest) {
            if s.prefixes.contains(&p) {
                return Ok(Atom {
                    text: format!("{p}{}", s.shown),
                    dim: s.dim,
                    factor: scaled(s.factor, e),
                    temperature: None,
                });
            }
            let hint = match same_but_case(&word) {
                Some(n) => format!("did you mean `{n}`?"),
                None if s.prefixes.is_empty() => {
                    format!("`{}` is written without a prefix", s.shown)
                }
                None => {
                    let list: Vec<String> = s.prefixes.iter().map(|c| c.to_string()).collect();
                    format!("`{}` takes the prefixes {}", s.shown, list.join(" "))
                }
            };
            return Err(error(
                format!(
                    "the prefix `{first}` is not used with `{}`",
                    s.shown,
                    first = first.unwrap_or(p)
                ),
                Some(hint),
            ));
        }
    }
    let hint = if word == "°K" || word == "degK" {
        Some("kelvin is written `K`, without a degree sign".to_string())
    } else if word.starts_with('°') {
        Some("temperatures are written `°C`, `°F` or `K`".to_string())
    } else if word.chars().count() == 1 && prefix.and_then(prefix_exponent).is_some() {
        Some(format!(
            "a prefix needs a unit symbol after it, e.g. `{word}A`"
        ))
    } else {
        nearest_symbol(&word).map(|n| format!("did you mean `{n}`?"))
    };
    Err(error(format!("unknown unit `{raw}`"), hint))
}

/// A unit being built by the parser.
struct Part {
    text: String,
    dim: Dim,
    factor: f64,
    /// Set only while the part is a single temperature symbol without power or parentheses.
    temperature: Option<TempScale>,
}

impl Part {
    fn combine(self, o: Part, divide: bool, sep: &str) -> Result<Part, UnitError> {
        let dims = if divide {
            self.dim
                .0
                .iter()
                .zip(o.dim.0)
                .map(|(a, b)| a.checked_sub(b))
                .collect::<Vec<_>>()
        } else {
            self.dim
                .0
                .iter()
                .zip(o.dim.0)
                .map(|(a, b)| a.checked_add(b))
                .collect()
        };
        let mut d = [0i8; 7];
        for (slot, v) in d.iter_mut().zip(dims) {
            *slot = v.ok_or_else(too_large)?;
        }
        let factor = if divide {
            self.factor / o.factor
        } else {
            self.factor * o.factor
        };
        Ok(Part {
            text: format!("{}{sep}{}", self.text, o.text),
            dim: Dim(d),
            factor,
            temperature: None,
        })
    }
}

fn too_large() -> UnitError {
    error(
        "this unit's powers are too large".to_string(),
        Some("write a unit with small powers, such as `m²` or `s⁻¹`".to_string()),
    )
}

/// Deepest parenthesis nesting accepted; deeper input is an error, never a stack overflow.
const MAX_DEPTH: usize = 16;

struct Parser<'a> {
    src: &'a str,
    chars: Vec<char>,
    pos: usize,
    depth: usize,
}

fn is_unit_char(c: char) -> bool {
    c.is_alphabetic() || c == '°' || c == '%'
}

fn is_product(c: char) -> bool {
    matches!(c, '·' | '*' | '⋅')
}

fn superscript_digit(c: char) -> Option<u32> {
    match c {
        '⁰' => Some(0),
        '¹' => Some(1),
        '²' => Some(2),
        '³' => Some(3),
        '⁴' => Some(4),
        '⁵' => Some(5),
        '⁶' => Some(6),
        '⁷' => Some(7),
        '⁸' => Some(8),
        '⁹' => Some(9),
        _ => None,
    }
}

impl Parser<'_> {
    fn peek(&self) -> Option<char> {
        self.chars.get(self.pos).copied()
    }

    fn quotient(&mut self) -> Result<Part, UnitError> {
        let num = self.product()?;
        if self.peek() != Some('/') {
            return Ok(num);
        }
        self.pos += 1;
        if self.peek().is_none() {
            return Err(error(
                format!("the unit `{}` ends after `/`", self.src),
                Some(format!(
                    "write the unit below the line, e.g. `{}K`",
                    self.src
                )),
            ));
        }
        let den_start = self.pos;
        let den = self.factor()?;
        if let Some(c) = self.peek() {
            if c == '/' || is_product(c) {
                return Err(error(
                    format!("`{}` is ambiguous after `/`", self.src),
                    Some(format!(
                        "put the whole denominator in parentheses: `{}/({})`",
                        num.text,
                        self.rest_of_group(den_start)
                    )),
                ));
            }
        }
        num.combine(den, true, "/")
    }

    fn product(&mut self) -> Result<Part, UnitError> {
        let mut acc = self.factor()?;
        while let Some(c) = self.peek() {
            if !is_product(c) {
                break;
            }
            self.pos += 1;
            if self.peek().is_none() {
                return Err(error(
                    format!("the unit `{}` ends after `{c}`", self.src),
                    Some("write a unit after the product sign, e.g. `A·h`".to_string()),
                ));
            }
            let next = self.factor()?;
            acc = acc.combine(next, false, "·")?;
        }
        Ok(acc)
    }

    fn factor(&mut self) -> Result<Part, UnitError> {
        let base = match self.peek() {
            Some('(') => {
                if self.depth >= MAX_DEPTH {
                    return Err(error(
                        "the unit is nested too deeply".to_string(),
                        Some("write it with fewer parentheses".to_string()),
                    ));
                }
                self.pos += 1;
                if self.peek() == Some(')') {
                    return Err(error(
                        format!("empty parentheses in the unit `{}`", self.src),
                        Some("write a unit inside them, e.g. `W/(m·K)`".to_string()),
                    ));
                }
                self.depth += 1;
                let inner = self.quotient()?;
                self.depth -= 1;
                if self.peek() != Some(')') {
                    if self.peek().is_none() {
                        return Err(error(
                            format!("missing `)` in the unit `{}`", self.src),
                            Some(format!("close the parenthesis: `{})`", self.src)),
                        ));
                    }
                    return Err(self.unexpected());
                }
                self.pos += 1;
                Part {
                    text: format!("({})", inner.text),
                    dim: inner.dim,
                    factor: inner.factor,
                    temperature: None,
                }
            }
            Some('1')
                if self
                    .chars
                    .get(self.pos + 1)
                    .is_none_or(|&c| c == '/' || c == ')' || is_product(c)) =>
            {
                self.pos += 1;
                Part {
                    text: "1".to_string(),
                    dim: Dim::NONE,
                    factor: 1.0,
                    temperature: None,
                }
            }
            Some(c) if is_unit_char(c) => {
                let start = self.pos;
                while self.peek().is_some_and(is_unit_char) {
                    self.pos += 1;
                }
                let word: String = self.chars[start..self.pos].iter().collect();
                let atom = resolve_atom(&word)?;
                Part {
                    text: atom.text,
                    dim: atom.dim,
                    factor: atom.factor,
                    temperature: atom.temperature,
                }
            }
            Some('/') => {
                return Err(error(
                    format!("nothing before `/` in the unit `{}`", self.src),
                    Some(format!("write a unit before it, e.g. `1{}`", &self.src)),
                ))
            }
            Some(_) => return Err(self.unexpected()),
            None => {
                return Err(error(
                    format!("a unit is missing in `{}`", self.src),
                    Some("write a unit symbol such as `V`, `mA` or `K/W`".to_string()),
                ))
            }
        };
        match self.power()? {
            None => Ok(base),
            Some(n) => {
                let dim = base.dim.powi(n).ok_or_else(too_large)?;
                Ok(Part {
                    text: format!("{}{}", base.text, superscript(n)),
                    dim,
                    factor: base.factor.powi(n),
                    temperature: None,
                })
            }
        }
    }

    /// An exponent written `^2`, `^-1`, `²`, `⁻¹`; `None` when there is none.
    fn power(&mut self) -> Result<Option<i32>, UnitError> {
        let caret = self.peek() == Some('^');
        let mut negative = false;
        let mut value: Option<i32> = None;
        if caret {
            self.pos += 1;
            if matches!(self.peek(), Some('-' | '−')) {
                negative = true;
                self.pos += 1;
            } else if self.peek() == Some('+') {
                self.pos += 1;
            }
            while let Some(d) = self.peek().and_then(|c| c.to_digit(10)) {
                self.pos += 1;
                value = Some(
                    value
                        .unwrap_or(0)
                        .saturating_mul(10)
                        .saturating_add(d as i32),
                );
            }
            if value.is_none() {
                return Err(error(
                    format!(
                        "a whole-number power is missing after `^` in `{}`",
                        self.src
                    ),
                    Some("write it like `m^2` or `s^-1`".to_string()),
                ));
            }
        } else {
            if self.peek() == Some('⁻') {
                negative = true;
                self.pos += 1;
            }
            while let Some(d) = self.peek().and_then(superscript_digit) {
                self.pos += 1;
                value = Some(
                    value
                        .unwrap_or(0)
                        .saturating_mul(10)
                        .saturating_add(d as i32),
                );
            }
            if negative && value.is_none() {
                return Err(error(
                    format!("a power is missing after `⁻` in `{}`", self.src),
                    Some("write it like `s⁻¹`".to_string()),
                ));
            }
        }
        match value {
            None => Ok(None),
            Some(0) => Err(error(
                format!("a power of zero in the unit `{}`", self.src),
                Some("leave the factor out".to_string()),
            )),
            Some(v) if v > 9 => Err(too_large()),
            Some(v) => Ok(Some(if negative { -v } else { v })),
        }
    }

    /// The source text from `start` to the end of the enclosing parenthesis group, with a
    /// further `/` at that level read as a product (`V/s/s` means V/(s·s)).
    fn rest_of_group(&self, start: usize) -> String {
        let mut depth = 0usize;
        let mut out = String::new();
        for &c in self.chars.get(start..).unwrap_or_default() {
            match c {
                '(' => depth += 1,
                ')' if depth == 0 => break,
                ')' => depth -= 1,
                _ => {}
            }
            out.push(if c == '/' && depth == 0 { '·' } else { c });
        }
        out
    }

    fn unexpected(&self) -> UnitError {
        let c = self.peek().unwrap_or(' ');
        if c.is_whitespace() {
            let joined: String = self.src.split_whitespace().collect();
            return error(
                format!("a space inside the unit `{}`", self.src),
                Some(format!(
                    "write a compound unit without spaces (`{joined}`); \
                     with spaces it is arithmetic"
                )),
            );
        }
        if c.is_ascii_digit() {
            let before: String = self.chars[..self.pos].iter().collect();
            let hint = if before.ends_with(|b: char| is_unit_char(b) || b == ')') {
                format!("write a power as `{before}^{c}`")
            } else {
                "a unit is made of symbols such as `V`, `mA` or `K/W`; the number goes before it"
                    .to_string()
            };
            return error(
                format!("unexpected `{c}` in the unit `{}`", self.src),
                Some(hint),
            );
        }
        if c == ')' {
            return error(
                format!("unmatched `)` in the unit `{}`", self.src),
                Some("remove it or add the opening `(`".to_string()),
            );
        }
        error(
            format!("unexpected `{c}` in the unit `{}`", self.src),
            Some("a unit is made of symbols joined by `·`, `*` or `/`, e.g. `W/(m·K)`".to_string()),
        )
    }
}

/// Units parsed once per text, within one source or one evaluation: a worksheet writes the same
/// few units again and again, so a short list beats hashing.
#[derive(Debug, Default, Clone)]
pub struct UnitCache(Vec<(String, Result<Unit, UnitError>)>);

impl UnitCache {
    /// `parse_unit(text)`, parsed the first time only.
    pub fn get(&mut self, text: &str) -> Result<&Unit, UnitError> {
        let i = match self.0.iter().position(|(t, _)| t == text) {
            Some(i) => i,
            None => {
                self.0.push((text.to_string(), parse_unit(text)));
                self.0.len() - 1
            }
        };
        self.0[i].1.as_ref().map_err(Clone::clone)
    }
}

/// The display units the library's records name (`efficiency` and `error` in %).
const LIBRARY_UNITS: &[&str] = &["%"];

/// A unit the library names (a record field's display unit), parsed once: every evaluation
/// shows them. A text not in the table is parsed on the spot.
pub fn library_unit(text: &str) -> Result<Unit, UnitError> {
    static PARSED: std::sync::LazyLock<Vec<(&str, Result<Unit, UnitError>)>> =
        std::sync::LazyLock::new(|| LIBRARY_UNITS.iter().map(|t| (*t, parse_unit(t))).collect());
    match PARSED.iter().find(|(t, _)| *t == text) {
        Some((_, unit)) => unit.clone(),
        None => parse_unit(text),
    }
}

/// Parses a unit as written without spaces: `V`, `mA`, `K/W`, `W/(m·K)`, `A·h`, `m^2`, `mm²`.
///
/// Products use `·` or `*` (shown as `·`), quotients `/` (once, with a single factor or a
/// parenthesised group after it), powers `^n`, `^-n` or superscripts (shown as superscripts).
/// Inside a compound unit `°C` and `°F` are temperature differences. The canonical text
/// shows `ohm` as `Ω`, `degC`/`degF` as `°C`/`°F`, and the `u` prefix as `µ`.
pub fn parse_unit(text: &str) -> Result<Unit, UnitError> {
    if text.is_empty() {
        return Err(error(
            "an empty unit".to_string(),
            Some("write a unit symbol such as `V`, `mA` or `K/W`".to_string()),
        ));
    }
    let mut p = Parser {
        src: text,
        chars: {
            let mut chars = Vec::with_capacity(text.len());
            chars.extend(text.chars());
            chars
        },
        pos: 0,
        depth: 0,
    };
    let part = p.quotient()?;
    if p.pos < p.chars.len() {
        return Err(p.unexpected());
    }
    if !part.factor.is_finite() || part.factor <= 0.0 {
        return Err(too_large());
    }
    Ok(Unit {
        text: part.text,
        dim: part.dim,
        factor: part.factor,
        temperature: part.temperature,
    })
}

/// `x` rounded to `sig` significant digits: sign, the digits, and the decimal exponent of
/// the first digit. Rounding is done by the standard library's exact decimal formatting, so
/// a value that rounds up to the next power of ten gets the larger exponent (999.7 → 100, 3).
fn round_sig(x: f64, sig: usize) -> (bool, Digits, i32) {
    let sig = sig.clamp(1, 17);
    if let Some((digits, exp)) = round_scaled(x.abs(), sig).or_else(|| round_shortest(x.abs(), sig))
    {
        return (x < 0.0, digits, exp);
    }
    round_exact(x, sig)
}

/// The powers of ten a double holds exactly (10^0 to 10^22).
const EXACT_POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// `round_sig` by scaling `x` to `sig` digits before the point and rounding to an integer,
/// where that provably gives the correctly rounded result; None where it may not (then the
/// slower conversions decide).
///
/// Why it holds: with 10^k exact (|k| ≤ 22), `x·10^k` (or `x / 10^-k`) is one correctly
/// rounded operation, so the computed `s` is within a relative 2⁻⁵³ of the exact product
/// `t`. Rounding to the nearest integer changes only across a half-integer; when `s` lies
/// further than 2⁻⁵⁰·s from one, `t` lies on the same side, and both round alike. A value
/// next to a power of ten rounds to that power whichever exponent is assumed, so the
/// exponent estimated from the binary exponent only needs to bring `s` into range. Up to 15
/// digits the integer is exact in a double. The property tests below check it against the
/// exact conversion.
fn round_scaled(x: f64, sig: usize) -> Option<(Digits, i32)> {
    if sig > 15 || !x.is_normal() || x <= 0.0 {
        return None;
    }
    let (lo, hi) = (EXACT_POW10[sig - 1], EXACT_POW10[sig]);
    let scaled = |e: i32| -> Option<f64> {
        let k = sig as i32 - 1 - e;
        let p = *EXACT_POW10.get(k.unsigned_abs() as usize)?;
        Some(if k >= 0 { x * p } else { x / p })
    };
    // The power of ten of the leading digit, estimated from the binary exponent
    // (⌊e₂·log₁₀2⌋ with log₁₀2 ≈ 78913/2¹⁸, the approximation of U. Adams, "Ryū: fast
    // float-to-string conversion", PLDI 2018, from memory) and settled by comparing the
    // scaled value with its range: at most a step or two, no logarithm.
    let e2 = ((x.to_bits() >> 52) & 0x7ff) as i32 - 1023;
    let mut e = (e2 * 78913) >> 18;
    let mut s = scaled(e)?;
    for _ in 0..3 {
        if s < lo {
            e -= 1;
        } else if s >= hi {
            e += 1;
        } else {
            break;
        }
        s = scaled(e)?;
    }
    if !(lo..hi).contains(&s) {
        return None;
    }
    // `s` is below 10¹⁵, so its integer part is exact in a u64 and its fraction is exact.
    let whole = s as u64;
    let frac = s - whole as f64;
    let mut r = if (frac - 0.5).abs() > s * 4.0 * f64::EPSILON {
        whole + u64::from(frac > 0.5)
    } else if frac == 0.5 && scaled_exactly(x, s, sig as i32 - 1 - e) {
        // An exact tie (370.5 to three digits, common for a tolerance applied to a
        // preferred value): halves go to the even neighbour, as in the exact conversion.
        whole + (whole % 2)
    } else {
        return None;
    };
    if r as f64 >= hi {
        // 999.7 → 1000: one digit more, so the next power of ten.
        r = lo as u64;
        e += 1;
    }
    let mut text = itoa::Buffer::new();
    Digits::from(text.format(r)).ok().map(|d| (d, e))
}

/// Whether `s`, the rounded `x·10^k` (`x / 10^-k` for negative `k`), is that value exactly:
/// the residual of one fused multiply-add is exact, so it is zero only then. (The error of a
/// rounded product is itself a double and an FMA yields it exactly: J.-M. Muller et al.,
/// "Handbook of Floating-Point Arithmetic", 2nd ed., Birkhäuser 2018, on the FMA and
/// error-free transformations, from memory. The property tests below check the result.)
fn scaled_exactly(x: f64, s: f64, k: i32) -> bool {
    let Some(&p) = EXACT_POW10.get(k.unsigned_abs() as usize) else {
        return false;
    };
    if k >= 0 {
        x.mul_add(p, -s) == 0.0
    } else {
        s.mul_add(p, -x) == 0.0
    }
}

/// `round_sig` from the shortest decimal that reads back as `x` (a fast conversion), where
/// that is provably the correctly rounded result; None where it may not be (then the exact
/// conversion decides).
///
/// Why it holds: the shortest representation `s` lies in `x`'s rounding interval, and no
/// rounding boundary of `sig` digits (a tie point `d₁…d_sig5`) can lie strictly between `x`
/// and `s`: it would lie in the interval too and be a decimal at most as long as `s` and
/// nearer to `x`, which the shortest-and-nearest rule would have printed instead. So
/// rounding `s` rounds `x` the same way, except when `s` is itself a tie point (handed to the
/// exact conversion). When `s` has no more than `sig` digits it is the answer padded with
/// zeros, provided half a unit in the last of `sig` places exceeds half an ulp of `x`
/// (relative 5·10⁻¹⁶ against 1.1·10⁻¹⁶): true up to 15 digits, for normal numbers.
/// (Shortest round-trip output as specified for Schubfach, from memory: R. Giulietti, "The
/// Schubfach way to render doubles", 2020. The property tests below check the claim against
/// the exact conversion.)
fn round_shortest(x: f64, sig: usize) -> Option<(Digits, i32)> {
    // Subnormal numbers have wide ulps (5e-324 reads back from "5e-324" but is 4.94e-324).
    if sig > 15 || !x.is_normal() || x <= 0.0 {
        return None;
    }
    let mut buffer = zmij::Buffer::new();
    let text = buffer.format_finite(x);
    // "1.234", "0.00012", "1.5e20", "1e-7": significant digits and the power of ten of the
    // first one.
    let (mantissa, e) = match text.split_once(['e', 'E']) {
        Some((m, e)) => (m, e.trim_start_matches('+').parse::<i32>().ok()?),
        None => (text, 0),
    };
    let mut all = [0u8; 40];
    let mut n = 0usize;
    let mut point = None;
    for b in mantissa.bytes() {
        match b {
            b'0'..=b'9' => {
                *all.get_mut(n)? = b;
                n += 1;
            }
            b'.' => point = Some(n),
            _ => return None,
        }
    }
    let int_len = point.unwrap_or(n) as i32;
    let lead = all[..n].iter().take_while(|&&b| b == b'0').count();
    let digits = &all[lead..n];
    let digits = &digits[..digits.iter().rposition(|&b| b != b'0')? + 1];
    let mut exp = e + int_len - 1 - lead as i32;
    let mut kept = [b'0'; 17];
    if digits.len() <= sig {
        kept[..digits.len()].copy_from_slice(digits);
    } else {
        let dropped = &digits[sig..];
        if dropped == b"5" {
            return None;
        }
        kept[..sig].copy_from_slice(&digits[..sig]);
        if dropped[0] >= b'5' {
            // Round up, carrying; 9.99 → 10.0 moves the exponent.
            let mut i = sig;
            loop {
                if i == 0 {
                    kept[0] = b'1';
                    kept[1..sig].fill(b'0');
                    exp += 1;
                    break;
                }
                i -= 1;
                if kept[i] == b'9' {
                    kept[i] = b'0';
                } else {
                    kept[i] += 1;
                    break;
                }
            }
        }
    }
    let out = Digits::from(std::str::from_utf8(&kept[..sig]).ok()?).ok()?;
    Some((out, exp))
}

/// `round_sig` by the standard library's exact conversion.
fn round_exact(x: f64, sig: usize) -> (bool, Digits, i32) {
    use std::fmt::Write;
    // "1.23e4" (at most 17 digits, a point and a four-character exponent) written on the
    // stack: this runs for every number shown.
    let mut text = Digits::new();
    let _ = write!(text, "{:.*e}", sig - 1, x.abs());
    let s = text.as_str();
    let at = s.find('e').unwrap_or(s.len());
    let exp = s[at..].get(1..).and_then(|e| e.parse().ok()).unwrap_or(0);
    // The digits are the mantissa without its point.
    let mut digits = Digits::new();
    for c in s[..at].chars().filter(char::is_ascii_digit) {
        let _ = digits.try_push(c);
    }
    (x < 0.0, digits, exp)
}

/// The digits of a rounded number, on the stack (at most 17 digits; the exact conversion's
/// text before they are picked out is at most 24 characters).
type Digits = arrayvec::ArrayString<32>;

/// Decimal text of the digits `d₁d₂…` with `d₁` at 10^exp. Plain decimals for
/// 10⁻³ ≤ |x| < 10⁶, otherwise `1.23e-9` (a form the worksheet language reads back).
fn render(negative: bool, digits: &str, exp: i32) -> String {
    let mut out = String::with_capacity(digits.len() + 12);
    if negative {
        out.push('-');
    }
    if !(-3..6).contains(&exp) {
        let (first, rest) = digits.split_at(1.min(digits.len()));
        out.push_str(first);
        if !rest.is_empty() {
            out.push('.');
            out.push_str(rest);
        }
        out.push('e');
        out.push_str(&exp.to_string());
        return out;
    }
    let n = digits.len() as i32;
    if exp < 0 {
        out.push_str("0.");
        out.extend(std::iter::repeat_n('0', (-exp - 1) as usize));
        out.push_str(digits);
    } else if exp + 1 >= n {
        out.push_str(digits);
        out.extend(std::iter::repeat_n('0', (exp + 1 - n) as usize));
    } else {
        let (int, frac) = digits.split_at((exp + 1) as usize);
        out.push_str(int);
        out.push('.');
        out.push_str(frac);
    }
    out
}

/// A plain number to `sig` significant digits, trailing zeros kept: 0.18 → "0.180",
/// 4700 → "4700", 1.2e-9 → "1.20e-9". Zero is "0"; non-finite values print as Rust does.
pub fn format_number(x: f64, sig: usize) -> String {
    if !x.is_finite() {
        return x.to_string();
    }
    if x == 0.0 {
        return "0".to_string();
    }
    let (neg, digits, exp) = round_sig(x, sig);
    render(neg, &digits, exp)
}

fn with_unit(mut number: String, unit: &str) -> String {
    if !(unit.is_empty() || unit == "1") {
        number.reserve(unit.len() + 1);
        number.push(' ');
        number.push_str(unit);
    }
    number
}

fn prefix_symbol(e: i32) -> &'static str {
    match e {
        -12 => "p",
        -9 => "n",
        -6 => "µ",
        -3 => "m",
        3 => "k",
        6 => "M",
        9 => "G",
        _ => "",
    }
}

/// `value` (in `unit`) with the largest allowed engineering prefix not above its rounded
/// magnitude, so the mantissa stays under 1000 whenever a prefix allows it.
fn format_prefixed(value: f64, unit: &str, prefixes: &[i32], sig: usize) -> String {
    if !value.is_finite() {
        return with_unit(value.to_string(), unit);
    }
    if value == 0.0 {
        return with_unit("0".to_string(), unit);
    }
    let (neg, digits, exp) = round_sig(value, sig);
    let chosen = prefixes
        .iter()
        .copied()
        .filter(|&p| p <= exp)
        .max()
        .or_else(|| prefixes.iter().copied().min())
        .unwrap_or(0);
    let mut number = render(neg, &digits, exp - chosen);
    // As `with_unit`, with the prefix before the unit.
    if !(unit.is_empty() || unit == "1") {
        number.push(' ');
        number.push_str(prefix_symbol(chosen));
        number.push_str(unit);
    }
    number
}

/// Seconds below one second take prefixes (ms, µs, ns, ps); 1 s up to an hour stays in
/// seconds ("1500 s"); from one hour on, hours ("20.0 h"), decided on the rounded value.
fn format_time(si: f64, sig: usize) -> String {
    if si.is_finite() && si != 0.0 {
        let (_, digits, exp) = round_sig(si, sig);
        let rounded: f64 = format!("{}e{}", &*digits, exp - digits.len() as i32 + 1)
            .parse()
            .unwrap_or(si.abs());
        if rounded >= 3600.0 {
            return format_prefixed(si / 3600.0, "h", NO_PREFIX, sig);
        }
    }
    format_prefixed(si, "s", &[-12, -9, -6, -3, 0], sig)
}

/// Formats an SI value in the unit the trade uses for its dimension, with an engineering
/// prefix keeping 1 ≤ mantissa < 1000, to `sig` significant digits: "79.4 °C", "4.70 kΩ".
///
/// Absolute temperatures (kelvin in `si`) are shown in °C; temperature differences in K;
/// K, K/W, °C and dimensionless numbers never take a prefix; capacitance uses pF, nF, µF
/// (no mF); mass is shown in g with prefixes; temperature coefficients in ppm/K; times as
/// described at [`format_time`]; dimensions without a name in SI base units.
pub fn format_si(si: f64, dim: Dim, absolute: bool, sig: usize) -> String {
    if absolute && dim == Dim::TEMPERATURE {
        return with_unit(format_number(si - 273.15, sig), "°C");
    }
    if dim == Dim::TIME {
        return format_time(si, sig);
    }
    match named(dim) {
        Some(n) => format_prefixed(si / n.scale, n.shown, n.prefixes, sig),
        None => format_prefixed(si, &base_text(dim), NO_PREFIX, sig),
    }
}

/// The unit text `format_si` uses for a dimension, without a prefix: "V", "°C" for an
/// absolute temperature, "K/W", "" for dimensionless (e.g. for axis labels).
pub fn display_unit(dim: Dim, absolute: bool) -> String {
    if absolute && dim == Dim::TEMPERATURE {
        return "°C".to_string();
    }
    match named(dim) {
        Some(n) => n.shown.to_string(),
        None => base_text(dim),
    }
}

/// Formats an SI value in the given unit (declared or `as`), to `sig` significant digits.
/// An absolute temperature in `K` shows its thermodynamic value; in `°C`/`°F` its reading.
pub fn format_in(si: f64, absolute: bool, unit: &Unit, sig: usize) -> String {
    with_unit(format_number(unit.from_si(si, absolute), sig), &unit.text)
}

/// A signed difference (a check's margin) in the unit of its dimension: "+34.0 K",
/// "-2.10 V"; temperature differences in K. Exactly zero shows without a sign ("0 K").
pub fn format_difference(si: f64, dim: Dim, sig: usize) -> String {
    let mut body = format_si(si.abs(), dim, false, sig);
    if si > 0.0 {
        body.insert(0, '+');
    } else if si < 0.0 {
        body.insert(0, '-');
    }
    body
}

/// Unit symbols offered by completion after a number: every symbol of the table with each
/// prefix it takes (micro as `µ`), then common compound units.
pub fn symbols() -> Vec<&'static str> {
    const COMPOUND: &[&str] = &[
        "K/W", "°C/W", "W/K", "mV/K", "µV/K", "V/s", "V/µs", "A/s", "A/µs", "ppm/K", "%/K", "mm²",
        "cm²", "W/(m·K)", "A·h",
    ];
    forms()
        .iter()
        .map(String::as_str)
        .chain(COMPOUND.iter().copied())
        .collect()
}

/// True when `text` is a single unit symbol, possibly prefixed (`mA`, `uF`, `°C`, `ohm`).
pub fn is_unit_symbol(text: &str) -> bool {
    text.chars().all(is_unit_char) && resolve_atom(text).is_ok()
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn both(x: f64, sig: usize) -> ((bool, String, i32), (bool, String, i32)) {
        let (n, d, e) = round_sig(x, sig);
        let (m, f, g) = round_exact(x, sig);
        ((n, d.to_string(), e), (m, f.to_string(), g))
    }

    /// A declared unit that does not fit is answered with the unit the formula gives
    /// (`display_unit`): every named kind of quantity, and the products and quotients of
    /// two of them, must be writable that way.
    #[test]
    fn display_units_read_back_as_their_dimension() {
        let mut dims: Vec<Dim> = NAMED.iter().map(|n| n.dim).collect();
        for a in NAMED {
            for b in NAMED {
                dims.push(a.dim * b.dim);
                dims.push(a.dim / b.dim);
            }
        }
        for dim in dims.into_iter().filter(|d| !d.is_none()) {
            let text = display_unit(dim, false);
            let unit = parse_unit(&text).unwrap_or_else(|e| panic!("`{text}`: {}", e.message));
            assert_eq!(unit.dim, dim, "`{text}`");
        }
        assert_eq!(
            parse_unit(&display_unit(Dim::TEMPERATURE, true)).map(|u| u.dim),
            Ok(Dim::TEMPERATURE)
        );
    }

    #[test]
    fn ties_and_carries_round_as_the_exact_conversion() {
        // Exact binary ties (0.125, 2.5, 0.375; 370.5 and 409.5, a 390 Ω part ± 5 %) go to
        // the even neighbour; 0.15 and 9.995 are not ties in binary; 9.96 and 999.5 carry
        // into the next power of ten.
        for (x, sig) in [
            (370.5, 3),
            (409.5, 3),
            (3_705_000.0, 3),
            (0.0625, 2),
            (0.125, 2),
            (2.5, 1),
            (0.375, 2),
            (0.15, 1),
            (9.995, 3),
            (9.96, 2),
            (999.5, 3),
            (-4.7e3, 3),
            (1e-300, 3),
            (1.7976931348623157e308, 3),
            (5e-324, 3),
            (0.1, 15),
            (0.1, 17),
        ] {
            let (fast, exact) = both(x, sig);
            assert_eq!(fast, exact, "{x} to {sig} digits");
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(20_000))]

        #[test]
        fn any_double_rounds_as_the_exact_conversion(
            bits in prop_oneof![any::<u64>(), 1u64..(1u64 << 53)],
            sig in 1usize..=17,
        ) {
            // Any bit pattern, and the subnormal range.
            let x = f64::from_bits(bits);
            prop_assume!(x.is_finite() && x != 0.0);
            let (fast, exact) = both(x, sig);
            prop_assert_eq!(fast, exact);
        }

        #[test]
        fn engineering_magnitudes_round_as_the_exact_conversion(
            mantissa in 1.0f64..10.0, k in -22i32..=22, sig in 1usize..=17,
        ) {
            // Where rounding by scaling applies: values from 10⁻²² to 10²³, every digit count.
            let x = mantissa * 10f64.powi(k);
            let (fast, exact) = both(x, sig);
            prop_assert_eq!(fast, exact);
        }

        #[test]
        fn binary_fractions_round_as_the_exact_conversion(
            n in 1u64..4_000_000, j in 0i32..16, k in -8i32..8, sig in 1usize..=8,
        ) {
            // Odd multiples of powers of two, scaled by powers of ten: exact ties at many
            // digit counts, reached by multiplying and by dividing.
            let x = (n as f64 / 2f64.powi(j)) * 10f64.powi(k);
            let (fast, exact) = both(x, sig);
            prop_assert_eq!(fast, exact);
        }

        #[test]
        fn short_decimals_round_as_the_exact_conversion(
            n in 1u64..2_000_000, k in -30i32..30, sig in 1usize..=8,
        ) {
            // Values written with few digits, as worksheets hold them: ties are common here.
            let x: f64 = format!("{n}e{k}").parse().unwrap();
            let (fast, exact) = both(x, sig);
            prop_assert_eq!(fast, exact);
        }
    }
}
