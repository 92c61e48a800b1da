//! The worst-case analysis against brute force.
//!
//! The expected extremes come from an evaluator written here, independent of the
//! library: every corner of the input box is enumerated (for monotone functions the
//! extremes lie at corners), or many points are sampled (for non-monotone ones).

use proptest::prelude::*;
use worksheet_lang::results::Shown;
use worksheet_lang::{Interrupt, Worksheet};

/// A random expression over inputs x0..x{n-1}, increasing in every leaf.
#[derive(Debug, Clone)]
enum E {
    /// Input i, used either as `xi` or as `(1 / xi)` (fixed per input: `down[i]`).
    Leaf(usize),
    Const(f64),
    Add(Box<E>, Box<E>),
    Mul(Box<E>, Box<E>),
    Par(Box<E>, Box<E>),
    Sqrt(Box<E>),
    Max(Box<E>, Box<E>),
    Min(Box<E>, Box<E>),
}

fn source(e: &E, down: &[bool]) -> String {
    match e {
        E::Leaf(i) if down[*i] => format!("(1 / x{i})"),
        E::Leaf(i) => format!("x{i}"),
        E::Const(c) => format!("{c}"),
        E::Add(a, b) => format!("({} + {})", source(a, down), source(b, down)),
        E::Mul(a, b) => format!("({} * {})", source(a, down), source(b, down)),
        E::Par(a, b) => format!("({} || {})", source(a, down), source(b, down)),
        E::Sqrt(a) => format!("sqrt({})", source(a, down)),
        E::Max(a, b) => format!("max({}, {})", source(a, down), source(b, down)),
        E::Min(a, b) => format!("min({}, {})", source(a, down), source(b, down)),
    }
}

fn value(e: &E, down: &[bool], x: &[f64]) -> f64 {
    match e {
        E::Leaf(i) if down[*i] => 1.0 / x[*i],
        E::Leaf(i) => x[*i],
        E::Const(c) => *c,
        E::Add(a, b) => value(a, down, x) + value(b, down, x),
        E::Mul(a, b) => value(a, down, x) * value(b, down, x),
        E::Par(a, b) => {
            let (p, q) = (value(a, down, x), value(b, down, x));
            p * q / (p + q)
        }
        E::Sqrt(a) => value(a, down, x).sqrt(),
        E::Max(a, b) => value(a, down, x).max(value(b, down, x)),
        E::Min(a, b) => value(a, down, x).min(value(b, down, x)),
    }
}

fn expr(n: usize) -> impl Strategy<Value = E> {
    let leaf = prop_oneof![
        4 => (0..n).prop_map(E::Leaf),
        1 => (1u32..50).prop_map(|c| E::Const(f64::from(c) / 10.0)),
    ];
    leaf.prop_recursive(4, 24, 2, |inner| {
        prop_oneof![
            (inner.clone(), inner.clone()).prop_map(|(a, b)| E::Add(Box::new(a), Box::new(b))),
            (inner.clone(), inner.clone()).prop_map(|(a, b)| E::Mul(Box::new(a), Box::new(b))),
            (inner.clone(), inner.clone()).prop_map(|(a, b)| E::Par(Box::new(a), Box::new(b))),
            inner.clone().prop_map(|a| E::Sqrt(Box::new(a))),
            (inner.clone(), inner.clone()).prop_map(|(a, b)| E::Max(Box::new(a), Box::new(b))),
            (inner.clone(), inner).prop_map(|(a, b)| E::Min(Box::new(a), Box::new(b))),
        ]
    })
}

/// Runs a worksheet and returns (nominal, min, max, conservative) of `name`.
fn bounds(src: &str, name: &str) -> (f64, f64, f64, bool) {
    let mut ws = Worksheet::new();
    let ex = ws.execute(None, src, &Interrupt::new());
    assert!(
        !ex.report.has_errors(),
        "{src}\n{:?}",
        ex.report.diagnostics
    );
    let row = ex
        .report
        .values
        .iter()
        .find(|v| v.name == name)
        .expect("value row");
    match &row.shown {
        Shown::Number {
            value,
            bounds: Some(b),
        } => (value.si, b.min, b.max, b.conservative),
        Shown::Number {
            value,
            bounds: None,
        } => (value.si, value.si, value.si, false),
        other => panic!("not a number: {other:?}"),
    }
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * a.abs().max(b.abs()).max(1e-12)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(96))]

    /// Monotone expressions of up to 8 inputs: bounds equal the corner enumeration exactly.
    #[test]
    fn monotone_bounds_equal_corner_enumeration(
        n in 1usize..=8,
        seed in prop::collection::vec((1u32..20, 1u32..30, any::<bool>()), 8),
        e in (1usize..=8).prop_flat_map(expr),
    ) {
        let n = n.max(1);
        // Keep leaf indices in range by folding them onto n inputs.
        fn fold(e: &E, n: usize) -> E {
            match e {
                E::Leaf(i) => E::Leaf(i % n),
                E::Const(c) => E::Const(*c),
                E::Add(a, b) => E::Add(Box::new(fold(a, n)), Box::new(fold(b, n))),
                E::Mul(a, b) => E::Mul(Box::new(fold(a, n)), Box::new(fold(b, n))),
                E::Par(a, b) => E::Par(Box::new(fold(a, n)), Box::new(fold(b, n))),
                E::Sqrt(a) => E::Sqrt(Box::new(fold(a, n))),
                E::Max(a, b) => E::Max(Box::new(fold(a, n)), Box::new(fold(b, n))),
                E::Min(a, b) => E::Min(Box::new(fold(a, n)), Box::new(fold(b, n))),
            }
        }
        let e = fold(&e, n);
        let lo: Vec<f64> = seed.iter().take(n).map(|(a, _, _)| f64::from(*a) / 4.0).collect();
        let hi: Vec<f64> = seed.iter().take(n).map(|(a, w, _)| f64::from(*a) / 4.0 + f64::from(*w) / 10.0).collect();
        let down: Vec<bool> = seed.iter().take(n).map(|(_, _, d)| *d).collect();
        let mut src = String::new();
        for i in 0..n {
            src.push_str(&format!("given x{i} = {} .. {}\n", lo[i], hi[i]));
        }
        src.push_str(&format!("y = {}\n", source(&e, &down)));
        // The same expression through one definition per input, beside definitions that
        // each reach one input only: a box pass reuses what cannot reach its input, and the
        // bounds must not change.
        for i in 0..n {
            src.push_str(&format!("h{i} = x{i}\nz{i} = 2 * x{i} + 1\n"));
        }
        // Each input name `xN` becomes `hN` (`max` keeps its x: no digit follows).
        let text = source(&e, &down);
        let through: String = text
            .char_indices()
            .map(|(j, c)| {
                let digit_next = text[j + 1..].starts_with(|d: char| d.is_ascii_digit());
                if c == 'x' && digit_next { 'h' } else { c }
            })
            .collect();
        src.push_str(&format!("y2 = {through}\n"));
        let (_, min, max, conservative) = bounds(&src, "y");
        let (_, min2, max2, conservative2) = bounds(&src, "y2");
        prop_assert!(close(min, min2) && close(max, max2) && conservative == conservative2,
            "y {min}..{max} and y2 {min2}..{max2} differ: {src}");
        for i in 0..n {
            let (_, zmin, zmax, _) = bounds(&src, &format!("z{i}"));
            prop_assert!(close(zmin, 2.0 * lo[i] + 1.0) && close(zmax, 2.0 * hi[i] + 1.0),
                "z{i} {zmin}..{zmax}: {src}");
        }
        let mut bmin = f64::INFINITY;
        let mut bmax = f64::NEG_INFINITY;
        for mask in 0u32..(1 << n) {
            let x: Vec<f64> = (0..n).map(|i| if mask & (1 << i) != 0 { hi[i] } else { lo[i] }).collect();
            let v = value(&e, &down, &x);
            bmin = bmin.min(v);
            bmax = bmax.max(v);
        }
        // min/max are proven exact only when the monotonicity test succeeds; with these
        // operators on positive inputs it must.
        prop_assert!(!conservative, "monotone expression marked conservative: {src}");
        prop_assert!(close(min, bmin), "min {min} vs corners {bmin}: {src}");
        prop_assert!(close(max, bmax), "max {max} vs corners {bmax}: {src}");
    }

    /// Non-monotone relations: the bounds still enclose every sampled point.
    #[test]
    fn bounds_enclose_samples_of_non_monotone_relations(
        v0 in 8u32..15, r in 1u32..30, i_hi in 2u32..20, samples in prop::collection::vec((0.0f64..=1.0, 0.0f64..=1.0), 64),
    ) {
        // A pass element feeding a resistor: its loss (vin − r·i)·i peaks inside the range.
        let vin = (f64::from(v0) - 0.5, f64::from(v0) + 0.5);
        let rr = f64::from(r) / 10.0;
        let ir = (0.1, f64::from(i_hi) / 2.0);
        let src = format!(
            "given vin = {} V .. {} V\ngiven i = {} A .. {} A\nloss = (vin - {rr} ohm * i) * i\n",
            vin.0, vin.1, ir.0, ir.1
        );
        let (_, min, max, _) = bounds(&src, "loss");
        for (a, b) in samples.iter().chain([(0.0, 0.0), (0.0, 1.0), (1.0, 0.0), (1.0, 1.0)].iter()) {
            let v = vin.0 + a * (vin.1 - vin.0);
            let i = ir.0 + b * (ir.1 - ir.0);
            let p = (v - rr * i) * i;
            prop_assert!(min <= p + 1e-9 && p <= max + 1e-9, "{p} outside {min}..{max}: {src}");
        }
    }
}

#[test]
fn an_input_used_twice_does_not_widen() {
    let src = "given x = 10 V ± 10 %\nd = x - x\nq = x / x\n";
    let (nd, mind, maxd, cd) = bounds(src, "d");
    assert_eq!((nd, mind, maxd, cd), (0.0, 0.0, 0.0, false));
    let (nq, minq, maxq, _) = bounds(src, "q");
    assert!(close(nq, 1.0) && close(minq, 1.0) && close(maxq, 1.0));
}

#[test]
fn peak_inside_the_range_is_marked_conservative_and_enclosed() {
    // loss = (12 V − 10 Ω·i)·i peaks at i = 0.6 A (0 .. 1 A): 3.6 W. Derivation by hand:
    // d/di = 12 − 20 i = 0 → i = 0.6; (12 − 6)·0.6 = 3.6 W.
    let src = "given i = 0 A .. 1 A\nloss = (12 V - 10 ohm * i) * i\n";
    let (_, min, max, conservative) = bounds(src, "loss");
    assert!(conservative);
    assert!((3.6 - 1e-12..3.6 * 1.05).contains(&max), "max {max}");
    assert!(min <= 1e-12, "min {min}");
}
