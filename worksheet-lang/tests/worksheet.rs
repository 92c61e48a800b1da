//! The worksheet end to end: values, temperature rules, checks, the dependency graph and
//! the diagnostics of evaluation. Expected numbers are derived by hand beside each test.

use std::sync::Arc;
use worksheet_lang::results::{CellReport, Shown};
use worksheet_lang::{DiagKind, Interrupt, Worksheet};

fn run(src: &str) -> CellReport {
    let mut ws = Worksheet::new();
    Arc::unwrap_or_clone(ws.execute(Some("c1"), src, &Interrupt::new()).report)
}

fn si(r: &CellReport, name: &str) -> f64 {
    let row = r
        .values
        .iter()
        .chain(r.shown.iter())
        .find(|v| v.name == name)
        .unwrap_or_else(|| panic!("no row {name}: {:?}", r.diagnostics));
    match &row.shown {
        Shown::Number { value, .. } => value.si,
        other => panic!("{other:?}"),
    }
}

fn text(r: &CellReport, name: &str) -> String {
    r.values
        .iter()
        .chain(r.shown.iter())
        .find(|v| v.name == name)
        .expect("row")
        .text()
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * a.abs().max(b.abs()).max(1e-12)
}

fn only_error(src: &str) -> worksheet_lang::Diagnostic {
    let r = run(src);
    let errors: Vec<_> = r
        .diagnostics
        .iter()
        .filter(|d| d.is_error())
        .cloned()
        .collect();
    assert_eq!(errors.len(), 1, "{src}: {errors:?}");
    errors.into_iter().next().unwrap_or_else(|| unreachable!())
}

#[test]
fn temperature_rules() {
    // Absolute ± difference → absolute; absolute − absolute → difference.
    let r = run("a = 25 °C + 10 K\nb = 50 °C - 20 °C\nc = 77 °F\n");
    assert!(
        close(si(&r, "a"), 308.15),
        "25 °C + 10 K = 35 °C = 308.15 K"
    );
    assert_eq!(text(&r, "a"), "35.0 °C");
    assert!(close(si(&r, "b"), 30.0));
    assert_eq!(text(&r, "b"), "30.0 K");
    // 77 °F = (77 + 459.67)·5/9 K = 298.15 K = 25 °C (NIST SP 811, Appendix B.8 relation).
    assert!(close(si(&r, "c"), 298.15));
    assert_eq!(text(&r, "c"), "25.0 °C");
    let e = only_error("d = 25 °C + 25 °C\n");
    assert_eq!(e.kind, DiagKind::Temperature);
    assert!(e.hint.as_deref().unwrap_or("").contains("kelvin("), "{e:?}");
    let e = only_error("d = 2 * 25 °C\n");
    assert_eq!(e.kind, DiagKind::Temperature);
    // Inside a compound unit °C is a difference: 2 °C/W ≡ 2 K/W.
    let r = run("t = 1 W * 2 °C/W\n");
    assert!(close(si(&r, "t"), 2.0));
    assert_eq!(text(&r, "t"), "2.00 K");
    // kelvin(t) gives the thermodynamic value for formulas.
    let r = run("k = kelvin(25 °C) / 1 K\n");
    assert!(close(si(&r, "k"), 298.15));
}

#[test]
fn the_reference_rail_without_built_ins() {
    // The 5 V rail's numbers written out by hand: loss = (vin − 5 V)·i + vin·4 mA,
    // θ = 6 + 0.4 + 22·60/82 = 22.4976 K/W, tj = 50 °C + loss·θ.
    // Nominal: (7·0.18 + 12·0.004) = 1.308 W → tj = 79.427 °C.
    // Corners: (10.8 V, 144 mA): 0.8784 W → 69.762 °C; (13.2 V, 216 mA): 1.824 W → 91.035 °C.
    let src = "given vin = 10.8 V .. 13.2 V\ngiven iload = 180 mA ± 20 %\ngiven ta = 50 °C\n\
               loss = (vin - 5 V) * iload + vin * 4 mA\n\
               θ = 6 K/W + 0.4 K/W + (22 K/W || 60 K/W)\n\
               tj [°C] = ta + loss * θ\ncheck tj <= 125 °C\n";
    let mut ws = Worksheet::new();
    let r = ws.execute(Some("c1"), src, &Interrupt::new()).report;
    assert!(!r.has_errors(), "{:?}", r.diagnostics);
    let theta = 6.4 + 22.0 * 60.0 / 82.0;
    assert!(close(si(&r, "tj"), 323.15 + 1.308 * theta));
    let row = r.values.iter().find(|v| v.name == "tj").expect("tj");
    let Shown::Number {
        bounds: Some(b), ..
    } = &row.shown
    else {
        panic!("tj uncertain")
    };
    assert!(close(b.min, 323.15 + 0.8784 * theta));
    assert!(close(b.max, 323.15 + 1.824 * theta));
    assert!(!b.conservative);
    assert_eq!(row.text(), "79.4 °C");
    assert_eq!(row.range_text().as_deref(), Some("69.8 °C … 91.0 °C"));
    let c = &r.checks[0];
    assert!(c.passed);
    assert!(close(c.margin, 125.0 - (50.0 + 1.824 * theta)));
    assert!(close(c.worst, 323.15 + 1.824 * theta));
    assert!(close(c.limit, 398.15));
    assert_eq!(c.margin_text(), "+34.0 K");
    // A run leaves the shares of the spread out; they are worked out when asked.
    assert!(b.spread.is_none());
    // One at a time, the others nominal: vin's swing of the loss is
    // (8.2 − 5.8) V · 180 mA + 2.4 V · 4 mA = 0.4416 W, iload's 7 V · 72 mA = 0.504 W.
    let s = ws.spread("tj", &Interrupt::new()).expect("tj has a spread");
    let total = 0.4416 + 0.504;
    let share = |input: &str| {
        s.shares
            .iter()
            .find(|x| x.input == input)
            .map(|x| x.fraction)
    };
    assert_eq!(s.shares.len(), 2);
    assert!(close(share("iload").expect("iload"), 0.504 / total));
    assert!(close(share("vin").expect("vin"), 0.4416 / total));
    // Largest first.
    assert_eq!(s.shares[0].input, "iload");
    let rss = theta * ((0.4416f64 / 2.0).powi(2) + (0.504f64 / 2.0).powi(2)).sqrt();
    assert!(close(s.rss, rss), "{} against {rss}", s.rss);
}

#[test]
fn a_sizing_result_leads_with_its_worst_case_minimum() {
    // θSA = (tj_max − ambient) / power − θJC − θCS, worked by hand: 100 K / 5 W − 4 K/W
    // = 16 K/W nominal; at 6 W 100/6 − 4 = 12.67 K/W, at 4 W 100/4 − 4 = 21 K/W.
    let src = "given p = 5 W ± 20 %\n\
               sa = heat.sink_for(p, ambient: 50 °C, tj_max: 150 °C, jc: 3 K/W, cs: 1 K/W)\n";
    let r = run(src);
    assert!(!r.has_errors(), "{:?}", r.diagnostics);
    let row = r.values.iter().find(|v| v.name == "sa").expect("sa");
    assert!(row.leads_with_minimum);
    assert_eq!(row.text(), "12.7 K/W at worst (nominal 16.0 K/W)");
    assert_eq!(row.range_text().as_deref(), Some("12.7 K/W … 21.0 K/W"));
    // The data keeps the nominal value.
    assert!(close(si(&r, "sa"), 16.0));
    // A value that is not a sizing result shows its nominal value alone.
    let p = r.values.iter().find(|v| v.name == "p").expect("p");
    assert_eq!(p.text(), "5.00 W");
}

/// Inspection of an uncertain value lists each input's share of its spread and the
/// root-sum-square spread. p = vin · iload: vin's one-at-a-time swing is
/// (13.2 V − 10.8 V) · 180 mA = 0.432 W, iload's is 12 V · (216 mA − 144 mA) = 0.864 W, so
/// iload has 0.864 / 1.296 = 66.7 % and vin 33.3 %; the RSS is √(0.216² + 0.432²) W = 483 mW.
/// A declared unit shows the spread in that unit (i2 [A] = 2 · iload swings 144 mA: RSS
/// 0.0720 A), a temperature in kelvin (tj = 50 °C + 100 K/W · p: 100 K/W · 483 mW = 48.3 K).
#[test]
fn inspection_shows_the_shares_and_the_root_sum_square_spread() {
    let mut ws = Worksheet::new();
    let src = "given vin = 10.8 V .. 13.2 V\ngiven iload = 180 mA ± 20 %\np = vin * iload\n\
               i2 [A] = 2 * iload\ntj [°C] = 50 °C + 100 K/W * p\n";
    let r = ws.execute(Some("c1"), src, &Interrupt::new()).report;
    assert!(!r.has_errors(), "{:?}", r.diagnostics);
    let at = |ws: &Worksheet, name: &str| {
        ws.inspect(name, 1, &Interrupt::new())
            .expect("inspection")
            .text
    };
    let p = at(&ws, "p");
    assert!(p.contains(" 66.7 % of the spread from iload"), "{p}");
    assert!(p.contains(" 33.3 % of the spread from vin"), "{p}");
    assert!(p.contains("root-sum-square spread: ± 483 mW"), "{p}");
    let i2 = at(&ws, "i2");
    assert!(i2.contains("root-sum-square spread: ± 0.0720 A"), "{i2}");
    let tj = at(&ws, "tj");
    assert!(tj.contains("root-sum-square spread: ± 48.3 K"), "{tj}");
    // A value without uncertainty has no spread to report.
    let r = ws.execute(Some("c2"), "k = 3 V", &Interrupt::new()).report;
    assert!(!r.has_errors());
    assert!(!at(&ws, "k").contains("spread"));
}

/// Inspection works the spread out by evaluating the cell once more; an interrupt stops
/// that: no spread, and the text says why, while the value and its worst case (from the
/// last run) are still there: p = vin · iload, 12 V · 180 mA = 2.16 W, least
/// 10.8 V · 144 mA = 1.56 W, most 13.2 V · 216 mA = 2.85 W.
#[test]
fn an_interrupt_stops_the_spread_an_inspection_works_out() {
    let mut ws = Worksheet::new();
    let src = "given vin = 10.8 V .. 13.2 V\ngiven iload = 180 mA ± 20 %\np = vin * iload\n";
    let r = ws.execute(Some("c1"), src, &Interrupt::new()).report;
    assert!(!r.has_errors(), "{:?}", r.diagnostics);
    let raised = Interrupt::new();
    raised.raise();
    assert!(ws.spread("p", &raised).is_none());
    assert!(ws.spread("p", &Interrupt::new()).is_some());
    let text = ws.inspect("p", 1, &raised).expect("inspection").text;
    assert!(text.contains("value: 2.16 W"), "{text}");
    assert!(text.contains("worst case: 1.56 W … 2.85 W"), "{text}");
    assert!(text.contains("not worked out (interrupted)"), "{text}");
    assert!(!text.contains("root-sum-square"), "{text}");
}

/// Bounds worked by hand for values that are affine in their inputs (their extremes come
/// from the nominal value and the constant derivatives) beside one that is not.
/// a = 10 V ± 10 % (9 … 11 V), b = 2 V … 4 V (nominal 3 V).
/// y = 3·a − 2·b + 1 V: nominal 25 V, least 3·9 − 2·4 + 1 = 20 V, most 3·11 − 2·2 + 1 = 30 V.
/// z = (20 V − a) / 2: nominal 5 V, 4.5 V … 5.5 V. w = a·b (not affine): 18 V² … 44 V².
#[test]
fn affine_values_take_their_extremes_at_the_corners_their_slopes_choose() {
    let src = "given a = 10 V ± 10 %\ngiven b = 2 V .. 4 V\n\
               y = 3 * a - 2 * b + 1 V\nz = (20 V - a) / 2\nw = a * b\n\
               check y <= 31 V\n";
    let r = run(src);
    assert!(!r.has_errors(), "{:?}", r.diagnostics);
    let bounds = |name: &str| {
        let row = r.values.iter().find(|v| v.name == name).expect(name);
        match &row.shown {
            Shown::Number {
                bounds: Some(b), ..
            } => (b.min, b.max, b.conservative),
            other => panic!("{name}: {other:?}"),
        }
    };
    let (lo, hi, conservative) = bounds("y");
    assert!(close(lo, 20.0) && close(hi, 30.0), "y: {lo} … {hi}");
    assert!(!conservative);
    assert!(close(si(&r, "y"), 25.0));
    let (lo, hi, _) = bounds("z");
    assert!(close(lo, 4.5) && close(hi, 5.5), "z: {lo} … {hi}");
    let (lo, hi, conservative) = bounds("w");
    assert!(close(lo, 18.0) && close(hi, 44.0), "w: {lo} … {hi}");
    assert!(!conservative);
    // The check's margin and its worst side agree at the deciding corner (a = 11 V, b = 2 V).
    let c = &r.checks[0];
    assert!(c.passed);
    assert!(close(c.margin, 1.0), "{}", c.margin);
    assert!(close(c.worst, 30.0), "{}", c.worst);
}

/// A chosen part's tolerance is named by the part in the shares of a spread: R picks
/// 1.00 kΩ from E24 (± 5 %), so i = 5 V / R owes its whole spread to it; the LED resistor
/// for 5 V − 2.1 V at 8 mA is 390 Ω (362.5 Ω rounded up on E24).
#[test]
fn a_part_is_named_by_its_value_and_tolerance_in_the_shares() {
    let mut ws = Worksheet::new();
    let src = "R = res.pick(1 kΩ)\ni = 5 V / R\n\
               L = res.led(supply: 5 V, vf: 2.1 V, current: 8 mA)\n";
    let r = ws.execute(Some("c1"), src, &Interrupt::new()).report;
    assert!(!r.has_errors(), "{:?}", r.diagnostics);
    let only = |name: &str| {
        let s = ws.spread(name, &Interrupt::new()).expect(name);
        assert_eq!(s.shares.len(), 1, "{name}: {:?}", s.shares);
        assert!(close(s.shares[0].fraction, 1.0));
        s.shares[0].input.clone()
    };
    assert_eq!(only("i"), "E24 1.00 kΩ ± 5.00 % in R");
    assert_eq!(only("L.current"), "r = 390 Ω ± 5.00 % in L");
}

/// The spread of a value in one cell that reads another's given, with a sweep beside it:
/// p = vin · 2 A owes all of its spread to vin; a name without uncertainty, or unknown, has
/// none.
#[test]
fn a_spread_is_worked_out_for_a_value_read_across_cells() {
    let mut ws = Worksheet::new();
    let run = |ws: &mut Worksheet, key: &str, src: &str| {
        let r = ws.execute(Some(key), src, &Interrupt::new()).report;
        assert!(!r.has_errors(), "{key}: {:?}", r.diagnostics);
    };
    run(&mut ws, "c1", "given vin = 10.8 V .. 13.2 V\nk = 3 V\n");
    run(
        &mut ws,
        "c2",
        "p = vin * 2 A\nsweep vin over 10 V .. 14 V steps 5: p\n",
    );
    let s = ws.spread("p", &Interrupt::new()).expect("p");
    assert_eq!(s.shares.len(), 1);
    assert_eq!(s.shares[0].input, "vin");
    // Half of the swing 2 A · 2.4 V.
    assert!(close(s.rss, 2.4), "{}", s.rss);
    assert!(ws.spread("k", &Interrupt::new()).is_none());
    assert!(ws.spread("nothing", &Interrupt::new()).is_none());
}

#[test]
fn a_check_is_judged_on_its_difference_at_the_worst_corner() {
    // vin − 2 V ≥ vin − 3 V holds at every vin: the same vin on both sides.
    let r = run("given vin = 4 V .. 6 V\ncheck vin - 2 V >= vin - 3 V\n");
    assert!(r.checks[0].passed);
    assert!(close(r.checks[0].margin, 1.0));
    // A failing check is a warning-like result, not an error: vin reaches 6 V > 5.5 V.
    let r = run("given vin = 4 V .. 6 V\ncheck vin <= 5.5 V\n");
    assert!(!r.has_errors());
    assert!(!r.checks[0].passed);
    assert!(close(r.checks[0].margin, -0.5));
    assert!(close(r.checks[0].worst, 6.0));
}

#[test]
fn tolerance_forms() {
    // 85 % ± 5 % is relative: 80.75 % … 89.25 %.
    let r = run("e = 85 % ± 5 %\nv = 1.25 V ± 20 mV\nc = tol(10 uF, -20 %, +80 %)\n");
    let row = r.values.iter().find(|v| v.name == "e").expect("e");
    let Shown::Number {
        bounds: Some(b), ..
    } = &row.shown
    else {
        panic!()
    };
    assert!(close(b.min, 0.8075) && close(b.max, 0.8925));
    let row = r.values.iter().find(|v| v.name == "v").expect("v");
    let Shown::Number {
        bounds: Some(b), ..
    } = &row.shown
    else {
        panic!()
    };
    assert!(close(b.min, 1.23) && close(b.max, 1.27));
    let row = r.values.iter().find(|v| v.name == "c").expect("c");
    let Shown::Number {
        bounds: Some(b), ..
    } = &row.shown
    else {
        panic!()
    };
    assert!(close(b.min, 8e-6) && close(b.max, 18e-6));
    let e = only_error("t = 50 °C ± 5 %\n");
    assert_eq!(e.kind, DiagKind::Temperature);
    let r = run("t = 50 °C ± 2 °C\n");
    let row = r.values.iter().find(|v| v.name == "t").expect("t");
    assert_eq!(row.range_text().as_deref(), Some("48.0 °C … 52.0 °C"));
}

#[test]
fn redefinition_recomputes_dependents_in_other_cells() {
    let mut ws = Worksheet::new();
    let i = Interrupt::new();
    ws.execute(Some("a"), "given iload = 180 mA\n", &i);
    ws.execute(Some("b"), "p = iload * 5 V\n", &i);
    ws.execute(Some("c"), "check p <= 1 W\n", &i);
    let ex = ws.execute(Some("a"), "given iload = 250 mA\n", &i);
    assert!(!ex.report.has_errors());
    let cells: Vec<&str> = ex.updated.iter().map(|u| u.report.cell.as_str()).collect();
    assert_eq!(cells, ["b", "c"]);
    let b = &ex.updated[0].report;
    assert!(close(si(b, "p"), 1.25));
    let c = &ex.updated[1].report;
    assert!(!c.checks[0].passed, "1.25 W > 1 W must fail now");
    let ch = &ex.updated[0].changed_by[0];
    assert_eq!(
        (ch.name.as_str(), ch.old.as_str(), ch.new.as_str()),
        ("iload", "180 mA", "250 mA")
    );
    // A run that does not change anything updates nothing.
    let ex = ws.execute(Some("a"), "given iload = 250 mA\n", &i);
    assert!(ex.updated.is_empty());
}

#[test]
fn a_failed_run_leaves_the_worksheet_as_it_was() {
    let mut ws = Worksheet::new();
    let i = Interrupt::new();
    ws.execute(Some("a"), "given x = 2 V\n", &i);
    ws.execute(Some("b"), "y = x * 2\n", &i);
    let ex = ws.execute(Some("a"), "given x = 2 V + 1 A\n", &i);
    assert!(ex.report.has_errors());
    assert!(ex.updated.is_empty());
    let b = ws.reports().iter().find(|r| r.cell == "b").expect("b");
    assert!(close(si(b, "y"), 4.0));
    // The cell that failed is not kept: later cells read the old `x`.
    let c = ws.execute(Some("c"), "z = x * 3\n", &i);
    assert!(close(si(&c.report, "z"), 6.0), "{:?}", c.report.diagnostics);
    // Nor is a new cell that fails.
    let d = ws.execute(Some("d"), "w = x * nope\n", &i);
    assert!(d.report.has_errors());
    let cells: Vec<&str> = ws.reports().iter().map(|r| r.cell.as_str()).collect();
    assert_eq!(cells, ["a", "b", "c"]);
    let w = ws.execute(Some("e"), "w = x + 1 V\n", &i);
    assert!(close(si(&w.report, "w"), 3.0), "{:?}", w.report.diagnostics);
}

#[test]
fn rerunning_one_cell_among_many_keeps_every_other_report() {
    let mut ws = Worksheet::new();
    let i = Interrupt::new();
    // Many cells without ids (as a console sends them), around a named pair.
    for k in 0..120 {
        ws.execute(None, &format!("{k} V + 1 V\n"), &i);
        if k == 40 {
            ws.execute(Some("src"), "given v = 2 V\n", &i);
            ws.execute(Some("use"), "p = v * 0.5 A\n", &i);
        }
    }
    assert_eq!(ws.reports().len(), 122);
    let ex = ws.execute(Some("src"), "given v = 4 V\n", &i);
    let updated: Vec<&str> = ex.updated.iter().map(|u| u.report.cell.as_str()).collect();
    assert_eq!(updated, ["use"]);
    assert!(close(si(&ex.updated[0].report, "p"), 2.0));
    // Every report is still there, in the order of the cells, with its own value.
    let reports = ws.reports();
    assert_eq!(reports.len(), 122);
    assert_eq!(reports[41].cell, "src");
    assert_eq!(reports[42].cell, "use");
    for (k, r) in reports
        .iter()
        .filter(|r| r.cell.starts_with("cell-"))
        .enumerate()
    {
        assert_eq!(r.shown.len(), 1, "{}", r.cell);
        assert!(
            close(si(r, &format!("{k} V + 1 V")), k as f64 + 1.0),
            "{}",
            r.cell
        );
    }
    // A cell deleted in the middle: the others keep their places and values.
    ws.forget(&["cell-7"], &i).expect("not interrupted");
    let ex = ws.execute(Some("src"), "given v = 6 V\n", &i);
    assert!(close(si(&ex.updated[0].report, "p"), 3.0));
    let reports = ws.reports();
    assert_eq!(reports.len(), 121);
    assert!(reports.iter().all(|r| r.cell != "cell-7"));
    let last = reports.last().expect("reports");
    assert!(close(si(last, "119 V + 1 V"), 120.0));
}

#[test]
fn cells_without_ids_are_known_by_their_names() {
    let mut ws = Worksheet::new();
    let i = Interrupt::new();
    let first = ws.execute(None, "given v = 1 V\n", &i).report.cell.clone();
    let again = ws.execute(None, "given v = 2 V\n", &i).report.cell.clone();
    assert_eq!(first, again);
    let other = ws.execute(None, "w = v * 3\n", &i).report.cell.clone();
    assert_ne!(first, other);
}

#[test]
fn cycles_are_named() {
    let r = run("a = b + 1 V\nb = a * 2\n");
    let errs: Vec<_> = r
        .diagnostics
        .iter()
        .filter(|d| d.kind == DiagKind::Cycle)
        .collect();
    assert_eq!(errs.len(), 2);
    assert!(
        errs[0].message.contains("a → b → a") || errs[0].message.contains("b → a → b"),
        "{}",
        errs[0].message
    );
}

#[test]
fn diagnostics_of_evaluation_have_kind_message_span_and_hint() {
    // Unknown name with a near miss.
    let src = "iload = 1 A\np = iloda * 2 V\n";
    let e = only_error(src);
    assert_eq!(e.kind, DiagKind::UnknownName);
    assert_eq!(&src[e.span.clone()], "iloda");
    assert_eq!(e.hint.as_deref(), Some("did you mean `iload`?"));
    // A bare unit symbol.
    let e = only_error("x = V\n");
    assert_eq!(e.kind, DiagKind::UnknownName);
    assert!(e.hint.as_deref().unwrap_or("").contains("`1 V`"), "{e:?}");
    // A value code written backwards.
    let e = only_error("r = R47\n");
    assert_eq!(e.hint.as_deref(), Some("did you mean `0R47`?"));
    // Dimensions named in words.
    let src = "x = 12 V + 3 A\n";
    let e = only_error(src);
    assert_eq!(e.kind, DiagKind::DimensionMismatch);
    assert!(
        e.message.contains("voltage plus a current"),
        "{}",
        e.message
    );
    assert_eq!(&src[e.span.clone()], "12 V + 3 A");
    assert!(
        e.hint
            .as_deref()
            .unwrap_or("")
            .contains("units of both sides"),
        "{e:?}"
    );
    // Declared unit: the hint names the unit the formula gives, which the brackets accept.
    let e = only_error("p [mW] = 2 V\n");
    assert_eq!(e.kind, DiagKind::DimensionMismatch);
    assert!(
        e.message.contains("power") && e.message.contains("voltage"),
        "{}",
        e.message
    );
    assert_eq!(
        e.hint.as_deref(),
        Some("the formula gives a voltage: declare `[V]`, or check the formula")
    );
    // 3 mA · 2 Ω · 1 s is a voltage times a time: V·s, which a declaration takes.
    let e = only_error("x [V] = 3 mA * 2 ohm * 1 s\n");
    assert!(e.hint.as_deref().unwrap_or("").contains("`[V·s]`"), "{e:?}");
    assert!(!run("x [V·s] = 3 mA * 2 ohm * 1 s\n").has_errors());
    // A plain number declared in a unit: the numbers lack their units.
    let e = only_error("w [V] = 3\n");
    assert!(e.hint.as_deref().unwrap_or("").contains("`3 V`"), "{e:?}");
    // A divisor whose range spans zero.
    let e = only_error("given v = -1 V .. 2 V\nr = 1 V / v\n");
    assert_eq!(e.kind, DiagKind::DivisorSpansZero);
    // Domain.
    let e = only_error("x = sqrt(-4 V^2)\n");
    assert_eq!(e.kind, DiagKind::DomainError);
    // A number that overflows on its way to SI units is no value, in the number itself.
    let src = "x = 2 * 9e307 kV\n";
    let e = only_error(src);
    assert_eq!(e.kind, DiagKind::DomainError);
    assert_eq!(&src[e.span.clone()], "9e307 kV", "{e:?}");
    // And a name whose value overflowed never gets one.
    let r = run("a = 1e300 V * 1e300\nb = a + 1 V\n");
    assert!(r
        .diagnostics
        .iter()
        .any(|d| d.kind == DiagKind::DomainError));
    assert!(r
        .diagnostics
        .iter()
        .any(|d| d.kind == DiagKind::DependencyFailed));
    // Nor does a swept name whose range overflows when stepped through, whether the series
    // reads it bare or computes with it.
    for y in ["x", "x * 2"] {
        let src = format!("x = 1 V\ny = {y}\nsweep x over -1.7e308 V .. 1.7e308 V steps 3: y\n");
        let r = run(&src);
        assert!(
            r.diagnostics
                .iter()
                .any(|d| d.is_error() && d.message.contains("no finite value")),
            "{src}: {:?}",
            r.diagnostics
        );
    }
    // Unknown function with a near miss.
    let e = only_error("x = sqr(4)\n");
    assert_eq!(e.kind, DiagKind::UnknownFunction);
    assert_eq!(e.hint.as_deref(), Some("did you mean `sqrt`?"));
    // Recursion is bounded.
    let e = only_error("f(x) = f(x) + 1\ny = f(1)\n");
    assert_eq!(e.kind, DiagKind::Limit);
    // Twice in one cell.
    let e = only_error("a = 1 V\na = 2 V\n");
    assert_eq!(e.kind, DiagKind::Redefinition);
    // A dependent of a failed definition says why, naming the definition that failed once
    // however long the chain.
    let r = run("a = 1 V + 1 A\nb = a * 2\nc = b + 1 V\nd = c / 2\n");
    let because: Vec<&str> = r
        .diagnostics
        .iter()
        .filter(|d| d.kind == DiagKind::DependencyFailed)
        .map(|d| d.message.as_str())
        .collect();
    let root = "A voltage plus a current: the dimensions differ";
    assert_eq!(
        because,
        [
            format!("`a` has no value: {root}"),
            format!("`b` has no value: it depends on `a`, which failed: {root}"),
            format!("`c` has no value: it depends on `a`, which failed: {root}"),
        ],
    );
    // A unit read as a unit although a name exists: a warning with the product spelled out.
    let r = run("C = 2 uF\nq = 2 C\n");
    let w = r
        .diagnostics
        .iter()
        .find(|d| d.kind == DiagKind::UnitShadowsName)
        .expect("warning");
    assert!(!w.is_error());
    assert!(w.hint.as_deref().unwrap_or("").contains("2 * C"));
}

#[test]
fn user_functions_records_and_lists() {
    let r = run("p(v, i) [mW] = v * i\nx = p(2 V, 3 mA)\nl = [1 V, 2 V]\n");
    assert!(close(si(&r, "x"), 0.006));
    assert_eq!(text(&r, "x"), "6.00 mW");
    let r = run("x = 1500 mV\nx as V\n");
    assert_eq!(r.shown[0].text(), "1.50 V");
}

#[test]
fn overrides_replace_a_given_whole() {
    let mut ws = Worksheet::new();
    ws.set_override("iload", "250 mA ± 20 %").expect("literal");
    let r = ws
        .execute(
            Some("m"),
            "given iload = 180 mA\np = iload * 2 V\n",
            &Interrupt::new(),
        )
        .report;
    assert!(close(si(&r, "p"), 0.5));
    let row = r.values.iter().find(|v| v.name == "p").expect("p");
    let Shown::Number {
        bounds: Some(b), ..
    } = &row.shown
    else {
        panic!()
    };
    assert!(close(b.min, 0.4) && close(b.max, 0.6));
    let mut ws = Worksheet::new();
    ws.set_override("nope", "1 A").expect("literal");
    let r = ws
        .execute(Some("m"), "given iload = 180 mA\n", &Interrupt::new())
        .report;
    assert!(r
        .diagnostics
        .iter()
        .any(|d| d.kind == DiagKind::UnknownName && d.is_error()));
    let mut ws = Worksheet::new();
    ws.set_override("iload", "2 V").expect("literal");
    let r = ws
        .execute(Some("m"), "given iload [mA] = 180 mA\n", &Interrupt::new())
        .report;
    assert!(
        r.diagnostics
            .iter()
            .any(|d| d.kind == DiagKind::DimensionMismatch),
        "{:?}",
        r.diagnostics
    );
}

#[test]
fn sweeps_follow_the_closed_form() {
    // p = (12 V − 5 V)·i for i from 0.1 A to 0.3 A in 3 points: 0.7, 1.4, 2.1 W.
    let r = run("given i = 100 mA\np = 7 V * i\nsweep i over 0.1 A .. 0.3 A steps 3: p\n");
    assert!(!r.has_errors(), "{:?}", r.diagnostics);
    let s = &r.sweeps[0];
    assert_eq!(s.points.len(), 3);
    for (x, y) in s.points.iter().zip(&s.series[0].nominal) {
        assert!(close(*y, 7.0 * x));
    }
}

#[test]
fn a_two_name_sweep_draws_a_family() {
    // loss = (vin − 5 V)·i: for vin in {10 V, 12 V} and i in {0.1, 0.2, 0.3} A:
    // 0.5, 1.0, 1.5 W and 0.7, 1.4, 2.1 W.
    let r = run("given vin = 12 V\ngiven i = 0.1 A\nloss = (vin - 5 V) * i\nsweep i over 0.1 A .. 0.3 A steps 3, vin over 10 V .. 12 V steps 2: loss\n");
    assert!(!r.has_errors(), "{:?}", r.diagnostics);
    let s = &r.sweeps[0];
    assert_eq!(s.series.len(), 2);
    assert_eq!(s.series[0].name, "loss (vin = 10.0 V)");
    for (got, want) in s.series[0].nominal.iter().zip([0.5, 1.0, 1.5]) {
        assert!(close(*got, want));
    }
    for (got, want) in s.series[1].nominal.iter().zip([0.7, 1.4, 2.1]) {
        assert!(close(*got, want));
    }
}

#[test]
fn a_swept_given_keeps_the_other_tolerances() {
    // p = v·i with v = 5 V ± 10 %: at i = 1 A the band is 4.5 … 5.5 W.
    let r = run("given v = 5 V ± 10 %\ngiven i = 2 A ± 50 %\np = v * i\ncheck p <= 6 W\nsweep i over 1 A .. 2 A steps 2: p\n");
    let s = &r.sweeps[0];
    let min = s.series[0].min.as_ref().expect("band");
    let max = s.series[0].max.as_ref().expect("band");
    assert!(close(min[0], 4.5) && close(max[0], 5.5));
    assert!(close(min[1], 9.0) && close(max[1], 11.0));
    assert_eq!(s.limits.len(), 1);
    assert!(close(s.limits[0].limit, 6.0));
}

/// The compiled sweep path against the general one (which re-runs the full analysis at
/// every point): both must give the same curves and bands.
#[test]
fn compiled_sweeps_agree_with_the_general_path() {
    let cases = [
        // Monotone chain with tolerances on several inputs.
        "given vin = 10.8 V .. 13.2 V\ngiven i = 100 mA\nr = 10 ohm ± 5 %\n\
         drop = i * r\nloss = (vin - 5 V - drop) * i + vin * 2 mA\n\
         θ = 6 K/W + (22 K/W || 60 K/W ± 10 %)\ntj = 50 °C + loss * θ\ncheck tj <= 125 °C\n\
         sweep i over 10 mA .. 300 mA steps 40: tj, loss\n",
        // A peak inside the tolerance box (not monotone in r): bands still enclose.
        "given i = 0.2 A\ngiven v = 12 V ± 1 %\nr = 5 ohm .. 50 ohm\np = (v - r * i) * i\n\
         sweep i over 0.05 A .. 0.5 A steps 25: p\n",
        // User functions, math, a family of curves.
        "f(x, y) = sqrt(x * y) + max(x, y)\ngiven a = 2 V ± 10 %\ngiven b = 3 V\n\
         z = f(a, b) * exp(-(b / 10 V))\n\
         sweep a over 1 V .. 4 V steps 7, b over 1 V .. 3 V steps 3: z\n",
    ];
    for src in cases {
        let mut fast = Worksheet::new();
        let mut slow = Worksheet::new();
        slow.set_fast_sweeps(false);
        let f = fast.execute(Some("c"), src, &Interrupt::new()).report;
        let s = slow.execute(Some("c"), src, &Interrupt::new()).report;
        assert!(
            !f.has_errors() && !s.has_errors(),
            "{src}: {:?} {:?}",
            f.diagnostics,
            s.diagnostics
        );
        assert_eq!(f.sweeps.len(), 1);
        let (ft, st) = (&f.sweeps[0], &s.sweeps[0]);
        assert_eq!(ft.points, st.points, "{src}");
        assert_eq!(ft.series.len(), st.series.len());
        for (a, b) in ft.series.iter().zip(&st.series) {
            assert_eq!((a.dim, a.absolute), (b.dim, b.absolute), "{src}");
            for (x, y) in a.nominal.iter().zip(&b.nominal) {
                assert!(close(*x, *y), "{src}: nominal {x} vs {y}");
            }
            match (&a.min, &b.min, &a.max, &b.max) {
                (Some(amin), Some(bmin), Some(amax), Some(bmax)) => {
                    for k in 0..amin.len() {
                        // Both enclose; for monotone cases both are exact and equal.
                        assert!(amin[k] <= a.nominal[k] + 1e-12 && amax[k] >= a.nominal[k] - 1e-12);
                        if src.contains("steps 40") || src.contains("steps 7") {
                            assert!(
                                close(amin[k], bmin[k]) && close(amax[k], bmax[k]),
                                "{src}: {k}: {} {} vs {} {}",
                                amin[k],
                                amax[k],
                                bmin[k],
                                bmax[k]
                            );
                        }
                    }
                }
                (None, None, None, None) => {}
                other => panic!("{src}: band present in one path only: {other:?}"),
            }
        }
    }
}

/// A long sweep of plain arithmetic stays well inside a generous bound (the benchmark
/// measures the speed; this only guards against the general path being taken).
#[test]
fn a_million_point_sweep_finishes() {
    let src = "given x = 1 V\ny1 = x * 2 + 1 V\ny2 = y1 * y1 / 1 V\ny3 = y2 - x\n\
               sweep x over 0 V .. 1 V steps 1000000: y3\n";
    let start = std::time::Instant::now();
    let r = run(src);
    let t = start.elapsed();
    println!("10^6-point sweep: {t:?}");
    assert!(!r.has_errors(), "{:?}", r.diagnostics);
    assert!(t.as_secs() < 60, "took {t:?}");
    // At most 1000 points kept (the language reference): here the two ends and the lowest
    // and highest of each of 499 buckets, which for a rising series are the bucket's ends.
    assert_eq!(r.sweeps[0].points.len(), 998);
    // y3 = (2x + 1)² − x at x = 1 V: 9 − 1 = 8.
    let last = *r.sweeps[0].series[0].nominal.last().expect("points");
    assert!(close(last, 8.0));
}

#[test]
fn updates_say_what_changed_them_and_forgotten_cells_take_their_names() {
    let mut ws = Worksheet::new();
    let i = Interrupt::new();
    ws.execute(Some("a"), "given x = 1 V\n", &i);
    ws.execute(Some("b"), "y = x * 2\n", &i);
    let ex = ws.execute(Some("a"), "given x = 2 V\n", &i);
    assert_eq!(ex.report.updated_cells, ["y"]);
    let b = &ex.updated[0].report;
    assert_eq!(b.updated_by.len(), 1);
    assert_eq!(
        (b.updated_by[0].old.as_str(), b.updated_by[0].new.as_str()),
        ("1.00 V", "2.00 V")
    );
    // The stored report carries no such note: running `a` again changes nothing.
    assert!(ws
        .execute(Some("a"), "given x = 2 V\n", &i)
        .updated
        .is_empty());
    let gone = ws.forget(&["a"], &i).expect("not interrupted");
    assert_eq!(gone.len(), 1);
    assert!(gone[0]
        .report
        .diagnostics
        .iter()
        .any(|d| d.kind == DiagKind::UnknownName));
    assert!(ws
        .forget(&["nope"], &i)
        .expect("not interrupted")
        .is_empty());
}

#[test]
fn a_cell_that_updated_others_is_not_changed_when_its_results_are_the_same() {
    // The worksheet keeps b's report with the note that its run updated z. When a later
    // run evaluates b again with the same results, b is not listed as updated.
    let mut ws = Worksheet::new();
    let i = Interrupt::new();
    ws.execute(Some("a"), "given x = 1 V\n", &i);
    ws.execute(Some("b"), "y = x * 2\n", &i);
    ws.execute(Some("c"), "z = y + 1 V\n", &i);
    let ex = ws.execute(Some("b"), "y = x * 3\n", &i);
    assert_eq!(ex.report.updated_cells, ["z"]);
    let kept = ws.reports().iter().find(|r| r.cell == "b").expect("b");
    assert_eq!(kept.updated_cells, ["z"]);
    let again = ws.execute(Some("a"), "given x = 1 V\n", &i);
    assert!(again.updated.is_empty(), "{:?}", again.updated);
    assert!(again.report.updated_cells.is_empty());
}

#[test]
fn a_cell_run_for_the_first_time_updates_its_readers_without_a_list_of_changes() {
    let mut ws = Worksheet::new();
    let i = Interrupt::new();
    ws.execute(Some("c"), "given x = 1 V\n", &i);
    ws.execute(Some("b"), "y = x * 2\n", &i);
    // A new cell takes `x` over: `b` follows, and `c` says its `x` is not used. The new cell
    // has no values of its own to compare with, so the updates carry no list of changes
    // (rather than every value of the new cell marked new).
    let ex = ws.execute(Some("a"), "given x = 2 V\nz = 3 V\n", &i);
    assert_eq!(ex.report.updated_cells, ["c", "y"]);
    for u in &ex.updated {
        assert!(u.changed_by.is_empty() && u.report.updated_by.is_empty());
    }
    // Run again with another `x` and a new `w`: the list names what moved.
    let ex = ws.execute(Some("a"), "given x = 3 V\nz = 3 V\nw = 1 A\n", &i);
    assert_eq!(ex.report.updated_cells, ["y"]);
    let by: Vec<(&str, &str, &str)> = ex.updated[0]
        .changed_by
        .iter()
        .map(|c| (c.name.as_str(), c.old.as_str(), c.new.as_str()))
        .collect();
    assert_eq!(by, [("x", "2.00 V", "3.00 V"), ("w", "(new)", "1.00 A")]);
    // A run that changes nothing another cell reads updates nothing.
    assert!(ws
        .execute(Some("a"), "given x = 3 V\nz = 4 V\nw = 1 A\n", &i)
        .updated
        .is_empty());
}

#[test]
fn type_and_argument_diagnostics() {
    // A text where a number belongs.
    let src = "x = \"five\" * 2\n";
    let e = only_error(src);
    assert_eq!(e.kind, DiagKind::TypeMismatch);
    assert_eq!(&src[e.span.clone()], "\"five\"");
    // A misspelt parameter of a built-in, with the nearest name and the signature.
    let src = "u = reg.linear(12 V, vot: 5 V, iout: 1 A)\n";
    let e = only_error(src);
    assert_eq!(e.kind, DiagKind::Argument);
    assert_eq!(&src[e.span.clone()], "vot");
    assert!(
        e.hint
            .as_deref()
            .unwrap_or("")
            .starts_with("did you mean `vout`?"),
        "{e:?}"
    );
    // A missing required argument.
    let e = only_error("u = reg.linear(12 V, iout: 1 A)\n");
    assert_eq!(e.kind, DiagKind::Argument);
    assert!(e.message.contains("needs `vout`"), "{}", e.message);
}

/// A part choice that reads its arguments' ranges (the rating of `res.led`) sees an exact
/// argument as a point, however it is written, and an uncertain one over its whole range.
#[test]
fn a_choice_reads_exact_arguments_as_points_and_uncertain_ones_as_ranges() {
    let rating = |src: &str| si(&run(src), "R.rating");
    let literal = rating("R = res.led(supply: 5 V, vf: 2 V, current: 8 mA)");
    let named = rating("vs = 5 V\nvd = vs - 3 V\nR = res.led(supply: vs, vf: vd, current: 8 mA)");
    assert_eq!(literal, named);
    // 5 V − 2 V across 390 Ω (E24, at or above 375 Ω): 24 mW at its −5 % end, twice that
    // after the margin: the 50 mW rating.
    assert!(close(literal, 0.05), "{literal}");
    // Over 5 V .. 12 V the choice is made at the nominal 8.5 V (820 Ω), and the rating for
    // the 12 V end: 10 V across 779 Ω is 128 mW, twice that 257 mW: the ⅓ W rating. The
    // nominal point alone would ask for 0.125 W.
    let ranged = rating("given vs = 5 V .. 12 V\nR = res.led(supply: vs, vf: 2 V, current: 8 mA)");
    let at_nominal = rating("R = res.led(supply: 8.5 V, vf: 2 V, current: 8 mA)");
    assert!(close(ranged, 1.0 / 3.0), "{ranged}");
    assert!(close(at_nominal, 0.125), "{at_nominal}");
}

/// Swings between the ends of the floating-point range stay finite: shares and the RSS
/// spread of `1e-308 ± 1e308` (ends ±1e308, a swing of 2e308) are numbers.
#[test]
fn spreads_near_the_largest_number_stay_finite() {
    let mut ws = Worksheet::new();
    let r = ws
        .execute(
            Some("c1"),
            "x = 1e-308 ± 1e308\ny = x / 2",
            &Interrupt::new(),
        )
        .report;
    assert!(r.diagnostics.is_empty(), "{:?}", r.diagnostics);
    for name in ["x", "y"] {
        let s = ws.spread(name, &Interrupt::new()).expect("a spread");
        assert!(s.rss.is_finite(), "{name}: rss {}", s.rss);
        assert!(s.shares.iter().all(|s| s.fraction.is_finite()), "{name}");
    }
    // x: half its swing is 1e308, the RSS of one input.
    let s = ws.spread("x", &Interrupt::new()).expect("x");
    assert!(close(s.rss, 1e308), "{}", s.rss);
    assert!(close(s.shares[0].fraction, 1.0));
}

#[test]
fn check_sides_show_enough_digits_to_differ_and_keep_their_own_kind() {
    // 1.0001 V against 1.0004 V agree to three digits; five tell them apart.
    let r = run("x = 1.0001 V\ncheck x <= 1.0004 V\n");
    let c = &r.checks[0];
    assert!(c.passed);
    assert_eq!(
        c.side_texts(),
        ("1.0001 V".to_string(), "1.0004 V".to_string())
    );
    assert_eq!(c.margin_text(), "+300 µV");
    // An absolute temperature against a difference: each side shown as what it is.
    let r = run("t = 50 °C\ncheck t >= 10 K\n");
    let c = &r.checks[0];
    assert_eq!(
        c.side_texts(),
        ("50.0 °C".to_string(), "10.0 K".to_string())
    );
}

#[test]
fn a_box_pass_evaluates_what_the_definitions_it_varies_read() {
    // y = a·z with z = b − 2 V: z cannot reach a, but y's derivative in a is z itself, which
    // spans −1 V … 1 V over the box; at z's nominal 0 V it would look independent of a.
    // Worked by hand: a ∈ [0.9, 1.1] V and z ∈ [−1, 1] V, so y = a·z reaches ±1.1 V² at
    // a = 1.1 V, z = ±1 V.
    let r = run("given a = 1 V ± 10 %\ngiven b = 2 V ± 1 V\nz = b - 2 V\ny = a * z\n");
    assert!(!r.has_errors(), "{:?}", r.diagnostics);
    let row = r.values.iter().find(|v| v.name == "y").expect("y");
    let Shown::Number {
        bounds: Some(b), ..
    } = &row.shown
    else {
        panic!("y uncertain")
    };
    assert!(close(b.min, -1.1), "min {}", b.min);
    assert!(close(b.max, 1.1), "max {}", b.max);
}

/// A battery's results carry its hazard (for the caution the renderers add), once per cell
/// and in the cell that calls it; a cell without one carries none.
#[test]
fn a_battery_cell_carries_the_battery_hazard() {
    use worksheet_lang::results::Hazard;
    let mut ws = Worksheet::new();
    let src = "given i = 20 mA ± 10 %\n\
               a = power.battery_hours(capacity: 2 A*h, current: i)\n\
               b = power.battery_hours(capacity: 3 A*h, current: i)\n";
    let r = ws.execute(Some("c1"), src, &Interrupt::new()).report;
    assert!(!r.has_errors(), "{:?}", r.diagnostics);
    assert_eq!(r.hazards, vec![Hazard::Battery]);
    let r = ws
        .execute(Some("c2"), "p = 2 * i", &Interrupt::new())
        .report;
    assert!(r.hazards.is_empty());
    assert!(run("x = 3 V\n").hazards.is_empty());
}

/// A tolerance or range of zero width is exact, not an uncertain input: `± 0 %`, `5 V .. 5 V`,
/// `tol(x, 0 %, 0 %)` and a part of tolerance 0 give values without a range, and a value that
/// also reads a real input takes its range from that input alone: y = a · b / 1 V with
/// a = 5 V exactly and b = 3 V ± 10 % spans 5 · 2.7 = 13.5 V to 5 · 3.3 = 16.5 V.
#[test]
fn a_tolerance_of_zero_width_is_exact() {
    let src = "given a = 5 V ± 0 %\ngiven b = 3 V ± 10 %\ny = a * b / 1 V\n\
               z = tol(2 V, 0 %, 0 %) + a\nw = 4 V .. 4 V\n\
               R7 = res.led(supply: 5 V, vf: 2.1 V, current: 8 mA, series: E24, tolerance: 0)\n";
    let r = run(src);
    assert!(!r.has_errors(), "{:?}", r.diagnostics);
    let bounds = |name: &str| match &r.values.iter().find(|v| v.name == name).expect(name).shown {
        Shown::Number { bounds, .. } => bounds.as_ref().map(|b| (b.min, b.max)),
        other => panic!("{name}: {other:?}"),
    };
    for exact in ["a", "z", "w", "R7.r", "R7.current"] {
        assert_eq!(bounds(exact), None, "{exact}");
    }
    let (lo, hi) = bounds("y").expect("y has a range");
    assert!(
        (lo - 13.5).abs() < 1e-12 && (hi - 16.5).abs() < 1e-12,
        "{lo} {hi}"
    );
}
