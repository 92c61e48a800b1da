//! The results data (`application/vnd.headroom.results+json`, `headroom run --json`), version 1.
//!
//! Numbers are in the coherent SI unit named by `unit`; absolute temperatures in kelvin with
//! `absolute: true`. A value shown as text (a list, a word) has only `name`, `text`, `given`
//! and `note`. A sweep also says whether its swept points are absolute temperatures.

use serde_json::{json, Map, Value};
use std::collections::BTreeSet;
use worksheet_lang::results::{CellReport, CheckRow, Shown, SweepTable, ValueRow, WarningRow};
use worksheet_lang::units::Dim;

/// Most points a sweep's data holds.
pub(super) const MAX_SWEEP_POINTS: usize = 1000;

pub(super) fn results(reports: &[&CellReport]) -> Value {
    document(
        reports.iter().flat_map(|r| &r.values),
        reports.iter().flat_map(|r| &r.checks),
        reports.iter().flat_map(|r| &r.warnings),
        reports.iter().flat_map(|r| &r.sweeps),
    )
}

pub(super) fn results_of(
    values: &[ValueRow],
    checks: &[CheckRow],
    warnings: &[WarningRow],
    sweeps: &[SweepTable],
) -> Value {
    document(values, checks, warnings, sweeps)
}

/// The results document of rows read in place (no copy of the reports).
fn document<'a>(
    values: impl IntoIterator<Item = &'a ValueRow>,
    checks: impl IntoIterator<Item = &'a CheckRow>,
    warnings: impl IntoIterator<Item = &'a WarningRow>,
    sweeps: impl IntoIterator<Item = &'a SweepTable>,
) -> Value {
    object([
        ("version", json!(1)),
        ("values", values.into_iter().map(value).collect()),
        ("checks", checks.into_iter().map(check).collect()),
        (
            "warnings",
            warnings
                .into_iter()
                .map(|w| {
                    object([
                        ("source", Value::String(w.source.clone())),
                        ("text", Value::String(w.text.clone())),
                    ])
                })
                .collect(),
        ),
        ("sweeps", sweeps.into_iter().map(sweep).collect()),
    ])
}

/// A JSON object of built values, moved in. (`json!` would serialize each one again: a deep
/// copy of every array and object it is given.)
fn object<const N: usize>(pairs: [(&str, Value); N]) -> Value {
    let mut m = Map::with_capacity(N);
    for (k, v) in pairs {
        m.insert(k.to_string(), v);
    }
    Value::Object(m)
}

/// A JSON number. The language turns every NaN or infinity into a domain error before it
/// reaches a result, so a non-finite number here is a bug upstream; JSON cannot carry one.
fn num(x: f64) -> Value {
    debug_assert!(x.is_finite(), "non-finite number {x} in results data");
    serde_json::Number::from_f64(x).map_or(Value::Null, Value::Number)
}

fn nums(xs: &[f64]) -> Value {
    Value::Array(xs.iter().copied().map(num).collect())
}

/// Most keys a value row has: name, si, unit, absolute, text, min, max, conservative,
/// given, note. (With `preserve_order` a map grows by rehashing; sized once, it does not.)
const VALUE_KEYS: usize = 10;

fn value(v: &ValueRow) -> Value {
    let mut m = Map::with_capacity(VALUE_KEYS);
    m.insert("name".into(), json!(v.name));
    if let Shown::Number { value, bounds } = &v.shown {
        m.insert("si".into(), num(value.si));
        m.insert("unit".into(), json!(unit_symbol(value.dim)));
        m.insert("absolute".into(), json!(value.absolute));
        m.insert("text".into(), json!(v.text()));
        if let Some(b) = bounds {
            m.insert("min".into(), num(b.min));
            m.insert("max".into(), num(b.max));
        }
        m.insert(
            "conservative".into(),
            json!(bounds.as_ref().is_some_and(|b| b.conservative)),
        );
    } else {
        m.insert("text".into(), json!(v.text()));
    }
    m.insert("given".into(), json!(v.given));
    m.insert("note".into(), json!(v.note));
    Value::Object(m)
}

fn check(c: &CheckRow) -> Value {
    object([
        ("text", Value::String(c.text.clone())),
        ("passed", Value::Bool(c.passed)),
        ("worst", num(c.worst)),
        ("limit", num(c.limit)),
        ("absolute", Value::Bool(c.absolute())),
        ("margin", num(c.margin)),
        ("unit", Value::String(unit_symbol(c.dim))),
    ])
}

fn sweep(s: &SweepTable) -> Value {
    let keep = decimate(s);
    let pick =
        |xs: &[f64]| -> Vec<f64> { keep.iter().filter_map(|&i| xs.get(i).copied()).collect() };
    let series: Vec<Value> = s
        .series
        .iter()
        .map(|se| {
            let mut m = Map::new();
            m.insert("name".into(), json!(se.name));
            m.insert("unit".into(), json!(unit_symbol(se.dim)));
            m.insert("absolute".into(), json!(se.absolute));
            m.insert("nominal".into(), nums(&pick(&se.nominal)));
            if let Some(min) = &se.min {
                m.insert("min".into(), nums(&pick(min)));
            }
            if let Some(max) = &se.max {
                m.insert("max".into(), nums(&pick(max)));
            }
            Value::Object(m)
        })
        .collect();
    object([
        ("over", json!(s.over)),
        ("unit", json!(unit_symbol(s.dim))),
        ("absolute", json!(s.absolute)),
        ("points", nums(&pick(&s.points))),
        ("series", Value::Array(series)),
    ])
}

/// Indices of the sweep points the data keeps: all of them up to `MAX_SWEEP_POINTS`, else
/// the first, the last and every series' extremes, filled up with evenly spaced points.
pub(super) fn decimate(s: &SweepTable) -> Vec<usize> {
    let n = s.points.len();
    if n <= MAX_SWEEP_POINTS {
        return (0..n).collect();
    }
    let mut extremes = BTreeSet::from([0, n - 1]);
    let arrays = s.series.iter().flat_map(|se| {
        std::iter::once(&se.nominal)
            .chain(se.min.as_ref())
            .chain(se.max.as_ref())
    });
    for xs in arrays {
        let by = |better: fn(f64, f64) -> bool| {
            xs.iter()
                .take(n)
                .enumerate()
                .fold(None::<(usize, f64)>, |best, (i, &x)| match best {
                    Some((_, b)) if !better(x, b) => best,
                    _ => Some((i, x)),
                })
                .map(|(i, _)| i)
        };
        extremes.extend(by(|x, b| x < b));
        extremes.extend(by(|x, b| x > b));
    }
    if extremes.len() >= MAX_SWEEP_POINTS {
        return extremes.into_iter().take(MAX_SWEEP_POINTS).collect();
    }
    // Evenly spaced points including the first and last (already among the extremes), so the
    // union holds at most MAX_SWEEP_POINTS. With n > MAX_SWEEP_POINTS the steps are ≥ 1.
    let even = MAX_SWEEP_POINTS - extremes.len() + 2;
    let mut keep = extremes;
    keep.extend((0..even).map(|k| k * (n - 1) / (even - 1)));
    keep.into_iter().collect()
}

/// The coherent SI unit of a dimension as written in the data: "V", "K/W", "1".
fn unit_symbol(dim: Dim) -> String {
    dim.symbol_text()
}
