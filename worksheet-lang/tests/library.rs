//! The built-in power-design library, called directly with language values through a small
//! stand-in for the evaluator. Expected values come from outside the library: the IEC 60063
//! tables, published worked examples, facts of the trade, and closed forms worked by hand.

use proptest::prelude::*;
use std::collections::HashMap;
use worksheet_lang::builtins::{
    self, series, CallCtx, CallError, CallHost, PartLabel, WarnRule, WarnWhen,
};
use worksheet_lang::num::{Dual, Interval};
use worksheet_lang::units::Dim;
use worksheet_lang::value::{Num, Value};

// ---------------------------------------------------------------------------------------
// A stand-in for the evaluator's side of a call.

#[derive(Clone, Copy, PartialEq, Debug)]
enum Pass {
    Nominal,
    /// Intervals; the part input named by `Host::seed` (if any) carries the derivative.
    Box,
    /// Every part input at the low end of its range.
    Low,
    /// Every part input at the high end of its range.
    High,
}

struct Host {
    pass: Pass,
    seed: Option<String>,
    choices: HashMap<String, f64>,
    /// key → (label, nominal, lo, hi)
    parts: HashMap<String, (String, f64, f64, f64)>,
    probes: Vec<(String, Num, WarnRule)>,
    warnings: Vec<String>,
    hazards: Vec<worksheet_lang::results::Hazard>,
    ranges: HashMap<usize, Interval>,
}

impl Host {
    fn new() -> Self {
        Host {
            pass: Pass::Nominal,
            seed: None,
            choices: HashMap::new(),
            parts: HashMap::new(),
            probes: Vec::new(),
            warnings: Vec::new(),
            hazards: Vec::new(),
            ranges: HashMap::new(),
        }
    }
    fn probe(&self, key: &str) -> Option<&(String, Num, WarnRule)> {
        self.probes.iter().rev().find(|p| p.0 == key)
    }
}

impl CallHost for Host {
    fn is_nominal(&self) -> bool {
        self.pass == Pass::Nominal
    }
    fn choose(
        &mut self,
        key: &str,
        pick: &mut dyn FnMut() -> Result<f64, CallError>,
    ) -> Result<f64, CallError> {
        if let Some(v) = self.choices.get(key) {
            return Ok(*v);
        }
        assert_eq!(
            self.pass,
            Pass::Nominal,
            "choices are made in the nominal pass"
        );
        let v = pick()?;
        self.choices.insert(key.to_string(), v);
        Ok(v)
    }
    fn hazard(&mut self, hazard: worksheet_lang::results::Hazard) {
        self.hazards.push(hazard);
    }
    fn part_input(
        &mut self,
        key: &str,
        label: PartLabel,
        nominal: f64,
        lo: f64,
        hi: f64,
        dim: Dim,
    ) -> Dual {
        let _ = dim;
        self.parts
            .insert(key.to_string(), (label.text(), nominal, lo, hi));
        match self.pass {
            Pass::Nominal => Dual::constant(nominal),
            Pass::Box => Dual::input(Interval::new(lo, hi), self.seed.as_deref() == Some(key)),
            Pass::Low => Dual::constant(lo),
            Pass::High => Dual::constant(hi),
        }
    }
    fn probe(&mut self, key: &str, value: Num, rule: WarnRule) {
        self.probes.push((key.to_string(), value, rule));
    }
    fn warn(&mut self, text: String) {
        self.warnings.push(text);
    }
    fn arg_range(&self, param: usize) -> Option<Interval> {
        self.ranges.get(&param).copied()
    }
}

/// Calls `path` with named arguments.
fn call(host: &mut Host, path: &str, args: &[(&str, Value)]) -> Result<Value, CallError> {
    let b = builtins::lookup(path).unwrap_or_else(|| panic!("no built-in {path}"));
    let mut vals: Vec<Option<Value>> = vec![None; b.params.len()];
    for (name, v) in args {
        let i = b
            .params
            .iter()
            .position(|p| p.name == *name)
            .unwrap_or_else(|| panic!("{path} has no {name}"));
        vals[i] = Some(v.clone());
    }
    let mut ctx = CallCtx { host };
    (b.call)(&mut ctx, &vals)
}

fn nominal(path: &str, args: &[(&str, Value)]) -> Value {
    let mut h = Host::new();
    call(&mut h, path, args).unwrap_or_else(|e| panic!("{path}: {e:?}"))
}

fn q(x: f64, dim: Dim) -> Value {
    Value::Num(Num::constant(x, dim))
}
fn volts(x: f64) -> Value {
    q(x, Dim::VOLTAGE)
}
fn amps(x: f64) -> Value {
    q(x, Dim::CURRENT)
}
fn watts(x: f64) -> Value {
    q(x, Dim::POWER)
}
fn ohms(x: f64) -> Value {
    q(x, Dim::RESISTANCE)
}
fn k_per_w(x: f64) -> Value {
    q(x, Dim::THERMAL_RESISTANCE)
}
fn seconds(x: f64) -> Value {
    q(x, Dim::TIME)
}
fn plain(x: f64) -> Value {
    q(x, Dim::NONE)
}
fn celsius(t: f64) -> Value {
    Value::Num(Num::absolute(Dual::constant(t + 273.15)))
}
fn text(s: &str) -> Value {
    Value::Str(s.into())
}
fn series_value(name: &str) -> Value {
    builtins::constant(name).expect("series constant")
}
/// An uncertain argument for a box pass; `seed` marks the input differentiated against.
fn range(lo: f64, hi: f64, dim: Dim, seed: bool) -> Value {
    Value::Num(Num::new(Dual::input(Interval::new(lo, hi), seed), dim))
}
fn celsius_range(lo: f64, hi: f64, seed: bool) -> Value {
    Value::Num(Num::absolute(Dual::input(
        Interval::new(lo + 273.15, hi + 273.15),
        seed,
    )))
}

fn num(v: &Value) -> Dual {
    match v {
        Value::Num(n) => n.x,
        other => panic!("expected a number, got {other:?}"),
    }
}
fn field(v: &Value, name: &str) -> Dual {
    match v {
        Value::Record(r) => num(&r
            .get(name)
            .unwrap_or_else(|| panic!("no field {name}"))
            .value),
        other => panic!("expected a record, got {other:?}"),
    }
}
fn close(got: f64, want: f64, tol: f64) -> bool {
    (got - want).abs() <= tol
}
#[track_caller]
fn assert_close(got: f64, want: f64, tol: f64) {
    assert!(close(got, want, tol), "got {got}, want {want} ± {tol}");
}

// ---------------------------------------------------------------------------------------
// IEC 60063 preferred-number series, every value as the standard's tables print them
// (written from memory of IEC 60063:2015 Tables 1 and 2; E48/E96/E192 also cross-checked
// below against the rounding formula with its one printed exception).

/// Two significant digits, in tenths (IEC 60063, Table 1).
const IEC_E3: [u32; 3] = [10, 22, 47];
const IEC_E6: [u32; 6] = [10, 15, 22, 33, 47, 68];
const IEC_E12: [u32; 12] = [10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82];
const IEC_E24: [u32; 24] = [
    10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30, 33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91,
];
/// Three significant digits, in hundredths (IEC 60063, Table 2).
const IEC_E48: [u32; 48] = [
    100, 105, 110, 115, 121, 127, 133, 140, 147, 154, 162, 169, 178, 187, 196, 205, 215, 226, 237,
    249, 261, 274, 287, 301, 316, 332, 348, 365, 383, 402, 422, 442, 464, 487, 511, 536, 562, 590,
    619, 649, 681, 715, 750, 787, 825, 866, 909, 953,
];
const IEC_E96: [u32; 96] = [
    100, 102, 105, 107, 110, 113, 115, 118, 121, 124, 127, 130, 133, 137, 140, 143, 147, 150, 154,
    158, 162, 165, 169, 174, 178, 182, 187, 191, 196, 200, 205, 210, 215, 221, 226, 232, 237, 243,
    249, 255, 261, 267, 274, 280, 287, 294, 301, 309, 316, 324, 332, 340, 348, 357, 365, 374, 383,
    392, 402, 412, 422, 432, 442, 453, 464, 475, 487, 499, 511, 523, 536, 549, 562, 576, 590, 604,
    619, 634, 649, 665, 681, 698, 715, 732, 750, 768, 787, 806, 825, 845, 866, 887, 909, 931, 953,
    976,
];
const IEC_E192: [u32; 192] = [
    100, 101, 102, 104, 105, 106, 107, 109, 110, 111, 113, 114, 115, 117, 118, 120, 121, 123, 124,
    126, 127, 129, 130, 132, 133, 135, 137, 138, 140, 142, 143, 145, 147, 149, 150, 152, 154, 156,
    158, 160, 162, 164, 165, 167, 169, 172, 174, 176, 178, 180, 182, 184, 187, 189, 191, 193, 196,
    198, 200, 203, 205, 208, 210, 213, 215, 218, 221, 223, 226, 229, 232, 234, 237, 240, 243, 246,
    249, 252, 255, 258, 261, 264, 267, 271, 274, 277, 280, 284, 287, 291, 294, 298, 301, 305, 309,
    312, 316, 320, 324, 328, 332, 336, 340, 344, 348, 352, 357, 361, 365, 370, 374, 379, 383, 388,
    392, 397, 402, 407, 412, 417, 422, 427, 432, 437, 442, 448, 453, 459, 464, 470, 475, 481, 487,
    493, 499, 505, 511, 517, 523, 530, 536, 542, 549, 556, 562, 569, 576, 583, 590, 597, 604, 612,
    619, 626, 634, 642, 649, 657, 665, 673, 681, 690, 698, 706, 715, 723, 732, 741, 750, 759, 768,
    777, 787, 796, 806, 816, 825, 835, 845, 856, 866, 876, 887, 898, 909, 920, 931, 942, 953, 965,
    976, 988,
];

#[track_caller]
fn assert_table(name: &str, printed: &[u32], scale: f64) {
    let s = series::by_name(name).unwrap_or_else(|| panic!("no series {name}"));
    let got: Vec<f64> = s.values.to_vec();
    let want: Vec<f64> = printed.iter().map(|&m| f64::from(m) / scale).collect();
    assert_eq!(got.len(), want.len(), "{name} length");
    for (i, (g, w)) in got.iter().zip(&want).enumerate() {
        assert!(
            (g - w).abs() < 1e-12,
            "{name}[{i}]: table has {g}, IEC 60063 prints {w}"
        );
    }
    assert!(matches!(builtins::constant(name), Some(Value::Series(c)) if c.name == name));
}

#[test]
fn iec_60063_two_digit_series_as_printed() {
    // Source: IEC 60063, Table 1 (E3 to E24).
    assert_table("E3", &IEC_E3, 10.0);
    assert_table("E6", &IEC_E6, 10.0);
    assert_table("E12", &IEC_E12, 10.0);
    assert_table("E24", &IEC_E24, 10.0);
}

#[test]
fn iec_60063_three_digit_series_as_printed() {
    // Source: IEC 60063, Table 2 (E48 to E192).
    assert_table("E48", &IEC_E48, 100.0);
    assert_table("E96", &IEC_E96, 100.0);
    assert_table("E192", &IEC_E192, 100.0);
}

/// round(10^(i/n)) to `digits` significant digits, in units of the last digit.
fn formula(i: usize, n: usize, digits: i32) -> u32 {
    let x = 10f64.powf(i as f64 / n as f64);
    (x * 10f64.powi(digits - 1)).round() as u32
}

#[test]
fn three_digit_series_follow_the_formula_except_e192_9_20() {
    // IEC 60063: E48–E192 are round(10^(i/n), 3 digits), except 9.20 in E192 (formula 9.19).
    for (n, printed) in [(48, &IEC_E48[..]), (96, &IEC_E96[..]), (192, &IEC_E192[..])] {
        for (i, &m) in printed.iter().enumerate() {
            let f = formula(i, n, 3);
            if n == 192 && i == 185 {
                assert_eq!((m, f), (920, 919));
            } else {
                assert_eq!(m, f, "E{n}[{i}]");
            }
        }
    }
}

#[test]
fn e24_differs_from_the_formula_at_eight_printed_values() {
    // IEC 60063: the two-digit series keep the values in use before standardisation.
    let differ: Vec<(u32, u32)> = IEC_E24
        .iter()
        .enumerate()
        .filter_map(|(i, &m)| {
            let f = formula(i, 24, 2);
            (f != m).then_some((m, f))
        })
        .collect();
    assert_eq!(
        differ,
        [
            (27, 26),
            (30, 29),
            (33, 32),
            (36, 35),
            (39, 38),
            (43, 42),
            (47, 46),
            (82, 83)
        ]
    );
}

#[test]
fn smaller_two_digit_series_are_every_other_value_of_the_next() {
    // IEC 60063: E12 is every second E24 value, E6 every second E12 value, E3 every second E6.
    let every_other = |v: &[u32]| v.iter().step_by(2).copied().collect::<Vec<_>>();
    assert_eq!(every_other(&IEC_E24), IEC_E12);
    assert_eq!(every_other(&IEC_E12), IEC_E6);
    assert_eq!(every_other(&IEC_E6), IEC_E3);
}

// ---------------------------------------------------------------------------------------
// res.pick

fn pick(value: f64, series: &str, mode: &str) -> f64 {
    num(&nominal(
        "res.pick",
        &[
            ("value", ohms(value)),
            ("series", series_value(series)),
            ("mode", text(mode)),
        ],
    ))
    .value()
}

#[test]
fn pick_up_down_nearest_across_decades() {
    // E24 holds 4.3 and 4.7 (IEC 60063): 4.6 kΩ lies between them.
    assert_eq!(pick(4600.0, "E24", "up"), 4700.0);
    assert_eq!(pick(4600.0, "E24", "down"), 4300.0);
    assert_eq!(pick(4600.0, "E24", "nearest"), 4700.0);
    // 0.5 Ω between E24's 0.47 and 0.51; 0.51 is nearer by ratio (0.51/0.5 < 0.5/0.47).
    assert_close(pick(0.5, "E24", "up"), 0.51, 1e-15);
    assert_close(pick(0.5, "E24", "down"), 0.47, 1e-15);
    assert_close(pick(0.5, "E24", "nearest"), 0.51, 1e-15);
    // The top end: 10 MΩ is itself preferred (1.0 × 10^7).
    for mode in ["up", "down", "nearest"] {
        assert_eq!(pick(10e6, "E24", mode), 10e6);
        assert_eq!(pick(10e6, "E96", mode), 10e6);
    }
    // Crossing a decade: above 9.1 the next E24 value is 10; below 1.0 it is 0.91.
    assert_eq!(pick(9500.0, "E24", "up"), 10_000.0);
    assert_close(pick(0.99, "E24", "down"), 0.91, 1e-15);
    // E192's printed 9.20 (not the formula's 9.19).
    assert_eq!(pick(9200.0, "E192", "down"), 9200.0);
    assert_eq!(pick(9195.0, "E192", "up"), 9200.0);
    // E96 has no 9.20: 9.19 kΩ is nearer to 9.09 kΩ than to 9.31 kΩ by ratio.
    assert_eq!(pick(9190.0, "E96", "nearest"), 9090.0);
    // A preferred value entered after unit scaling stays itself.
    assert_eq!(pick(4.7 * 1000.0, "E12", "up"), 4700.0);
    assert_eq!(pick(4.7 * 1000.0, "E12", "down"), 4700.0);
}

#[test]
fn picked_part_enters_with_its_series_tolerance() {
    let mut h = Host::new();
    call(
        &mut h,
        "res.pick",
        &[("value", ohms(1234.0)), ("series", series_value("E96"))],
    )
    .unwrap();
    let (_, nom, lo, hi) = h.parts["value"].clone();
    // E96 ↔ 1 % (IEC 60063's association of series and tolerance).
    assert_eq!(nom, 1240.0);
    assert_close(lo, 1240.0 * 0.99, 1e-9);
    assert_close(hi, 1240.0 * 1.01, 1e-9);
    // In a box pass the result spans the part's tolerance, chosen once.
    h.pass = Pass::Box;
    let v = num(&call(
        &mut h,
        "res.pick",
        &[("value", ohms(1300.0)), ("series", series_value("E96"))],
    )
    .unwrap());
    assert_close(v.v.lo, 1240.0 * 0.99, 1e-9);
    assert_close(v.v.hi, 1240.0 * 1.01, 1e-9);
}

#[test]
fn pick_rejects_bad_words_and_non_positive_values() {
    let mut h = Host::new();
    let e = call(
        &mut h,
        "res.pick",
        &[("value", ohms(100.0)), ("mode", text("round"))],
    )
    .unwrap_err();
    assert_eq!(e.param, Some(2));
    let e = call(&mut h, "res.pick", &[("value", ohms(-5.0))]).unwrap_err();
    assert_eq!(e.param, Some(0));
}

// ---------------------------------------------------------------------------------------
// reg.linear and reg.switching

#[test]
fn linear_9v_to_5v_at_7ma() {
    // Common practice, no source: 9 V → 5 V at 7 mA with negligible quiescent current is
    // about 35 mW out, 63 mW in, 28 mW of heat, efficiency ≈ vout/vin ≈ 56 %.
    let r = nominal(
        "reg.linear",
        &[
            ("vin", volts(9.0)),
            ("vout", volts(5.0)),
            ("iout", amps(7e-3)),
        ],
    );
    assert_close(field(&r, "pout").value(), 35e-3, 1e-9);
    assert_close(field(&r, "pin").value(), 63e-3, 1e-9);
    assert_close(field(&r, "loss").value(), 28e-3, 1e-9);
    assert_close(field(&r, "efficiency").value(), 5.0 / 9.0, 1e-12);
    assert_close(field(&r, "iin").value(), 7e-3, 1e-15);
    assert_close(field(&r, "headroom").value(), 4.0, 1e-12);
    let Value::Record(rec) = &r else {
        unreachable!()
    };
    assert_eq!(rec.get("efficiency").and_then(|f| f.display), Some("%"));
    assert_eq!(rec.kind, "reg.linear");
}

#[test]
fn linear_quiescent_current_adds_vin_times_iq() {
    // loss = (vin − vout)·iout + vin·iq: (12 − 5)·0.1 + 12·0.004 = 0.748 W.
    let r = nominal(
        "reg.linear",
        &[
            ("vin", volts(12.0)),
            ("vout", volts(5.0)),
            ("iout", amps(0.1)),
            ("iq", amps(4e-3)),
        ],
    );
    assert_close(field(&r, "loss").value(), 0.748, 1e-12);
    assert_close(field(&r, "pin").value(), 12.0 * 0.104, 1e-12);
    assert_close(field(&r, "efficiency").value(), 0.5 / 1.248, 1e-12);
}

#[test]
fn mcp1726_power_dissipation_example() {
    // Microchip, "MCP1726 1A, Low Voltage, Low Quiescent Current LDO Regulator" data sheet
    // DS21936C (2007), section 5.3.1 "Power Dissipation Example": VIN = 3.3 V ± 10 %,
    // VOUT = 2.5 V (at its −2.5 % limit 0.975 × 2.5 V), IOUT = 1.0 A:
    // PLDO(MAX) = (3.63 V − 0.975 × 2.5 V) × 1.0 A = 1.192 W (printed).
    let worst = nominal(
        "reg.linear",
        &[
            ("vin", volts(3.63)),
            ("vout", volts(0.975 * 2.5)),
            ("iout", amps(1.0)),
        ],
    );
    assert_close(field(&worst, "loss").value(), 1.192, 0.001);
    // The same from the ranges in one box pass: its upper bound is the printed worst case.
    let mut h = Host::new();
    h.pass = Pass::Box;
    let r = call(
        &mut h,
        "reg.linear",
        &[
            ("vin", range(2.97, 3.63, Dim::VOLTAGE, false)),
            ("vout", range(0.975 * 2.5, 1.025 * 2.5, Dim::VOLTAGE, false)),
            ("iout", amps(1.0)),
        ],
    )
    .unwrap();
    assert_close(field(&r, "loss").v.hi, 1.192, 0.001);
}

#[test]
fn mcp1700_power_dissipation_example() {
    // Microchip, MCP1700 data sheet DS20001826C, section 6.3.1 "Power Dissipation Example":
    // VIN = 2.3 V to 3.2 V, VOUT = 1.8 V (at its −3 % limit), IOUT = 150 mA:
    // PLDO = (3.2 V − 0.97 × 1.8 V) × 150 mA = 218.1 mW (printed).
    let r = nominal(
        "reg.linear",
        &[
            ("vin", volts(3.2)),
            ("vout", volts(0.97 * 1.8)),
            ("iout", amps(0.15)),
        ],
    );
    assert_close(field(&r, "loss").value(), 218.1e-3, 0.05e-3);
}

#[test]
fn linear_in_dropout_at_the_low_input_corner() {
    // vin 4.5 V .. 5.5 V, vout 3.3 V, dropout 1.5 V: at 4.5 V the headroom is −0.3 V and the
    // output sags to 3.0 V (worked by hand).
    let args = |vin: Value| {
        vec![
            ("vin", vin),
            ("vout", volts(3.3)),
            ("iout", amps(0.2)),
            ("dropout", volts(1.5)),
        ]
    };
    let mut h = Host::new();
    let r = call(&mut h, "reg.linear", &args(volts(5.0))).unwrap();
    assert_close(field(&r, "headroom").value(), 0.2, 1e-12);
    let (_, probe, rule) = h.probe("headroom").expect("headroom probe").clone();
    assert_eq!(rule.when, WarnWhen::MinBelow(0.0));
    assert!(rule.message.contains("dropout"));
    assert_close(probe.x.value(), 0.2, 1e-12);

    // The corner vin = 4.5 V.
    h.pass = Pass::Low;
    let r = call(&mut h, "reg.linear", &args(volts(4.5))).unwrap();
    assert_close(field(&r, "headroom").value(), -0.3, 1e-12);
    assert_close(field(&r, "pout").value(), 3.0 * 0.2, 1e-12);
    assert_close(field(&r, "loss").value(), 1.5 * 0.2, 1e-12);
    assert_close(field(&r, "efficiency").value(), 3.0 / 4.5, 1e-12);

    // The box over vin: the probe's minimum is below zero, so the warning fires.
    h.pass = Pass::Box;
    call(
        &mut h,
        "reg.linear",
        &args(range(4.5, 5.5, Dim::VOLTAGE, true)),
    )
    .unwrap();
    let (_, probe, _) = h.probe("headroom").unwrap().clone();
    assert_close(probe.x.v.lo, -0.3, 1e-12);
    assert_close(probe.x.v.hi, 0.7, 1e-12);
}

#[test]
fn linear_warns_over_vin_max_and_iout_max() {
    let mut h = Host::new();
    h.pass = Pass::Box;
    call(
        &mut h,
        "reg.linear",
        &[
            ("vin", range(10.0, 14.0, Dim::VOLTAGE, false)),
            ("vout", volts(5.0)),
            ("iout", range(0.1, 0.6, Dim::CURRENT, false)),
            ("vin_max", volts(13.2)),
            ("iout_max", amps(0.5)),
        ],
    )
    .unwrap();
    let (_, v, rule) = h.probe("vin_max").unwrap().clone();
    assert_eq!(rule.when, WarnWhen::MinBelow(0.0));
    assert_close(v.x.v.lo, 13.2 - 14.0, 1e-12);
    let (_, i, _) = h.probe("iout_max").unwrap().clone();
    assert_close(i.x.v.lo, 0.5 - 0.6, 1e-12);
}

#[test]
fn linear_rejects_impossible_inputs() {
    let mut h = Host::new();
    let e = call(
        &mut h,
        "reg.linear",
        &[
            ("vin", volts(5.0)),
            ("vout", volts(5.0)),
            ("iout", amps(0.1)),
        ],
    )
    .unwrap_err();
    assert_eq!(e.param, Some(1));
    assert!(e.hint.is_some());
    let e = call(
        &mut h,
        "reg.linear",
        &[
            ("vin", volts(9.0)),
            ("vout", volts(5.0)),
            ("iout", amps(-0.1)),
        ],
    )
    .unwrap_err();
    assert_eq!(e.param, Some(2));
    // A wrong dimension names the parameter.
    let e = call(
        &mut h,
        "reg.linear",
        &[
            ("vin", amps(9.0)),
            ("vout", volts(5.0)),
            ("iout", amps(0.1)),
        ],
    )
    .unwrap_err();
    assert_eq!(e.param, Some(0));
    // At a worst corner vout ≥ vin is dropout, not an error.
    h.pass = Pass::High;
    assert!(call(
        &mut h,
        "reg.linear",
        &[
            ("vin", volts(4.9)),
            ("vout", volts(5.0)),
            ("iout", amps(0.1)),
            ("dropout", volts(0.3))
        ]
    )
    .is_ok());
}

#[test]
fn switching_power_balance() {
    // pin = pout/η + vin·iq: 5 V × 2 A at 90 % from 12 V with 1 mA: pin = 11.111 + 0.012 W.
    let r = nominal(
        "reg.switching",
        &[
            ("vin", volts(12.0)),
            ("vout", volts(5.0)),
            ("iout", amps(2.0)),
            ("efficiency", plain(0.9)),
            ("iq", amps(1e-3)),
        ],
    );
    assert_close(field(&r, "pout").value(), 10.0, 1e-12);
    assert_close(field(&r, "pin").value(), 10.0 / 0.9 + 0.012, 1e-12);
    assert_close(field(&r, "loss").value(), 10.0 / 0.9 - 10.0 + 0.012, 1e-12);
    assert_close(field(&r, "iin").value(), (10.0 / 0.9 + 0.012) / 12.0, 1e-12);
}

#[test]
fn switching_rejects_efficiency_above_100_percent_and_zero() {
    let base = |eta: Value| {
        vec![
            ("vin", volts(12.0)),
            ("vout", volts(5.0)),
            ("iout", amps(1.0)),
            ("efficiency", eta),
        ]
    };
    let mut h = Host::new();
    assert_eq!(
        call(&mut h, "reg.switching", &base(plain(1.05)))
            .unwrap_err()
            .param,
        Some(3)
    );
    assert_eq!(
        call(&mut h, "reg.switching", &base(plain(0.0)))
            .unwrap_err()
            .param,
        Some(3)
    );
    // A range reaching past 100 % in a box pass is caught too.
    h.pass = Pass::Box;
    assert_eq!(
        call(
            &mut h,
            "reg.switching",
            &base(range(0.9, 1.02, Dim::NONE, false))
        )
        .unwrap_err()
        .param,
        Some(3)
    );
}

// ---------------------------------------------------------------------------------------
// heat.*

#[test]
fn mcp1726_junction_temperature_and_maximum_power() {
    // Microchip MCP1726 data sheet DS21936C (2007), section 5.3.1: 3x3 DFN, RθJA = 41 °C/W,
    // TA(MAX) = 70 °C, 1.192 W: TJ(RISE) = 48.8 °C, TJ = 118.8 °C (printed, to 0.1 °C
    // truncated: 1.192 × 41 = 48.87).
    let tj = num(&nominal(
        "heat.junction",
        &[
            ("power", watts(1.192)),
            ("ambient", celsius(70.0)),
            ("theta", k_per_w(41.0)),
        ],
    ))
    .value();
    assert_close(tj - 273.15, 118.8, 0.1);
    // Same section: PD(MAX) = (125 °C − 70 °C) / 41 °C/W = 1.34 W for the DFN and
    // (125 °C − 70 °C) / 150 °C/W = 0.366 W for SOIC-8 (printed).
    let p = |theta: f64| {
        num(&nominal(
            "heat.max_power",
            &[
                ("ambient", celsius(70.0)),
                ("tj_max", celsius(125.0)),
                ("theta", k_per_w(theta)),
            ],
        ))
        .value()
    };
    assert_close(p(41.0), 1.34, 0.005);
    assert_close(p(150.0), 0.366, 0.001);
}

#[test]
fn heatsink_for_a_to220_at_5w() {
    // Thermalloy heat-sink catalogue, worked selection example (edition not checked; read as
    // reproduced in course notes): TO-220 dissipating 5 W, RθJC = 3.0 °C/W, TJmax = 150 °C,
    // TAmax = 50 °C, RθCS = 1 °C/W (no insulator, with grease): RθSA must be below 16 °C/W.
    let sa = num(&nominal(
        "heat.sink_for",
        &[
            ("power", watts(5.0)),
            ("ambient", celsius(50.0)),
            ("tj_max", celsius(150.0)),
            ("jc", k_per_w(3.0)),
            ("cs", k_per_w(1.0)),
        ],
    ));
    assert_close(sa.value(), 16.0, 1e-9);
}

#[test]
fn no_heatsink_can_do_it_warns() {
    // (125 − 50) / 50 − 4 − 0.89 = −3.39 K/W: negative, so no sink exists.
    let mut h = Host::new();
    let sa = num(&call(
        &mut h,
        "heat.sink_for",
        &[
            ("power", watts(50.0)),
            ("ambient", celsius(50.0)),
            ("tj_max", celsius(125.0)),
            ("jc", k_per_w(4.0)),
            ("cs", k_per_w(0.89)),
        ],
    )
    .unwrap());
    assert_close(sa.value(), 1.5 - 4.89, 1e-9);
    let (_, v, rule) = h.probe("theta_sa").unwrap().clone();
    assert_eq!(rule.when, WarnWhen::MinBelow(0.0));
    assert!(v.x.value() < 0.0);
}

#[test]
fn junction_of_the_reference_worksheet_and_its_limit_probes() {
    // ta + P·θ with θ = 6 + 0.4 + (22 ∥ 60) K/W: the reference worksheet's nominal point
    // (180 mA, 12 V, 5 V, 4 mA): loss = 7 × 0.18 + 12 × 0.004 = 1.308 W, worked by hand.
    let theta = 6.0 + 0.4 + 1.0 / (1.0 / 22.0 + 1.0 / 60.0);
    let mut h = Host::new();
    let tj = num(&call(
        &mut h,
        "heat.junction",
        &[
            ("power", watts(1.308)),
            ("ambient", celsius(50.0)),
            ("theta", k_per_w(theta)),
            ("tj_max", celsius(125.0)),
        ],
    )
    .unwrap());
    assert_close(tj.value() - 273.15, 50.0 + 1.308 * theta, 1e-9);
    assert_close(tj.value() - 273.15, 79.4, 0.05);
    let (_, near, near_rule) = h.probe("tj_near").unwrap().clone();
    let (_, _, over_rule) = h.probe("tj_over").unwrap().clone();
    assert_eq!(near_rule.when, WarnWhen::MinBelow(10.0));
    assert_eq!(over_rule.when, WarnWhen::MinBelow(0.0));
    // The probed value is the margin tj_max − tj, a difference in kelvin.
    assert!(!near.abs);
    assert_close(near.x.value(), 125.0 - (50.0 + 1.308 * theta), 1e-9);
}

#[test]
fn the_language_reference_example_worst_case() {
    // The 5 V rail of the language reference: vin 10.8 V .. 13.2 V, iload 180 mA ± 20 %,
    // iq 4 mA, dropout 2 V, ta 50 °C, θ = 6 + 0.4 + (22 ∥ 60) K/W, tj_max 125 °C: tj is
    // 69.8 °C to 91.0 °C worst case (figures stated there). Both values are monotone here,
    // so one box pass gives the exact range.
    let mut h = Host::new();
    h.pass = Pass::Box;
    let u1 = call(
        &mut h,
        "reg.linear",
        &[
            ("vin", range(10.8, 13.2, Dim::VOLTAGE, false)),
            ("vout", volts(5.0)),
            ("iout", range(0.144, 0.216, Dim::CURRENT, false)),
            ("iq", amps(4e-3)),
            ("dropout", volts(2.0)),
        ],
    )
    .unwrap();
    let loss = field(&u1, "loss");
    let theta = 6.0 + 0.4 + 1.0 / (1.0 / 22.0 + 1.0 / 60.0);
    let tj = num(&call(
        &mut h,
        "heat.junction",
        &[
            ("power", range(loss.v.lo, loss.v.hi, Dim::POWER, false)),
            ("ambient", celsius(50.0)),
            ("theta", k_per_w(theta)),
            ("tj_max", celsius(125.0)),
        ],
    )
    .unwrap());
    assert_close(tj.v.lo - 273.15, 69.8, 0.05);
    assert_close(tj.v.hi - 273.15, 91.0, 0.05);
    // The headroom stays positive (10.8 − 5 − 2 = 3.8 V): no dropout warning.
    assert_close(h.probe("headroom").unwrap().1.x.v.lo, 3.8, 1e-12);
}

#[test]
fn junction_rejects_a_difference_as_ambient_and_non_positive_theta() {
    let mut h = Host::new();
    let e = call(
        &mut h,
        "heat.junction",
        &[
            ("power", watts(1.0)),
            ("ambient", q(25.0, Dim::TEMPERATURE)),
            ("theta", k_per_w(10.0)),
        ],
    )
    .unwrap_err();
    assert_eq!(e.param, Some(1));
    let e = call(
        &mut h,
        "heat.junction",
        &[
            ("power", watts(1.0)),
            ("ambient", celsius(25.0)),
            ("theta", k_per_w(0.0)),
        ],
    )
    .unwrap_err();
    assert_eq!(e.param, Some(2));
}

#[test]
fn max_ambient_is_tj_max_less_the_rise() {
    // 125 °C − 2 W × 30 K/W = 65 °C.
    let t = num(&nominal(
        "heat.max_ambient",
        &[
            ("power", watts(2.0)),
            ("tj_max", celsius(125.0)),
            ("theta", k_per_w(30.0)),
        ],
    ));
    assert_close(t.value() - 273.15, 65.0, 1e-9);
    assert!(
        matches!(nominal("heat.max_ambient", &[("power", watts(2.0)), ("tj_max", celsius(125.0)), ("theta", k_per_w(30.0))]), Value::Num(n) if n.abs)
    );
}

fn foster(terms: &[(f64, f64)]) -> Value {
    Value::List(
        terms
            .iter()
            .map(|&(r, tau)| Value::List(vec![k_per_w(r), seconds(tau)].into()))
            .collect(),
    )
}

#[test]
fn pulse_on_a_foster_network() {
    // One term R = 1 K/W, τ = 1 s; 10 W for 1 s: 10 × (1 − e^−1) = 6.3212 K (by hand).
    let rise = |period: Option<f64>, base: f64| {
        let mut args = vec![
            ("power", watts(10.0)),
            ("duration", seconds(1.0)),
            ("network", foster(&[(1.0, 1.0)])),
            ("base", watts(base)),
        ];
        if let Some(t) = period {
            args.push(("period", seconds(t)));
        }
        num(&nominal("heat.pulse", &args)).value()
    };
    assert_close(rise(None, 0.0), 6.321_205_588, 1e-8);
    // Every 2 s: 6.3212 / (1 − e^−2) = 7.3106 K.
    assert_close(rise(Some(2.0), 0.0), 6.321_205_588 / 0.864_664_717, 1e-7);
    // Period = duration is a steady load: P·ΣR.
    assert_close(rise(Some(1.0), 0.0), 10.0, 1e-9);
    // A steady 1 W under the pulses adds 1 W × ΣR.
    assert_close(rise(None, 1.0), 7.321_205_588, 1e-8);
    // Two terms add: 5 W for 10 ms on [[0.5 K/W, 1 ms], [2 K/W, 100 ms]]:
    // 5 × (0.5 (1 − e^−10) + 2 (1 − e^−0.1)) = 5 × (0.499977 + 0.190325) = 3.45151 K.
    let r = num(&nominal(
        "heat.pulse",
        &[
            ("power", watts(5.0)),
            ("duration", seconds(0.01)),
            ("network", foster(&[(0.5, 0.001), (2.0, 0.1)])),
        ],
    ));
    assert_close(r.value(), 3.451_51, 1e-4);
    assert!(
        matches!(nominal("heat.pulse", &[("power", watts(5.0)), ("duration", seconds(0.01)), ("network", foster(&[(0.5, 0.001)]))]), Value::Num(n) if !n.abs && n.dim == Dim::TEMPERATURE)
    );
}

#[test]
fn pulse_rejects_malformed_networks_and_short_periods() {
    let mut h = Host::new();
    let bad = Value::List(vec![Value::List(vec![k_per_w(1.0)].into())].into());
    let e = call(
        &mut h,
        "heat.pulse",
        &[
            ("power", watts(1.0)),
            ("duration", seconds(1.0)),
            ("network", bad),
        ],
    )
    .unwrap_err();
    assert_eq!(e.param, Some(2));
    let e = call(
        &mut h,
        "heat.pulse",
        &[
            ("power", watts(1.0)),
            ("duration", seconds(1.0)),
            ("network", foster(&[(1.0, 1.0)])),
            ("period", seconds(0.5)),
        ],
    )
    .unwrap_err();
    assert_eq!(e.param, Some(3));
}

// ---------------------------------------------------------------------------------------
// res.led

#[test]
fn led_resistor_carries_supply_minus_vf() {
    // Common practice, no source: a series resistor carries the supply minus the LED's
    // forward voltage; 1.5 V across 220 Ω is about 6.8 mA.
    let mut h = Host::new();
    let r = call(
        &mut h,
        "res.led",
        &[
            ("supply", volts(3.5)),
            ("vf", volts(2.0)),
            ("current", amps(6.9e-3)),
        ],
    )
    .unwrap();
    // 1.5 V / 6.9 mA = 217.4 Ω → the next E24 value up is 220 Ω.
    assert_eq!(field(&r, "r").value(), 220.0);
    assert_close(field(&r, "current").value(), 6.8e-3, 0.05e-3);
    assert_close(field(&r, "power").value(), 1.5 * 1.5 / 220.0, 1e-12);
    // Twice the worst-case power, 2 × 2.25 / (220 × 0.95) = 21.5 mW → 1/20 W.
    assert_eq!(field(&r, "rating").value(), 0.05);
    assert!(h.warnings.is_empty(), "{:?}", h.warnings);
}

#[test]
fn led_rating_follows_twice_the_power_after_derating() {
    // 12 V, 2 V, 20 mA: 10 V / 20 mA = 500 Ω → 510 Ω (E24). Worst power with a 5 % low
    // resistor: 100 / 484.5 = 206.4 mW; twice that is 413 mW → 1/2 W at 25 °C. At 100 °C
    // the derated share is (155 − 100) / 85 = 0.647, so 638 mW is needed → 1 W.
    // (Ratings and the rule of twice the dissipation: common practice, no source.)
    let run = |ambient: f64| {
        nominal(
            "res.led",
            &[
                ("supply", volts(12.0)),
                ("vf", volts(2.0)),
                ("current", amps(0.02)),
                ("ambient", celsius(ambient)),
            ],
        )
    };
    let cool = run(25.0);
    assert_eq!(field(&cool, "r").value(), 510.0);
    assert_eq!(field(&cool, "rating").value(), 0.5);
    assert_eq!(field(&run(100.0), "rating").value(), 1.0);
}

#[test]
fn led_worst_rule_keeps_the_worst_current_under_the_target() {
    // supply 5 V ± 5 %, vf 1.9 V .. 2.1 V, 10 mA, 5 % resistors. Nominal rule: 3 V / 10 mA =
    // 300 Ω (E24 has 3.0). Worst rule: (5.25 − 1.9) V / (10 mA × 0.95) = 352.6 Ω → 360 Ω.
    let args = |supply: Value, vf: Value, rule: &str| {
        vec![
            ("supply", supply),
            ("vf", vf),
            ("current", amps(0.01)),
            ("rule", text(rule)),
        ]
    };
    let mut h = Host::new();
    h.ranges.insert(0, Interval::new(4.75, 5.25));
    h.ranges.insert(1, Interval::new(1.9, 2.1));
    let r = call(&mut h, "res.led", &args(volts(5.0), volts(2.0), "worst")).unwrap();
    assert_eq!(field(&r, "r").value(), 360.0);
    h.pass = Pass::Box;
    let r = call(
        &mut h,
        "res.led",
        &args(
            range(4.75, 5.25, Dim::VOLTAGE, false),
            range(1.9, 2.1, Dim::VOLTAGE, false),
            "worst",
        ),
    )
    .unwrap();
    assert!(field(&r, "current").v.hi <= 0.01);
    assert_close(field(&r, "current").v.hi, 3.35 / (360.0 * 0.95), 1e-12);

    let mut h = Host::new();
    let r = call(&mut h, "res.led", &args(volts(5.0), volts(2.0), "nominal")).unwrap();
    assert_eq!(field(&r, "r").value(), 300.0);
}

#[test]
fn led_warns_when_little_voltage_is_left() {
    // 3.3 V for a 2.9 V LED leaves 0.4 V: a 0.1 V shift of vf moves the current by 25 %.
    let mut h = Host::new();
    call(
        &mut h,
        "res.led",
        &[
            ("supply", volts(3.3)),
            ("vf", volts(2.9)),
            ("current", amps(0.005)),
        ],
    )
    .unwrap();
    assert_eq!(h.warnings.len(), 1);
    assert!(h.warnings[0].contains("25"), "{}", h.warnings[0]);
    // Only the nominal pass words unconditional warnings.
    h.pass = Pass::High;
    call(
        &mut h,
        "res.led",
        &[
            ("supply", volts(3.3)),
            ("vf", volts(2.9)),
            ("current", amps(0.005)),
        ],
    )
    .unwrap();
    assert_eq!(h.warnings.len(), 1);
}

#[test]
fn led_probes_the_load_of_its_resistor() {
    let mut h = Host::new();
    call(
        &mut h,
        "res.led",
        &[
            ("supply", volts(12.0)),
            ("vf", volts(2.0)),
            ("current", amps(0.02)),
        ],
    )
    .unwrap();
    let (_, load, rule) = h.probe("load_half").unwrap().clone();
    assert_eq!(rule.when, WarnWhen::MaxAbove(0.5));
    // 10 V² / 510 Ω on a 1/2 W rating at 25 °C (no derating): 0.392.
    assert_close(load.x.value(), 100.0 / 510.0 / 0.5, 1e-12);
    assert_eq!(
        h.probe("load_over").unwrap().2.when,
        WarnWhen::MaxAbove(1.0)
    );
}

#[test]
fn led_rejects_a_supply_below_the_string() {
    let mut h = Host::new();
    let e = call(
        &mut h,
        "res.led",
        &[
            ("supply", volts(5.0)),
            ("vf", volts(3.0)),
            ("current", amps(0.01)),
            ("count", plain(2.0)),
        ],
    )
    .unwrap_err();
    assert_eq!(e.param, Some(0));
    let e = call(
        &mut h,
        "res.led",
        &[
            ("supply", volts(5.0)),
            ("vf", volts(2.0)),
            ("current", amps(0.01)),
            ("count", plain(1.5)),
        ],
    )
    .unwrap_err();
    assert_eq!(e.param, Some(3));
}

// ---------------------------------------------------------------------------------------
// res.divider against a brute-force search over the whole series

/// Every preferred value of `series` from 1 Ω to 100 MΩ, built from the IEC 60063 tables
/// above (independently of the library's own table).
fn all_values(printed: &[u32], scale: f64) -> Vec<f64> {
    let mut v = Vec::new();
    for decade in 0..9 {
        for &m in printed {
            v.push(f64::from(m) / scale * 10f64.powi(decade));
        }
    }
    v
}

/// The best pair by the documented rule, by trying every pair of values.
fn brute_force(
    values: &[f64],
    output_ref: bool,
    vout: f64,
    vref: f64,
    target: f64,
    iadj: f64,
) -> (f64, f64) {
    let mut best: Option<(f64, f64, f64, f64)> = None;
    for &top in values {
        for &bottom in values {
            let (made, current) = if output_ref {
                (vref * (1.0 + bottom / top) + iadj * bottom, vref / top)
            } else {
                (vref * (1.0 + top / bottom), vref / bottom)
            };
            let (lo, hi) = if output_ref {
                (target, 2.0 * target)
            } else {
                (target / 2.0, 2.0 * target)
            };
            if current < lo * (1.0 - 1e-9) || current > hi * (1.0 + 1e-9) {
                continue;
            }
            let err = (made / vout - 1.0).abs();
            let off = (current / target).ln().abs();
            let better = match best {
                None => true,
                Some((_, _, e, o)) => err < e - 1e-9 || ((err - e).abs() <= 1e-9 && off < o),
            };
            if better {
                best = Some((top, bottom, err, off));
            }
        }
    }
    let (t, b, _, _) = best.expect("a pair");
    (t, b)
}

fn divider(args: &[(&str, Value)]) -> (f64, f64, Value) {
    let r = nominal("res.divider", args);
    (field(&r, "r_top").value(), field(&r, "r_bottom").value(), r)
}

#[track_caller]
fn assert_same_pair(got: (f64, f64), want: (f64, f64)) {
    assert!(
        close(got.0, want.0, want.0 * 1e-9) && close(got.1, want.1, want.1 * 1e-9),
        "library picked {got:?}, brute force {want:?}"
    );
}

#[test]
fn divider_matches_brute_force_ground_reference() {
    let e96 = all_values(&IEC_E96, 100.0);
    let e24 = all_values(&IEC_E24, 10.0);
    for (vout, vref, values, name) in [
        (3.3, 0.8, &e96, "E96"),
        (1.8, 0.6, &e24, "E24"),
        (5.0, 1.221, &e96, "E96"),
        (12.0, 0.765, &e24, "E24"),
    ] {
        let (t, b, r) = divider(&[
            ("vout", volts(vout)),
            ("vref", volts(vref)),
            ("series", series_value(name)),
        ]);
        assert_same_pair((t, b), brute_force(values, false, vout, vref, 50e-6, 0.0));
        // The record's own fields agree with the divider equation.
        assert_close(field(&r, "vout").value(), vref * (1.0 + t / b), 1e-12);
        assert_close(
            field(&r, "error").value(),
            vref * (1.0 + t / b) / vout - 1.0,
            1e-12,
        );
        assert_close(field(&r, "current").value(), vref / b, 1e-15);
    }
}

#[test]
fn divider_matches_brute_force_output_reference() {
    let e96 = all_values(&IEC_E96, 100.0);
    let e24 = all_values(&IEC_E24, 10.0);
    for (vout, iadj, values, name) in [
        (5.0, 50e-6, &e96, "E96"),
        (12.0, 0.0, &e24, "E24"),
        (3.3, 100e-6, &e24, "E24"),
    ] {
        let (t, b, r) = divider(&[
            ("vout", volts(vout)),
            ("vref", volts(1.25)),
            ("reference", text("output")),
            ("series", series_value(name)),
            ("iadj", amps(iadj)),
        ]);
        assert_same_pair((t, b), brute_force(values, true, vout, 1.25, 5e-3, iadj));
        assert_close(
            field(&r, "vout").value(),
            1.25 * (1.0 + b / t) + iadj * b,
            1e-12,
        );
        assert!(field(&r, "current").value() >= 5e-3 * (1.0 - 1e-9));
    }
}

#[test]
fn divider_with_a_current_target_and_tolerances() {
    // 3.3 V from 0.8 V at 100 µA: the brute force decides the pair; then the box pass carries
    // 1 % resistors and vref ± 1 %.
    let e96 = all_values(&IEC_E96, 100.0);
    let want = brute_force(&e96, false, 3.3, 0.8, 100e-6, 0.0);
    let mut h = Host::new();
    let args = |vref: Value| {
        vec![
            ("vout", volts(3.3)),
            ("vref", vref),
            ("current", amps(100e-6)),
        ]
    };
    let r = call(&mut h, "res.divider", &args(volts(0.8))).unwrap();
    assert_same_pair(
        (field(&r, "r_top").value(), field(&r, "r_bottom").value()),
        want,
    );
    h.pass = Pass::Box;
    let r = call(
        &mut h,
        "res.divider",
        &args(range(0.792, 0.808, Dim::VOLTAGE, false)),
    )
    .unwrap();
    let (t, b) = want;
    // vout's extremes: vref high, r_top high, r_bottom low (and the reverse).
    let hi = 0.808 * (1.0 + t * 1.01 / (b * 0.99));
    let lo = 0.792 * (1.0 + t * 0.99 / (b * 1.01));
    assert_close(field(&r, "vout").v.hi, hi, 1e-12);
    assert_close(field(&r, "vout").v.lo, lo, 1e-12);
}

#[test]
fn divider_rejects_vout_at_or_below_vref() {
    let mut h = Host::new();
    let e = call(
        &mut h,
        "res.divider",
        &[("vout", volts(0.8)), ("vref", volts(0.8))],
    )
    .unwrap_err();
    assert_eq!(e.param, Some(0));
    let e = call(
        &mut h,
        "res.divider",
        &[
            ("vout", volts(3.3)),
            ("vref", volts(0.8)),
            ("iadj", amps(1e-6)),
        ],
    )
    .unwrap_err();
    assert_eq!(e.param, Some(6));
}

// ---------------------------------------------------------------------------------------
// res.derate and power.battery_hours

fn derated(rating: f64, t: f64) -> f64 {
    num(&nominal(
        "res.derate",
        &[("rating", watts(rating)), ("temperature", celsius(t))],
    ))
    .value()
}

#[test]
fn derating_curve_end_points() {
    // The linear curve: full rating at the knee (70 °C), zero at 155 °C, half halfway
    // (112.5 °C); flat below the knee (common practice, no source).
    assert_close(derated(0.25, 70.0), 0.25, 1e-12);
    assert_close(derated(0.25, 155.0), 0.0, 1e-12);
    assert_close(derated(0.25, 112.5), 0.125, 1e-12);
    assert_close(derated(0.25, 25.0), 0.25, 1e-12);
    assert_close(derated(0.25, 170.0), 0.0, 1e-12);
    // Another curve: knee 125 °C, zero 175 °C, at 150 °C: half.
    let p = num(&nominal(
        "res.derate",
        &[
            ("rating", watts(1.0)),
            ("temperature", celsius(150.0)),
            ("knee", celsius(125.0)),
            ("zero", celsius(175.0)),
        ],
    ));
    assert_close(p.value(), 0.5, 1e-12);
}

fn hours(capacity_ah: f64, current: f64, k: f64, rated_h: f64) -> f64 {
    num(&nominal(
        "power.battery_hours",
        &[
            ("capacity", q(capacity_ah * 3600.0, Dim::CHARGE)),
            ("current", amps(current)),
            ("peukert", plain(k)),
            ("rated_hours", seconds(rated_h * 3600.0)),
        ],
    ))
    .value()
        / 3600.0
}

#[test]
fn peukert_law_in_its_published_form() {
    // Peukert (1897), t = H (C / (I H))^k. With k = 1 it is C / I: 2 Ah at 0.5 A is 4 h.
    assert_close(hours(2.0, 0.5, 1.0, 20.0), 4.0, 1e-9);
    // k = 1.2, 100 Ah rated at 20 h, 10 A: 20 × 0.5^1.2 = 20 × 0.435275 = 8.7055 h.
    assert_close(hours(100.0, 10.0, 1.2, 20.0), 8.7055, 1e-4);
    // At the rated current C / H the run time is H whatever k is.
    assert_close(hours(100.0, 5.0, 1.3, 20.0), 20.0, 1e-9);
    // Defaults: k = 1, H = 20 h.
    let t = num(&nominal(
        "power.battery_hours",
        &[
            ("capacity", q(7.2 * 3600.0, Dim::CHARGE)),
            ("current", amps(0.36)),
        ],
    ));
    assert_close(t.value() / 3600.0, 20.0, 1e-9);
}

#[test]
fn peukert_rejects_an_energy_and_an_exponent_below_one() {
    let mut h = Host::new();
    let e = call(
        &mut h,
        "power.battery_hours",
        &[("capacity", q(10.0, Dim::ENERGY)), ("current", amps(1.0))],
    )
    .unwrap_err();
    assert_eq!(e.param, Some(0));
    let e = call(
        &mut h,
        "power.battery_hours",
        &[
            ("capacity", q(3600.0, Dim::CHARGE)),
            ("current", amps(1.0)),
            ("peukert", plain(0.9)),
        ],
    )
    .unwrap_err();
    assert_eq!(e.param, Some(2));
}

// ---------------------------------------------------------------------------------------
// The library as data

#[test]
fn every_builtin_is_listed_with_full_documentation() {
    let paths: Vec<&str> = builtins::all().iter().map(|b| b.path).collect();
    assert_eq!(
        paths,
        [
            "reg.linear",
            "reg.switching",
            "heat.junction",
            "heat.sink_for",
            "heat.max_power",
            "heat.max_ambient",
            "heat.pulse",
            "res.pick",
            "res.led",
            "res.divider",
            "res.derate",
            "power.battery_hours"
        ]
    );
    assert_eq!(builtins::namespaces(), ["heat", "power", "reg", "res"]);
    for b in builtins::all() {
        let d = &b.doc;
        assert!(
            d.signature.starts_with(&format!("{}(", b.path)),
            "{}",
            b.path
        );
        assert!(
            !d.summary.is_empty()
                && !d.formula.is_empty()
                && !d.source.is_empty()
                && !d.caveats.is_empty()
        );
        assert!(!d.fields.is_empty(), "{}", b.path);
        let names: Vec<&str> = b.params.iter().map(|p| p.name).collect();
        let documented: Vec<&str> = d.arguments.iter().map(|a| a.name).collect();
        assert_eq!(names, documented, "{}", b.path);
        for p in b.params {
            assert!(
                d.signature.contains(p.name),
                "{} signature lacks {}",
                b.path,
                p.name
            );
        }
    }
    // The record fields the language reference names.
    let fields = |path: &str| -> Vec<&str> {
        builtins::lookup(path)
            .unwrap()
            .doc
            .fields
            .iter()
            .map(|f| f.name)
            .collect()
    };
    assert_eq!(
        fields("reg.linear"),
        ["pin", "pout", "loss", "efficiency", "iin", "headroom"]
    );
    assert_eq!(fields("reg.switching"), ["pin", "pout", "loss", "iin"]);
    assert_eq!(fields("res.led"), ["r", "current", "power", "rating"]);
    assert_eq!(
        fields("res.divider"),
        ["r_top", "r_bottom", "vout", "error", "current"]
    );
    assert!(builtins::lookup("heat.sink_for")
        .unwrap()
        .leads_with_minimum());
    assert!(!builtins::lookup("heat.junction")
        .unwrap()
        .leads_with_minimum());
    // The θ chain's definitions and the cautions are stated.
    assert!(builtins::lookup("heat.junction")
        .unwrap()
        .doc
        .source
        .contains("JESD51"));
    assert!(builtins::lookup("heat.junction")
        .unwrap()
        .doc
        .caveats
        .contains("60 °C"));
    assert!(builtins::lookup("power.battery_hours")
        .unwrap()
        .doc
        .source
        .contains("Peukert (1897)"));
}

#[test]
fn record_fields_match_the_documentation() {
    let r = nominal(
        "reg.switching",
        &[
            ("vin", volts(12.0)),
            ("vout", volts(3.3)),
            ("iout", amps(1.0)),
            ("efficiency", plain(0.9)),
        ],
    );
    let Value::Record(rec) = r else { panic!() };
    let names: Vec<&str> = rec.fields.iter().map(|f| f.name).collect();
    assert_eq!(names, ["pin", "pout", "loss", "iin"]);
}

// ---------------------------------------------------------------------------------------
// Monotone where physics says so: derivative signs from box passes, and point comparisons.

fn linear_loss(vin: Value, iout: Value) -> Dual {
    let mut h = Host::new();
    h.pass = Pass::Box;
    let r = call(
        &mut h,
        "reg.linear",
        &[
            ("vin", vin),
            ("vout", volts(3.3)),
            ("iout", iout),
            ("iq", amps(2e-3)),
            ("dropout", volts(0.3)),
        ],
    )
    .unwrap();
    field(&r, "loss")
}

proptest! {
    // Failures are reported with their minimal input; no regression files in the tree.
    #![proptest_config(ProptestConfig { failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn more_load_more_linear_loss(vin in 4.0f64..15.0, i0 in 0.0f64..1.0, w in 0.001f64..0.5) {
        // d(loss)/d(iout) = vin − vo ≥ 0 over the whole box.
        let d = linear_loss(volts(vin), range(i0, i0 + w, Dim::CURRENT, true)).d;
        prop_assert!(d.lo >= 0.0, "{d:?}");
        let a = linear_loss(volts(vin), amps(i0)).value();
        let b = linear_loss(volts(vin), amps(i0 + w)).value();
        prop_assert!(b >= a);
    }

    #[test]
    fn higher_input_more_linear_loss(v0 in 3.0f64..15.0, w in 0.01f64..3.0, i in 0.001f64..1.0) {
        let d = linear_loss(range(v0, v0 + w, Dim::VOLTAGE, true), amps(i)).d;
        prop_assert!(d.lo >= 0.0, "{d:?}");
    }

    #[test]
    fn box_bounds_enclose_sampled_points(v0 in 3.5f64..15.0, w in 0.01f64..3.0, i0 in 0.0f64..1.0, iw in 0.001f64..0.5, s in 0.0f64..1.0, t in 0.0f64..1.0) {
        let boxed = linear_loss(range(v0, v0 + w, Dim::VOLTAGE, false), range(i0, i0 + iw, Dim::CURRENT, false)).v;
        let point = linear_loss(volts(v0 + s * w), amps(i0 + t * iw)).value();
        prop_assert!(boxed.lo <= point + 1e-12 && point <= boxed.hi + 1e-12);
    }

    #[test]
    fn more_load_more_switching_loss_and_higher_efficiency_less(i0 in 0.0f64..5.0, w in 0.001f64..1.0, e0 in 0.5f64..0.95, ew in 0.001f64..0.05) {
        let run = |iout: Value, eta: Value| {
            let mut h = Host::new();
            h.pass = Pass::Box;
            let r = call(&mut h, "reg.switching", &[("vin", volts(12.0)), ("vout", volts(5.0)), ("iout", iout), ("efficiency", eta)]).unwrap();
            field(&r, "loss")
        };
        prop_assert!(run(range(i0, i0 + w, Dim::CURRENT, true), plain(e0)).d.lo >= 0.0);
        let d = run(amps(i0 + 0.01), range(e0, e0 + ew, Dim::NONE, true)).d;
        prop_assert!(d.hi < 0.0, "{d:?}");
    }

    #[test]
    fn higher_ambient_higher_junction(t0 in -40.0f64..100.0, w in 0.1f64..30.0, p in 0.0f64..20.0, theta in 0.1f64..100.0) {
        let mut h = Host::new();
        h.pass = Pass::Box;
        let tj = num(&call(&mut h, "heat.junction", &[("power", watts(p)), ("ambient", celsius_range(t0, t0 + w, true)), ("theta", k_per_w(theta))]).unwrap());
        prop_assert!(tj.d.lo > 0.0);
        let at = |t: f64| num(&nominal("heat.junction", &[("power", watts(p)), ("ambient", celsius(t)), ("theta", k_per_w(theta))])).value();
        prop_assert!(at(t0 + w) > at(t0));
    }

    #[test]
    fn more_power_hotter_junction_and_smaller_sink(p0 in 0.1f64..20.0, w in 0.01f64..5.0) {
        let mut h = Host::new();
        h.pass = Pass::Box;
        let tj = num(&call(&mut h, "heat.junction", &[("power", range(p0, p0 + w, Dim::POWER, true)), ("ambient", celsius(40.0)), ("theta", k_per_w(5.0))]).unwrap());
        prop_assert!(tj.d.lo > 0.0);
        let sa = num(&call(&mut h, "heat.sink_for", &[("power", range(p0, p0 + w, Dim::POWER, true)), ("ambient", celsius(40.0)), ("tj_max", celsius(125.0)), ("jc", k_per_w(1.0)), ("cs", k_per_w(0.5))]).unwrap());
        prop_assert!(sa.d.hi < 0.0);
    }

    #[test]
    fn longer_pulses_heat_more_and_longer_periods_less(t0 in 1e-4f64..1.0, w in 1e-5f64..0.1, gap in 0.01f64..10.0) {
        let run = |duration: Value, period: Value| {
            let mut h = Host::new();
            h.pass = Pass::Box;
            num(&call(&mut h, "heat.pulse", &[("power", watts(10.0)), ("duration", duration), ("network", foster(&[(0.3, 0.002), (1.2, 0.05)])), ("period", period)]).unwrap())
        };
        prop_assert!(run(range(t0, t0 + w, Dim::TIME, true), seconds(t0 + w + gap)).d.lo > 0.0);
        prop_assert!(run(seconds(t0), range(t0 + gap, t0 + 2.0 * gap, Dim::TIME, true)).d.hi < 0.0);
    }

    #[test]
    fn hotter_resistors_may_dissipate_less(t0 in 0.0f64..200.0, w in 0.1f64..30.0) {
        let mut h = Host::new();
        h.pass = Pass::Box;
        let p = num(&call(&mut h, "res.derate", &[("rating", watts(0.25)), ("temperature", celsius_range(t0, t0 + w, true))]).unwrap());
        prop_assert!(p.d.hi <= 0.0);
        prop_assert!(derated(0.25, t0 + w) <= derated(0.25, t0));
    }

    #[test]
    fn more_current_shorter_run_time(i0 in 0.01f64..10.0, w in 0.001f64..1.0, k in 1.0f64..1.5) {
        let mut h = Host::new();
        h.pass = Pass::Box;
        let t = num(&call(&mut h, "power.battery_hours", &[("capacity", q(50.0 * 3600.0, Dim::CHARGE)), ("current", range(i0, i0 + w, Dim::CURRENT, true)), ("peukert", plain(k))]).unwrap());
        prop_assert!(t.d.hi < 0.0);
    }

    #[test]
    fn pick_brackets_the_value(x in 0.5f64..10e6) {
        for name in ["E6", "E24", "E96", "E192"] {
            let up = pick(x, name, "up");
            let down = pick(x, name, "down");
            let near = pick(x, name, "nearest");
            prop_assert!(down <= x * (1.0 + 1e-9) && up >= x * (1.0 - 1e-9));
            prop_assert!(near == up || near == down);
            // Neighbours in a series are at most two nominal steps apart (the printed
            // values round the geometric steps, e.g. E192's 1.02 → 1.04).
            let n = series::by_name(name).unwrap().values.len() as f64;
            prop_assert!(up / down <= 10f64.powf(2.0 / n) * (1.0 + 1e-9), "{name}: {down} .. {up}");
        }
    }
}

/// The evaluator gathers a call's arguments on the stack, room for `MAX_PARAMS` of them.
#[test]
fn every_builtin_has_room_for_its_parameters() {
    for b in builtins::all() {
        assert!(
            b.params.len() <= builtins::MAX_PARAMS,
            "{} has {} parameters",
            b.path,
            b.params.len()
        );
    }
}
