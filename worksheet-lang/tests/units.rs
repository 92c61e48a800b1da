//! Units: symbol table factors against the `uom` crate and NIST SP 811, compound parsing,
//! error messages, dimension words and engineering display.

use proptest::prelude::*;
use worksheet_lang::units::{
    describe_quantity, display_unit, format_difference, format_in, format_number, format_si,
    is_unit_symbol, nearest_symbol, parse_unit, symbols, Dim, TempScale, Unit,
};

fn unit(text: &str) -> Unit {
    match parse_unit(text) {
        Ok(u) => u,
        Err(e) => panic!("`{text}` should parse: {e}"),
    }
}

fn factor(text: &str) -> f64 {
    unit(text).factor
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-12 * a.abs().max(b.abs())
}

macro_rules! assert_close {
    ($a:expr, $b:expr) => {{
        let (a, b): (f64, f64) = ($a, $b);
        assert!(close(a, b), "{a} != {b}");
    }};
}

// ---- conversion factors against the uom crate ------------------------------------------

#[test]
fn factors_match_uom_crate() {
    use uom::si::f64 as q;
    use uom::si::{
        capacitance, electric_charge, electric_current, electric_potential, electrical_resistance,
        energy, frequency, inductance, length, ratio, temperature_interval, thermal_conductivity,
        thermal_resistance, time,
    };
    // Source: uom crate 0.37, unit definitions in src/si/*.rs.
    let cases: Vec<(&str, f64)> = vec![
        ("Wh", q::Energy::new::<energy::watt_hour>(1.0).value),
        ("kWh", q::Energy::new::<energy::kilowatt_hour>(1.0).value),
        ("mWh", q::Energy::new::<energy::milliwatt_hour>(1.0).value),
        (
            "Ah",
            q::ElectricCharge::new::<electric_charge::ampere_hour>(1.0).value,
        ),
        (
            "mAh",
            q::ElectricCharge::new::<electric_charge::milliampere_hour>(1.0).value,
        ),
        (
            "µAh",
            q::ElectricCharge::new::<electric_charge::microampere_hour>(1.0).value,
        ),
        (
            "A·h",
            q::ElectricCharge::new::<electric_charge::ampere_hour>(1.0).value,
        ),
        ("mil", q::Length::new::<length::mil>(1.0).value),
        ("mm", q::Length::new::<length::millimeter>(1.0).value),
        ("min", q::Time::new::<time::minute>(1.0).value),
        ("h", q::Time::new::<time::hour>(1.0).value),
        ("µs", q::Time::new::<time::microsecond>(1.0).value),
        ("us", q::Time::new::<time::microsecond>(1.0).value),
        (
            "µF",
            q::Capacitance::new::<capacitance::microfarad>(1.0).value,
        ),
        (
            "nF",
            q::Capacitance::new::<capacitance::nanofarad>(1.0).value,
        ),
        (
            "pF",
            q::Capacitance::new::<capacitance::picofarad>(1.0).value,
        ),
        (
            "µH",
            q::Inductance::new::<inductance::microhenry>(1.0).value,
        ),
        (
            "kΩ",
            q::ElectricalResistance::new::<electrical_resistance::kiloohm>(1.0).value,
        ),
        (
            "MΩ",
            q::ElectricalResistance::new::<electrical_resistance::megaohm>(1.0).value,
        ),
        (
            "mΩ",
            q::ElectricalResistance::new::<electrical_resistance::milliohm>(1.0).value,
        ),
        (
            "kohm",
            q::ElectricalResistance::new::<electrical_resistance::kiloohm>(1.0).value,
        ),
        (
            "mA",
            q::ElectricCurrent::new::<electric_current::milliampere>(1.0).value,
        ),
        (
            "µA",
            q::ElectricCurrent::new::<electric_current::microampere>(1.0).value,
        ),
        (
            "mV",
            q::ElectricPotential::new::<electric_potential::millivolt>(1.0).value,
        ),
        (
            "kV",
            q::ElectricPotential::new::<electric_potential::kilovolt>(1.0).value,
        ),
        ("kHz", q::Frequency::new::<frequency::kilohertz>(1.0).value),
        ("MHz", q::Frequency::new::<frequency::megahertz>(1.0).value),
        ("%", q::Ratio::new::<ratio::percent>(1.0).value),
        ("ppm", q::Ratio::new::<ratio::part_per_million>(1.0).value),
        (
            "°F/W",
            q::ThermalResistance::new::<thermal_resistance::kelvin_per_watt>(1.0).value * 5.0 / 9.0,
        ),
        (
            "W/(m·K)",
            q::ThermalConductivity::new::<thermal_conductivity::watt_per_meter_kelvin>(1.0).value,
        ),
    ];
    for (text, expected) in cases {
        let got = factor(text);
        assert!(close(got, expected), "{text}: {got} != uom {expected}");
    }
    // A difference of one degree Fahrenheit (uom temperature_interval::degree_fahrenheit).
    let df = q::TemperatureInterval::new::<temperature_interval::degree_fahrenheit>(1.0).value;
    assert_close!(factor("°F/W") * factor("W"), df);
    assert_close!(unit("°F").factor, df);
    assert_close!(unit("degF").factor, df);
}

#[test]
fn absolute_temperatures_match_uom_crate() {
    use uom::si::f64::ThermodynamicTemperature as T;
    use uom::si::thermodynamic_temperature::{degree_celsius, degree_fahrenheit};
    // Source: uom crate 0.37, thermodynamic_temperature.rs (offsets 273.15 and 459.67).
    let f = unit("°F");
    assert_close!(f.to_si(77.0, true), T::new::<degree_fahrenheit>(77.0).value);
    let c = unit("°C");
    assert_close!(c.to_si(-40.0, true), T::new::<degree_celsius>(-40.0).value);
}

// ---- conversion factors against NIST SP 811 (2008) ----------------------------------------
// Values as printed in SP 811; the section numbers are cited from memory.

#[test]
fn factors_match_nist_sp811() {
    // NIST SP 811 (2008), Appendix B.8 (factors in alphabetical order).
    assert_close!(factor("mil"), 2.54e-5); // mil (0.001 in) = 2.54 E-05 m
    assert_close!(factor("Wh"), 3.6e3); // watt hour = 3.6 E+03 J
    assert_close!(factor("kWh"), 3.6e6); // kilowatt hour = 3.6 E+06 J
    assert_close!(factor("Ah"), 3.6e3); // ampere hour = 3.6 E+03 C
    assert_close!(factor("min"), 60.0); // minute = 6.0 E+01 s
    assert_close!(factor("h"), 3.6e3); // hour = 3.6 E+03 s

    // NIST SP 811 (2008), B.8: degree Fahrenheit (interval) = 5.555556 E-01 K (exactly 5/9).
    assert!((factor("°F/W") - 0.5555556).abs() < 1e-7);
    assert!((factor("degF") - 0.5555556).abs() < 1e-7);
    // Inside a compound unit a degree Celsius is a difference, equal to one kelvin
    // (NIST SP 811 (2008) §4.2.1.1).
    assert_eq!(factor("°C/W"), 1.0);
    assert_eq!(unit("°C/W").dim, Dim::THERMAL_RESISTANCE);
}

#[test]
fn absolute_temperatures_match_nist_sp811() {
    // NIST SP 811 (2008) §4.2.1.1: t/°C = T/K − 273.15;
    // Appendix B.9: T/K = (t/°F + 459.67)/1.8, t/°C = (t/°F − 32)/1.8.
    let c = unit("°C");
    assert_eq!(c.temperature, Some(TempScale::Celsius));
    assert!(c.is_absolute_temperature());
    assert_close!(c.to_si(25.0, true), 298.15);
    assert_close!(c.from_si(352.58, true), 79.43);
    let f = unit("°F");
    assert!((f.to_si(77.0, true) - 298.15).abs() < 1e-9); // 77 °F = 25 °C
    assert!((f.from_si(273.15, true) - 32.0).abs() < 1e-9); // ice point
    assert!((f.from_si(233.15, true) + 40.0).abs() < 1e-9); // −40 °F = −40 °C
    let k = unit("K");
    assert_eq!(k.temperature, Some(TempScale::Kelvin));
    assert!(!k.is_absolute_temperature());
    assert_eq!(k.to_si(300.0, true), 300.0);
}

// ---- parsing -------------------------------------------------------------------------------

#[test]
fn prefixed_symbols() {
    // SI prefixes: SI Brochure (9th ed.) Table 7.
    assert_eq!(factor("mV"), 1e-3);
    assert_eq!(factor("GΩ"), 1e9);
    assert_eq!(factor("nA"), 1e-9);
    assert_eq!(factor("ns"), 1e-9);
    assert_eq!(factor("ms"), 1e-3);
    assert_eq!(factor("kg"), 1.0);
    assert_eq!(unit("kg").dim, Dim::MASS);
    assert_eq!(factor("g"), 1e-3);
    let uf = unit("uF");
    assert_eq!(uf.text, "µF");
    assert_eq!(uf.dim, Dim::CAPACITANCE);
    assert_eq!(unit("ohm").text, "Ω");
    assert_eq!(unit("Mohm").text, "MΩ");
    assert_eq!(unit("degC").text, "°C");
    assert_eq!(unit("degC").temperature, Some(TempScale::Celsius));
    // "mm" is the millimetre, "mil" a thousandth of an inch, "min" a minute: not prefixes.
    assert_eq!(factor("mm"), 1e-3);
    assert_eq!(unit("mil").dim, Dim::LENGTH);
    assert_eq!(unit("min").dim, Dim::TIME);
    assert_eq!(unit("Hz").dim, Dim::FREQUENCY);
    assert_eq!(unit("H").dim, Dim::INDUCTANCE);
    assert_eq!(unit("h").dim, Dim::TIME);
    assert_eq!(unit("S").dim, Dim::CONDUCTANCE);
    assert_eq!(unit("s").dim, Dim::TIME);
    assert_eq!(unit("C").dim, Dim::CHARGE);
    assert_eq!(unit("J").dim, Dim::ENERGY);
    assert_eq!(unit("mWh").dim, Dim::ENERGY);
    assert!(unit("%").dim.is_none());
    assert_eq!(unit("V").temperature, None);
}

#[test]
fn compound_units() {
    let r = unit("K/W");
    assert_eq!(
        (r.dim, r.factor, r.temperature),
        (Dim::THERMAL_RESISTANCE, 1.0, None)
    );
    let tc = unit("mV/K");
    assert_eq!(tc.factor, 1e-3);
    assert_eq!(tc.dim, Dim::VOLTAGE.div(Dim::TEMPERATURE));
    let k = unit("W/(m*K)");
    assert_eq!(k.text, "W/(m·K)");
    assert_eq!(k.dim, Dim([1, 1, -3, 0, -1, 0, 0])); // W·m⁻¹·K⁻¹ = m·kg·s⁻³·K⁻¹
    let ah = unit("A*h");
    assert_eq!(
        (ah.text.as_str(), ah.dim, ah.factor),
        ("A·h", Dim::CHARGE, 3600.0)
    );
    let area = unit("mm²");
    assert_eq!(area.dim, Dim::AREA);
    assert!(close(area.factor, 1e-6));
    assert_eq!(unit("mm^2").text, "mm²");
    assert_eq!(unit("m³").dim, Dim::VOLUME);
    assert_eq!(unit("s^-1").dim, Dim::FREQUENCY);
    assert_eq!(unit("s⁻¹").text, "s⁻¹");
    assert_eq!(unit("1/s").dim, Dim::FREQUENCY);
    assert_eq!(unit("V/s").dim, Dim([2, 1, -4, -1, 0, 0, 0]));
    // Ω·F is a time constant; W·h an energy.
    assert_eq!(unit("Ω·F").dim, Dim::TIME);
    assert_eq!(unit("W·h").dim, Dim::ENERGY);
    assert!(close(factor("ppm/K"), 1e-6));
    assert_eq!(unit("ppm/K").dim, Dim::TEMPERATURE_COEFFICIENT);
    assert!(close(factor("µV/K"), 1e-6));
    assert!(close(factor("kΩ·µF"), 1e-3));
    // A temperature symbol in a compound, in parentheses or with a power is a difference.
    assert_eq!(unit("°C/W").temperature, None);
    assert_eq!(unit("(°C)").temperature, None);
    assert_eq!(unit("K²").temperature, None);
    assert_eq!(unit("°C/W").text, "°C/W");
}

fn err(text: &str) -> (String, Option<String>) {
    match parse_unit(text) {
        Ok(u) => panic!("`{text}` should not parse, got {u:?}"),
        Err(e) => (e.message, e.hint),
    }
}

#[test]
fn error_messages_and_hints() {
    assert_eq!(
        err("Vv"),
        (
            "unknown unit `Vv`".to_string(),
            Some("did you mean `V`?".to_string())
        )
    );
    assert_eq!(err("KHz").1.as_deref(), Some("did you mean `kHz`?"));
    assert_eq!(err("ma").1.as_deref(), Some("did you mean `mA`?"));
    assert_eq!(err("mh").1.as_deref(), Some("did you mean `mH`?"));
    assert!(err("mV/").0.contains("ends after `/`"));
    assert!(err("A·").0.contains("ends after `·`"));
    assert_eq!(err("kK").0, "the prefix `k` is not used with `K`");
    assert_eq!(err("kmin").0, "the prefix `k` is not used with `min`");
    assert_eq!(err("k%").0, "the prefix `k` is not used with `%`");
    assert_eq!(err("m°C").0, "the prefix `m` is not used with `°C`");
    assert!(err("Gs").1.unwrap_or_default().contains("p n µ m"));
    assert!(err("kppm").0.contains("not used with `ppm`"));
    assert!(err("°K").1.unwrap_or_default().contains("`K`"));
    // NIST SP 811 (2008) §6.1.6: no product sign or second solidus after a solidus.
    let (m, h) = err("W/m·K");
    assert!(m.contains("ambiguous"), "{m}");
    assert!(h.unwrap_or_default().contains("W/(m·K"));
    let (m, h) = err("V/s/s");
    assert!(m.contains("ambiguous"));
    assert_eq!(
        h.as_deref(),
        Some("put the whole denominator in parentheses: `V/(s·s)`")
    );
    assert_eq!(err("Ms").1.as_deref(), Some("did you mean `ms`?"));
    assert!(!err("12V").1.unwrap_or_default().contains('^'));
    let (m, h) = err("W/(m·K");
    assert!(m.contains("missing `)`"));
    assert_eq!(h.as_deref(), Some("close the parenthesis: `W/(m·K)`"));
    assert!(err("K/W)").0.contains("unmatched `)`"));
    assert!(err("K W").0.contains("space"));
    assert!(err("K W").1.unwrap_or_default().contains("`KW`"));
    assert!(err("mm2").1.unwrap_or_default().contains("mm^2"));
    assert!(err("").0.contains("empty"));
    assert!(err("m^").0.contains("power"));
    assert!(err("m^0").0.contains("zero"));
    assert!(err("m^99").0.contains("too large"));
    assert!(err("()").0.contains("empty parentheses"));
    assert!(err("/s").1.unwrap_or_default().contains("1/s"));
    assert!(err("12").0.contains("unexpected"));
    let deep = format!("{}V{}", "(".repeat(500), ")".repeat(500));
    assert!(err(&deep).0.contains("nested"));
    assert!(unit("((V))").dim == Dim::VOLTAGE);
}

#[test]
fn nearest_and_symbol_list() {
    assert_eq!(nearest_symbol("Vv").as_deref(), Some("V"));
    assert_eq!(nearest_symbol("KHZ").as_deref(), Some("kHz"));
    assert_eq!(nearest_symbol("zzzzzz"), None);
    let all = symbols();
    for s in [
        "V", "mV", "kV", "A", "mA", "µA", "nA", "W", "mW", "Ω", "mΩ", "kΩ", "MΩ", "GΩ", "ohm", "S",
        "F", "µF", "nF", "pF", "H", "µH", "mH", "Hz", "kHz", "MHz", "s", "ms", "µs", "ns", "min",
        "h", "J", "Wh", "kWh", "mWh", "Ah", "mAh", "C", "K", "°C", "degC", "°F", "degF", "m", "mm",
        "mil", "%", "ppm", "K/W", "mV/K",
    ] {
        assert!(all.contains(&s), "symbols() lacks {s}");
    }
    for s in &all {
        assert!(
            parse_unit(s).is_ok(),
            "symbols() offers {s}, which does not parse"
        );
    }
    for silly in [
        "kK", "mmin", "kh", "m%", "kppm", "k°C", "m°F", "kmil", "Mmm",
    ] {
        assert!(!all.contains(&silly), "symbols() offers {silly}");
        assert!(!is_unit_symbol(silly));
    }
    assert!(is_unit_symbol("uF"));
    assert!(!is_unit_symbol("K/W"));
}

// ---- dimensions in words -------------------------------------------------------------------

#[test]
fn describe_texts() {
    let cases = [
        (Dim::VOLTAGE, "a voltage"),
        (Dim::CURRENT, "a current"),
        (Dim::POWER, "a power"),
        (Dim::RESISTANCE, "a resistance"),
        (Dim::CONDUCTANCE, "a conductance"),
        (Dim::CAPACITANCE, "a capacitance"),
        (Dim::INDUCTANCE, "an inductance"),
        (Dim::FREQUENCY, "a frequency"),
        (Dim::TIME, "a time"),
        (Dim::ENERGY, "an energy"),
        (Dim::CHARGE, "a charge"),
        (Dim::TEMPERATURE, "a temperature difference"),
        (Dim::THERMAL_RESISTANCE, "a thermal resistance"),
        (Dim::LENGTH, "a length"),
        (Dim::NONE, "a dimensionless number"),
    ];
    for (d, words) in cases {
        assert_eq!(d.describe(), words);
    }
    // The named dimensions as the evaluator would produce them.
    assert_eq!(Dim::VOLTAGE.div(Dim::CURRENT), Dim::RESISTANCE);
    assert_eq!(Dim::VOLTAGE.mul(Dim::CURRENT), Dim::POWER);
    assert_eq!(Dim::RESISTANCE.mul(Dim::CAPACITANCE), Dim::TIME);
    assert_eq!(unit("V/s").dim.describe(), "a voltage per time");
    assert_eq!(unit("A/s").dim.describe(), "a current per time");
    // V² has no name of its own; it is written as the power of the unit, not in base units
    // (m⁴·kg²/(s⁶·A²)), and a capacitance per voltage as F/V.
    let v2 = Dim::VOLTAGE.powi(2).unwrap_or_default();
    assert_eq!(v2.describe(), "a quantity in V²");
    assert_eq!(
        Dim::CAPACITANCE.div(Dim::VOLTAGE).describe(),
        "a quantity in F/V"
    );
    assert_eq!(Dim([0, 0, -2, 0, 0, 0, 0]).describe(), "a quantity in 1/s²");
    assert_eq!(
        describe_quantity(Dim::TEMPERATURE, true),
        "an absolute temperature"
    );
    assert_eq!(
        describe_quantity(Dim::TEMPERATURE, false),
        "a temperature difference"
    );
}

#[test]
fn symbol_texts() {
    let cases = [
        (Dim::VOLTAGE, "V"),
        (Dim::CURRENT, "A"),
        (Dim::RESISTANCE, "Ω"),
        (Dim::THERMAL_RESISTANCE, "K/W"),
        (Dim::TEMPERATURE, "K"),
        (Dim::NONE, "1"),
        (Dim::MASS, "kg"),
        (Dim::FREQUENCY, "Hz"),
    ];
    for (d, text) in cases {
        assert_eq!(d.symbol_text(), text);
    }
    assert_eq!(unit("mV/K").dim.symbol_text(), "V/K");
    assert_eq!(unit("mW/K").dim.symbol_text(), "W/K");
    let v2 = Dim::VOLTAGE.powi(2).unwrap_or_default();
    assert_eq!(v2.symbol_text(), "V²");
    // Every symbol text is itself a unit of factor 1 and the same dimension.
    for d in [
        v2,
        Dim([1, 1, -3, 0, -1, 0, 0]),
        Dim::TEMPERATURE_COEFFICIENT,
        Dim::NONE,
    ] {
        let u = unit(&d.symbol_text());
        assert_eq!((u.dim, u.factor), (d, 1.0), "{}", d.symbol_text());
    }
}

// ---- display -------------------------------------------------------------------------------

#[test]
fn engineering_display() {
    // Expected texts worked out by hand from the values.
    assert_eq!(format_si(0.18, Dim::CURRENT, false, 3), "180 mA");
    assert_eq!(format_si(352.58, Dim::TEMPERATURE, true, 3), "79.4 °C"); // 352.58 − 273.15
    assert_eq!(format_si(364.19, Dim::TEMPERATURE, true, 3), "91.0 °C");
    assert_eq!(format_si(233.15, Dim::TEMPERATURE, true, 3), "-40.0 °C");
    assert_eq!(format_si(4700.0, Dim::RESISTANCE, false, 3), "4.70 kΩ");
    assert_eq!(format_si(0.9997, Dim::CURRENT, false, 3), "1.00 A");
    assert_eq!(format_si(0.9994, Dim::CURRENT, false, 3), "999 mA");
    assert_eq!(format_si(999.7e-6, Dim::CURRENT, false, 3), "1.00 mA");
    assert_eq!(format_si(-2.1, Dim::VOLTAGE, false, 3), "-2.10 V");
    assert_eq!(format_si(0.0, Dim::VOLTAGE, false, 3), "0 V");
    assert_eq!(format_si(1200.0, Dim::VOLTAGE, false, 3), "1.20 kV");
    assert_eq!(format_si(33.96, Dim::TEMPERATURE, false, 3), "34.0 K");
    assert_eq!(
        format_si(6.4, Dim::THERMAL_RESISTANCE, false, 3),
        "6.40 K/W"
    );
    assert_eq!(format_si(2.2e-6, Dim::CAPACITANCE, false, 3), "2.20 µF");
    assert_eq!(format_si(100e-9, Dim::CAPACITANCE, false, 3), "100 nF");
    assert_eq!(format_si(4.7e-3, Dim::CAPACITANCE, false, 3), "4700 µF");
    assert_eq!(format_si(0.85, Dim::NONE, false, 3), "0.850");
    assert_eq!(format_si(2.5e-3, Dim::TIME, false, 3), "2.50 ms");
    assert_eq!(format_si(1500.0, Dim::TIME, false, 3), "1500 s");
    assert_eq!(format_si(72000.0, Dim::TIME, false, 3), "20.0 h");
    assert_eq!(format_si(3599.9, Dim::TIME, false, 3), "1.00 h");
    assert_eq!(format_si(5e-3, Dim::MASS, false, 3), "5.00 g");
    assert_eq!(format_si(1.5e-3, Dim::LENGTH, false, 3), "1.50 mm");
    assert_eq!(format_si(35e-6, Dim::LENGTH, false, 3), "35.0 µm");
    assert_eq!(
        format_si(50e-6, Dim::TEMPERATURE_COEFFICIENT, false, 3),
        "50.0 ppm/K"
    );
    assert_eq!(format_si(-2e-3, unit("V/K").dim, false, 3), "-2.00 mV/K");
    assert_eq!(
        format_si(2.0, Dim::VOLTAGE.powi(2).unwrap_or_default(), false, 3),
        "2.00 V²"
    );
    assert_eq!(
        format_si(1234.5, Dim::THERMAL_RESISTANCE, false, 3),
        "1230 K/W"
    );
    assert_eq!(format_si(4.7e-4, Dim::NONE, false, 3), "4.70e-4");
    assert_eq!(display_unit(Dim::TEMPERATURE, true), "°C");
    assert_eq!(display_unit(Dim::CAPACITANCE, false), "F");
}

#[test]
fn display_in_declared_units() {
    assert_eq!(format_in(0.5, false, &unit("mW"), 3), "500 mW");
    assert_eq!(format_in(352.58, true, &unit("K"), 3), "353 K");
    assert_eq!(format_in(352.58, true, &unit("°C"), 3), "79.4 °C");
    // 352.58 K · 9/5 − 459.67 = 174.974 °F
    assert_eq!(format_in(352.58, true, &unit("°F"), 3), "175 °F");
    // A 10 K difference is 18 °F of difference.
    assert_eq!(format_in(10.0, false, &unit("°F"), 3), "18.0 °F");
    assert_eq!(format_in(0.85, false, &unit("%"), 3), "85.0 %");
    // 5.4 C = 5.4/3.6 mAh = 1.5 mAh
    assert_eq!(format_in(5.4, false, &unit("mAh"), 3), "1.50 mAh");
    assert_eq!(format_in(0.0, false, &unit("mW"), 3), "0 mW");
}

#[test]
fn numbers_and_differences() {
    assert_eq!(format_number(0.18, 3), "0.180");
    assert_eq!(format_number(79.43, 3), "79.4");
    assert_eq!(format_number(123456.0, 3), "123000");
    assert_eq!(format_number(1e6, 3), "1.00e6");
    assert_eq!(format_number(-0.0047, 3), "-0.00470");
    assert_eq!(format_number(0.000470, 3), "4.70e-4");
    assert_eq!(format_number(999.97, 4), "1000");
    assert_eq!(format_number(33.96, 5), "33.960");
    assert_eq!(format_number(0.0, 3), "0");
    assert_eq!(format_number(-0.0, 3), "0");
    assert_eq!(format_difference(33.96, Dim::TEMPERATURE, 3), "+34.0 K");
    assert_eq!(format_difference(-2.1, Dim::VOLTAGE, 3), "-2.10 V");
    assert_eq!(format_difference(0.015, Dim::CURRENT, 3), "+15.0 mA");
    assert_eq!(format_difference(0.0, Dim::VOLTAGE, 3), "0 V");
}

// ---- properties ----------------------------------------------------------------------------

fn single_forms() -> Vec<&'static str> {
    symbols()
        .into_iter()
        .filter(|s| !s.contains(['/', '·', '²']))
        .collect()
}

proptest! {
    #[test]
    fn parse_unit_never_panics(s in "\\PC{0,24}") {
        let _ = parse_unit(&s);
    }

    #[test]
    fn parse_unit_never_panics_on_unit_like_text(
        s in "[VAWΩSFHzsminhJCK°%pnuµmkMGd·*/^()²³⁻¹0-9 -]{0,24}"
    ) {
        if let Ok(u) = parse_unit(&s) {
            prop_assert!(u.factor.is_finite() && u.factor > 0.0);
            // The canonical text means the same unit.
            let again = parse_unit(&u.text);
            prop_assert!(again.is_ok(), "{} -> {}", s, u.text);
            if let Ok(a) = again {
                prop_assert_eq!(a.dim, u.dim);
                prop_assert!(close(a.factor, u.factor));
            }
        }
    }

    #[test]
    fn round_trip_to_si_and_back(i in 0usize..200, j in 0usize..200, x in -1e6f64..1e6) {
        let forms = single_forms();
        let a = forms[i % forms.len()];
        let b = forms[j % forms.len()];
        for text in [a.to_string(), format!("{a}/{b}"), format!("{a}·{b}"), format!("{a}^2")] {
            let u = unit(&text);
            for absolute in [false, true] {
                if absolute && !u.is_absolute_temperature() {
                    continue;
                }
                let back = u.from_si(u.to_si(x, absolute), absolute);
                let tol = 1e-9 * x.abs().max(1000.0);
                prop_assert!((back - x).abs() <= tol, "{}: {} -> {}", text, x, back);
            }
        }
        // Compound factors are products and quotients of the parts.
        let (fa, fb) = (factor(a), factor(b));
        let (quotient, product, inverse) = (
            factor(&format!("{a}/{b}")),
            factor(&format!("{a}*{b}")),
            factor(&format!("{a}^-2")),
        );
        prop_assert!(close(quotient, fa / fb));
        prop_assert!(close(product, fa * fb));
        prop_assert!(close(inverse, 1.0 / (fa * fa)));
    }

    #[test]
    fn displayed_value_reads_back(e in -11.0f64..8.0, m in 1.0f64..10.0, k in 0usize..6) {
        let dims = [
            Dim::VOLTAGE,
            Dim::CURRENT,
            Dim::RESISTANCE,
            Dim::POWER,
            Dim::FREQUENCY,
            Dim::TIME,
        ];
        let si = m * 10f64.powf(e);
        let text = format_si(si, dims[k], false, 3);
        let (num, unit_text) = text.split_once(' ').unwrap_or((text.as_str(), ""));
        let value: f64 = num.parse().unwrap_or(f64::NAN);
        let u = unit(unit_text);
        prop_assert_eq!(u.dim, dims[k]);
        // Three significant digits: within half a unit of the third digit.
        prop_assert!((value * u.factor - si).abs() <= 5.0e-3 * si, "{} -> {}", si, text);
        // Engineering prefixes keep the mantissa under 1000 where one is available.
        // (kA is the largest current prefix; long times go to hours without a prefix.)
        if dims[k] != Dim::CURRENT && dims[k] != Dim::TIME {
            prop_assert!(value < 1000.0, "{}", text);
        }
    }
}

#[test]
fn a_library_unit_is_the_unit_its_text_names() {
    // "%" is one hundredth of the pure number (common practice, no source).
    let percent = worksheet_lang::units::library_unit("%").expect("percent");
    assert_eq!(percent.dim, Dim::NONE);
    assert!((percent.factor - 0.01).abs() < 1e-15);
    assert_eq!(Ok(percent), parse_unit("%"));
    // A text outside the library's table is parsed on the spot, errors included.
    assert_eq!(worksheet_lang::units::library_unit("mW"), parse_unit("mW"));
    assert!(worksheet_lang::units::library_unit("nonsense-unit").is_err());
}
