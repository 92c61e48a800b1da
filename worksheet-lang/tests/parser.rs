//! Lexer and parser: every lexical rule, statement form, precedence rule, syntax diagnostic
//! and recovery path of the language reference, plus robustness against any input.

use proptest::prelude::*;
use worksheet_lang::ast::{
    CmpOp, CodeKind, Expr, ExprKind, Program, Stmt, StmtKind, SweepStep, UnitExpr,
};
use worksheet_lang::fold;
use worksheet_lang::{is_complete, parse, Completeness, DiagKind};

// ---- helpers ----------------------------------------------------------------------------

/// A compact prefix form of an expression, for comparing trees.
fn sexp(e: &Expr) -> String {
    match &e.kind {
        ExprKind::Number { value, unit } => match unit {
            Some(u) => format!("{value} {}", u.text),
            None => format!("{value}"),
        },
        ExprKind::Code { text, .. } => format!("code:{text}"),
        ExprKind::Str(s) => format!("{s:?}"),
        ExprKind::Name(n) => n.clone(),
        ExprKind::Neg(x) => format!("(neg {})", sexp(x)),
        ExprKind::Binary { op, lhs, rhs } => {
            let op = match op {
                worksheet_lang::ast::BinOp::Add => "+",
                worksheet_lang::ast::BinOp::Sub => "-",
                worksheet_lang::ast::BinOp::Mul => "*",
                worksheet_lang::ast::BinOp::Div => "/",
                worksheet_lang::ast::BinOp::Pow => "^",
                worksheet_lang::ast::BinOp::Parallel => "||",
            };
            format!("({op} {} {})", sexp(lhs), sexp(rhs))
        }
        ExprKind::PlusMinus { base, spread } => format!("(± {} {})", sexp(base), sexp(spread)),
        ExprKind::Range { lo, hi } => format!("(.. {} {})", sexp(lo), sexp(hi)),
        ExprKind::Call { callee, args } => {
            let mut s = format!("(call {}", sexp(callee));
            for a in args {
                match &a.name {
                    Some(n) => s.push_str(&format!(" {}:{}", n.name, sexp(&a.value))),
                    None => s.push_str(&format!(" {}", sexp(&a.value))),
                }
            }
            s.push(')');
            s
        }
        ExprKind::Field { base, field } => format!("(. {} {})", sexp(base), field.name),
        ExprKind::List(items) => {
            let items: Vec<String> = items.iter().map(sexp).collect();
            format!("[{}]", items.join(" "))
        }
        ExprKind::Error => "ERROR".to_string(),
    }
}

/// Parses a one-statement cell that must parse cleanly.
fn one(src: &str) -> Stmt {
    let p = parse(src);
    assert!(p.diagnostics.is_empty(), "{src:?}: {:#?}", p.diagnostics);
    assert_eq!(p.stmts.len(), 1, "{src:?}: {:#?}", p.stmts);
    p.stmts.into_iter().next().unwrap()
}

/// The expression of a clean one-line show statement.
fn expr(src: &str) -> Expr {
    match one(src).kind {
        StmtKind::Show {
            expr,
            as_unit: None,
        } => expr,
        other => panic!("{src:?}: not a plain expression: {other:?}"),
    }
}

/// The value of `x = …`.
fn value(src: &str) -> Expr {
    match one(&format!("x = {src}")).kind {
        StmtKind::Define(d) => d.value,
        other => panic!("{src:?}: {other:?}"),
    }
}

fn unit_text(u: &Option<UnitExpr>) -> Option<&str> {
    u.as_ref().map(|u| u.text.as_str())
}

/// Byte range of the `n`-th (0-based) occurrence of `needle` in `hay`.
fn find(hay: &str, needle: &str, n: usize) -> std::ops::Range<usize> {
    let start = hay
        .match_indices(needle)
        .nth(n)
        .unwrap_or_else(|| panic!("{needle:?} not in {hay:?}"))
        .0;
    start..start + needle.len()
}

/// Every span in a program: inside the source and on character boundaries.
fn spans_ok(src: &str, p: &Program) -> Result<(), String> {
    let check = |what: &str, s: &std::ops::Range<usize>| -> Result<(), String> {
        if s.start > s.end || s.end > src.len() {
            return Err(format!("{what} span {s:?} outside 0..{}", src.len()));
        }
        if !src.is_char_boundary(s.start) || !src.is_char_boundary(s.end) {
            return Err(format!("{what} span {s:?} not on char boundaries"));
        }
        Ok(())
    };
    type Check<'a> = dyn Fn(&str, &std::ops::Range<usize>) -> Result<(), String> + 'a;
    fn walk(e: &Expr, check: &Check) -> Result<(), String> {
        check("expr", &e.span)?;
        match &e.kind {
            ExprKind::Number { unit: Some(u), .. } => check("unit", &u.span),
            ExprKind::Neg(x) => walk(x, check),
            ExprKind::Binary { lhs, rhs, .. } => {
                walk(lhs, check)?;
                walk(rhs, check)
            }
            ExprKind::PlusMinus { base, spread } => {
                walk(base, check)?;
                walk(spread, check)
            }
            ExprKind::Range { lo, hi } => {
                walk(lo, check)?;
                walk(hi, check)
            }
            ExprKind::Call { callee, args } => {
                walk(callee, check)?;
                for a in args {
                    if let Some(n) = &a.name {
                        check("arg", &n.span)?;
                    }
                    walk(&a.value, check)?;
                }
                Ok(())
            }
            ExprKind::Field { base, field } => {
                check("field", &field.span)?;
                walk(base, check)
            }
            ExprKind::List(items) => items.iter().try_for_each(|i| walk(i, check)),
            _ => Ok(()),
        }
    }
    for d in &p.diagnostics {
        check("diagnostic", &d.span)?;
    }
    for s in &p.stmts {
        check("statement", &s.span)?;
        match &s.kind {
            StmtKind::Given(d) | StmtKind::Define(d) => {
                check("name", &d.name.span)?;
                if let Some(u) = &d.unit {
                    check("unit", &u.span)?;
                }
                if let Some(n) = &d.note {
                    check("note", &n.span)?;
                }
                walk(&d.value, &check)?;
            }
            StmtKind::Function {
                name, params, body, ..
            } => {
                check("name", &name.span)?;
                for p in params {
                    check("param", &p.span)?;
                }
                walk(body, &check)?;
            }
            StmtKind::Check { lhs, rhs, .. } => {
                walk(lhs, &check)?;
                walk(rhs, &check)?;
            }
            StmtKind::Sweep { vars, exprs } => {
                for v in vars {
                    walk(&v.from, &check)?;
                    walk(&v.to, &check)?;
                }
                for e in exprs {
                    walk(e, &check)?;
                }
            }
            StmtKind::Show { expr, as_unit } => {
                if let Some(u) = as_unit {
                    check("as", &u.span)?;
                }
                walk(expr, &check)?;
            }
            StmtKind::Error => {}
        }
    }
    Ok(())
}

/// Whether a statement is or holds an error node.
fn has_error(s: &Stmt) -> bool {
    fn bad(e: &Expr) -> bool {
        match &e.kind {
            ExprKind::Error => true,
            ExprKind::Neg(x) => bad(x),
            ExprKind::Binary { lhs, rhs, .. } => bad(lhs) || bad(rhs),
            ExprKind::PlusMinus { base, spread } => bad(base) || bad(spread),
            ExprKind::Range { lo, hi } => bad(lo) || bad(hi),
            ExprKind::Call { callee, args } => bad(callee) || args.iter().any(|a| bad(&a.value)),
            ExprKind::Field { base, .. } => bad(base),
            ExprKind::List(items) => items.iter().any(bad),
            _ => false,
        }
    }
    match &s.kind {
        StmtKind::Error => true,
        StmtKind::Given(d) | StmtKind::Define(d) => bad(&d.value),
        StmtKind::Function { body, .. } => bad(body),
        StmtKind::Check { lhs, rhs, .. } => bad(lhs) || bad(rhs),
        StmtKind::Sweep { vars, exprs } => {
            vars.iter().any(|v| {
                bad(&v.from)
                    || bad(&v.to)
                    || matches!(&v.step, Some(SweepStep::Steps(e) | SweepStep::By(e)) if bad(e))
            }) || exprs.iter().any(bad)
        }
        StmtKind::Show { expr, .. } => bad(expr),
    }
}

// ---- the look-alike fold ----------------------------------------------------------------

#[test]
fn fold_table_maps_each_look_alike() {
    // (pasted character, what the lexer sees)
    let table = [
        ("\u{00B5}", "\u{00B5}"), // micro sign stays
        ("\u{03BC}", "\u{00B5}"), // Greek mu → micro sign
        ("\u{2126}", "\u{03A9}"), // ohm sign → Greek omega
        ("\u{212A}", "K"),        // kelvin sign
        ("\u{2103}", "°C"),
        ("\u{2109}", "°F"),
        ("\u{00BA}", "°"),        // masculine ordinal
        ("\u{2212}", "-"),        // minus sign
        ("\u{00D7}", "*"),        // multiplication sign
        ("\u{00B7}", "\u{00B7}"), // middle dot stays
        ("\u{22C5}", "\u{00B7}"), // dot operator → middle dot
        ("\u{00A0}", " "),        // no-break space
        ("\u{202F}", " "),        // narrow no-break space
        ("\u{2009}", " "),        // thin space
        ("\u{200A}", " "),        // hair space
        ("\u{2007}", " "),        // figure space
        ("a", "a"),
        ("Ω", "Ω"),
    ];
    for (from, to) in table {
        assert_eq!(fold::fold_str(from), to, "{from:?}");
    }
}

#[test]
fn fold_keeps_spans_in_the_original_source() {
    let src = "x = 25\u{00A0}\u{2103} + 4.7\u{202F}\u{03BC}F × 2";
    let f = fold::fold(src);
    assert_eq!(f.text(), "x = 25 °C + 4.7 µF * 2");
    // `°C` came from the 3-byte `℃`; both folded characters map to all of it.
    let c = find(f.text(), "°C", 0);
    assert_eq!(f.span(c.clone()), find(src, "\u{2103}", 0));
    assert_eq!(f.span(c.end - 1..c.end), find(src, "\u{2103}", 0));
    assert_eq!(f.span(find(f.text(), "*", 0)), find(src, "×", 0));
    assert_eq!(f.span(find(f.text(), "µF", 0)), find(src, "\u{03BC}F", 0));
}

#[test]
fn folded_units_parse_and_point_at_the_original() {
    // (source, value, unit text after folding, unit as typed)
    let cases = [
        ("10 \u{03BC}F", 10.0, "µF", "\u{03BC}F"),
        ("10 \u{00B5}F", 10.0, "µF", "\u{00B5}F"),
        ("5 k\u{2126}", 5.0, "kΩ", "k\u{2126}"),
        ("25 \u{2103}", 25.0, "°C", "\u{2103}"),
        ("77 \u{2109}", 77.0, "°F", "\u{2109}"),
        ("25 \u{00BA}C", 25.0, "°C", "\u{00BA}C"),
        ("10 \u{212A}", 10.0, "K", "\u{212A}"),
        ("2 A\u{22C5}h", 2.0, "A·h", "A\u{22C5}h"),
        ("12\u{00A0}V", 12.0, "V", "V"),
        ("12\u{202F}V", 12.0, "V", "V"),
        ("12\u{2009}mA", 12.0, "mA", "mA"),
    ];
    for (src, v, unit, typed) in cases {
        let e = expr(src);
        match &e.kind {
            ExprKind::Number {
                value,
                unit: Some(u),
            } => {
                assert_eq!(*value, v, "{src:?}");
                assert_eq!(u.text, unit, "{src:?}");
                assert_eq!(&src[u.span.clone()], typed, "{src:?}");
            }
            other => panic!("{src:?}: {other:?}"),
        }
        assert_eq!(e.span, 0..src.len(), "{src:?}");
    }
    // Minus sign and multiplication sign are operators after folding.
    assert_eq!(sexp(&expr("\u{2212}5 V")), "(neg 5 V)");
    assert_eq!(sexp(&expr("a \u{00D7} b")), "(* a b)");
    assert_eq!(sexp(&expr("a \u{22C5} b")), "(* a b)");
}

#[test]
fn names_are_nfkc_normalised_with_original_spans() {
    // (source name, normalised name)
    let cases = [
        ("\u{FB01}lter", "filter"),       // ligature ﬁ
        ("\u{FF56}in", "vin"),            // fullwidth v
        ("R\u{2081}", "R1"),              // subscript one
        ("e\u{0301}ta", "\u{00E9}ta"),    // decomposed é composes
        ("\u{03B8}", "\u{03B8}"),         // θ
        ("\u{0394}T", "\u{0394}T"),       // ΔT
        ("\u{03B7}_max", "\u{03B7}_max"), // η_max
        ("\u{03C8}jt", "\u{03C8}jt"),     // ψjt
        ("_tmp2", "_tmp2"),
        ("R47", "R47"),
    ];
    for (name, normal) in cases {
        let src = format!("{name} = 1");
        match one(&src).kind {
            StmtKind::Define(d) => {
                assert_eq!(d.name.name, normal, "{src:?}");
                assert_eq!(d.name.span, 0..name.len(), "{src:?}");
            }
            other => panic!("{src:?}: {other:?}"),
        }
    }
    // Names are case-sensitive.
    assert_eq!(sexp(&expr("Vin + vin")), "(+ Vin vin)");
}

// ---- numbers, units, codes --------------------------------------------------------------

#[test]
fn numbers() {
    let cases: [(&str, f64); 8] = [
        ("12", 12.0),
        ("0.47", 0.47),
        ("4.7e-3", 4.7e-3),
        ("4.7E3", 4700.0),
        ("1e+2", 100.0),
        ("1_000", 1000.0),
        ("1_000_000.000_1", 1_000_000.000_1),
        ("007", 7.0),
    ];
    for (src, v) in cases {
        match value(src).kind {
            ExprKind::Number { value, unit: None } => assert_eq!(value, v, "{src:?}"),
            other => panic!("{src:?}: {other:?}"),
        }
    }
}

#[test]
fn a_double_dot_after_digits_is_a_range() {
    assert_eq!(sexp(&value("1..2")), "(.. 1 2)");
    assert_eq!(sexp(&value("1.5..2.5")), "(.. 1.5 2.5)");
    assert_eq!(sexp(&value("10.8 V .. 13.2 V")), "(.. 10.8 V 13.2 V)");
    assert_eq!(sexp(&value("10.8V..13.2V")), "(.. 10.8 V 13.2 V)");
}

#[test]
fn units_after_numbers() {
    // (source, value, unit) — the unit follows directly or after exactly one space.
    let cases = [
        ("12 V", 12.0, "V"),
        ("85mA", 85.0, "mA"),
        ("0.5 K/W", 0.5, "K/W"),
        ("3 mV/K", 3.0, "mV/K"),
        ("0.2 W/(m·K)", 0.2, "W/(m·K)"),
        ("2 A·h", 2.0, "A·h"),
        ("4 m^2", 4.0, "m^2"),
        ("4 mm²", 4.0, "mm²"),
        ("3 m^-1", 3.0, "m^-1"),
        ("12 V/s", 12.0, "V/s"),
        ("25 °C", 25.0, "°C"),
        ("25°C", 25.0, "°C"),
        ("50 degC", 50.0, "degC"),
        ("10 %", 10.0, "%"),
        ("10%", 10.0, "%"),
        ("50 ppm", 50.0, "ppm"),
        ("10K", 10.0, "K"),
        ("10 K", 10.0, "K"),
        ("1m", 1.0, "m"),
        ("2 C", 2.0, "C"),
        ("5kΩ", 5.0, "kΩ"),
        ("4.7 kΩ", 4.7, "kΩ"),
        ("2.2 µH", 2.2, "µH"),
        ("10 ohm", 10.0, "ohm"),
        ("2 h", 2.0, "h"),
        ("5 min", 5.0, "min"),
        ("1.2 Wh", 1.2, "Wh"),
        ("12V", 12.0, "V"),
    ];
    for (src, v, unit) in cases {
        let e = value(src);
        match &e.kind {
            ExprKind::Number {
                value,
                unit: Some(u),
            } => {
                assert_eq!((*value, u.text.as_str()), (v, unit), "{src:?}");
                // "x = " is four bytes.
                assert_eq!(u.span, 4 + src.len() - unit.len()..4 + src.len(), "{src:?}");
            }
            other => panic!("{src:?}: {other:?}"),
        }
    }
}

#[test]
fn where_units_end() {
    // With spaces around `/` or `*` it is arithmetic; a compound unit has no spaces.
    let cases = [
        ("12 V / 2", "(/ 12 V 2)"),
        ("12 V/s", "12 V/s"),
        ("12 V*x", "(* 12 V x)"),
        ("12 V * x", "(* 12 V x)"),
        ("12 V/(2 A)", "(/ 12 V 2 A)"),
        ("12 V/x", "(/ 12 V x)"),
        ("2 m^2/x", "(/ 2 m^2 x)"),
        ("100 mA/2", "(/ 100 mA 2)"),
        ("2 V/s1", "(/ 2 V s1)"),
        ("2 W/m^2", "2 W/m^2"),
        ("(12 V)", "12 V"),
        ("f(2 V, 3 A)", "(call f 2 V 3 A)"),
        ("5 V..6 V", "(.. 5 V 6 V)"),
        ("1 .. 10", "(.. 1 10)"),
        ("2 ^ 3", "(^ 2 3)"),
        ("2^3", "(^ 2 3)"),
    ];
    for (src, tree) in cases {
        assert_eq!(sexp(&value(src)), tree, "{src:?}");
    }
    // Keywords are never units, so a sweep's `steps` and `by` read as such.
    match one("sweep x over 1 .. 10 steps 5: y").kind {
        StmtKind::Sweep { vars, .. } => {
            assert_eq!(sexp(&vars[0].to), "10");
            assert!(matches!(&vars[0].step, Some(SweepStep::Steps(e)) if sexp(e) == "5"));
        }
        other => panic!("{other:?}"),
    }
}

#[test]
fn a_word_that_is_no_unit_is_a_name() {
    // `2 x`, `12 V1`, `2 mA_max`: a number followed by a name is a syntax error whose
    // hint writes the product.
    let cases = [
        ("x = 2 x", "write `2 * x`"),
        ("x = 12 V1", "write `12 * V1`"),
        ("x = 2 mA_max", "write `2 * mA_max`"),
        ("x = 2x", "write `2 * x`"),
        ("x = 1 + 2 y", "write `2 * y`"),
        (
            "x = 10KΩ",
            "write `10 * KΩ` for a product, or `10 kΩ` for the unit (units are case-sensitive)",
        ),
        (
            "x = 5 v",
            "write `5 * v` for a product, or `5 V` for the unit (units are case-sensitive)",
        ),
        (
            "x = 12 Vv",
            "`Vv` is not a unit; did you mean `12 V`? (for a product, write `12 * Vv`)",
        ),
    ];
    for (src, hint) in cases {
        let p = parse(src);
        assert_eq!(p.diagnostics.len(), 1, "{src:?}: {:#?}", p.diagnostics);
        let d = &p.diagnostics[0];
        assert_eq!(d.kind, DiagKind::UnexpectedToken, "{src:?}");
        assert_eq!(d.hint.as_deref(), Some(hint), "{src:?}");
    }
}

/// IEC 60062 letter-and-numeral codes: the letter stands where the decimal point would.
#[test]
fn component_value_codes() {
    use CodeKind::{Capacitance as F, Resistance as R};
    let cases: [(&str, f64, CodeKind); 19] = [
        // The examples of the language reference.
        ("4k7", 4700.0, R),
        ("2R2", 2.2, R),
        ("0R47", 0.47, R),
        ("47R", 47.0, R),
        ("10k", 10_000.0, R),
        ("1M5", 1.5e6, R),
        ("1G", 1e9, R),
        ("4K7", 4700.0, R),
        ("4n7", 4.7e-9, F),
        ("100n", 100e-9, F),
        ("220p", 220e-12, F),
        ("2u2", 2.2e-6, F),
        ("2µ2", 2.2e-6, F),
        ("100u", 100e-6, F),
        // IEC 60062 (from memory): 4R7 = 4.7 Ω, 1M0 = 1 MΩ, 4p7 = 4.7 pF, 1n0 = 1 nF,
        // 4µ7 = 4.7 µF. (It also writes R47 for 0.47 Ω and 47K for 47 kΩ; here `R47` is a
        // name and `47K` is kelvin, so those read `0R47` and `47k`.)
        ("4R7", 4.7, R),
        ("1M0", 1e6, R),
        ("4p7", 4.7e-12, F),
        ("1n0", 1e-9, F),
        ("4µ7", 4.7e-6, F),
    ];
    for (src, v, k) in cases {
        match value(src).kind {
            ExprKind::Code { value, kind, text } => {
                assert_eq!((value, kind), (v, k), "{src:?}");
                assert_eq!(text, src);
            }
            other => panic!("{src:?}: {other:?}"),
        }
    }
    // A unit wins over a code: `10K` is ten kelvin, `5kΩ` is a number with a unit.
    assert_eq!(sexp(&value("10K")), "10 K");
    assert_eq!(sexp(&value("5kΩ")), "5 kΩ");
    // `R47` is a name; `4k7x` is no code.
    assert_eq!(sexp(&value("R47")), "R47");
    assert_eq!(parse("x = 4k7x").diagnostics.len(), 1);
}

// ---- precedence -------------------------------------------------------------------------

#[test]
fn precedence() {
    let cases = [
        ("6 K/W ± 10 % + 0.4 K/W", "(+ (± 6 K/W 10 %) 0.4 K/W)"),
        ("-5 V .. 5 V", "(.. (neg 5 V) 5 V)"),
        ("R1 + R2 || R3", "(+ R1 (|| R2 R3))"),
        ("R1 || R2 + R3", "(+ (|| R1 R2) R3)"),
        ("a || b * c", "(|| a (* b c))"),
        ("a || b || c", "(|| (|| a b) c)"),
        ("a * b ± c", "(* a (± b c))"),
        ("a ± b * c", "(* (± a b) c)"),
        ("a +/- b", "(± a b)"),
        ("-a ± b", "(± (neg a) b)"),
        ("a - b - c", "(- (- a b) c)"),
        ("a / b / c", "(/ (/ a b) c)"),
        ("a - b * c", "(- a (* b c))"),
        ("2^3^2", "(^ 2 (^ 3 2))"),
        ("-x^2", "(neg (^ x 2))"),
        ("2^-1", "(^ 2 (neg 1))"),
        ("--x", "(neg (neg x))"),
        ("+x", "x"),
        ("a^b.c", "(^ a (. b c))"),
        ("u1.loss * 2", "(* (. u1 loss) 2)"),
        ("f(x).y.z", "(. (. (call f x) y) z)"),
        ("(a + b) * c", "(* (+ a b) c)"),
        ("[1, 2] ", "[1 2]"),
        (
            "[[0.5 K/W, 1 ms], [2 K/W, 10 ms]]",
            "[[0.5 K/W 1 ms] [2 K/W 10 ms]]",
        ),
        ("[]", "[]"),
        ("tol(x, -20 %, +80 %)", "(call tol x (neg 20 %) 80 %)"),
        (
            "reg.linear(vin, vout: 5 V, iout: iload)",
            "(call (. reg linear) vin vout:5 V iout:iload)",
        ),
        ("f()", "(call f)"),
        ("f(a, b,)", "(call f a b)"),
        ("\"nearest\"", "\"nearest\""),
        ("a · b", "(* a b)"),
        ("(a ± b) ± c", "(± (± a b) c)"),
    ];
    for (src, tree) in cases {
        assert_eq!(sexp(&expr(src)), tree, "{src:?}");
    }
}

#[test]
fn expression_spans() {
    let src = "-5 V .. f(a).b";
    let e = expr(src);
    assert_eq!(e.span, 0..src.len());
    match &e.kind {
        ExprKind::Range { lo, hi } => {
            assert_eq!(lo.span, 0..4);
            assert_eq!(hi.span, find(src, "f(a).b", 0));
            match &hi.kind {
                ExprKind::Field { base, field } => {
                    assert_eq!(base.span, find(src, "f(a)", 0));
                    assert_eq!(field.span, find(src, "b", 0));
                }
                other => panic!("{other:?}"),
            }
        }
        other => panic!("{other:?}"),
    }
    // Parentheses belong to the operand they enclose.
    let e = expr("(a + b) * c");
    match &e.kind {
        ExprKind::Binary { lhs, .. } => assert_eq!(lhs.span, 0..7),
        other => panic!("{other:?}"),
    }
}

// ---- statements -------------------------------------------------------------------------

#[test]
fn given_and_define() {
    let src = "given vin [V] = 10.8 V .. 13.2 V   \"adapter, ±10 %\"   # the adapter";
    let s = one(src);
    assert_eq!(s.span, 0..find(src, "\"adapter, ±10 %\"", 0).end);
    match s.kind {
        StmtKind::Given(d) => {
            assert_eq!(d.name.name, "vin");
            assert_eq!(unit_text(&d.unit), Some("V"));
            assert_eq!(d.unit.unwrap().span, find(src, "V", 0));
            assert_eq!(sexp(&d.value), "(.. 10.8 V 13.2 V)");
            let note = d.note.unwrap();
            assert_eq!(note.text, "adapter, ±10 %");
            assert_eq!(note.span, find(src, "\"adapter, ±10 %\"", 0));
        }
        other => panic!("{other:?}"),
    }
    let cases = [
        ("tj [°C] = heat.junction(p)", "tj", Some("°C")),
        ("θ = 6 K/W", "θ", None),
        ("r_th [ K/W ] = 2 K/W", "r_th", Some("K/W")),
        ("a [W/(m·K)] = k", "a", Some("W/(m·K)")),
        ("area [mm²] = 4 mm²", "area", Some("mm²")),
        ("pct [%] = 5 %", "pct", Some("%")),
    ];
    for (src, name, unit) in cases {
        match one(src).kind {
            StmtKind::Define(d) => {
                assert_eq!(d.name.name, name, "{src:?}");
                assert_eq!(unit_text(&d.unit), unit, "{src:?}");
                assert!(d.note.is_none());
            }
            other => panic!("{src:?}: {other:?}"),
        }
    }
    match one("given iload = 180 mA ± 20 %   \"logic\"").kind {
        StmtKind::Given(d) => {
            assert_eq!(d.unit, None);
            assert_eq!(sexp(&d.value), "(± 180 mA 20 %)");
            assert_eq!(d.note.unwrap().text, "logic");
        }
        other => panic!("{other:?}"),
    }
}

#[test]
fn functions() {
    match one("p(v, r) [mW] = v^2 / r").kind {
        StmtKind::Function {
            name,
            params,
            unit,
            body,
        } => {
            assert_eq!(name.name, "p");
            let params: Vec<&str> = params.iter().map(|p| p.name.as_str()).collect();
            assert_eq!(params, ["v", "r"]);
            assert_eq!(unit_text(&unit), Some("mW"));
            assert_eq!(sexp(&body), "(/ (^ v 2) r)");
        }
        other => panic!("{other:?}"),
    }
    assert!(matches!(one("k() = 2").kind, StmtKind::Function { params, .. } if params.is_empty()));
    // A call on its own is shown, not defined.
    assert!(matches!(one("p(1 V, 2 Ω)").kind, StmtKind::Show { .. }));
}

#[test]
fn checks() {
    let cases = [
        ("check tj <= 125 °C", CmpOp::Le),
        ("check tj ≤ 125 °C", CmpOp::Le),
        ("check tj < 125 °C", CmpOp::Lt),
        ("check h >= 0 V", CmpOp::Ge),
        ("check h ≥ 0 V", CmpOp::Ge),
        ("check h > 0 V", CmpOp::Gt),
    ];
    for (src, op) in cases {
        match one(src).kind {
            StmtKind::Check {
                op: o, note: None, ..
            } => assert_eq!(o, op, "{src:?}"),
            other => panic!("{src:?}: {other:?}"),
        }
    }
    match one("check vin - 2 V >= vout  \"stays out of dropout\"").kind {
        StmtKind::Check { lhs, op, rhs, note } => {
            assert_eq!(sexp(&lhs), "(- vin 2 V)");
            assert_eq!(op, CmpOp::Ge);
            assert_eq!(sexp(&rhs), "vout");
            assert_eq!(note.unwrap().text, "stays out of dropout");
        }
        other => panic!("{other:?}"),
    }
}

#[test]
fn sweeps() {
    match one("sweep iload over 50 mA .. 300 mA steps 26: tj, u1.loss").kind {
        StmtKind::Sweep { vars, exprs } => {
            assert_eq!(vars.len(), 1);
            assert_eq!(vars[0].name.name, "iload");
            assert_eq!(sexp(&vars[0].from), "50 mA");
            assert_eq!(sexp(&vars[0].to), "300 mA");
            assert!(matches!(&vars[0].step, Some(SweepStep::Steps(e)) if sexp(e) == "26"));
            let exprs: Vec<String> = exprs.iter().map(sexp).collect();
            assert_eq!(exprs, ["tj", "(. u1 loss)"]);
        }
        other => panic!("{other:?}"),
    }
    match one("sweep ta over 0 °C .. 50 °C by 5 K, vin over 11 V .. 13 V: tj").kind {
        StmtKind::Sweep { vars, exprs } => {
            assert_eq!(vars.len(), 2);
            assert!(matches!(&vars[0].step, Some(SweepStep::By(e)) if sexp(e) == "5 K"));
            assert_eq!(vars[1].name.name, "vin");
            assert!(vars[1].step.is_none());
            assert_eq!(exprs.len(), 1);
        }
        other => panic!("{other:?}"),
    }
    // Over a negative range.
    match one("sweep v over -5 V .. 5 V: i").kind {
        StmtKind::Sweep { vars, .. } => assert_eq!(sexp(&vars[0].from), "(neg 5 V)"),
        other => panic!("{other:?}"),
    }
}

#[test]
fn show_and_as() {
    let cases = [
        ("u1.loss as mW", "(. u1 loss)", Some("mW")),
        ("tj as K", "tj", Some("K")),
        ("θ as °C/W", "θ", Some("°C/W")),
        ("k as W/(m·K)", "k", Some("W/(m·K)")),
        ("a as mm²  # area", "a", Some("mm²")),
        ("r as %", "r", Some("%")),
        ("1 V + 2 V", "(+ 1 V 2 V)", None),
    ];
    for (src, tree, unit) in cases {
        match one(src).kind {
            StmtKind::Show { expr, as_unit } => {
                assert_eq!(sexp(&expr), tree, "{src:?}");
                assert_eq!(unit_text(&as_unit), unit, "{src:?}");
                if let (Some(u), Some(text)) = (as_unit, unit) {
                    assert_eq!(u.span, find(src, text, 0), "{src:?}");
                }
            }
            other => panic!("{src:?}: {other:?}"),
        }
    }
}

#[test]
fn the_worksheet_at_a_glance_parses() {
    let src = r#"# 5 V logic rail of a bench data-acquisition box, fed from a 12 V adapter
given vin   = 10.8 V .. 13.2 V           "adapter, ±10 %"
given iload = 180 mA ± 20 %              "logic + display backlight"
given ta    = 50 °C                      "inside the closed enclosure"

u1 = reg.linear(vin, vout: 5 V, iout: iload, iq: 4 mA, dropout: 2 V)
θ  = 6 K/W + 0.4 K/W + (22 K/W || 60 K/W)     # junction→case, pad, sink ∥ board copper
tj [°C] = heat.junction(u1.loss, ambient: ta, theta: θ, tj_max: 125 °C)
check tj <= 125 °C                       "silicon limit from the part's data"
check u1.headroom >= 0 V                 "stays out of dropout"

R7 = res.led(supply: 5 V, vf: 2.1 V, current: 8 mA, series: E24)
u1.loss as mW
sweep iload over 50 mA .. 300 mA steps 26: tj, u1.loss
"#;
    let p = parse(src);
    assert!(p.diagnostics.is_empty(), "{:#?}", p.diagnostics);
    let kinds: Vec<&str> = p
        .stmts
        .iter()
        .map(|s| match &s.kind {
            StmtKind::Given(_) => "given",
            StmtKind::Define(_) => "define",
            StmtKind::Function { .. } => "function",
            StmtKind::Check { .. } => "check",
            StmtKind::Sweep { .. } => "sweep",
            StmtKind::Show { .. } => "show",
            StmtKind::Error => "error",
        })
        .collect();
    assert_eq!(
        kinds,
        [
            "given", "given", "given", "define", "define", "define", "check", "check", "define",
            "show", "sweep"
        ]
    );
    // The θ line's span stops before its comment.
    let theta = &p.stmts[4];
    assert_eq!(
        &src[theta.span.clone()],
        "θ  = 6 K/W + 0.4 K/W + (22 K/W || 60 K/W)"
    );
}

// ---- continuation lines -----------------------------------------------------------------

#[test]
fn continuation_lines() {
    // (source, number of statements, tree of the first statement's expression)
    let cases = [
        ("x = f(1,\n      2)", 1, "(call f 1 2)"),
        ("x = f(1, # first\n      2)  # second", 1, "(call f 1 2)"),
        ("x = (1\n+ 2)", 1, "(+ 1 2)"),
        ("x = [1,\n 2]", 1, "[1 2]"),
        ("x = 1 +\n    2", 1, "(+ 1 2)"),
        ("x = 1 *\n\n    2", 1, "(* 1 2)"),
        ("x = 1 ||\n 2", 1, "(|| 1 2)"),
        ("x = 1 V ±\n 5 %", 1, "(± 1 V 5 %)"),
        ("x = 1 V ..\n 2 V", 1, "(.. 1 V 2 V)"),
        ("x =\n 3", 1, "3"),
        ("x = 1\n+ 2", 2, "1"),
        ("x = 1\n\n\ny = 2", 2, "1"),
    ];
    for (src, n, tree) in cases {
        let p = parse(src);
        assert!(p.diagnostics.is_empty(), "{src:?}: {:#?}", p.diagnostics);
        assert_eq!(p.stmts.len(), n, "{src:?}");
        match &p.stmts[0].kind {
            StmtKind::Define(d) => assert_eq!(sexp(&d.value), tree, "{src:?}"),
            other => panic!("{src:?}: {other:?}"),
        }
    }
    let p = parse("check a <=\n  b\nsweep x over 1 .. 2:\n  y,\n  z");
    assert!(p.diagnostics.is_empty(), "{:#?}", p.diagnostics);
    assert_eq!(p.stmts.len(), 2);
    assert!(matches!(&p.stmts[1].kind, StmtKind::Sweep { exprs, .. } if exprs.len() == 2));
    // A statement's span covers its continuation lines.
    let src = "u1 = reg.linear(vin,\n    vout: 5 V)   # rail\nx = 1";
    let p = parse(src);
    assert_eq!(p.stmts[0].span, 0..find(src, "5 V)", 0).end);
    assert_eq!(p.stmts[1].span, find(src, "x = 1", 0));
}

#[test]
fn completeness() {
    let incomplete = || Completeness::Incomplete {
        indent: "    ".to_string(),
    };
    let cases = [
        ("x = 1", Completeness::Complete),
        ("", Completeness::Complete),
        ("# just a comment", Completeness::Complete),
        ("x = f(1,", incomplete()),
        ("x = f(1,\n 2", incomplete()),
        ("x = [1, 2", incomplete()),
        ("x = 1 +", incomplete()),
        ("x = 1 + # more below", incomplete()),
        ("x = 1 +\n", incomplete()),
        ("sweep x over 1 .. 2:", incomplete()),
        ("check a <=", incomplete()),
        ("x =", incomplete()),
        ("f(a,\n b)", Completeness::Complete),
        ("x = 1)", Completeness::Invalid),
        ("x = (1]", Completeness::Invalid),
        ("x = ]", Completeness::Invalid),
        ("x = 1 \"open note", Completeness::Invalid),
        ("x = \"(\"", Completeness::Complete),
        ("x = 1 # (", Completeness::Complete),
    ];
    for (src, want) in cases {
        assert_eq!(is_complete(src), want, "{src:?}");
    }
}

// ---- diagnostics ------------------------------------------------------------------------

struct Expect {
    src: &'static str,
    kind: DiagKind,
    message: &'static str,
    /// The text under the span, and which occurrence of it.
    at: (&'static str, usize),
    hint: Option<&'static str>,
}

#[test]
fn syntax_diagnostics() {
    let cases = [
        Expect {
            src: "x = 2 @ 3",
            kind: DiagKind::InvalidCharacter,
            message: "the character `@` (U+0040) is not part of the language",
            at: ("@", 0),
            hint: None,
        },
        Expect {
            src: "x = a | b",
            kind: DiagKind::InvalidCharacter,
            message: "the character `|` (U+007C) is not part of the language",
            at: ("|", 0),
            hint: Some("`||` is the parallel combination: `R1 || R2`"),
        },
        Expect {
            src: "given v = 5 V \"open note   \nx = 1",
            kind: DiagKind::UnterminatedString,
            message: "this string is not closed",
            at: ("\"open note", 0),
            hint: Some("end it with `\"` on the same line; a string cannot span lines"),
        },
        Expect {
            src: "x = 1__000",
            kind: DiagKind::InvalidNumber,
            message: "misplaced `_` in the number `1__000`",
            at: ("1__000", 0),
            hint: Some("`_` groups digits and stands between two of them: `1_000`"),
        },
        Expect {
            src: "x = 1e999 V",
            kind: DiagKind::InvalidNumber,
            message: "the number `1e999` is too large",
            at: ("1e999", 0),
            hint: Some("write it with a unit prefix (`4.7 GΩ`) or a smaller exponent"),
        },
        Expect {
            src: "x = 4.7k",
            kind: DiagKind::InvalidNumber,
            message: "`4.7k` is neither a number with a unit nor a component-value code",
            at: ("4.7k", 0),
            hint: Some(
                "a code puts its letter where the decimal point would be (`4k7`); \
                 or write the unit: `4.7 kΩ`",
            ),
        },
        Expect {
            src: "R1 = 4k7Ω",
            kind: DiagKind::UnitAfterCode,
            message: "a unit after the component-value code `4k7`",
            at: ("Ω", 0),
            hint: Some("`4k7` already means 4.7 kΩ; drop the unit, or write `4.7 kΩ`"),
        },
        Expect {
            src: "R1 = 10k Ω",
            kind: DiagKind::UnitAfterCode,
            message: "a unit after the component-value code `10k`",
            at: ("Ω", 0),
            hint: Some("`10k` already means 10 kΩ; drop the unit, or write `10 kΩ`"),
        },
        Expect {
            src: "C1 = 4n7 F",
            kind: DiagKind::UnitAfterCode,
            message: "a unit after the component-value code `4n7`",
            at: ("F", 0),
            hint: Some("`4n7` already means 4.7 nF; drop the unit, or write `4.7 nF`"),
        },
        Expect {
            src: "sweep v over 10.8 .. 13.2 V: i",
            kind: DiagKind::RangeNeedsUnits,
            message: "each end of a range carries its own unit",
            at: ("10.8 .. 13.2 V", 0),
            hint: Some("write `10.8 V .. 13.2 V`"),
        },
        Expect {
            src: "x = 10.8 .. 13.2 V",
            kind: DiagKind::RangeNeedsUnits,
            message: "each end of a range carries its own unit",
            at: ("10.8 .. 13.2 V", 0),
            hint: Some("write `10.8 V .. 13.2 V`"),
        },
        Expect {
            src: "x = -5 .. 5 V",
            kind: DiagKind::RangeNeedsUnits,
            message: "each end of a range carries its own unit",
            at: ("-5 .. 5 V", 0),
            hint: Some("write `-5 V .. 5 V`"),
        },
        Expect {
            src: "x = 1 V .. 2",
            kind: DiagKind::RangeNeedsUnits,
            message: "each end of a range carries its own unit",
            at: ("1 V .. 2", 0),
            hint: Some("write `1 V .. 2 V`"),
        },
        Expect {
            src: "x = 2 x",
            kind: DiagKind::UnexpectedToken,
            message: "expected an operator or the end of the statement, found the name `x`",
            at: ("x", 1),
            hint: Some("write `2 * x`"),
        },
        Expect {
            src: "x = (1 + 2) V",
            kind: DiagKind::UnexpectedToken,
            message: "expected an operator or the end of the statement, found the name `V`",
            at: ("V", 0),
            hint: Some("write the unit after a number: `1 V`"),
        },
        Expect {
            src: "x = 12  V",
            kind: DiagKind::UnexpectedToken,
            message: "expected an operator or the end of the statement, found the name `V`",
            at: ("V", 0),
            hint: Some("write the unit after the number with at most one space: `12 V`"),
        },
        Expect {
            src: "x = 5 +",
            kind: DiagKind::UnexpectedToken,
            message: "expected an expression, found end of input",
            at: ("", 7),
            hint: None,
        },
        Expect {
            src: "check a = b",
            kind: DiagKind::UnexpectedToken,
            message: "expected a comparison `<`, `<=`, `>` or `>=`, found `=`",
            at: ("=", 0),
            hint: Some(
                "`=` defines a value (`name = …`); a check compares with `<`, `<=`, `>` or `>=`",
            ),
        },
        Expect {
            src: "x = a ± b ± c",
            kind: DiagKind::UnexpectedToken,
            message: "tolerance operators do not chain",
            at: ("±", 1),
            hint: Some("give one tolerance, or group the first in parentheses: `(a ± b) …`"),
        },
        Expect {
            src: "x = 1 V .. 2 V ± 5 %",
            kind: DiagKind::UnexpectedToken,
            message: "tolerance operators do not chain",
            at: ("±", 0),
            hint: Some("give one tolerance, or group the first in parentheses: `(1 V .. 2 V) …`"),
        },
        Expect {
            src: "u = reg.linear(vin, vout: 5 V, 3 A)",
            kind: DiagKind::UnexpectedToken,
            message: "a positional argument after a named one",
            at: ("3 A", 0),
            hint: Some("name this argument, or move it before `vout:`"),
        },
        Expect {
            src: "x = f(1, 2",
            kind: DiagKind::UnclosedDelimiter,
            message: "this `(` is never closed",
            at: ("(", 0),
            hint: Some("close the `(` opened here"),
        },
        Expect {
            src: "x = [1, 2\ny = 3",
            kind: DiagKind::UnclosedDelimiter,
            message: "this `[` is never closed",
            at: ("[", 0),
            hint: Some("close the `[` opened here"),
        },
        Expect {
            src: "x = 1)",
            kind: DiagKind::UnexpectedToken,
            message: "expected an operator or the end of the statement, found `)`",
            at: (")", 0),
            hint: Some("this closing bracket has no opening one"),
        },
        Expect {
            src: "x = .5",
            kind: DiagKind::UnexpectedToken,
            message: "expected an expression, found `.`",
            at: (".", 0),
            hint: Some("write a leading zero: `0.5`"),
        },
        Expect {
            src: "x = 2 ** 3",
            kind: DiagKind::UnexpectedToken,
            message: "expected an expression, found `*`",
            at: ("*", 1),
            hint: Some("write a power with `^`: `x^2`"),
        },
        Expect {
            src: "x = y²",
            kind: DiagKind::UnexpectedToken,
            message: "expected an operator or the end of the statement, found `²`",
            at: ("²", 0),
            hint: Some("write a power with `^`: `x^2`"),
        },
        Expect {
            src: "given over = 3",
            kind: DiagKind::UnexpectedToken,
            message: "expected the name of the input after `given`, found the keyword `over`",
            at: ("over", 0),
            hint: Some("`over` is a keyword and cannot be a name"),
        },
        Expect {
            src: "x = 5 V as mV",
            kind: DiagKind::UnexpectedToken,
            message: "expected the end of the statement, found the keyword `as`",
            at: ("as", 0),
            hint: Some(
                "`as` only ends a statement that shows a value; to fix the unit of `x` \
                 write `x [UNIT] = …`",
            ),
        },
        Expect {
            src: "sweep x over vin: y",
            kind: DiagKind::UnexpectedToken,
            message: "a sweep runs over a range",
            at: ("vin", 0),
            hint: Some("write both ends: `over 50 mA .. 300 mA`"),
        },
        Expect {
            src: "x [] = 3",
            kind: DiagKind::UnexpectedToken,
            message: "no unit between `[` and `]`",
            at: ("[]", 0),
            hint: Some("write the unit the value must have, e.g. `[mW]`, or drop the brackets"),
        },
    ];
    for c in cases {
        let p = parse(c.src);
        assert_eq!(p.diagnostics.len(), 1, "{:?}: {:#?}", c.src, p.diagnostics);
        let d = &p.diagnostics[0];
        assert_eq!(d.kind, c.kind, "{:?}", c.src);
        assert_eq!(d.message, c.message, "{:?}", c.src);
        let span = if c.at.0.is_empty() {
            c.at.1..c.at.1
        } else {
            find(c.src, c.at.0, c.at.1)
        };
        assert_eq!(d.span, span, "{:?}", c.src);
        assert_eq!(d.hint.as_deref(), c.hint, "{:?}", c.src);
        assert!(d.is_error());
        spans_ok(c.src, &p).unwrap();
        // The statement in error holds an error node (or is one), except for an unclosed
        // note, which spoils nothing else.
        if c.kind != DiagKind::UnterminatedString {
            assert!(has_error(&p.stmts[0]), "{:?}: {:?}", c.src, p.stmts[0]);
        }
    }
}

#[test]
fn unknown_units_carry_the_unit_parsers_message() {
    // (source, the unit text under the span): only a text that cannot be a name (it holds
    // `/`, `·`, `^`, `°`, `%`…) is an unknown unit; the message and hint are the unit
    // parser's.
    let cases = [
        ("x = 12 foo/s", "foo/s"),
        ("x = 3 W/m·K", "W/m·K"),
        ("x = 2 °Q", "°Q"),
        ("x = 5 V^x", "V^x"),
        ("x = 5 V·x", "V·x"),
        ("x = 2 x/y", "x/y"),
    ];
    for (src, unit) in cases {
        let p = parse(src);
        assert_eq!(p.diagnostics.len(), 1, "{src:?}: {:#?}", p.diagnostics);
        let d = &p.diagnostics[0];
        let e = worksheet_lang::units::parse_unit(unit).unwrap_err();
        assert_eq!(d.kind, DiagKind::UnknownUnit, "{src:?}");
        assert_eq!(d.span, find(src, unit, 0), "{src:?}");
        assert_eq!((&d.message, &d.hint), (&e.message, &e.hint), "{src:?}");
    }
}

#[test]
fn expected_and_found_are_filled_in() {
    let p = parse("x = f(1 2)");
    let d = &p.diagnostics[0];
    assert_eq!(d.expected.as_deref(), Some("`,` or `)`"));
    assert_eq!(d.found.as_deref(), Some("the number `2`"));
    assert_eq!(d.hint.as_deref(), Some("separate the items with `,`"));
    let p = parse("x = f(1, 2");
    let d = &p.diagnostics[0];
    assert_eq!(d.expected.as_deref(), Some("`)`"));
    assert_eq!(d.found.as_deref(), Some("end of input"));
}

#[test]
fn declared_and_as_units_are_kept_as_written() {
    // The evaluator resolves these (and reports an unknown one); the parser keeps the text
    // whole, even where it holds characters that are no tokens.
    let cases = [
        ("t [°Q] = 3 K", "°Q"),
        ("t [W/m·K] = 3", "W/m·K"),
        ("t [mVV] = 3 V", "mVV"),
        ("x as furlong", "furlong"),
        ("x as K W", "K W"),
        ("x as m!", "m!"),
        ("x as  mW  # shown in milliwatts", "mW"),
    ];
    for (src, text) in cases {
        let s = one(src);
        let unit = match s.kind {
            StmtKind::Define(d) => d.unit,
            StmtKind::Show { as_unit, .. } => as_unit,
            other => panic!("{src:?}: {other:?}"),
        };
        let unit = unit.unwrap();
        assert_eq!(unit.text, text, "{src:?}");
        assert_eq!(unit.span, find(src, text, 0), "{src:?}");
    }
}

// ---- recovery ---------------------------------------------------------------------------

#[test]
fn three_bad_lines_three_diagnostics() {
    let src = "given a = 1 V\nb = 2 x\nc = a * 2\ncheck c = 3\nd = (1 +\ne = c + 1";
    let p = parse(src);
    let kinds: Vec<DiagKind> = p.diagnostics.iter().map(|d| d.kind).collect();
    assert_eq!(
        kinds,
        [
            DiagKind::UnexpectedToken,
            DiagKind::UnexpectedToken,
            DiagKind::UnclosedDelimiter
        ],
        "{:#?}",
        p.diagnostics
    );
    assert_eq!(p.stmts.len(), 6, "{:#?}", p.stmts);
    // Good lines parse; a broken definition keeps its name with an error value; a broken
    // check is an error statement.
    assert!(matches!(&p.stmts[0].kind, StmtKind::Given(d) if d.name.name == "a"));
    assert!(
        matches!(&p.stmts[1].kind, StmtKind::Define(d) if d.name.name == "b" && d.value.kind == ExprKind::Error)
    );
    assert!(matches!(&p.stmts[2].kind, StmtKind::Define(d) if sexp(&d.value) == "(* a 2)"));
    assert_eq!(p.stmts[3].kind, StmtKind::Error);
    assert!(
        matches!(&p.stmts[4].kind, StmtKind::Define(d) if d.name.name == "d" && d.value.kind == ExprKind::Error)
    );
    assert!(matches!(&p.stmts[5].kind, StmtKind::Define(d) if sexp(&d.value) == "(+ c 1)"));
    // Every diagnostic lies inside its statement's span.
    for (d, s) in p.diagnostics.iter().zip([1, 3, 4]) {
        let span = &p.stmts[s].span;
        assert!(
            span.start <= d.span.start && d.span.end <= span.end,
            "{d:?} {span:?}"
        );
    }
    assert_eq!(&src[p.stmts[3].span.clone()], "check c = 3");
}

#[test]
fn a_trailing_operator_does_not_swallow_the_next_definition() {
    let src = "x = 5 V +\ny = 3\nz = y";
    let p = parse(src);
    assert_eq!(p.diagnostics.len(), 1, "{:#?}", p.diagnostics);
    let d = &p.diagnostics[0];
    assert_eq!(d.kind, DiagKind::UnexpectedToken);
    assert_eq!(d.message, "`+` ends the line but has nothing after it");
    assert_eq!(d.span, find(src, "+", 0));
    assert_eq!(
        d.hint.as_deref(),
        Some(
            "finish the expression, or remove the `+`; a line ending in `+` continues on the \
             next line"
        )
    );
    assert_eq!(p.stmts.len(), 3);
    assert!(matches!(&p.stmts[0].kind, StmtKind::Define(d) if d.value.kind == ExprKind::Error));
    assert!(matches!(&p.stmts[1].kind, StmtKind::Define(d) if sexp(&d.value) == "3"));
    assert!(matches!(&p.stmts[2].kind, StmtKind::Define(d) if sexp(&d.value) == "y"));
    // A mistake on the next line is reported once, when that line is read on its own.
    let src = "x = 5 V *
given y = f(1 2)";
    let p = parse(src);
    let spans: Vec<_> = p.diagnostics.iter().map(|d| d.span.clone()).collect();
    assert_eq!(spans, [find(src, "*", 0), find(src, "2", 0)]);
    assert_eq!(p.stmts.len(), 2);
}

#[test]
fn an_unclosed_bracket_does_not_swallow_the_rest() {
    let src = "a = f(1,\n  2\nb = 3\nc = (4\nd = 5";
    let p = parse(src);
    let d: Vec<_> = p
        .diagnostics
        .iter()
        .map(|d| (d.kind, d.span.clone()))
        .collect();
    assert_eq!(
        d,
        [
            (DiagKind::UnclosedDelimiter, find(src, "(", 0)),
            (DiagKind::UnclosedDelimiter, find(src, "(", 1)),
        ]
    );
    let names: Vec<String> = p
        .stmts
        .iter()
        .map(|s| match &s.kind {
            StmtKind::Define(d) => format!("{}={}", d.name.name, sexp(&d.value)),
            other => format!("{other:?}"),
        })
        .collect();
    assert_eq!(names, ["a=ERROR", "b=3", "c=ERROR", "d=5"]);
}

#[test]
fn several_errors_in_one_statement_are_all_reported_when_independent() {
    // Lexical errors do not stop the statement; each bad value is reported.
    let p = parse("x = 1__0 + 4k7Ω + 2 foo/s");
    let kinds: Vec<DiagKind> = p.diagnostics.iter().map(|d| d.kind).collect();
    assert_eq!(
        kinds,
        [
            DiagKind::InvalidNumber,
            DiagKind::UnitAfterCode,
            DiagKind::UnknownUnit
        ]
    );
    match &p.stmts[0].kind {
        StmtKind::Define(d) => assert_eq!(sexp(&d.value), "(+ (+ ERROR ERROR) ERROR)"),
        other => panic!("{other:?}"),
    }
}

// ---- limits -----------------------------------------------------------------------------

fn deep_case(src: &str, at: std::ops::Range<usize>) {
    let t = std::time::Instant::now();
    let p = parse(src);
    assert!(t.elapsed().as_secs() < 5, "took {:?}", t.elapsed());
    assert_eq!(p.diagnostics.len(), 1, "{:?}", &p.diagnostics);
    let d = &p.diagnostics[0];
    assert_eq!(d.kind, DiagKind::TooDeep);
    assert_eq!(
        d.message,
        "the expression is nested too deeply (more than 256 levels)"
    );
    assert_eq!(d.span, at);
    assert_eq!(p.stmts.len(), 1);
}

#[test]
fn hundred_thousand_nested_parentheses() {
    let n = 100_000;
    // Unclosed: one error at the 257th `(`.
    let open = "(".repeat(n);
    deep_case(&open, 256..257);
    // Closed.
    let closed = format!("{}1{}", "(".repeat(n), ")".repeat(n));
    deep_case(&closed, 256..257);
    // The same depth of brackets.
    let lists = format!("{}1{}", "[".repeat(n), "]".repeat(n));
    deep_case(&lists, 256..257);
    let calls = format!("{}1{}", "f(".repeat(n), ")".repeat(n));
    deep_case(&calls, 513..514);
}

#[test]
fn long_chains_are_limited_too() {
    let n = 100_000;
    // 100 000 signs: no more than 256 operators may wait for their operand; the 257th
    // `-` (byte 256) is refused.
    deep_case(&format!("{}x", "-".repeat(n)), 256..257);
    // `2^2^2…` is right-associative, so every `^` waits: the 257th is at byte 1 + 2·256.
    deep_case(&format!("2{}", "^2".repeat(n)), 513..514);
    // `1+1+1…` reduces as it goes, but its tree is one level deeper per `+`: the 256th
    // `+` (byte 2·256 − 1) would make a tree 257 levels deep.
    deep_case(&"1+".repeat(n), 511..512);
    // The same for a chain of fields: the 256th `.` is at byte 1 + 2·255.
    deep_case(&format!("x{}", ".a".repeat(n)), 511..512);
    // 256 levels are fine.
    let ok = format!("{}1{}", "(".repeat(255), ")".repeat(255));
    assert!(parse(&ok).diagnostics.is_empty());
    let ok = format!("{}1{}", "[".repeat(255), "]".repeat(255));
    assert!(parse(&ok).diagnostics.is_empty());
}

#[test]
fn many_statements_and_lines() {
    // Each `f(1 2` line fails on its own, leaving its bracket open; the next line is read
    // afresh.
    let src = "x = 1\n".repeat(20_000) + &"\n".repeat(20_000) + &"f(1 2\n".repeat(5_000);
    let p = parse(&src);
    assert_eq!(p.stmts.len(), 20_000 + 5_000);
    assert_eq!(p.diagnostics.len(), 5_000);
    spans_ok(&src, &p).unwrap();
}

// ---- never panic ------------------------------------------------------------------------

const SOUP: &[&str] = &[
    "given", "check", "sweep", "over", "steps", "by", "as", "x", "R1", "θ", "u1", ".", "loss",
    "12", "0.47", "4.7e-3", "1_000", "1", "..", "4k7", "0R47", "10K", "2µ2", "100n", "V", "mA",
    "K/W", "°C", "%", "Ω", "²", "+", "-", "*", "/", "^", "||", "±", "+/-", "(", ")", "[", "]", ",",
    ":", "=", "<", "<=", "≤", ">", ">=", "≥", "\"note\"", "\"", "#c", "\n", " ", "  ", "℃", "μ",
    "−", "×", "⋅", "\u{00A0}", "@", "|", "é", "\u{0301}", "e", "_",
];

fn soup() -> impl Strategy<Value = String> {
    prop::collection::vec((0..SOUP.len(), 0..3usize), 0..60).prop_map(|parts| {
        let mut s = String::new();
        for (i, sep) in parts {
            s.push_str(SOUP[i]);
            s.push_str(["", " ", "\n"][sep]);
        }
        s
    })
}

proptest! {
    #[test]
    fn random_bytes_never_panic(bytes in prop::collection::vec(any::<u8>(), 0..200)) {
        let src = String::from_utf8_lossy(&bytes).into_owned();
        let p = parse(&src);
        prop_assert!(spans_ok(&src, &p).is_ok(), "{:?}", spans_ok(&src, &p));
        let _ = is_complete(&src);
    }

    #[test]
    fn token_soup_never_panics(src in soup()) {
        let p = parse(&src);
        prop_assert!(spans_ok(&src, &p).is_ok(), "{:?}", spans_ok(&src, &p));
        let _ = is_complete(&src);
        // Every diagnostic lies inside a statement, and a statement without one holds no
        // error: so a statement is sound exactly when no error points into it.
        for d in &p.diagnostics {
            prop_assert!(
                p.stmts.iter().any(|s| s.span.start <= d.span.start && d.span.end <= s.span.end),
                "{:?} outside every statement of {:?}", d, src
            );
        }
        for s in &p.stmts {
            let inside = |d: &&worksheet_lang::Diagnostic| {
                s.span.start <= d.span.start && d.span.end <= s.span.end
            };
            let flagged = p.diagnostics.iter().any(|d| inside(&d));
            if !flagged {
                prop_assert!(!has_error(s), "{:?} in {:?}", s, src);
            }
            // An error the parser reports leaves an error in the tree (an unclosed note
            // aside), so an evaluator that skips such trees never reports it twice.
            let serious = p
                .diagnostics
                .iter()
                .filter(inside)
                .any(|d| d.kind != DiagKind::UnterminatedString);
            if serious {
                prop_assert!(has_error(s), "{:?} in {:?}: {:?}", s, src, p.diagnostics);
            }
        }
    }
}
