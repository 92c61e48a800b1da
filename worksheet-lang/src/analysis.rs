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
        self.scalar_of(i, s)
    }

    /// Scalar `s` of the memoised pass `i` (from `pass_at`).
    fn scalar_of(&self, i: usize, s: usize) -> Option<Num> {
        self.memo[i].2.scalars.get(s).copied().flatten()
    }

    /// The memoised pass under `a` (run if new), by its index; None when interrupted.
    fn pass_at(&mut self, a: &[Interval], seed: Option<usize>) -> Option<usize> {
        let same = |x: &Interval, y: &Interval| {
            x.lo.to_bits() == y.lo.to_bits() && x.hi.to_bits() == y.hi.to_bits()
        };
        let found = if self.memo.len() < SCAN_LIMIT {
            self.memo.iter().position(|(at, sd, _)| {
                *sd == seed && at.len() == a.len() && at.iter().zip(a).all(|(x, y)| same(x, y))
            })
        } else {
            self.key.clear();
            self.key
                .extend(a.iter().flat_map(|i| [i.lo.to_bits(), i.hi.to_bits()]));
            self.key.push(seed.map_or(u64::MAX, |x| x as u64));
            self.index.get(&self.key).copied()
        };
        if found.is_some() {
            return found;
        }
        if self.interrupted {
            return None;
        }
        self.count += 1;
        let Some(p) = self.eval.pass(Mode::Assign {
            values: a.to_vec(),
            seed,
        }) else {
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

/// Analyses every scalar of the nominal pass; with `swings`, also each input's one-at-a-time
/// swing of each value (for its shares of the spread, which take passes of their own).
/// Returns None when interrupted.
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
    let nominal_point: Vec<Interval> = inputs.iter().map(|i| Interval::point(i.nominal)).collect();
    // Scratch rows, reused from scalar to scalar.
    let mut signs: Vec<Sign> = Vec::with_capacity(n);
    let mut unknown: Vec<usize> = Vec::with_capacity(n);
    let mut one_at_a_time = nominal_point.clone();
    // The passes with one input at an end and the others nominal, the same for every
    // scalar: found once per input (memo indices, low end and high end).
    let mut ends: Vec<Option<(usize, usize)>> = vec![None; n];
    // The corner passes of monotone scalars by the signs of their derivatives (memo
    // indices of the minimum's and the maximum's corner).
    let mut corners: Vec<(Inputs<Sign>, usize, usize)> = Vec::new();
    for s in 0..m {
        let Some(nom) = nominal.scalars[s] else {
            continue;
        };
        signs.clear();
        signs.extend(derivs[s * n..(s + 1) * n].iter().map(|d| match d {
            Some(d) => sign(*d),
            // Failed in a box pass (its error is reported elsewhere): treat as unknown.
            None => Sign::Unknown,
        }));
        let depends: Inputs<usize> = (0..n).filter(|&k| signs[k] != Sign::Zero).collect();
        if depends.is_empty() {
            continue;
        }
        let end = |k: usize, want_max: bool| -> Interval {
            let i = &inputs[k];
            match (signs[k], want_max) {
                (Sign::Up, false) | (Sign::Down, true) => Interval::point(i.lo),
                (Sign::Up, true) | (Sign::Down, false) => Interval::point(i.hi),
                _ => Interval::point(i.nominal),
            }
        };
        unknown.clear();
        unknown.extend(
            depends
                .iter()
                .copied()
                .filter(|&k| signs[k] == Sign::Unknown),
        );
        let mut min_at: Inputs<Interval> = (0..n).map(|k| end(k, false)).collect();
        let mut max_at: Inputs<Interval> = (0..n).map(|k| end(k, true)).collect();
        let derivatives = &derivs[s * n..(s + 1) * n];
        let (min, max, conservative) = if let Some((lo, hi)) =
            affine_extremes(nom.x.value(), derivatives, inputs, &min_at, &max_at)
        {
            (lo.min(nom.x.value()), hi.max(nom.x.value()), false)
        } else if unknown.is_empty() {
            // Scalars whose derivatives have the same signs share their corners.
            let found = corners.iter().find(|(sg, _, _)| sg[..] == signs[..]);
            let (lo, hi) = match found {
                Some(&(_, lo, hi)) => (lo, hi),
                None => {
                    let (Some(lo), Some(hi)) =
                        (passes.pass_at(&min_at, None), passes.pass_at(&max_at, None))
                    else {
                        return None;
                    };
                    corners.push((signs.iter().copied().collect(), lo, hi));
                    (lo, hi)
                }
            };
            let (lo, hi) = (passes.scalar_of(lo, s), passes.scalar_of(hi, s));
            // A value that fails at a corner has its error reported by that pass.
            let (Some(lo), Some(hi)) = (lo, hi) else {
                continue;
            };
            let (lo, hi) = (lo.x.value(), hi.x.value());
            (lo.min(nom.x.value()), hi.max(nom.x.value()), false)
        } else {
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
            (
                lo.min(nom.x.value()),
                hi.max(nom.x.value()),
                !(lo_exact && hi_exact),
            )
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
            let f_lo = passes.scalar_of(lo, s).map(|x| x.x.value());
            let f_hi = passes.scalar_of(hi, s).map(|x| x.x.value());
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
/// extreme is at the corner (`min_at`, `max_at`) whose ends the derivatives' signs chose.
/// None when some derivative is not a point (or the extremes would not be finite).
fn affine_extremes(
    nominal: f64,
    derivatives: &[Option<Interval>],
    inputs: &[InputInfo],
    min_at: &[Interval],
    max_at: &[Interval],
) -> Option<(f64, f64)> {
    let (mut lo, mut hi) = (nominal, nominal);
    for (k, d) in derivatives.iter().enumerate() {
        let d = (*d)?;
        if d.lo != d.hi || !d.lo.is_finite() {
            return None;
        }
        if d.lo != 0.0 {
            lo += d.lo * (min_at[k].lo - inputs[k].nominal);
            hi += d.lo * (max_at[k].lo - inputs[k].nominal);
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
}
