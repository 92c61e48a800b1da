//! `sweep NAME over A .. B (steps N | by STEP): EXPR, …` — the listed expressions
//! re-evaluated, with their worst cases, while one definition takes a series of values.

use crate::ast::{Expr, ExprKind, Stmt, StmtKind, SweepStep, SweepVar};
use crate::compile::{Bands, Column, Tape, BLOCK};
use crate::diagnostic::{DiagKind, Diagnostic};
use crate::eval::EvalError;
use crate::num::{Dual, Interval};
use crate::results::{SweepLimit, SweepSeries, SweepTable};
use crate::value::Num;
use crate::worksheet::SweepHost;

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

/// One swept name: which definition, its current value's kind, and its `count` evenly
/// spaced values (computed when needed, never stored: a sweep may have 10⁷ of them).
struct Axis {
    name: String,
    def: usize,
    current: Num,
    from: f64,
    step: f64,
    count: usize,
}

impl Axis {
    /// The `i`th value.
    fn x(&self, i: usize) -> f64 {
        self.from + self.step * i as f64
    }

    fn last(&self) -> f64 {
        self.x(self.count - 1)
    }
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
        from,
        step,
        count,
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

/// One series' values at a run of consecutive points: nominal, and the band's ends where
/// the series is uncertain.
#[derive(Clone, Copy)]
struct Values<'a> {
    nominal: &'a [f64],
    band: Option<(&'a [f64], &'a [f64])>,
}

impl Values<'_> {
    /// (nominal, min, max) at the `k`th point; the band always holds the nominal value.
    fn at(&self, k: usize) -> [f64; 3] {
        let n = self.nominal[k];
        match self.band {
            Some((lo, hi)) => [n, band_low(lo[k], n), band_high(hi[k], n)],
            None => [n, n, n],
        }
    }

    /// Whether the band leaves the nominal value anywhere.
    fn moves(&self) -> bool {
        self.band.is_some_and(|(lo, hi)| {
            lo.iter().zip(self.nominal).any(|(l, n)| l < n)
                || hi.iter().zip(self.nominal).any(|(h, n)| h > n)
        })
    }
}

/// A band's low end, widened to hold the nominal value `n` (values are finite).
fn band_low(lo: f64, n: f64) -> f64 {
    if lo < n {
        lo
    } else {
        n
    }
}

/// A band's high end, widened to hold the nominal value `n`.
fn band_high(hi: f64, n: f64) -> f64 {
    if hi > n {
        hi
    } else {
        n
    }
}

/// A point the table keeps: its index and each series' (nominal, min, max) there.
struct Kept {
    i: usize,
    values: Vec<[f64; 3]>,
}

impl Kept {
    fn of(i: usize, vals: &[Values<'_>], k: usize) -> Self {
        Kept {
            i,
            values: vals.iter().map(|v| v.at(k)).collect(),
        }
    }
}

/// Where a sweep's values go as they are computed. It keeps at most `MAX_DATA_POINTS` points:
/// all of them when there are no more; otherwise the first, the last and, in each of
/// `(MAX_DATA_POINTS - 2) / 2` equal buckets, the first points where the first series (its band,
/// when it has one) is lowest and highest, so peaks survive. The points are chosen while the
/// first curve streams in, bucket by bucket; the other curves of a family are kept at the same
/// points. Only the kept points are ever stored, however long the sweep.
struct Table {
    n: usize,
    /// Series per curve (the swept expressions).
    per_curve: usize,
    /// 0 when every point is kept.
    buckets: usize,
    series: Vec<SweepSeries>,
    /// Per series: whether its band left the nominal value anywhere (else it has none).
    moved: Vec<bool>,
    /// The kept indices, complete once the first curve has streamed.
    kept: Vec<usize>,
    /// First curve: the bucket being filled and what it keeps so far (the ends of the sweep
    /// that fall in it, its lowest and its highest point).
    bucket: usize,
    ends: Vec<Kept>,
    lowest: Option<Kept>,
    highest: Option<Kept>,
    /// Later curves: the curve being fed and its position in `kept`.
    cursor: (usize, usize),
    /// Room for the first series' band over a block.
    scratch: (Vec<f64>, Vec<f64>),
}

impl Table {
    fn new(n: usize, series: Vec<SweepSeries>, per_curve: usize) -> Self {
        // Two points a bucket and the two ends: never more than MAX_DATA_POINTS.
        let buckets = if n <= MAX_DATA_POINTS {
            0
        } else {
            (MAX_DATA_POINTS - 2) / 2
        };
        Table {
            n,
            per_curve,
            buckets,
            moved: vec![false; series.len()],
            series,
            kept: Vec::new(),
            bucket: 0,
            ends: Vec::new(),
            lowest: None,
            highest: None,
            cursor: (0, 0),
            scratch: (Vec::new(), Vec::new()),
        }
    }

    /// The index just past bucket `b` (buckets are fewer than points, so none is empty).
    fn bucket_end(&self, b: usize) -> usize {
        (b + 1) * self.n / self.buckets
    }

    /// Points `i0..` of curve `curve`, one `Values` per swept expression. Each curve's
    /// points come in order, and the curves one after the other.
    fn feed(&mut self, curve: usize, i0: usize, vals: &[Values<'_>]) {
        let base = curve * self.per_curve;
        for (j, v) in vals.iter().enumerate() {
            if !self.moved[base + j] && v.moves() {
                self.moved[base + j] = true;
            }
        }
        let len = vals.first().map_or(0, |v| v.nominal.len());
        if self.buckets == 0 {
            for k in 0..len {
                self.push(base, vals.iter().map(|v| v.at(k)));
            }
        } else if curve == 0 {
            self.choose(i0, len, vals);
        } else {
            if self.cursor.0 != curve {
                self.cursor = (curve, 0);
            }
            while let Some(&i) = self.kept.get(self.cursor.1).filter(|&&i| i < i0 + len) {
                self.push(base, vals.iter().map(|v| v.at(i - i0)));
                self.cursor.1 += 1;
            }
        }
    }

    fn push(&mut self, base: usize, values: impl Iterator<Item = [f64; 3]>) {
        for (s, [n, lo, hi]) in self.series[base..].iter_mut().zip(values) {
            s.nominal.push(n);
            s.min.get_or_insert_with(Vec::new).push(lo);
            s.max.get_or_insert_with(Vec::new).push(hi);
        }
    }

    /// The first curve: follows each bucket's lowest and highest point of the first series
    /// and keeps them when the bucket is complete.
    fn choose(&mut self, i0: usize, len: usize, vals: &[Values<'_>]) {
        let last = self.n - 1;
        let mut k = 0;
        while k < len {
            let end = self.bucket_end(self.bucket);
            let stop = (end - i0).min(len);
            for e in [0, last] {
                if (i0 + k..i0 + stop).contains(&e) {
                    self.ends.push(Kept::of(e, vals, e - i0));
                }
            }
            // The first point of the least (greatest) value of the first series' band:
            // a point of this block enters when it beats the bucket's best so far.
            let lo_best = self
                .lowest
                .as_ref()
                .map_or(f64::INFINITY, |p| p.values[0][1]);
            let hi_best = self
                .highest
                .as_ref()
                .map_or(f64::NEG_INFINITY, |p| p.values[0][2]);
            let first = &vals[0];
            let nominal = &first.nominal[k..stop];
            let (lows, highs) = match first.band {
                // The band with the nominal value in it.
                Some((lows, highs)) => {
                    let (l, h) = (&mut self.scratch.0, &mut self.scratch.1);
                    l.clear();
                    h.clear();
                    l.extend(
                        lows[k..stop]
                            .iter()
                            .zip(nominal)
                            .map(|(&l, &n)| band_low(l, n)),
                    );
                    h.extend(
                        highs[k..stop]
                            .iter()
                            .zip(nominal)
                            .map(|(&h, &n)| band_high(h, n)),
                    );
                    (&l[..], &h[..])
                }
                None => (nominal, nominal),
            };
            let lowest = first_extreme(lows, lo_best, |x, b| x < b);
            let highest = first_extreme(highs, hi_best, |x, b| x > b);
            if let Some(j) = lowest {
                self.lowest = Some(Kept::of(i0 + k + j, vals, k + j));
            }
            if let Some(j) = highest {
                self.highest = Some(Kept::of(i0 + k + j, vals, k + j));
            }
            if i0 + stop == end {
                let mut picks: Vec<Kept> = std::mem::take(&mut self.ends);
                picks.extend(self.lowest.take());
                picks.extend(self.highest.take());
                picks.sort_by_key(|p| p.i);
                picks.dedup_by_key(|p| p.i);
                for p in picks {
                    self.kept.push(p.i);
                    self.push(0, p.values.into_iter());
                }
                self.bucket += 1;
            }
            k = stop;
        }
    }

    /// The kept points of `axis` and the series; a band that never left the nominal value
    /// is dropped.
    fn finish(mut self, axis: &Axis) -> (Vec<f64>, Vec<SweepSeries>) {
        for (s, moved) in self.series.iter_mut().zip(&self.moved) {
            if !moved {
                s.min = None;
                s.max = None;
            }
        }
        let points = if self.buckets == 0 {
            (0..self.n).map(|i| axis.x(i)).collect()
        } else {
            self.kept.iter().map(|&i| axis.x(i)).collect()
        };
        (points, self.series)
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
        if o.count > MAX_FAMILY {
            return Some(Err(Diagnostic::error(
                DiagKind::Limit,
                vars[1].name.span.clone(),
                format!(
                    "a family of curves has at most {MAX_FAMILY}; this one asks for {}",
                    o.count
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
        if (o.count as f64) * (inner.count as f64) > MAX_POINTS as f64 {
            return Some(Err(limit(
                &vars[1].from,
                o.count as f64 * inner.count as f64,
            )));
        }
    }
    let texts: Vec<String> = exprs
        .iter()
        .map(|e| source.get(e.span.clone()).unwrap_or("").trim().to_string())
        .collect();
    let family: Vec<Option<f64>> = match &outer {
        Some(o) => (0..o.count).map(|k| Some(o.x(k))).collect(),
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
    let per_curve = exprs.len();
    let fast = match host.compile(&swept, exprs) {
        Some(tape) => {
            let mut table = Table::new(inner.count, series.clone(), per_curve);
            fast_sweep(
                host,
                &tape,
                &inner,
                outer.as_ref(),
                &family,
                exprs,
                &mut table,
            )?
            .then_some(table)
        }
        None => None,
    };
    let table = match fast {
        Some(table) => table,
        None => {
            let mut table = Table::new(inner.count, series, per_curve);
            for (fi, b) in family.iter().enumerate() {
                for i in 0..inner.count {
                    if host.interrupt().is_raised() {
                        return None;
                    }
                    let x = inner.x(i);
                    let mut pins = vec![(inner.def, pinned(&inner, x))];
                    if let (Some(b), Some(o)) = (b, &outer) {
                        pins.push((o.def, pinned(o, *b)));
                    }
                    let at = || {
                        format!(
                            "at {} = {}",
                            inner.name,
                            crate::units::format_si(x, inner.current.dim, inner.current.abs, 3)
                        )
                    };
                    let p = match host.point(&pins, exprs)? {
                        Ok(p) => p,
                        Err(e) => {
                            let mut d = err(e);
                            d.message = format!("{}: {}", at(), d.message);
                            return Some(Err(d));
                        }
                    };
                    let mut columns = Vec::with_capacity(per_curve);
                    for (j, v) in p.values.iter().enumerate() {
                        let Some((n, band)) = v else {
                            return Some(Err(Diagnostic::error(
                                DiagKind::TypeMismatch,
                                exprs[j].span.clone(),
                                format!("{}: `{}` has no number to show", at(), texts[j]),
                            )));
                        };
                        let s = &mut table.series[fi * per_curve + j];
                        s.dim = n.dim;
                        s.absolute = n.abs;
                        columns.push((n.x.value(), *band));
                    }
                    let vals: Vec<Values<'_>> = columns
                        .iter()
                        .map(|(n, band)| Values {
                            nominal: std::slice::from_ref(n),
                            band: band.as_ref().map(|(lo, hi)| {
                                (std::slice::from_ref(lo), std::slice::from_ref(hi))
                            }),
                        })
                        .collect();
                    table.feed(fi, i, &vals);
                }
            }
            table
        }
    };
    let (points, series) = table.finish(&inner);
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
    Some(Ok(SweepTable {
        over: inner.name,
        dim: inner.current.dim,
        absolute: inner.current.abs,
        points,
        series,
        limits,
    }))
}

/// Runs the sweep on its compiled tape into `table`. Returns Some(false) when the general
/// path must take over (a value left its domain somewhere: that path reports where); None
/// when interrupted.
fn fast_sweep(
    host: &SweepHost<'_>,
    tape: &Tape,
    inner: &Axis,
    outer: Option<&Axis>,
    family: &[Option<f64>],
    exprs: &[Expr],
    table: &mut Table,
) -> Option<bool> {
    let per_curve = exprs.len();
    // The kinds (dimension, absolute) of the series, and the errors a point can meet,
    // from one ordinary evaluation at the first point of each curve.
    for (fi, b) in family.iter().enumerate() {
        let mut pins = vec![(inner.def, pinned(inner, inner.x(0)))];
        if let (Some(b), Some(o)) = (b, outer) {
            pins.push((o.def, pinned(o, *b)));
        }
        match host.point(&pins, exprs)? {
            Ok(p) => {
                for (s, v) in table.series[fi * per_curve..].iter_mut().zip(p.values) {
                    match v {
                        Some((n, _)) => {
                            s.dim = n.dim;
                            s.absolute = n.abs;
                        }
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
    let n = inner.count;
    let (first, last) = (inner.x(0), inner.last());
    let mut bregs: Vec<Vec<f64>> = Vec::new();
    tape.prepare_block(&mut bregs);
    // One block of the swept values; when uncertain, each output's nominal values and band.
    let mut xs = vec![0.0; BLOCK];
    let counts: Vec<f64> = (0..BLOCK).map(|k| k as f64).collect();
    let block = || vec![vec![0.0; BLOCK]; if uncertain { per_curve } else { 0 }];
    let (mut nominal, mut lows, mut highs) = (block(), block(), block());
    let nominal_tols: Vec<f64> = tape.inputs[tape.swept..]
        .iter()
        .map(|t| t.nominal)
        .collect();
    for (fi, b) in family.iter().enumerate() {
        let mut at: Vec<f64> = vec![first];
        if let Some(b) = b {
            at.push(*b);
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
                let b = Bands::prove(tape, &sweep_box(inner.x(lo), inner.x(hi - 1)), &mut dregs)
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
            let start = i0 as f64;
            for (x, k) in xs[..len].iter_mut().zip(&counts) {
                // As `Axis::x`: `start + k` is the index, exactly.
                *x = inner.from + inner.step * (start + k);
            }
            let mut cols: Vec<Column<'_>> = vec![Column::Each(&xs[..len])];
            if let Some(b) = b {
                cols.push(Column::Same(*b));
            }
            let swept_cols = cols.len();
            cols.extend(nominal_tols.iter().map(|&t| Column::Same(t)));
            tape.run_block(&cols, len, &mut bregs);
            if !tape
                .outputs
                .iter()
                .all(|&r| all_finite(&bregs[r as usize][..len]))
            {
                return Some(false);
            }
            if uncertain {
                for (o, &r) in tape.outputs.iter().enumerate() {
                    nominal[o][..len].copy_from_slice(&bregs[r as usize][..len]);
                }
                let proven = whole
                    .as_ref()
                    .or(segments.get(segment).and_then(|(_, b)| b.as_ref()));
                match proven {
                    Some(bands) => {
                        for o in 0..per_curve {
                            if !bands.at_block(
                                o,
                                &cols[..swept_cols],
                                len,
                                &mut bregs,
                                &mut lows[o],
                                &mut highs[o],
                            ) {
                                return Some(false);
                            }
                        }
                    }
                    None => {
                        // Not proven over this stretch: point by point.
                        for k in 0..len {
                            at[0] = xs[k];
                            let Some(point_bands) =
                                Bands::prove(tape, &sweep_box(xs[k], xs[k]), &mut dregs)
                            else {
                                return Some(false);
                            };
                            for o in 0..per_curve {
                                let (lo, hi) = match point_bands.at(o, &at, &mut scratch, &mut regs)
                                {
                                    Some(r) => r,
                                    None => match enclose(tape, o, &at, &mut dregs) {
                                        Some(r) => r,
                                        None => return Some(false),
                                    },
                                };
                                lows[o][k] = lo;
                                highs[o][k] = hi;
                            }
                        }
                    }
                }
                for o in 0..per_curve {
                    if !all_finite(&lows[o][..len]) || !all_finite(&highs[o][..len]) {
                        return Some(false);
                    }
                }
            }
            let vals: Vec<Values<'_>> = (0..per_curve)
                .map(|o| {
                    if uncertain {
                        Values {
                            nominal: &nominal[o][..len],
                            band: Some((&lows[o][..len], &highs[o][..len])),
                        }
                    } else {
                        Values {
                            nominal: &bregs[tape.outputs[o] as usize][..len],
                            band: None,
                        }
                    }
                })
                .collect();
            table.feed(fi, i0, &vals);
            i0 = i1;
        }
    }
    Some(true)
}

/// The first index of the extreme of `v` (least when `better` is `<`, greatest when it is
/// `>`) if it is better than `bound`. The extreme is found in eight independent
/// lanes, so the loop vectorises; then its first occurrence.
fn first_extreme(v: &[f64], bound: f64, better: fn(f64, f64) -> bool) -> Option<usize> {
    let mut lanes = [bound; 8];
    let chunks = v.chunks_exact(8);
    let rest = chunks.remainder();
    for c in chunks {
        for (l, &x) in lanes.iter_mut().zip(c) {
            if better(x, *l) {
                *l = x;
            }
        }
    }
    let best = lanes
        .iter()
        .chain(rest)
        .fold(bound, |b, &x| if better(x, b) { x } else { b });
    if !better(best, bound) {
        return None;
    }
    v.iter().position(|&x| x == best)
}

/// Whether every value is finite. `x * 0` is ±0 for a finite `x` and NaN otherwise; summed
/// in eight independent lanes, the loop vectorises.
fn all_finite(v: &[f64]) -> bool {
    let mut lanes = [0.0f64; 8];
    let chunks = v.chunks_exact(8);
    let rest = chunks.remainder();
    for c in chunks {
        for (l, x) in lanes.iter_mut().zip(c) {
            *l += x * 0.0;
        }
    }
    lanes.iter().all(|l| *l == 0.0) && rest.iter().all(|x| x.is_finite())
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

#[cfg(test)]
mod tests {
    use super::*;

    /// A wobbly series: a slow wave plus a pseudo-random term (a linear congruential
    /// generator), so buckets have their extremes anywhere, with repeated values for ties.
    fn wobble(n: usize, seed: u64) -> Vec<f64> {
        let mut x = seed;
        (0..n)
            .map(|i| {
                x = x
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                let noise = ((x >> 40) % 7) as f64;
                (i as f64 / 300.0).sin() * 10.0 + noise
            })
            .collect()
    }

    /// A series' nominal values and its band's two ends.
    type Series = (Vec<f64>, Vec<f64>, Vec<f64>);

    /// The reference: every value kept, then the first, the last and each bucket's first
    /// least and first greatest point of the first series' band, picked by brute force.
    fn reference(n: usize, first: (&[f64], &[f64])) -> Vec<usize> {
        if n <= MAX_DATA_POINTS {
            return (0..n).collect();
        }
        let buckets = (MAX_DATA_POINTS - 2) / 2;
        let mut keep = vec![0, n - 1];
        for b in 0..buckets {
            let (lo, hi) = (b * n / buckets, (b + 1) * n / buckets);
            let mut lo_i = lo;
            let mut hi_i = lo;
            for i in lo..hi {
                if first.0[i] < first.0[lo_i] {
                    lo_i = i;
                }
                if first.1[i] > first.1[hi_i] {
                    hi_i = i;
                }
            }
            keep.extend([lo_i, hi_i]);
        }
        keep.sort_unstable();
        keep.dedup();
        keep
    }

    #[test]
    fn the_table_keeps_what_a_brute_force_pick_keeps() {
        for n in [10, 1000, 1001, 2500, 100_003] {
            for block in [1, 7, 512] {
                for banded in [false, true] {
                    // Two curves of two series; the band of the first is the nominal value
                    // with a pseudo-random spread on each side.
                    let curves: Vec<Vec<Series>> = (0..2u64)
                        .map(|c| {
                            (0..2u64)
                                .map(|j| {
                                    let nom = wobble(n, 1 + c * 10 + j);
                                    let spread = wobble(n, 99 + c * 10 + j);
                                    let lo =
                                        nom.iter().zip(&spread).map(|(v, s)| v - s.abs()).collect();
                                    let hi = nom
                                        .iter()
                                        .zip(&spread)
                                        .map(|(v, s)| v + s.abs() / 2.0)
                                        .collect();
                                    (nom, lo, hi)
                                })
                                .collect()
                        })
                        .collect();
                    let names = (0..4).map(|k| series_of(format!("s{k}"))).collect();
                    let mut table = Table::new(n, names, 2);
                    for (c, curve) in curves.iter().enumerate() {
                        let mut i0 = 0;
                        while i0 < n {
                            let i1 = (i0 + block).min(n);
                            let vals: Vec<Values<'_>> = curve
                                .iter()
                                .map(|(nom, lo, hi)| Values {
                                    nominal: &nom[i0..i1],
                                    band: banded.then(|| (&lo[i0..i1], &hi[i0..i1])),
                                })
                                .collect();
                            table.feed(c, i0, &vals);
                            i0 = i1;
                        }
                    }
                    let axis = Axis {
                        name: "x".into(),
                        def: 0,
                        current: Num {
                            x: Dual::constant(0.0),
                            dim: crate::units::Dim::NONE,
                            abs: false,
                        },
                        from: 1.0,
                        step: 0.5,
                        count: n,
                    };
                    let (points, series) = table.finish(&axis);
                    let first = &curves[0][0];
                    let keep = if banded {
                        reference(n, (&first.1, &first.2))
                    } else {
                        reference(n, (&first.0, &first.0))
                    };
                    let what = format!("n {n}, blocks of {block}, banded {banded}");
                    assert!(keep.len() <= MAX_DATA_POINTS, "{what}");
                    let want: Vec<f64> = keep.iter().map(|&i| 1.0 + 0.5 * i as f64).collect();
                    assert_eq!(points, want, "{what}");
                    for (s, (nom, lo, hi)) in series.iter().zip(curves.iter().flatten()) {
                        let pick = |v: &Vec<f64>| keep.iter().map(|&i| v[i]).collect::<Vec<_>>();
                        assert_eq!(s.nominal, pick(nom), "{what}");
                        assert_eq!(s.min.as_ref(), banded.then(|| pick(lo)).as_ref(), "{what}");
                        assert_eq!(s.max.as_ref(), banded.then(|| pick(hi)).as_ref(), "{what}");
                    }
                }
            }
        }
    }

    #[test]
    fn all_finite_finds_any_infinity_or_nan() {
        let clean: Vec<f64> = (0..21).map(|k| k as f64 * -1.5e300).collect();
        assert!(all_finite(&clean));
        for bad in [f64::INFINITY, f64::NEG_INFINITY, f64::NAN] {
            for at in [0, 7, 8, 15, 16, 20] {
                let mut v = clean.clone();
                v[at] = bad;
                assert!(!all_finite(&v), "{bad} at {at}");
            }
        }
    }
}
