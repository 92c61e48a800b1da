//! Rendering of hand-built reports. Expected texts and numbers are worked out by hand from the
//! inputs below, not taken from the renderer's output.

use super::json::{decimate, MAX_SWEEP_POINTS};
use super::*;
use serde_json::Value;
use worksheet_lang::diagnostic::{DiagKind, Diagnostic};
use worksheet_lang::results::{
    Bounds, CheckRow, Quantity, SweepSeries, SweepTable, ValueRow, WarningRow,
};

/// A number row; `text` is what it must display (the row makes its text from `si`).
fn number(name: &str, given: bool, si: f64, dim: Dim, absolute: bool, text: &str) -> ValueRow {
    let row = ValueRow {
        name: name.into(),
        given,
        note: String::new(),
        shown: Shown::Number {
            value: Quantity { si, dim, absolute },
            bounds: None,
        },
        unit: None,
        preferred: None,
        leads_with_minimum: false,
    };
    assert_eq!(row.text(), text, "the text of {name}");
    row
}

fn with_bounds(mut v: ValueRow, min: f64, max: f64, conservative: bool, range: &str) -> ValueRow {
    if let Shown::Number { bounds, .. } = &mut v.shown {
        *bounds = Some(Bounds {
            min,
            max,
            conservative,
            spread: None,
        });
    }
    assert_eq!(
        v.range_text().as_deref(),
        Some(range),
        "the range of {}",
        v.name
    );
    v
}

fn with_note(mut v: ValueRow, note: &str) -> ValueRow {
    v.note = note.into();
    v
}

#[allow(clippy::too_many_arguments)]
fn check_row(
    text: &str,
    passed: bool,
    worst: f64,
    limit: f64,
    absolute: bool,
    margin: f64,
    dim: Dim,
    texts: [&str; 3],
) -> CheckRow {
    let row = CheckRow {
        text: text.into(),
        note: String::new(),
        passed,
        worst,
        limit,
        margin,
        dim,
        conservative: false,
        worst_absolute: absolute,
        limit_absolute: absolute,
    };
    // The row makes its texts from its numbers: they must be the ones the test expects.
    let (worst_text, limit_text) = row.side_texts();
    assert_eq!(
        [worst_text, limit_text, row.margin_text()],
        texts,
        "the texts of {text}"
    );
    row
}

/// tj = 79.4 °C nominal, 69.8 °C … 91.0 °C worst case; 352.58 K, 342.91 K, 364.19 K.
fn tj() -> ValueRow {
    with_bounds(
        number("tj", false, 352.58, Dim::TEMPERATURE, true, "79.4 °C"),
        342.91,
        364.19,
        false,
        "69.8 °C … 91.0 °C",
    )
}

/// check tj <= 125 °C at its worst corner: 364.19 K against 398.15 K, margin 33.96 K.
fn tj_check() -> CheckRow {
    check_row(
        "tj <= 125 °C",
        true,
        364.19,
        398.15,
        true,
        33.96,
        Dim::TEMPERATURE,
        ["91.0 °C", "125 °C", "+34.0 K"],
    )
}

fn report(values: Vec<ValueRow>, checks: Vec<CheckRow>) -> CellReport {
    CellReport {
        cell: "c1".into(),
        values,
        checks,
        ..CellReport::default()
    }
}

fn keys(v: &Value) -> Vec<&str> {
    v.as_object()
        .expect("an object")
        .keys()
        .map(String::as_str)
        .collect()
}

fn assert_all_finite(v: &Value) {
    match v {
        Value::Number(n) => assert!(n.as_f64().is_some_and(f64::is_finite), "{n}"),
        Value::Null => panic!("null in results data"),
        Value::Array(a) => a.iter().for_each(assert_all_finite),
        Value::Object(o) => o.values().for_each(assert_all_finite),
        Value::Bool(_) | Value::String(_) => {}
    }
}

// ---- results JSON ----

#[test]
fn json_uncertain_absolute_temperature() {
    let data = results_json(&[&report(vec![tj()], vec![])]);
    let v = &data["values"][0];
    assert_eq!(
        keys(v),
        [
            "name",
            "si",
            "unit",
            "absolute",
            "text",
            "min",
            "max",
            "conservative",
            "given",
            "note"
        ]
    );
    assert_eq!(v["name"], "tj");
    assert_eq!(v["si"].as_f64(), Some(352.58));
    assert_eq!(v["unit"], "K");
    assert_eq!(v["absolute"], true);
    assert_eq!(v["text"], "79.4 °C");
    assert_eq!(v["min"].as_f64(), Some(342.91));
    assert_eq!(v["max"].as_f64(), Some(364.19));
    assert_eq!(v["conservative"], false);
    assert_eq!(v["given"], false);
    assert_eq!(v["note"], "");
}

#[test]
fn json_certain_value_has_no_bounds() {
    let vin = with_note(
        number("vin", true, 12.0, Dim::VOLTAGE, false, "12.0 V"),
        "bench supply",
    );
    let data = results_json(&[&report(vec![vin], vec![])]);
    let v = &data["values"][0];
    assert!(v.get("min").is_none() && v.get("max").is_none(), "{v}");
    assert_eq!(v["si"].as_f64(), Some(12.0));
    assert_eq!(v["unit"], "V");
    assert_eq!(v["absolute"], false);
    assert_eq!(v["conservative"], false);
    assert_eq!(v["given"], true);
    assert_eq!(v["note"], "bench supply");
}

#[test]
fn json_conservative_bounds_are_flagged() {
    let r = with_bounds(
        number("r", false, 1000.0, Dim::RESISTANCE, false, "1.00 kΩ"),
        900.0,
        1100.0,
        true,
        "900 Ω … 1.10 kΩ",
    );
    let data = results_json(&[&report(vec![r], vec![])]);
    assert_eq!(data["values"][0]["conservative"], true);
    assert_eq!(data["values"][0]["unit"], "Ω");
}

#[test]
fn json_text_value_has_no_number_fields() {
    let row = ValueRow {
        shown: Shown::Text("E24".into()),
        ..number("series", false, 0.0, Dim::NONE, false, "0")
    };
    let data = results_json(&[&report(vec![row], vec![])]);
    assert_eq!(keys(&data["values"][0]), ["name", "text", "given", "note"]);
}

#[test]
fn json_check_shape() {
    let data = results_json(&[&report(vec![], vec![tj_check()])]);
    let c = &data["checks"][0];
    assert_eq!(
        keys(c),
        ["text", "passed", "worst", "limit", "absolute", "margin", "unit"]
    );
    assert_eq!(c["text"], "tj <= 125 °C");
    assert_eq!(c["passed"], true);
    assert_eq!(c["worst"].as_f64(), Some(364.19));
    // 125 °C = 398.15 K (kelvin = degrees Celsius + 273.15, SI Brochure 9th ed., 2.3.1).
    assert_eq!(c["limit"].as_f64(), Some(398.15));
    assert_eq!(c["absolute"], true);
    assert_eq!(c["margin"].as_f64(), Some(33.96));
    assert_eq!(c["unit"], "K");
}

#[test]
fn json_top_level_shape_and_several_cells() {
    let mut a = report(vec![tj()], vec![tj_check()]);
    a.warnings.push(WarningRow {
        source: "u1".into(),
        text: "within 10 K of tj_max".into(),
    });
    let b = report(
        vec![number("vin", true, 12.0, Dim::VOLTAGE, false, "12.0 V")],
        vec![],
    );
    let data = results_json(&[&a, &b]);
    assert_eq!(
        keys(&data),
        ["version", "values", "checks", "warnings", "sweeps"]
    );
    assert_eq!(data["version"], 1);
    assert_eq!(data["values"].as_array().map(Vec::len), Some(2));
    assert_eq!(data["values"][1]["name"], "vin");
    assert_eq!(data["warnings"][0]["source"], "u1");
    assert_eq!(data["warnings"][0]["text"], "within 10 K of tj_max");
    assert_all_finite(&data);

    let empty = results_json(&[&CellReport::default()]);
    for k in ["values", "checks", "warnings", "sweeps"] {
        assert_eq!(empty[k], Value::Array(vec![]), "{k}");
    }
}

#[cfg(debug_assertions)]
#[test]
#[should_panic(expected = "non-finite")]
fn json_refuses_non_finite_numbers() {
    let bad = number("x", false, f64::NAN, Dim::VOLTAGE, false, "NaN V");
    let _ = results_json(&[&report(vec![bad], vec![])]);
}

#[test]
fn json_units_are_coherent_si() {
    let rows = vec![
        number("vin", true, 12.0, Dim::VOLTAGE, false, "12.0 V"),
        number("θ", false, 6.4, Dim::THERMAL_RESISTANCE, false, "6.40 K/W"),
        number("η", false, 0.85, Dim::NONE, false, "0.850"),
        number("iload", true, 0.18, Dim::CURRENT, false, "180 mA"),
    ];
    let data = results_json(&[&report(rows, vec![])]);
    let units: Vec<&str> = (0..4)
        .map(|i| data["values"][i]["unit"].as_str().unwrap_or_default())
        .collect();
    // 85 % is the pure number 0.85: unit "1"; 180 mA is 0.18 A.
    assert_eq!(units, ["V", "K/W", "1", "A"]);
    assert_eq!(data["values"][2]["si"].as_f64(), Some(0.85));
    assert_eq!(data["values"][3]["si"].as_f64(), Some(0.18));
}

fn sweep_of(n: usize) -> SweepTable {
    let points: Vec<f64> = (0..n).map(|i| i as f64 * 1e-3).collect();
    let mut nominal: Vec<f64> = (0..n).map(|i| 300.0 + (i as f64) * 1e-3).collect();
    // A spike and a dip away from the ends, which decimation must keep.
    nominal[1234 % n] = 500.0;
    nominal[777 % n] = 100.0;
    let max: Vec<f64> = nominal.iter().map(|x| x + 1.0).collect();
    SweepTable {
        over: "iload".into(),
        dim: Dim::CURRENT,
        absolute: false,
        points,
        series: vec![SweepSeries {
            name: "tj".into(),
            dim: Dim::TEMPERATURE,
            absolute: true,
            nominal,
            min: None,
            max: Some(max),
        }],
        limits: Vec::new(),
    }
}

#[test]
fn sweep_decimation_keeps_ends_and_extremes() {
    let s = sweep_of(2500);
    let keep = decimate(&s);
    assert!(keep.len() <= MAX_SWEEP_POINTS, "{}", keep.len());
    assert!(keep.len() >= MAX_SWEEP_POINTS - 10, "{}", keep.len());
    for i in [0, 2499, 1234, 777] {
        assert!(keep.contains(&i), "index {i} dropped");
    }
    assert!(
        keep.windows(2).all(|w| w[0] < w[1]),
        "indices sorted, distinct"
    );

    let mut r = report(vec![], vec![]);
    r.sweeps.push(s);
    let data = results_json(&[&r]);
    let sw = &data["sweeps"][0];
    assert_eq!(keys(sw), ["over", "unit", "absolute", "points", "series"]);
    assert_eq!(sw["unit"], "A");
    let len = |v: &Value| v.as_array().map_or(0, Vec::len);
    assert_eq!(len(&sw["points"]), keep.len());
    assert_eq!(len(&sw["series"][0]["nominal"]), keep.len());
    assert_eq!(len(&sw["series"][0]["max"]), keep.len());
    assert!(sw["series"][0].get("min").is_none());
    assert_eq!(sw["series"][0]["unit"], "K");
    assert_eq!(sw["series"][0]["absolute"], true);
    assert_all_finite(&data);
}

#[test]
fn small_sweeps_are_not_decimated() {
    let s = sweep_of(26);
    assert_eq!(decimate(&s), (0..26).collect::<Vec<_>>());
}

// ---- plain text ----

#[test]
fn text_block_is_aligned() {
    let vin = with_note(
        with_bounds(
            number("vin", true, 12.0, Dim::VOLTAGE, false, "12.0 V"),
            10.8,
            13.2,
            false,
            "10.8 V … 13.2 V",
        ),
        "adapter",
    );
    let p = number("p", false, 0.144, Dim::POWER, false, "144 mW");
    let tj = with_note(tj(), "junction");
    let mut c1 = tj_check();
    c1.note = "silicon limit".into();
    // check p <= 100 mW with p = 144 mW: margin 100 − 144 = −44 mW.
    let c2 = check_row(
        "p <= 100 mW",
        false,
        0.144,
        0.1,
        false,
        -0.044,
        Dim::POWER,
        ["144 mW", "100 mW", "-44.0 mW"],
    );
    let mut r = report(vec![vin, p, tj], vec![c1, c2]);
    r.warnings.push(WarningRow {
        source: "u1".into(),
        text: "input below dropout at vin = 10.8 V".into(),
    });
    let expected = "\
Inputs
  vin  12.0 V    10.8 V … 13.2 V     adapter

Values
  p     144 mW
  tj   79.4 °C   69.8 °C … 91.0 °C   junction

Checks
  ✓ pass  tj <= 125 °C   margin +34.0 K    worst 91.0 °C, limit 125 °C   silicon limit
  ✗ FAIL  p <= 100 mW    margin -44.0 mW   worst 144 mW, limit 100 mW

Warnings
  ! u1: input below dropout at vin = 10.8 V

Caution: surfaces above about 60 °C burn on touch; confirm with the part's datasheet and by measurement.";
    assert_eq!(text(&r), expected);
}

#[test]
fn a_sizing_result_keeps_its_unit_column_a_unit() {
    // A heatsink sized for the worst case: θsa at most 9.88 K/W at the worst corner,
    // 14.9 K/W at nominal; the table leads with 9.88 K/W and says so in the range column.
    let mut sink = with_bounds(
        number(
            "θsa",
            false,
            14.9,
            Dim::THERMAL_RESISTANCE,
            false,
            "14.9 K/W",
        ),
        9.88,
        23.1,
        false,
        "9.88 K/W … 23.1 K/W",
    );
    sink.leads_with_minimum = true;
    assert_eq!(sink.text(), "9.88 K/W at worst (nominal 14.9 K/W)");
    assert_eq!(sink.value_text(), "9.88 K/W");
    let r = report(vec![sink], vec![]);
    assert_eq!(
        text(&r),
        "Values\n  θsa  9.88 K/W   at worst (nominal 14.9 K/W); 9.88 K/W … 23.1 K/W"
    );
    let h = html::report(&r);
    let cells: Vec<&str> = h
        .split("<td")
        .skip(1)
        .map(|c| c.split_once('>').map_or("", |(_, rest)| rest))
        .map(|c| c.split("</td>").next().unwrap_or(""))
        .collect();
    assert_eq!(cells[1], "9.88", "{h}");
    assert_eq!(cells[2], "K/W", "{h}");
    assert!(
        cells[3].contains("at worst (nominal 14.9 K/W);")
            && cells[3].ends_with("9.88 K/W … 23.1 K/W"),
        "{h}"
    );
}

#[test]
fn text_aligns_by_display_width() {
    // θ, Ω and ° are one column each; a byte count would misalign them.
    let theta = number("θ", false, 6.4, Dim::THERMAL_RESISTANCE, false, "6.40 K/W");
    let r7 = number("R7", false, 360.0, Dim::RESISTANCE, false, "360 Ω");
    let t = text(&report(vec![theta, r7], vec![]));
    assert_eq!(t, "Values\n  θ   6.40 K/W\n  R7   360 Ω");
}

#[test]
fn text_conservative_and_warning_diagnostics() {
    let r = with_bounds(
        number("r", false, 1000.0, Dim::RESISTANCE, false, "1.00 kΩ"),
        900.0,
        1100.0,
        true,
        "900 Ω … 1.10 kΩ",
    );
    let mut rep = report(vec![r], vec![]);
    rep.source = "C = 1u\nx = 2 C\n".into();
    rep.diagnostics.push(
        Diagnostic::warning(
            DiagKind::UnitShadowsName,
            11..14,
            "`2 C` is read as coulombs",
        )
        .hint("write `2 * C` for the product"),
    );
    let t = text(&rep);
    assert!(t.contains("900 Ω … 1.10 kΩ (conservative)"), "{t}");
    assert!(
        t.contains("! line 2: `2 C` is read as coulombs (hint: write `2 * C` for the product)"),
        "{t}"
    );
}

#[test]
fn margins_always_carry_a_sign() {
    let mut c = tj_check();
    assert_eq!(signed_margin(&c), "+34.0 K");
    c.margin = -14.0;
    c.dim = Dim::POWER;
    assert_eq!(signed_margin(&c), "-14.0 W");
    c.margin = 0.0;
    assert_eq!(signed_margin(&c), "+0 W");
}

#[test]
fn empty_report_has_empty_text() {
    assert_eq!(text(&CellReport::default()), "");
}

// ---- caution ----

#[test]
fn caution_follows_hot_absolute_temperatures() {
    let cool = with_bounds(
        number("tcase", false, 313.15, Dim::TEMPERATURE, true, "40.0 °C"),
        303.15,
        328.15,
        false,
        "30.0 °C … 55.0 °C",
    );
    assert!(cautions(&[&report(vec![cool.clone()], vec![])]).is_empty());

    // Nominal 50 °C but worst case 65 °C: the worst case can burn.
    let warm = with_bounds(
        number("tcase", false, 323.15, Dim::TEMPERATURE, true, "50.0 °C"),
        313.15,
        338.15,
        false,
        "40.0 °C … 65.0 °C",
    );
    assert_eq!(
        cautions(&[&report(vec![warm], vec![])]),
        [HOT_SURFACE_CAUTION]
    );

    // A rise of 80 K is a difference, not a surface temperature.
    let rise = number("rise", false, 80.0, Dim::TEMPERATURE, false, "80.0 K");
    assert!(cautions(&[&report(vec![rise], vec![])]).is_empty());

    // A check against a 125 °C limit says the part runs hot.
    assert_eq!(
        cautions(&[&report(vec![cool.clone()], vec![tj_check()])]),
        [HOT_SURFACE_CAUTION]
    );

    // A hot swept series.
    let mut r = report(vec![cool], vec![]);
    r.sweeps.push(sweep_of(26));
    assert_eq!(cautions(&[&r]), [HOT_SURFACE_CAUTION]);
    assert!(html::report(&r).contains("burn on touch"));
}

#[test]
fn caution_follows_shock_voltages() {
    // 48 V ± 10 % reaches 52.8 V: below 60 V, no caution.
    let bus = with_bounds(
        number("vbus", true, 48.0, Dim::VOLTAGE, false, "48.0 V"),
        43.2,
        52.8,
        false,
        "43.2 V … 52.8 V",
    );
    assert!(cautions(&[&report(vec![bus.clone()], vec![])]).is_empty());
    // 56 V ± 10 % reaches 61.6 V at its worst case.
    let high = with_bounds(
        number("vbus", true, 56.0, Dim::VOLTAGE, false, "56.0 V"),
        50.4,
        61.6,
        false,
        "50.4 V … 61.6 V",
    );
    assert_eq!(cautions(&[&report(vec![high], vec![])]), [SHOCK_CAUTION]);
    // A negative rail counts by its magnitude.
    let neg = number("vee", true, -70.0, Dim::VOLTAGE, false, "-70.0 V");
    assert_eq!(cautions(&[&report(vec![neg], vec![])]), [SHOCK_CAUTION]);
    // 70 A is not 70 V.
    let amps = number("i", false, 70.0, Dim::CURRENT, false, "70.0 A");
    assert!(cautions(&[&report(vec![amps], vec![])]).is_empty());
    // A check against a 100 V limit says the circuit may see it.
    let c = check_row(
        "vbus <= 100 V",
        true,
        52.8,
        100.0,
        false,
        47.2,
        Dim::VOLTAGE,
        ["52.8 V", "100 V", "+47.2 V"],
    );
    let r = report(vec![bus], vec![c]);
    assert_eq!(cautions(&[&r]), [SHOCK_CAUTION]);
    assert!(text(&r).ends_with(SHOCK_CAUTION));
    assert!(html::report(&r).contains("dangerous shock"));
}

#[test]
fn caution_follows_a_battery_and_cautions_come_in_order() {
    let t = number("life", false, 7200.0, Dim::TIME, false, "2.00 h");
    let mut r = report(vec![t], vec![]);
    assert!(cautions(&[&r]).is_empty());
    r.hazards.push(worksheet_lang::results::Hazard::Battery);
    assert_eq!(cautions(&[&r]), [BATTERY_CAUTION]);
    // Hot, shock and battery together, in that order, in text and HTML alike.
    r.values.push(number(
        "tj",
        false,
        373.15,
        Dim::TEMPERATURE,
        true,
        "100 °C",
    ));
    r.values
        .push(number("v", false, 120.0, Dim::VOLTAGE, false, "120 V"));
    assert_eq!(
        cautions(&[&r]),
        [HOT_SURFACE_CAUTION, SHOCK_CAUTION, BATTERY_CAUTION]
    );
    let t = text(&r);
    let (a, b, c) = (
        t.find("burn on touch").unwrap(),
        t.find("dangerous shock").unwrap(),
        t.find("lithium").unwrap(),
    );
    assert!(a < b && b < c, "{t}");
    let h = html::report(&r);
    assert_eq!(h.matches("Caution:").count(), 3, "{h}");
}

// ---- HTML ----

/// The `style="…"` attribute values in an HTML text.
fn styles(html: &str) -> Vec<&str> {
    html.split("style=\"")
        .skip(1)
        .map(|s| &s[..s.find('"').expect("closing quote")])
        .collect()
}

fn full_report() -> CellReport {
    let vin = with_note(
        with_bounds(
            number("vin", true, 12.0, Dim::VOLTAGE, false, "12.0 V"),
            10.8,
            13.2,
            true,
            "10.8 V … 13.2 V",
        ),
        "adapter <script>alert(1)</script> & co",
    );
    let mut bad = tj_check();
    bad.passed = false;
    bad.text = "a < b & c".into();
    let mut r = report(vec![vin, tj()], vec![tj_check(), bad]);
    r.warnings.push(WarningRow {
        source: "u1<b>".into(),
        text: "<img src=x onerror=alert(1)>".into(),
    });
    r
}

#[test]
fn html_escapes_user_text() {
    let h = html::report(&full_report());
    assert!(!h.contains("<script"), "{h}");
    assert!(!h.contains("<img"), "{h}");
    assert!(!h.contains("u1<b>"), "{h}");
    assert!(h.contains("adapter &lt;script&gt;alert(1)&lt;/script&gt; &amp; co"));
    assert!(h.contains("a &lt; b &amp; c"));
    assert!(h.contains("&lt;img src=x onerror=alert(1)&gt;"));
}

#[test]
fn html_has_no_style_or_script_elements() {
    let h = html::report(&full_report());
    let lower = h.to_lowercase();
    assert!(
        !lower.contains("<style") && !lower.contains("<script"),
        "{h}"
    );
    let s = shown_bundle(&CellReport {
        shown: vec![tj()],
        ..CellReport::default()
    })
    .expect("a shown value");
    let sh = s["text/html"].as_str().unwrap_or_default().to_lowercase();
    assert!(!sh.contains("<style") && !sh.contains("<script"));
}

#[test]
fn html_styles_survive_the_sanitizer() {
    // Properties the block may use, all on JupyterLab's sanitizer allow-list.
    const ALLOWED: &[&str] = &[
        "color",
        "background",
        "border",
        "border-bottom",
        "border-left",
        "border-collapse",
        "padding",
        "padding-left",
        "margin",
        "text-align",
        "font-weight",
        "font-style",
        "font-family",
        "white-space",
        "opacity",
    ];
    let h = html::report(&full_report());
    let all = styles(&h);
    assert!(!all.is_empty());
    for style in all {
        let decls: Vec<(&str, &str)> = style
            .split(';')
            .map(str::trim)
            .filter(|d| !d.is_empty())
            .map(|d| {
                d.split_once(':')
                    .map(|(p, v)| (p.trim(), v.trim()))
                    .expect(d)
            })
            .collect();
        for (i, (prop, value)) in decls.iter().enumerate() {
            assert!(ALLOWED.contains(prop), "{prop} in {style}");
            // The sanitizer drops `var(…)` values; each must follow a plain twin it keeps.
            if value.contains("var(") {
                assert!(
                    decls[..i]
                        .iter()
                        .any(|(p, v)| p == prop && !v.contains("var(")),
                    "{prop}: {value} has no sanitizer-safe fallback in {style}"
                );
            }
        }
    }
}

#[test]
fn html_separates_numbers_units_and_ranges() {
    let h = html::report(&full_report());
    assert!(h.contains(">79.4</td>"), "{h}");
    assert!(h.contains(">°C</td>"), "{h}");
    assert!(h.contains(">69.8 °C … 91.0 °C</td>"), "{h}");
    assert!(h.contains(">+34.0</td>"), "{h}");
    assert!(h.contains("✓ pass") && h.contains("✗ FAIL"));
    assert!(h.contains(">Inputs</th>") && h.contains(">Values</th>") && h.contains(">Checks</th>"));
    assert!(h.contains(">Warnings</div>"));
    assert!(h.contains("(conservative)"));
}

// ---- bundles and errors ----

#[test]
fn bundle_has_the_three_mime_types() {
    let r = full_report();
    let b = bundle(&r);
    assert_eq!(
        b.keys().map(String::as_str).collect::<Vec<_>>(),
        ["text/plain", "text/html", RESULTS_MIME]
    );
    assert_eq!(b["text/plain"].as_str(), Some(text(&r).as_str()));
    assert_eq!(b[RESULTS_MIME]["version"], 1);
}

#[test]
fn shown_value_text() {
    let six = number("v / 2", false, 6.0, Dim::VOLTAGE, false, "6.00 V");
    let plain = |rows: Vec<ValueRow>| {
        shown_bundle(&CellReport {
            shown: rows,
            ..CellReport::default()
        })
        .map(|b| b["text/plain"].as_str().unwrap_or_default().to_string())
    };
    assert_eq!(plain(vec![six.clone()]).as_deref(), Some("6.00 V"));
    let uncertain = with_bounds(six.clone(), 5.7, 6.3, false, "5.70 V … 6.30 V");
    assert_eq!(
        plain(vec![uncertain.clone()]).as_deref(),
        Some("6.00 V (5.70 V … 6.30 V)")
    );
    assert_eq!(plain(vec![]), None);

    let b = shown_bundle(&CellReport {
        shown: vec![uncertain],
        ..CellReport::default()
    })
    .expect("bundle");
    assert_eq!(b[RESULTS_MIME]["values"][0]["name"], "v / 2");
    assert_eq!(b[RESULTS_MIME]["values"][0]["min"].as_f64(), Some(5.7));

    let two = plain(vec![
        number("u1.loss", false, 1.33, Dim::POWER, false, "1.33 W"),
        number("u1.iin", false, 0.184, Dim::CURRENT, false, "184 mA"),
    ]);
    assert_eq!(two.as_deref(), Some("u1.loss  1.33 W\nu1.iin    184 mA"));
}

#[test]
fn traceback_carries_the_caret_excerpt() {
    let mut r = report(vec![], vec![]);
    r.source = "v = 1 V\nx = 12 V + 3 A\n".into();
    // `12 V + 3 A` is bytes 12..22 of the source, line 2 from column 5.
    r.diagnostics.push(
        Diagnostic::error(
            DiagKind::DimensionMismatch,
            12..22,
            "cannot add a voltage and a current",
        )
        .hint("check the units of both sides"),
    );
    r.diagnostics.push(Diagnostic::error(
        DiagKind::UnknownName,
        0..1,
        "unknown name `v`",
    ));
    let (ename, evalue, tb) = error_traceback(&r).expect("an error");
    assert_eq!(ename, "DimensionMismatch");
    assert_eq!(evalue, "cannot add a voltage and a current");
    assert!(tb[0].contains("DimensionMismatch") && tb[0].contains("\x1b["));
    assert!(tb.iter().any(|l| l.contains("line 2, column 5")), "{tb:?}");
    assert!(tb.iter().any(|l| l == "2 | x = 12 V + 3 A"), "{tb:?}");
    assert!(tb.iter().any(|l| l == "  |     ^^^^^^^^^^"), "{tb:?}");
    assert!(tb.iter().any(|l| l.contains("hint: check the units")));
    assert!(tb.iter().any(|l| l.contains("UnknownName")), "both errors");
}

#[test]
fn no_traceback_without_errors() {
    let mut r = report(vec![], vec![]);
    r.source = "x = 2 C".into();
    r.diagnostics.push(Diagnostic::warning(
        DiagKind::UnitShadowsName,
        4..7,
        "read as coulombs",
    ));
    assert_eq!(error_traceback(&r), None);
}
