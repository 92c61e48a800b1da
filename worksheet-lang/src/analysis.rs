//! Worst-case (extreme-value) analysis over the box of uncertain inputs.
//!
//! Method (interval analysis with a monotonicity test):
//! 1. A nominal pass evaluates everything at the nominal point and registers the inputs.
//! 2. One *box pass* per input evaluates everything with every input over its whole range
//!    and the derivative with respect to that input carried along in interval arithmetic.
//!    The result encloses the partial derivative over the whole box.
//! 3. A value whose every partial derivative keeps one sign over the box is monotone in each
//!    input, so its extremes lie at the corner that sets each input to the end its sign
//!    asks for. Evaluating that corner gives the exact bound — and because the value is
//!    re-evaluated as one function of the inputs, an input that appears twice never widens
//!    it (`x - x` has zero spread, `x / x` is exactly one).
//!    A value whose every partial derivative is enclosed by a single number is affine over
//!    the box (its derivatives are constant there): its extremes follow from the nominal
//!    value and those derivatives, with no corner evaluated (the mean-value form with point
//!    derivatives, which is exact).
//! 4. Where a partial derivative's sign is not proven, the inputs that are monotone are still
//!    set to their deciding ends (a valid reduction), the others are split into sub-ranges
//!    and evaluated in interval arithmetic; the union encloses the true range. Such a bound
//!    is guaranteed but not proven exact: it is marked conservative.
//!
//! Sources: R. E. Moore, R. B. Kearfott, M. J. Cloud, "Introduction to Interval Analysis",
//! SIAM 2009 (interval extensions, the monotonicity test, subdivision); forward-mode
//! differentiation in interval arithmetic as in L. B. Rall, "Automatic Differentiation:
//! Techniques and Applications", Springer LNCS 120, 1981.

use crate::eval::{InputInfo, Mode, Pass};
use crate::num::Interval;
use crate::value::Num;
use rustc_hash::FxHashMap as HashMap;

/// What the analysis found for one scalar.
#[derive(Debug, Clone, PartialEq)]
pub struct ScalarBounds {
    pub min: f64,
    pub max: f64,
    pub conservative: bool,
    /// The assignment of the inputs where the minimum (maximum) is reached or, for a
    /// conservative bound, the worst sampled point.
    pub min_at: Inputs<Interval>,
    pub max_at: Inputs<Interval>,
    /// The inputs the value depends on.
    pub depends: Inputs<usize>,
    /// Each dependency's one-at-a-time half swing |f(hi) − f(lo)| / 2, in the order of
    /// `depends` (halved before subtracting, so two finite ends never overflow); empty
    /// unless the analysis was asked for the swings.
    pub half_swings: Inputs<f64>,
}

/// One item per uncertain input: inline up to four inputs, the usual count.
pub type Inputs<T> = smallvec::SmallVec<[T; 4]>;

/// Evaluates the worksheet under an assignment; returns the scalars of that pass.
pub trait Evaluate {
    fn pass(&mut self, mode: Mode) -> Option<Pass>;
    /// Evaluates under `mode` at least what the scalars `need` are made from. A pass that
    /// left statements out is marked `partial`; the default evaluates everything.
    fn pass_needing(&mut self, mode: Mode, need: &[usize]) -> Option<Pass> {
        let _ = need;
        self.pass(mode)
    }
}

/// Below this many memoised passes a lookup compares assignments in place; from there on
/// it hashes them (a subdivided analysis runs hundreds of passes).
const SCAN_LIMIT: usize = 32;

/// Runs passes with memoisation: the same assignment is evaluated once.
pub struct Passes<'e, E: Evaluate> {
    pub eval: &'e mut E,
    /// The passes run, with their assignment and seed.
    memo: Vec<(Vec<Interval>, Option<usize>, Pass)>,
    /// The memo's index by the bits of assignment and seed, used past `SCAN_LIMIT`.
    index: HashMap<Vec<u64>, usize>,
    /// The key being looked up (reused).
    key: Vec<u64>,
    pub count: usize,
    pub interrupted: bool,
}

impl<'e, E: Evaluate> Passes<'e, E> {
    pub fn new(eval: &'e mut E) -> Self {
        Passes {
            eval,
            memo: Vec::new(),
            index: HashMap::default(),
            key: Vec::new(),
            count: 0,
            interrupted: false,
        }
    }

    /// The value of scalar `s` under `a`.
    pub fn at(&mut self, a: &[Interval], s: usize) -> Option<Num> {
        self.at_seeded(a, None, s)
    }

    /// The value of scalar `s` under `a`, with the derivative of input `seed` carried.
    pub fn at_seeded(&mut self, a: &[Interval], seed: Option<usize>, s: usize) -> Option<Num> {
        let i = self.pass_at(a, seed)?;
        self.scalar_in(i, s).flatten()
    }

    /// Scalar `s` of the memoised pass `i` (from `pass_at`), which is evaluated again in
    /// full first if it was a partial pass that left `s` out. The outer None: interrupted.
    fn scalar_in(&mut self, i: usize, s: usize) -> Option<Option<Num>> {
        let (at, seed, p) = &self.memo[i];
        if p.partial && p.scalars.get(s).copied().flatten().is_none() {
            let mode = Mode::Assign {
                values: at.clone(),
                seed: *seed,
            };
            self.count += 1;
            let Some(full) = self.eval.pass(mode) else {
                self.interrupted = true;
                return None;
            };
            self.memo[i].2 = full;
        }
        Some(self.memo[i].2.scalars.get(s).copied().flatten())
    }

    /// The memoised pass under `a`, if there is one.
    fn find(&mut self, a: &[Interval], seed: Option<usize>) -> Option<usize> {
        if self.memo.len() < SCAN_LIMIT {
            self.memo.iter().position(|(at, sd, _)| {
                *sd == seed && at.len() == a.len() && at.iter().zip(a).all(|(x, y)| same(*x, *y))
            })
        } else {
            self.key.clear();
            self.key
                .extend(a.iter().flat_map(|i| [i.lo.to_bits(), i.hi.to_bits()]));
            self.key.push(seed.map_or(u64::MAX, |x| x as u64));
            self.index.get(&self.key).copied()
        }
    }

    /// The memoised pass under `a` (run if new), by its index; None when interrupted.
    fn pass_at(&mut self, a: &[Interval], seed: Option<usize>) -> Option<usize> {
        if let Some(i) = self.find(a, seed) {
            return Some(i);
        }
        self.run(a, seed, None)
    }

    /// The memoised pass at the point `a`, run if new with only what the scalars `need`
    /// are made from; by its index, None when interrupted. Its other scalars are made when
    /// asked for (`scalar_in`).
    fn pass_needing(&mut self, a: &[Interval], need: &[usize]) -> Option<usize> {
        if let Some(i) = self.find(a, None) {
            for &s in need {
                self.scalar_in(i, s)?;
            }
            return Some(i);
        }
        self.run(a, None, Some(need))
    }

    /// Runs a pass under `a` and memoises it.
    fn run(
        &mut self,
        a: &[Interval],
        seed: Option<usize>,
        need: Option<&[usize]>,
    ) -> Option<usize> {
        if self.interrupted {
            return None;
        }
        self.count += 1;
        let mode = Mode::Assign {
            values: a.to_vec(),
            seed,
        };
        let pass = match need {
            Some(need) => self.eval.pass_needing(mode, need),
            None => self.eval.pass(mode),
        };
        let Some(p) = pass else {
            self.interrupted = true;
            return None;
        };
        self.memo.push((a.to_vec(), seed, p));
        if self.memo.len() >= SCAN_LIMIT {
            // Index every pass once the memo is long enough to be hashed.
            for i in self.index.len()..self.memo.len() {
                let (at, sd, _) = &self.memo[i];
                let key = at
                    .iter()
                    .flat_map(|i| [i.lo.to_bits(), i.hi.to_bits()])
                    .chain([sd.map_or(u64::MAX, |x| x as u64)])
                    .collect();
                self.index.insert(key, i);
            }
        }
        Some(self.memo.len() - 1)
    }

    pub fn box_pass(&mut self, seed: Option<usize>) -> Option<Pass> {
        self.count += 1;
        let p = self.eval.pass(Mode::Box { seed });
        if p.is_none() {
            self.interrupted = true;
        }
        p
    }
}

#[derive(Clone, Copy, PartialEq, Debug)]
enum Sign {
    Zero,
    Up,
    Down,
    Unknown,
}

fn sign(d: Interval) -> Sign {
    if d.lo == 0.0 && d.hi == 0.0 {
        Sign::Zero
    } else if d.lo >= 0.0 {
        Sign::Up
    } else if d.hi <= 0.0 {
        Sign::Down
    } else {
        Sign::Unknown
    }
}

/// The same assignment of one input, bit for bit (as the memo's hashed keys compare).
fn same(x: Interval, y: Interval) -> bool {
    x.lo.to_bits() == y.lo.to_bits() && x.hi.to_bits() == y.hi.to_bits()
}

/// How one scalar's bounds are found, settled from its derivatives' signs.
enum Method {
    /// Affine over the box: the bounds themselves.
    Affine(f64, f64),
    /// Monotone in every input: the values at two corners, by the index of their
    /// assignment in the list of corners to evaluate.
    Corners(usize, usize),
    /// Not monotone in some inputs: subdivided.
    Enclose,
}

/// The end of input `i` where a value whose derivative has the sign `sign` is least (or,
/// with `want_max`, greatest); its nominal value where that is not known.
fn end(i: &InputInfo, sign: Sign, want_max: bool) -> Interval {
    match (sign, want_max) {
        (Sign::Up, false) | (Sign::Down, true) => Interval::point(i.lo),
        (Sign::Up, true) | (Sign::Down, false) => Interval::point(i.hi),
        _ => Interval::point(i.nominal),
    }
}

/// Analyses every scalar of the nominal pass; with `swings`, also each input's one-at-a-time
/// swing of each value (for its shares of the spread, which take passes of their own).
/// Returns None when interrupted.
///
/// The corners that monotone scalars ask for are gathered first, each with the scalars
/// that asked for it, so that a corner pass evaluates only the statements those scalars
/// are made from (`Evaluate::pass_needing`): at the corner where a regulator's efficiency
/// is lowest, the junction temperature that reads its loss is not evaluated.
pub fn analyse<E: Evaluate>(
    inputs: &[InputInfo],
    nominal: &Pass,
    passes: &mut Passes<'_, E>,
    swings: bool,
) -> Option<Vec<Option<ScalarBounds>>> {
    let n = inputs.len();
    let m = nominal.scalars.len();
    let mut out = vec![None; m];
    if n == 0 {
        return Some(out);
    }
    // Box passes: derivative enclosures per input, scalar s's row at s·n.
    let mut derivs: Vec<Option<Interval>> = vec![None; m * n];
    for k in 0..n {
        let p = passes.box_pass(Some(k))?;
        for (s, d) in derivs.chunks_exact_mut(n).enumerate() {
            d[k] = p.scalars.get(s).copied().flatten().map(|x| x.x.d);
        }
    }
    // Each scalar's signs, row s at s·n.
    let signs: Vec<Sign> = derivs
        .iter()
        .map(|d| match d {
            Some(d) => sign(*d),
            // Failed in a box pass (its error is reported elsewhere): treat as unknown.
            None => Sign::Unknown,
        })
        .collect();
    // The corners to evaluate (the assignment of corner c at c·n), each with the scalars
    // that need it.
    let mut corner_at: Vec<Interval> = Vec::with_capacity(8 * n);
    let mut corner_need: Vec<Vec<usize>> = Vec::with_capacity(8);
    // Scalars whose derivatives have the same signs share their corners: (a scalar with
    // those signs, its two corners).
    let mut by_signs: Vec<(usize, usize, usize)> = Vec::with_capacity(4);
    let mut corners = |sg: &[Sign], s: usize| -> (usize, usize) {
        let found = by_signs
            .iter()
            .find(|(t, _, _)| signs[t * n..(t + 1) * n] == *sg);
        let (lo, hi) = match found {
            Some(&(_, lo, hi)) => (lo, hi),
            None => {
                let mut add = |want_max: bool| {
                    let at = |k: usize| end(&inputs[k], sg[k], want_max);
                    match corner_at
                        .chunks_exact(n)
                        .position(|c| (0..n).all(|k| same(c[k], at(k))))
                    {
                        Some(c) => c,
                        None => {
                            corner_at.extend((0..n).map(at));
                            corner_need.push(Vec::with_capacity(8));
                            corner_need.len() - 1
                        }
                    }
                };
                let (lo, hi) = (add(false), add(true));
                by_signs.push((s, lo, hi));
                (lo, hi)
            }
        };
        corner_need[lo].push(s);
        if hi != lo {
            corner_need[hi].push(s);
        }
        (lo, hi)
    };
    // How each scalar that depends on some input is bounded.
    let mut planned: Vec<(usize, Method)> = Vec::with_capacity(m);
    for s in 0..m {
        let Some(nom) = nominal.scalars[s] else {
            continue;
        };
        let sg = &signs[s * n..(s + 1) * n];
        if sg.iter().all(|&g| g == Sign::Zero) {
            continue;
        }
        let derivatives = &derivs[s * n..(s + 1) * n];
        let method = if let Some((lo, hi)) = affine_extremes(nom.x.value(), derivatives, inputs, sg)
        {
            Method::Affine(lo.min(nom.x.value()), hi.max(nom.x.value()))
        } else if sg.contains(&Sign::Unknown) {
            Method::Enclose
        } else {
            let (lo, hi) = corners(sg, s);
            Method::Corners(lo, hi)
        };
        planned.push((s, method));
    }
    // The corner passes, each evaluating what its scalars need.
    let mut corner_pass = Vec::with_capacity(corner_need.len());
    for (at, need) in corner_at.chunks_exact(n).zip(&corner_need) {
        corner_pass.push(passes.pass_needing(at, need)?);
    }
    let nominal_point: Vec<Interval> = inputs.iter().map(|i| Interval::point(i.nominal)).collect();
    let mut one_at_a_time = nominal_point.clone();
    // The passes with one input at an end and the others nominal, the same for every
    // scalar: found once per input (memo indices, low end and high end).
    let mut ends: Vec<Option<(usize, usize)>> = vec![None; n];
    for (s, method) in planned {
        let Some(nom) = nominal.scalars[s] else {
            continue;
        };
        let nom = nom.x.value();
        let sg = &signs[s * n..(s + 1) * n];
        let depends: Inputs<usize> = (0..n).filter(|&k| sg[k] != Sign::Zero).collect();
        let mut min_at: Inputs<Interval> = (0..n).map(|k| end(&inputs[k], sg[k], false)).collect();
        let mut max_at: Inputs<Interval> = (0..n).map(|k| end(&inputs[k], sg[k], true)).collect();
        let (min, max, conservative) = match method {
            Method::Affine(lo, hi) => (lo, hi, false),
            Method::Corners(lo, hi) => {
                let lo = passes.scalar_in(corner_pass[lo], s)?;
                let hi = passes.scalar_in(corner_pass[hi], s)?;
                // A value that fails at a corner has its error reported by that pass.
                let (Some(lo), Some(hi)) = (lo, hi) else {
                    continue;
                };
                (lo.x.value().min(nom), hi.x.value().max(nom), false)
            }
            Method::Enclose => {
                let unknown: Inputs<usize> = depends
                    .iter()
                    .copied()
                    .filter(|&k| sg[k] == Sign::Unknown)
                    .collect();
                let pieces = match unknown.len() {
                    1 => 16,
                    2 => 4,
                    3 => 2,
                    _ => 1,
                };
                let lo = enclose(inputs, passes, s, &min_at, &unknown, pieces, false);
                let hi = enclose(inputs, passes, s, &max_at, &unknown, pieces, true);
                if passes.interrupted {
                    return None;
                }
                let (Some((lo, lo_at, lo_exact)), Some((hi, hi_at, hi_exact))) = (lo, hi) else {
                    continue;
                };
                min_at = Inputs::from_vec(lo_at);
                max_at = Inputs::from_vec(hi_at);
                // Exact when every sub-range proved monotone, so its extreme is at its end.
                (lo.min(nom), hi.max(nom), !(lo_exact && hi_exact))
            }
        };
        let mut half_swings = Inputs::new();
        for &k in depends.iter().filter(|_| swings) {
            let (lo, hi) = match ends[k] {
                Some(found) => found,
                None => {
                    let a = &mut one_at_a_time;
                    a[k] = Interval::point(inputs[k].lo);
                    let lo = passes.pass_at(a, None);
                    a[k] = Interval::point(inputs[k].hi);
                    let hi = passes.pass_at(a, None);
                    a[k] = nominal_point[k];
                    let (Some(lo), Some(hi)) = (lo, hi) else {
                        return None;
                    };
                    ends[k] = Some((lo, hi));
                    (lo, hi)
                }
            };
            let f_lo = passes.scalar_in(lo, s)?.map(|x| x.x.value());
            let f_hi = passes.scalar_in(hi, s)?.map(|x| x.x.value());
            half_swings.push(match (f_lo, f_hi) {
                (Some(a), Some(b)) => (0.5 * b - 0.5 * a).abs(),
                _ => 0.0,
            });
        }
        out[s] = Some(ScalarBounds {
            min,
            max,
            conservative,
            min_at,
            max_at,
            depends,
            half_swings,
        });
    }
    Some(out)
}

/// The extremes of a value over the box when every partial derivative is enclosed by a
/// single number: the value is then affine there, f(x) = f(x₀) + Σ cₖ·(xₖ − x₀ₖ), and each
/// extreme is at the corner whose ends the derivatives' signs choose.
/// None when some derivative is not a point (or the extremes would not be finite).
fn affine_extremes(
    nominal: f64,
    derivatives: &[Option<Interval>],
    inputs: &[InputInfo],
    signs: &[Sign],
) -> Option<(f64, f64)> {
    let (mut lo, mut hi) = (nominal, nominal);
    for (k, d) in derivatives.iter().enumerate() {
        let d = (*d)?;
        if d.lo != d.hi || !d.lo.is_finite() {
            return None;
        }
        if d.lo != 0.0 {
            let i = &inputs[k];
            lo += d.lo * (end(i, signs[k], false).lo - i.nominal);
            hi += d.lo * (end(i, signs[k], true).lo - i.nominal);
        }
    }
    (lo.is_finite() && hi.is_finite()).then_some((lo, hi))
}

/// A guaranteed bound by subdivision of the inputs whose effect is not monotone, with
/// the others fixed at their deciding ends. Also returns the worst sampled point, and
/// whether every sub-range proved monotone (then the bound is exact).
fn enclose<E: Evaluate>(
    inputs: &[InputInfo],
    passes: &mut Passes<'_, E>,
    s: usize,
    base: &[Interval],
    unknown: &[usize],
    pieces: usize,
    want_max: bool,
) -> Option<(f64, Vec<Interval>, bool)> {
    let cells = pieces.pow(unknown.len() as u32);
    let mut all_exact = true;
    let mut bound = if want_max {
        f64::NEG_INFINITY
    } else {
        f64::INFINITY
    };
    let mut best_point = base.to_vec();
    let mut best_val = if want_max {
        f64::NEG_INFINITY
    } else {
        f64::INFINITY
    };
    for c in 0..cells {
        let mut a = base.to_vec();
        let mut idx = c;
        for &k in unknown {
            let j = idx % pieces;
            idx /= pieces;
            a[k] = sub_range(&inputs[k], j, pieces);
        }
        let v = passes.at(&a, s)?;
        if !v.x.is_finite() {
            return None;
        }
        // The sub-box's enclosure: the plain interval value, tightened by the mean-value
        // form f(c) + Σ f'ₖ(X)·(Xₖ − cₖ) (Moore, Kearfott & Cloud 2009, the mean value
        // extension), and exact where the derivatives keep their signs inside it.
        let centre: Vec<Interval> = a.iter().map(|i| Interval::point(i.mid())).collect();
        let fc = passes.at(&centre, s)?.x.value();
        let mut mv = Interval::point(fc);
        let mut corner = a.clone();
        let mut exact = true;
        for &k in unknown {
            let d = passes.at_seeded(&a, Some(k), s)?.x.d;
            let dx = Interval::new(a[k].lo - centre[k].lo, a[k].hi - centre[k].lo);
            mv = mv + mul(d, dx);
            corner[k] = if (d.lo >= 0.0) == want_max && (d.lo >= 0.0 || d.hi <= 0.0) {
                Interval::point(a[k].hi)
            } else if d.lo >= 0.0 || d.hi <= 0.0 {
                Interval::point(a[k].lo)
            } else {
                exact = false;
                a[k]
            };
        }
        all_exact &= exact;
        let sub = if exact {
            let x = passes.at(&corner, s)?.x.value();
            if (want_max && x > best_val) || (!want_max && x < best_val) {
                best_val = x;
                best_point = corner.clone();
            }
            x
        } else if want_max {
            v.x.v.hi.min(mv.hi)
        } else {
            v.x.v.lo.max(mv.lo)
        };
        bound = if want_max {
            bound.max(sub)
        } else {
            bound.min(sub)
        };
        // Sample the sub-box's ends for a point that attains a near-worst value.
        for end in [false, true] {
            let p: Vec<Interval> = a
                .iter()
                .map(|i| Interval::point(if end { i.hi } else { i.lo }))
                .collect();
            if let Some(x) = passes.at(&p, s) {
                let x = x.x.value();
                if (want_max && x > best_val) || (!want_max && x < best_val) {
                    best_val = x;
                    best_point = p;
                }
            }
        }
    }
    if passes.interrupted || !bound.is_finite() {
        return None;
    }
    Some((bound, best_point, all_exact))
}

fn mul(a: Interval, b: Interval) -> Interval {
    let p = [a.lo * b.lo, a.lo * b.hi, a.hi * b.lo, a.hi * b.hi];
    Interval::new(
        p.iter().copied().fold(f64::INFINITY, f64::min),
        p.iter().copied().fold(f64::NEG_INFINITY, f64::max),
    )
}

fn sub_range(i: &InputInfo, j: usize, pieces: usize) -> Interval {
    let w = (i.hi - i.lo) / pieces as f64;
    let lo = i.lo + w * j as f64;
    let hi = if j + 1 == pieces { i.hi } else { lo + w };
    Interval::new(lo, hi)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::num::Dual;
    use crate::units::Dim;

    /// One input x over −1 … 1 (nominal 0) and the scalar 3·x + 2, which is affine; with
    /// `curved`, also x·x + x, whose derivative 2·x + 1 spans −1 … 3 over the box.
    struct Scalars {
        curved: bool,
        points: usize,
    }

    impl Evaluate for Scalars {
        fn pass(&mut self, mode: Mode) -> Option<Pass> {
            let x = match &mode {
                Mode::Nominal => Dual::constant(0.0),
                Mode::Box { seed } => Dual::input(Interval::new(-1.0, 1.0), *seed == Some(0)),
                Mode::Assign { values, seed } => {
                    self.points += 1;
                    Dual::input(values[0], *seed == Some(0))
                }
            };
            let mut p = Pass::new(mode, 2);
            let c = Dual::constant;
            p.put_scalar(0, Num::new(c(3.0) * x + c(2.0), Dim::NONE));
            if self.curved {
                p.put_scalar(1, Num::new(x * x + x, Dim::NONE));
            }
            Some(p)
        }
    }

    fn analysed(curved: bool, swings: bool) -> (Vec<Option<ScalarBounds>>, usize) {
        let inputs = [InputInfo {
            key: "x".into(),
            label: crate::eval::InputLabel::Given("x".into()),
            nominal: 0.0,
            lo: -1.0,
            hi: 1.0,
        }];
        let mut eval = Scalars { curved, points: 0 };
        let nominal = eval.pass(Mode::Nominal).expect("nominal");
        let mut passes = Passes::new(&mut eval);
        let bounds = analyse(&inputs, &nominal, &mut passes, swings).expect("analysed");
        drop(passes);
        (bounds, eval.points)
    }

    #[test]
    fn an_affine_value_needs_no_evaluation_at_a_corner() {
        let (bounds, points) = analysed(false, false);
        let affine = bounds[0].as_ref().expect("bounds of 3·x + 2");
        assert_eq!(
            (affine.min, affine.max, affine.conservative),
            (-1.0, 5.0, false)
        );
        assert_eq!(affine.min_at[0], Interval::point(-1.0));
        assert_eq!(affine.max_at[0], Interval::point(1.0));
        assert!(affine.half_swings.is_empty());
        assert_eq!(points, 0);
        // Its swing, when asked for, is |5 − (−1)| / 2 = 3, from the two ends.
        let (bounds, points) = analysed(false, true);
        let swings = bounds[0].as_ref().map(|b| b.half_swings.to_vec());
        assert_eq!(swings, Some(vec![3.0]));
        assert_eq!(points, 2);
        // x² + x reaches −1/4 at x = −1/2 and 2 at x = 1: its sub-ranges are evaluated.
        let (bounds, points) = analysed(true, false);
        let curved = bounds[1].as_ref().expect("bounds of x² + x");
        assert!(curved.min <= -0.25 && curved.max >= 2.0, "{curved:?}");
        assert!(points > 0);
    }

    /// Inputs x and y over −1 … 1 (nominal 0); scalar 0 is x + x²/10 and scalar 1 is
    /// y + y²/10, each monotone (slope 0.8 … 1.2) and curved. A pass asked for some
    /// scalars makes only those.
    struct TwoCurves {
        needs: Vec<Vec<usize>>,
        full: usize,
    }

    impl TwoCurves {
        fn make(&self, mode: Mode, only: Option<&[usize]>) -> Pass {
            let (x, y) = match &mode {
                Mode::Nominal => (Dual::constant(0.0), Dual::constant(0.0)),
                Mode::Box { seed } => {
                    let whole = Interval::new(-1.0, 1.0);
                    (
                        Dual::input(whole, *seed == Some(0)),
                        Dual::input(whole, *seed == Some(1)),
                    )
                }
                Mode::Assign { values, seed } => (
                    Dual::input(values[0], *seed == Some(0)),
                    Dual::input(values[1], *seed == Some(1)),
                ),
            };
            let mut p = Pass::new(mode, 2);
            for (s, v) in [x, y].into_iter().enumerate() {
                if only.is_none_or(|o| o.contains(&s)) {
                    let tenth = Dual::constant(0.1);
                    p.put_scalar(s, Num::new(v + tenth * v * v, Dim::NONE));
                }
            }
            p.partial = only.is_some();
            p
        }
    }

    impl Evaluate for TwoCurves {
        fn pass(&mut self, mode: Mode) -> Option<Pass> {
            if matches!(mode, Mode::Assign { .. }) {
                self.full += 1;
            }
            Some(self.make(mode, None))
        }
        fn pass_needing(&mut self, mode: Mode, need: &[usize]) -> Option<Pass> {
            self.needs.push(need.to_vec());
            Some(self.make(mode, Some(need)))
        }
    }

    #[test]
    fn a_corner_pass_makes_what_its_scalars_need_and_the_rest_when_asked() {
        let inputs: Vec<InputInfo> = ["x", "y"]
            .into_iter()
            .map(|name| InputInfo {
                key: name.into(),
                label: crate::eval::InputLabel::Given(name.into()),
                nominal: 0.0,
                lo: -1.0,
                hi: 1.0,
            })
            .collect();
        let mut eval = TwoCurves {
            needs: Vec::new(),
            full: 0,
        };
        let nominal = eval.pass(Mode::Nominal).expect("nominal");
        let mut passes = Passes::new(&mut eval);
        let bounds = analyse(&inputs, &nominal, &mut passes, false).expect("analysed");
        for b in &bounds {
            let b = b.as_ref().expect("bounds");
            assert_eq!((b.min, b.max, b.conservative), (-0.9, 1.1, false));
        }
        // Scalar 1 at the corner where scalar 0 is least (x = −1, y nominal): that pass
        // did not make it, so the pass runs again in full.
        let corner = [Interval::point(-1.0), Interval::point(0.0)];
        let y_there = passes.at(&corner, 1).map(|n| n.x.value());
        assert_eq!(y_there, Some(0.0));
        assert_eq!(passes.at(&corner, 0).map(|n| n.x.value()), Some(-0.9));
        drop(passes);
        // Four corners, each asked for by one scalar; one full pass, for the question above.
        assert_eq!(eval.needs, vec![vec![0], vec![0], vec![1], vec![1]]);
        assert_eq!(eval.full, 1);
    }
}
