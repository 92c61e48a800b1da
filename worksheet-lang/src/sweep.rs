//! `sweep NAME over A .. B (steps N | by STEP): EXPR, …` — the listed expressions
//! re-evaluated, with their worst cases, while one definition takes a series of values.

use crate::ast::{Expr, ExprKind, Stmt, StmtKind, SweepStep, SweepVar};
use crate::compile::{Bands, Column, Tape, BLOCK};
use crate::diagnostic::{DiagKind, Diagnostic};
use crate::eval::EvalError;
use crate::num::{Dual, Interval};
use crate::results::{SweepLimit, SweepSeries, SweepTable};
use crate::value::Num;
use crate::worksheet::{PointValue, SweepHost};

/// Points a sweep may have.
pub const MAX_POINTS: usize = 10_000_000;
/// Points used when the sweep does not say.
pub const DEFAULT_POINTS: usize = 50;
/// Shortest stretch of a compiled sweep whose bands are proven as one; shorter stretches
/// that fail are proven point by point.
const MIN_SEGMENT: usize = 64;

/// Points kept in the results data (decimated, extremes kept).
pub const MAX_DATA_POINTS: usize = 1_000;

fn err(e: EvalError) -> Diagnostic {
    e.into_diagnostic()
}

/// Curves a two-name sweep may draw (values of its second name).
pub const MAX_FAMILY: usize = 20;

/// One swept name: which definition, its current value's kind, and the points.
struct Axis {
    name: String,
    def: usize,
    current: Num,
    points: Vec<f64>,
}

fn axis(host: &SweepHost<'_>, var: &SweepVar) -> Option<Result<Axis, Diagnostic>> {
    let name = &var.name.name;
    let Some(def) = host.definition_index(name) else {
        return Some(Err(Diagnostic::error(
            DiagKind::UnknownName,
            var.name.span.clone(),
            format!("`{name}` is not defined, so it cannot be swept"),
        )));
    };
    let name_expr = Expr {
        kind: ExprKind::Name(name.clone()),
        span: var.name.span.clone(),
    };
    // The swept definition's own dimension.
    let current = match host.point(&[], std::slice::from_ref(&name_expr))? {
        Ok(p) => match p.values.first().cloned().flatten() {
            Some((n, _)) => n,
            None => {
                return Some(Err(Diagnostic::error(
                    DiagKind::TypeMismatch,
                    var.name.span.clone(),
                    format!("`{name}` is not a number"),
                )))
            }
        },
        Err(e) => return Some(Err(err(e))),
    };
    let end = |e: &Expr| -> Result<Num, Diagnostic> {
        let n = host.constant(e).map_err(err)?;
        if n.dim != current.dim || n.abs != current.abs {
            return Err(Diagnostic::error(
                DiagKind::DimensionMismatch,
                e.span.clone(),
                format!(
                    "`{name}` is {}, but this end is {}",
                    crate::units::describe_quantity(current.dim, current.abs),
                    crate::units::describe_quantity(n.dim, n.abs)
                ),
            ));
        }
        Ok(n)
    };
    let (from, to) = match (end(&var.from), end(&var.to)) {
        (Ok(a), Ok(b)) => (a.x.value(), b.x.value()),
        (Err(e), _) | (_, Err(e)) => return Some(Err(e)),
    };
    if from > to {
        return Some(Err(Diagnostic::error(
            DiagKind::DomainError,
            var.from.span.start..var.to.span.end,
            "a sweep runs from the smaller end to the larger",
        )));
    }
    let (count, step) = match &var.step {
        None => (DEFAULT_POINTS, (to - from) / (DEFAULT_POINTS - 1) as f64),
        Some(SweepStep::Steps(e)) => match host.constant(e) {
            Ok(n) if n.dim.is_none() && n.x.value().fract() == 0.0 && n.x.value() >= 2.0 => {
                let c = n.x.value();
                if c > MAX_POINTS as f64 {
                    return Some(Err(limit(e, c)));
                }
                (c as usize, (to - from) / (c - 1.0))
            }
            Ok(_) => {
                return Some(Err(Diagnostic::error(
                    DiagKind::Argument,
                    e.span.clone(),
                    "`steps` takes a whole number of points, at least 2",
                )))
            }
            Err(x) => return Some(Err(err(x))),
        },
        Some(SweepStep::By(e)) => match host.constant(e) {
            Ok(n) if n.dim == current.dim && !n.abs && n.x.value() > 0.0 => {
                let c = ((to - from) / n.x.value() + 1e-9).floor() + 1.0;
                if c > MAX_POINTS as f64 {
                    return Some(Err(limit(e, c)));
                }
                (c.max(1.0) as usize, n.x.value())
            }
            Ok(_) => {
                return Some(Err(Diagnostic::error(
                    DiagKind::Argument,
                    e.span.clone(),
                    format!("`by` takes a positive step in the unit of `{name}`"),
                )))
            }
            Err(x) => return Some(Err(err(x))),
        },
    };
    Some(Ok(Axis {
        name: name.clone(),
        def,
        current,
        points: (0..count).map(|i| from + step * i as f64).collect(),
    }))
}

fn series_of(name: String) -> SweepSeries {
    SweepSeries {
        name,
        dim: crate::units::Dim::NONE,
        absolute: false,
        nominal: Vec::new(),
        min: None,
        max: None,
    }
}

fn push(s: &mut SweepSeries, v: Option<PointValue>) {
    let Some((n, b)) = v else { return };
    s.dim = n.dim;
    s.absolute = n.abs;
    s.nominal.push(n.x.value());
    if let Some((lo, hi)) = b {
        // Points before the first uncertain one are their own bounds.
        let len = s.nominal.len() - 1;
        let nominal_so_far = s.nominal[..len].to_vec();
        s.min.get_or_insert_with(|| nominal_so_far.clone()).push(lo);
        s.max.get_or_insert(nominal_so_far).push(hi);
    } else {
        if let Some(m) = s.min.as_mut() {
            m.push(n.x.value());
        }
        if let Some(m) = s.max.as_mut() {
            m.push(n.x.value());
        }
    }
}

/// Runs one sweep statement; None when interrupted.
pub(crate) fn run(
    host: &SweepHost<'_>,
    stmt: &Stmt,
    source: &str,
) -> Option<Result<SweepTable, Diagnostic>> {
    let StmtKind::Sweep { vars, exprs } = &stmt.kind else {
        return Some(Err(Diagnostic::error(
            DiagKind::UnexpectedToken,
            stmt.span.clone(),
            "not a sweep",
        )));
    };
    if vars.is_empty() || vars.len() > 2 {
        return Some(Err(Diagnostic::error(
            DiagKind::UnexpectedToken,
            stmt.span.clone(),
            "a sweep varies one name, or two for a family of curves",
        )));
    }
    let inner = match axis(host, &vars[0])? {
        Ok(a) => a,
        Err(d) => return Some(Err(d)),
    };
    let outer = match vars.get(1).map(|v| axis(host, v)) {
        None => None,
        Some(None) => return None,
        Some(Some(Ok(a))) => Some(a),
        Some(Some(Err(d))) => return Some(Err(d)),
    };
    if let Some(o) = &outer {
        if o.points.len() > MAX_FAMILY {
            return Some(Err(Diagnostic::error(
                DiagKind::Limit,
                vars[1].name.span.clone(),
                format!(
                    "a family of curves has at most {MAX_FAMILY}; this one asks for {}",
                    o.points.len()
                ),
            )
            .hint("give the second name fewer steps")));
        }
        if o.def == inner.def {
            return Some(Err(Diagnostic::error(
                DiagKind::Argument,
                vars[1].name.span.clone(),
                "the two names of a sweep must differ",
            )));
        }
        if (o.points.len() as f64) * (inner.points.len() as f64) > MAX_POINTS as f64 {
            return Some(Err(limit(
                &vars[1].from,
                o.points.len() as f64 * inner.points.len() as f64,
            )));
        }
    }
    let texts: Vec<String> = exprs
        .iter()
        .map(|e| source.get(e.span.clone()).unwrap_or("").trim().to_string())
        .collect();
    let family: Vec<Option<f64>> = match &outer {
        Some(o) => o.points.iter().map(|&b| Some(b)).collect(),
        None => vec![None],
    };
    let mut series: Vec<SweepSeries> = Vec::new();
    for b in &family {
        for t in &texts {
            series.push(series_of(match (b, &outer) {
                (Some(b), Some(o)) => format!(
                    "{t} ({} = {})",
                    o.name,
                    crate::units::format_si(*b, o.current.dim, o.current.abs, 3)
                ),
                _ => t.clone(),
            }));
        }
    }
    let mut swept = vec![inner.def];
    if let Some(o) = &outer {
        swept.push(o.def);
    }
    let fast = match host.compile(&swept, exprs) {
        Some(tape) => fast_sweep(
            host,
            &tape,
            &inner,
            outer.as_ref(),
            &family,
            exprs,
            &mut series,
        )?,
        None => false,
    };
    for (fi, b) in family.iter().enumerate() {
        if fast {
            break;
        }
        for &x in &inner.points {
            if host.interrupt().is_raised() {
                return None;
            }
            let mut pins = vec![(
                inner.def,
                Num {
                    x: Dual::constant(x),
                    ..inner.current
                },
            )];
            if let (Some(b), Some(o)) = (b, &outer) {
                pins.push((
                    o.def,
                    Num {
                        x: Dual::constant(*b),
                        ..o.current
                    },
                ));
            }
            let p = match host.point(&pins, exprs)? {
                Ok(p) => p,
                Err(e) => {
                    let mut d = err(e);
                    d.message = format!(
                        "at {} = {}: {}",
                        inner.name,
                        crate::units::format_si(x, inner.current.dim, inner.current.abs, 3),
                        d.message
                    );
                    return Some(Err(d));
                }
            };
            for (j, v) in p.values.into_iter().enumerate() {
                push(&mut series[fi * exprs.len() + j], v);
            }
        }
    }
    let mut limits = Vec::new();
    for (j, (e, t)) in exprs.iter().zip(&texts).enumerate() {
        if let ExprKind::Name(n) = &e.kind {
            for (text, rhs) in host.check_on(n) {
                if let Some(l) = host.constant(&rhs).ok().filter(|l| l.dim == series[j].dim) {
                    limits.push(SweepLimit {
                        series: t.clone(),
                        limit: l.x.value(),
                        text,
                    });
                }
            }
        }
    }
    let (points, series) = decimate(inner.points, series, MAX_DATA_POINTS);
    Some(Ok(SweepTable {
        over: inner.name,
        dim: inner.current.dim,
        absolute: inner.current.abs,
        points,
        series,
        limits,
    }))
}

/// Runs the sweep on its compiled tape. Returns Some(false), leaving `series` empty, when
/// the general path must take over (a value left its domain somewhere: that path reports
/// where); None when interrupted.
fn fast_sweep(
    host: &SweepHost<'_>,
    tape: &Tape,
    inner: &Axis,
    outer: Option<&Axis>,
    family: &[Option<f64>],
    exprs: &[Expr],
    series: &mut [SweepSeries],
) -> Option<bool> {
    // The kinds (dimension, absolute) of the series, and the errors a point can meet,
    // from one ordinary evaluation at the first point of each curve.
    let mut kinds = Vec::with_capacity(exprs.len());
    for b in family {
        let mut pins = vec![(inner.def, pinned(inner, inner.points[0]))];
        if let (Some(b), Some(o)) = (b, outer) {
            pins.push((o.def, pinned(o, *b)));
        }
        match host.point(&pins, exprs)? {
            Ok(p) => {
                kinds.clear();
                for v in p.values {
                    match v {
                        Some((n, _)) => kinds.push((n.dim, n.abs)),
                        None => return Some(false),
                    }
                }
            }
            Err(_) => return Some(false),
        }
    }
    let uncertain = tape.inputs.len() > tape.swept;
    let mut regs: Vec<f64> = Vec::new();
    let mut dregs: Vec<Dual> = Vec::new();
    let mut scratch: Vec<f64> = Vec::with_capacity(tape.inputs.len());
    tape.prepare(&mut regs);
    let n = inner.points.len();
    let (first, last) = (inner.points[0], inner.points[n - 1]);
    for (fi, b) in family.iter().enumerate() {
        let mut at: Vec<f64> = vec![first];
        if let Some(b) = b {
            at.push(*b);
        }
        let curve = &mut series[fi * exprs.len()..(fi + 1) * exprs.len()];
        for (s, (dim, abs)) in curve.iter_mut().zip(&kinds) {
            s.dim = *dim;
            s.absolute = *abs;
            s.nominal.reserve(n);
            if uncertain {
                s.min = Some(Vec::with_capacity(n));
                s.max = Some(Vec::with_capacity(n));
            }
        }
        // Signs proven over the whole sweep serve every point; otherwise over chunks.
        let sweep_box = |lo: f64, hi: f64| -> Vec<Interval> {
            let mut v = vec![Interval::new(lo, hi)];
            if let Some(b) = b {
                v.push(Interval::point(*b));
            }
            v
        };
        let whole = if uncertain {
            Bands::prove(tape, &sweep_box(first, last), &mut dregs).filter(Bands::exact)
        } else {
            None
        };
        // Where the signs are not proven over the whole sweep, over segments of it,
        // halved until proven (down to a few points; then point by point).
        let mut segments: Vec<(usize, Option<Bands<'_>>)> = Vec::new();
        if uncertain && whole.is_none() {
            let mut todo = vec![(0usize, n)];
            while let Some((lo, hi)) = todo.pop() {
                let b = Bands::prove(
                    tape,
                    &sweep_box(inner.points[lo], inner.points[hi - 1]),
                    &mut dregs,
                )
                .filter(Bands::exact);
                if b.is_some() || hi - lo <= MIN_SEGMENT {
                    segments.push((lo, b));
                } else {
                    let mid = lo + (hi - lo) / 2;
                    todo.push((mid, hi));
                    todo.push((lo, mid));
                }
            }
            segments.sort_by_key(|(start, _)| *start);
        }
        let mut segment = 0;
        let mut bregs: Vec<Vec<f64>> = Vec::new();
        tape.prepare_block(&mut bregs);
        let mut lo_buf = vec![0.0; BLOCK];
        let mut hi_buf = vec![0.0; BLOCK];
        let nominal_tols: Vec<f64> = tape.inputs[tape.swept..]
            .iter()
            .map(|t| t.nominal)
            .collect();
        let mut i0 = 0;
        while i0 < n {
            if host.interrupt().is_raised() {
                return None;
            }
            // A block stays inside one proven segment, so one set of bands serves it.
            let mut i1 = (i0 + BLOCK).min(n);
            if uncertain && whole.is_none() {
                while segment + 1 < segments.len() && segments[segment + 1].0 <= i0 {
                    segment += 1;
                }
                if let Some(next) = segments.get(segment + 1) {
                    i1 = i1.min(next.0);
                }
            }
            let len = i1 - i0;
            let mut cols: Vec<Column<'_>> = vec![Column::Each(&inner.points[i0..i1])];
            if let Some(b) = b {
                cols.push(Column::Same(*b));
            }
            let swept_cols = cols.len();
            cols.extend(nominal_tols.iter().map(|&t| Column::Same(t)));
            tape.run_block(&cols, len, &mut bregs);
            for (s, &r) in curve.iter_mut().zip(&tape.outputs) {
                let vals = &bregs[r as usize][..len];
                if vals.iter().any(|v| !v.is_finite()) {
                    return Some(false);
                }
                s.nominal.extend_from_slice(vals);
            }
            if uncertain {
                let proven = whole
                    .as_ref()
                    .or(segments.get(segment).and_then(|(_, b)| b.as_ref()));
                match proven {
                    Some(bands) => {
                        for (o, s) in curve.iter_mut().enumerate() {
                            if !bands.at_block(
                                o,
                                &cols[..swept_cols],
                                len,
                                &mut bregs,
                                &mut lo_buf,
                                &mut hi_buf,
                            ) {
                                return Some(false);
                            }
                            let nominal = &s.nominal[i0..i1];
                            if let (Some(mn), Some(mx)) = (s.min.as_mut(), s.max.as_mut()) {
                                for k in 0..len {
                                    let (lo, hi) = (lo_buf[k], hi_buf[k]);
                                    if !lo.is_finite() || !hi.is_finite() {
                                        return Some(false);
                                    }
                                    mn.push(lo.min(nominal[k]));
                                    mx.push(hi.max(nominal[k]));
                                }
                            }
                        }
                    }
                    None => {
                        // Not proven over this stretch: point by point.
                        for i in i0..i1 {
                            at[0] = inner.points[i];
                            let x = at[0];
                            let point_bands = Bands::prove(tape, &sweep_box(x, x), &mut dregs)?;
                            for (o, s) in curve.iter_mut().enumerate() {
                                let (lo, hi) = match point_bands.at(o, &at, &mut scratch, &mut regs)
                                {
                                    Some(r) => r,
                                    None => match enclose(tape, o, &at, &mut dregs) {
                                        Some(r) => r,
                                        None => return Some(false),
                                    },
                                };
                                if !lo.is_finite() || !hi.is_finite() {
                                    return Some(false);
                                }
                                let nominal = s.nominal[i];
                                if let (Some(mn), Some(mx)) = (s.min.as_mut(), s.max.as_mut()) {
                                    mn.push(lo.min(nominal));
                                    mx.push(hi.max(nominal));
                                }
                            }
                        }
                    }
                }
            }
            i0 = i1;
        }
        // A series that never moved with the tolerances has no band.
        for s in curve.iter_mut() {
            if s.min.as_ref() == Some(&s.nominal) && s.max.as_ref() == Some(&s.nominal) {
                s.min = None;
                s.max = None;
            }
        }
    }
    Some(true)
}

/// A guaranteed enclosure of output `o` over the tolerance box at one sweep point where the
/// monotonicity test fails: one run in interval arithmetic (wider than exact, never narrower).
fn enclose(tape: &Tape, o: usize, at: &[f64], dregs: &mut Vec<Dual>) -> Option<(f64, f64)> {
    let inputs: Vec<Dual> = tape
        .inputs
        .iter()
        .enumerate()
        .map(|(i, t)| match at.get(i) {
            Some(&x) if i < tape.swept => Dual::constant(x),
            _ => Dual::input(Interval::new(t.lo, t.hi), false),
        })
        .collect();
    tape.prepare(dregs);
    tape.run(&inputs, dregs);
    let v = dregs[tape.outputs[o] as usize];
    v.is_finite().then_some((v.v.lo, v.v.hi))
}

fn pinned(axis: &Axis, x: f64) -> Num {
    Num {
        x: Dual::constant(x),
        ..axis.current
    }
}

fn limit(e: &Expr, c: f64) -> Diagnostic {
    Diagnostic::error(
        DiagKind::Limit,
        e.span.clone(),
        format!("a sweep may have at most {MAX_POINTS} points; this one asks for {c:.0}"),
    )
}

/// Keeps at most `max` points: evenly spaced picks plus, in each bucket, the points where
/// any series reaches its extreme, so peaks survive.
pub fn decimate(
    points: Vec<f64>,
    series: Vec<SweepSeries>,
    max: usize,
) -> (Vec<f64>, Vec<SweepSeries>) {
    let n = points.len();
    if n <= max || max < 4 {
        return (points, series);
    }
    let buckets = max / 2;
    let mut keep: Vec<usize> = vec![0, n - 1];
    for b in 0..buckets {
        let lo = b * n / buckets;
        let hi = ((b + 1) * n / buckets).max(lo + 1).min(n);
        let mut lo_i = lo;
        let mut hi_i = lo;
        let first = series.first();
        if let Some(s) = first {
            for i in lo..hi {
                let v = s.max.as_ref().map_or(s.nominal[i], |m| m[i]);
                let w = s.min.as_ref().map_or(s.nominal[i], |m| m[i]);
                if v > s.max.as_ref().map_or(s.nominal[hi_i], |m| m[hi_i]) {
                    hi_i = i;
                }
                if w < s.min.as_ref().map_or(s.nominal[lo_i], |m| m[lo_i]) {
                    lo_i = i;
                }
            }
        }
        keep.push(lo_i);
        keep.push(hi_i);
    }
    keep.sort_unstable();
    keep.dedup();
    let pick = |v: &Vec<f64>| keep.iter().map(|&i| v[i]).collect::<Vec<_>>();
    let series = series
        .into_iter()
        .map(|s| SweepSeries {
            nominal: pick(&s.nominal),
            min: s.min.as_ref().map(pick),
            max: s.max.as_ref().map(pick),
            ..s
        })
        .collect();
    (pick(&points), series)
}
