//! Sweeps compiled once to a tape of plain-number operations.
//!
//! A sweep re-evaluates a few expressions at many points. Instead of walking the syntax
//! tree and re-running the whole analysis at every point, the dependency cone of the
//! swept expressions is compiled to a tape: one operation per register, in dependency
//! order, over SI numbers. Dimensions, temperatures and names were already checked by the
//! ordinary evaluation of the worksheet, so the tape only computes. It runs on `f64` for
//! nominal values and on `Dual` for the monotonicity test of the worst-case bands, reusing
//! one register file (no allocation per point).
//!
//! What the tape cannot express (built-in calls whose results depend on the swept value,
//! lists, texts) makes the compiler decline; the sweep then takes the general path.

use crate::ast::{BinOp, Expr, ExprKind};
use crate::eval::{self, Function, MAX_CALL_DEPTH};
use crate::num::{Dual, Interval};
use crate::units;
use rustc_hash::FxHashMap as HashMap;

/// One operation; operands are register indices (every operation writes its own register).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Op {
    Const(f64),
    Input(u32),
    Add(u32, u32),
    Sub(u32, u32),
    Mul(u32, u32),
    Div(u32, u32),
    Neg(u32),
    Recip(u32),
    Powi(u32, i32),
    Powf(u32, u32),
    Sqrt(u32),
    Exp(u32),
    Ln(u32),
    Log10(u32),
    Abs(u32),
    Min(u32, u32),
    Max(u32, u32),
}

/// An uncertain input of the tape (a tolerance site), as a perturbation variable.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TapeInput {
    pub nominal: f64,
    pub lo: f64,
    pub hi: f64,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Tape {
    pub ops: Vec<Op>,
    /// The operations that are not constants, in order (constants are written once by
    /// `prepare`).
    code: Vec<u32>,
    /// Inputs `0..swept` are the swept values; the rest are tolerance sites.
    pub swept: usize,
    pub inputs: Vec<TapeInput>,
    /// The register of each swept expression.
    pub outputs: Vec<u32>,
}

/// The arithmetic a tape runs on.
pub trait Arith: Copy {
    fn konst(x: f64) -> Self;
    fn add(self, o: Self) -> Self;
    fn sub(self, o: Self) -> Self;
    fn mul(self, o: Self) -> Self;
    fn div(self, o: Self) -> Self;
    fn neg(self) -> Self;
    fn recip(self) -> Self;
    fn powi(self, n: i32) -> Self;
    fn powf(self, p: Self) -> Self;
    fn sqrt(self) -> Self;
    fn exp(self) -> Self;
    fn ln(self) -> Self;
    fn log10(self) -> Self;
    fn abs(self) -> Self;
    fn min(self, o: Self) -> Self;
    fn max(self, o: Self) -> Self;
}

/// `f64` and `Dual` implement the same operations under the same names; the trait only
/// forwards to them.
macro_rules! forward_arith {
    ($t:ty, $konst:expr) => {
        impl Arith for $t {
            fn konst(x: f64) -> Self {
                $konst(x)
            }
            fn add(self, o: Self) -> Self {
                self + o
            }
            fn sub(self, o: Self) -> Self {
                self - o
            }
            fn mul(self, o: Self) -> Self {
                self * o
            }
            fn div(self, o: Self) -> Self {
                self / o
            }
            fn neg(self) -> Self {
                -self
            }
            fn recip(self) -> Self {
                <$t>::recip(self)
            }
            fn powi(self, n: i32) -> Self {
                <$t>::powi(self, n)
            }
            fn powf(self, p: Self) -> Self {
                <$t>::powf(self, p)
            }
            fn sqrt(self) -> Self {
                <$t>::sqrt(self)
            }
            fn exp(self) -> Self {
                <$t>::exp(self)
            }
            fn ln(self) -> Self {
                <$t>::ln(self)
            }
            fn log10(self) -> Self {
                <$t>::log10(self)
            }
            fn abs(self) -> Self {
                <$t>::abs(self)
            }
            fn min(self, o: Self) -> Self {
                <$t>::min(self, o)
            }
            fn max(self, o: Self) -> Self {
                <$t>::max(self, o)
            }
        }
    };
}

forward_arith!(f64, |x: f64| x);
forward_arith!(Dual, Dual::constant);

impl Tape {
    /// Sizes `regs` and writes the constants; `run` then only computes.
    pub fn prepare<T: Arith>(&self, regs: &mut Vec<T>) {
        regs.clear();
        regs.extend(self.ops.iter().map(|op| match op {
            Op::Const(x) => T::konst(*x),
            _ => T::konst(0.0),
        }));
    }

    /// Runs the tape on `inputs` (one per tape input) over registers made by `prepare`.
    pub fn run<T: Arith>(&self, inputs: &[T], regs: &mut [T]) {
        for &i in &self.code {
            let r = |j: &u32| regs[*j as usize];
            let v = match &self.ops[i as usize] {
                Op::Const(x) => T::konst(*x),
                Op::Input(k) => inputs[*k as usize],
                Op::Add(a, b) => r(a).add(r(b)),
                Op::Sub(a, b) => r(a).sub(r(b)),
                Op::Mul(a, b) => r(a).mul(r(b)),
                Op::Div(a, b) => r(a).div(r(b)),
                Op::Neg(a) => r(a).neg(),
                Op::Recip(a) => r(a).recip(),
                Op::Powi(a, n) => r(a).powi(*n),
                Op::Powf(a, b) => r(a).powf(r(b)),
                Op::Sqrt(a) => r(a).sqrt(),
                Op::Exp(a) => r(a).exp(),
                Op::Ln(a) => r(a).ln(),
                Op::Log10(a) => r(a).log10(),
                Op::Abs(a) => r(a).abs(),
                Op::Min(a, b) => r(a).min(r(b)),
                Op::Max(a, b) => r(a).max(r(b)),
            };
            regs[i as usize] = v;
        }
    }
}

/// Points a block run computes at once: short enough for its registers to stay in cache,
/// long enough for each operation's loop to run at full speed.
pub const BLOCK: usize = 512;

/// One input of a block run: the same value for every point, or one value per point.
#[derive(Clone, Copy)]
pub enum Column<'a> {
    Same(f64),
    Each(&'a [f64]),
}

impl Tape {
    /// Registers for `run_block`: one column of `BLOCK` values each, constants filled in.
    pub fn prepare_block(&self, regs: &mut Vec<Vec<f64>>) {
        regs.clear();
        regs.extend(self.ops.iter().map(|op| match op {
            Op::Const(x) => vec![*x; BLOCK],
            _ => vec![0.0; BLOCK],
        }));
    }

    /// Runs the tape on `len` (≤ `BLOCK`) points at once, column by column: each operation is
    /// a plain loop over the points, which the compiler vectorises. Afterwards register `r`
    /// holds the values of `r` at every point.
    pub fn run_block(&self, inputs: &[Column<'_>], len: usize, regs: &mut [Vec<f64>]) {
        let len = len.min(BLOCK);
        for &i in &self.code {
            let i = i as usize;
            let (before, rest) = regs.split_at_mut(i);
            let dst = &mut rest[0][..len];
            let col = |j: &u32| &before[*j as usize][..len];
            match &self.ops[i] {
                Op::Const(x) => dst.fill(*x),
                Op::Input(k) => match inputs[*k as usize] {
                    Column::Same(x) => dst.fill(x),
                    Column::Each(v) => dst.copy_from_slice(&v[..len]),
                },
                Op::Add(a, b) => zip2(dst, col(a), col(b), |x, y| x + y),
                Op::Sub(a, b) => zip2(dst, col(a), col(b), |x, y| x - y),
                Op::Mul(a, b) => zip2(dst, col(a), col(b), |x, y| x * y),
                Op::Div(a, b) => zip2(dst, col(a), col(b), |x, y| x / y),
                Op::Powf(a, b) => zip2(dst, col(a), col(b), f64::powf),
                Op::Min(a, b) => zip2(dst, col(a), col(b), f64::min),
                Op::Max(a, b) => zip2(dst, col(a), col(b), f64::max),
                Op::Neg(a) => zip1(dst, col(a), |x| -x),
                Op::Recip(a) => zip1(dst, col(a), |x| 1.0 / x),
                Op::Powi(a, n) => {
                    let n = *n;
                    zip1(dst, col(a), |x| x.powi(n))
                }
                Op::Sqrt(a) => zip1(dst, col(a), f64::sqrt),
                Op::Exp(a) => zip1(dst, col(a), f64::exp),
                Op::Ln(a) => zip1(dst, col(a), f64::ln),
                Op::Log10(a) => zip1(dst, col(a), f64::log10),
                Op::Abs(a) => zip1(dst, col(a), f64::abs),
            }
        }
    }
}

fn zip1(dst: &mut [f64], a: &[f64], f: impl Fn(f64) -> f64) {
    for (d, x) in dst.iter_mut().zip(a) {
        *d = f(*x);
    }
}

fn zip2(dst: &mut [f64], a: &[f64], b: &[f64], f: impl Fn(f64, f64) -> f64) {
    for ((d, x), y) in dst.iter_mut().zip(a).zip(b) {
        *d = f(*x, *y);
    }
}

/// What the compiler needs to know of the worksheet.
pub trait TapeSource {
    /// A definition's index and expression.
    fn definition(&self, name: &str) -> Option<(usize, &Expr)>;
    fn function(&self, name: &str) -> Option<&Function>;
    /// The value of a scalar of the ordinary evaluation ("name" or "name.field") when it is
    /// exactly known (no uncertainty).
    fn certain(&self, key: &str) -> Option<f64>;
}

struct Compiler<'s> {
    src: &'s dyn TapeSource,
    ops: Vec<Op>,
    inputs: Vec<TapeInput>,
    /// Swept definitions and their input index.
    swept: Vec<(usize, u32)>,
    defs: HashMap<usize, u32>,
    /// Whether a definition depends on a swept one.
    affected: HashMap<usize, bool>,
    sites: HashMap<(usize, usize), u32>,
    locals: Vec<(String, u32)>,
    /// The definition being compiled (for site keys); usize::MAX for a swept expression.
    current: usize,
    depth: usize,
}

/// Compiles `exprs` with the definitions in `swept` as the tape's first inputs.
/// None when something in their dependency cone cannot be put on a tape.
pub fn compile(src: &dyn TapeSource, swept: &[usize], exprs: &[Expr]) -> Option<Tape> {
    let mut c = Compiler {
        src,
        ops: Vec::new(),
        inputs: Vec::new(),
        swept: Vec::new(),
        defs: HashMap::default(),
        affected: HashMap::default(),
        sites: HashMap::default(),
        locals: Vec::new(),
        current: usize::MAX,
        depth: 0,
    };
    for (i, &d) in swept.iter().enumerate() {
        c.inputs.push(TapeInput {
            nominal: 0.0,
            lo: 0.0,
            hi: 0.0,
        });
        c.swept.push((d, i as u32));
    }
    let mut outputs = Vec::with_capacity(exprs.len());
    for e in exprs {
        c.current = usize::MAX;
        outputs.push(c.expr(e)?);
    }
    let code = (0..c.ops.len() as u32)
        .filter(|&i| !matches!(c.ops[i as usize], Op::Const(_)))
        .collect();
    Some(Tape {
        code,
        ops: c.ops,
        swept: swept.len(),
        inputs: c.inputs,
        outputs,
    })
}

impl Compiler<'_> {
    /// Appends an operation, folding it to a constant when its operands are constants.
    fn push(&mut self, op: Op) -> u32 {
        let folded = {
            let k = |r: &u32| self.konst(*r);
            let f = |a: &u32, g: fn(f64) -> f64| k(a).map(g);
            let f2 = |a: &u32, b: &u32, g: fn(f64, f64) -> f64| Some(g(k(a)?, k(b)?));
            match &op {
                Op::Const(_) | Op::Input(_) => None,
                Op::Add(a, b) => f2(a, b, |x, y| x + y),
                Op::Sub(a, b) => f2(a, b, |x, y| x - y),
                Op::Mul(a, b) => f2(a, b, |x, y| x * y),
                Op::Div(a, b) => f2(a, b, |x, y| x / y),
                Op::Powf(a, b) => f2(a, b, f64::powf),
                Op::Min(a, b) => f2(a, b, f64::min),
                Op::Max(a, b) => f2(a, b, f64::max),
                Op::Neg(a) => f(a, |x| -x),
                Op::Recip(a) => f(a, |x| 1.0 / x),
                Op::Powi(a, n) => k(a).map(|x| x.powi(*n)),
                Op::Sqrt(a) => f(a, f64::sqrt),
                Op::Exp(a) => f(a, f64::exp),
                Op::Ln(a) => f(a, f64::ln),
                Op::Log10(a) => f(a, f64::log10),
                Op::Abs(a) => f(a, f64::abs),
            }
        };
        self.ops.push(match folded {
            Some(x) => Op::Const(x),
            None => op,
        });
        (self.ops.len() - 1) as u32
    }

    fn konst(&self, r: u32) -> Option<f64> {
        match self.ops[r as usize] {
            Op::Const(x) => Some(x),
            _ => None,
        }
    }

    fn name(&mut self, n: &str) -> Option<u32> {
        if let Some((_, r)) = self.locals.iter().rev().find(|(k, _)| k == n) {
            return Some(*r);
        }
        let (d, e) = self.src.definition(n)?;
        if let Some(&r) = self.defs.get(&d) {
            return Some(r);
        }
        if let Some(&(_, i)) = self.swept.iter().find(|(s, _)| *s == d) {
            let r = self.push(Op::Input(i));
            self.defs.insert(d, r);
            return Some(r);
        }
        let affected = self.affected_by_name(d, e);
        if !affected {
            if let Some(v) = self.src.certain(n) {
                let r = self.push(Op::Const(v));
                self.defs.insert(d, r);
                return Some(r);
            }
        }
        if self.depth >= 256 {
            return None;
        }
        self.depth += 1;
        let saved = std::mem::replace(&mut self.current, d);
        let saved_locals = std::mem::take(&mut self.locals);
        let r = self.expr(e);
        self.locals = saved_locals;
        self.current = saved;
        self.depth -= 1;
        let r = r?;
        self.defs.insert(d, r);
        Some(r)
    }

    fn affected_by_name(&mut self, d: usize, e: &Expr) -> bool {
        if let Some(&a) = self.affected.get(&d) {
            return a;
        }
        let mut names = Vec::new();
        eval::free_names(e, &[], &mut names);
        self.affected.insert(d, false);
        let mut k = 0;
        let mut seen_funcs: Vec<String> = Vec::new();
        while k < names.len() {
            let n = names[k].clone();
            k += 1;
            if let Some(f) = self.src.function(&n) {
                if !seen_funcs.contains(&n) {
                    seen_funcs.push(n);
                    eval::free_names(&f.body, &f.params, &mut names);
                }
            }
        }
        let mut a = false;
        for n in &names {
            if let Some((i, ei)) = self.src.definition(n) {
                if self.swept.iter().any(|(s, _)| *s == i) || self.affected_by_name(i, ei) {
                    a = true;
                    break;
                }
            }
        }
        self.affected.insert(d, a);
        a
    }

    fn site(&mut self, start: usize, lo: f64, hi: f64) -> u32 {
        let key = (self.current, start);
        let idx = match self.sites.get(&key) {
            Some(&i) => i,
            None => {
                let i = self.inputs.len() as u32;
                self.inputs.push(TapeInput {
                    nominal: 0.0,
                    lo,
                    hi,
                });
                self.sites.insert(key, i);
                i
            }
        };
        self.push(Op::Input(idx))
    }

    /// A tolerance's size: a known number; a lone °C/°F literal is a difference here.
    fn spread(&mut self, e: &Expr) -> Option<f64> {
        if let ExprKind::Number {
            value,
            unit: Some(u),
        } = &e.kind
        {
            let unit = units::parse_unit(&u.text).ok()?;
            return Some(unit.to_si(*value, false));
        }
        let r = self.expr(e)?;
        self.konst(r)
    }

    fn expr(&mut self, e: &Expr) -> Option<u32> {
        stacker::maybe_grow(128 * 1024, 4 * 1024 * 1024, || self.expr_inner(e))
    }

    fn expr_inner(&mut self, e: &Expr) -> Option<u32> {
        match &e.kind {
            ExprKind::Number { value, unit } => {
                let si = match unit {
                    None => *value,
                    Some(u) => {
                        let unit = units::parse_unit(&u.text).ok()?;
                        unit.to_si(*value, unit.is_absolute_temperature())
                    }
                };
                Some(self.push(Op::Const(si)))
            }
            ExprKind::Code { value, .. } => Some(self.push(Op::Const(*value))),
            ExprKind::Name(n) => self.name(n),
            ExprKind::Neg(x) => {
                let a = self.expr(x)?;
                Some(self.push(Op::Neg(a)))
            }
            ExprKind::Binary { op, lhs, rhs } => {
                if *op == BinOp::Div && eval::same_function(lhs, rhs) {
                    return Some(self.push(Op::Const(1.0)));
                }
                let a = self.expr(lhs)?;
                let b = self.expr(rhs)?;
                Some(match op {
                    BinOp::Add => self.push(Op::Add(a, b)),
                    BinOp::Sub => self.push(Op::Sub(a, b)),
                    BinOp::Mul => self.push(Op::Mul(a, b)),
                    BinOp::Div => self.push(Op::Div(a, b)),
                    BinOp::Parallel => {
                        let ra = self.push(Op::Recip(a));
                        let rb = self.push(Op::Recip(b));
                        let s = self.push(Op::Add(ra, rb));
                        self.push(Op::Recip(s))
                    }
                    BinOp::Pow => {
                        let p = self.konst(b);
                        match p {
                            Some(p) if p.fract() == 0.0 && p.abs() <= 64.0 => {
                                self.push(Op::Powi(a, p as i32))
                            }
                            Some(p) if (2.0 * p).fract() == 0.0 && p.abs() <= 64.0 => {
                                let s = self.push(Op::Sqrt(a));
                                self.push(Op::Powi(s, (2.0 * p) as i32))
                            }
                            _ => self.push(Op::Powf(a, b)),
                        }
                    }
                })
            }
            ExprKind::PlusMinus { base, spread } => {
                let b = self.expr(base)?;
                let s = self.spread(spread)?;
                let d = self.site(e.span.start, -s, s);
                if eval::is_relative_literal(spread) {
                    let one = self.push(Op::Const(1.0));
                    let f = self.push(Op::Add(one, d));
                    Some(self.push(Op::Mul(b, f)))
                } else {
                    Some(self.push(Op::Add(b, d)))
                }
            }
            ExprKind::Range { lo, hi } => {
                let l = self.expr(lo)?;
                let h = self.expr(hi)?;
                let (l, h) = (self.konst(l)?, self.konst(h)?);
                let mid = self.push(Op::Const(0.5 * (l + h)));
                let d = self.site(e.span.start, -0.5 * (h - l), 0.5 * (h - l));
                Some(self.push(Op::Add(mid, d)))
            }
            ExprKind::Call { callee, args } => self.call(callee, args, e),
            ExprKind::Field { base, field } => {
                // A field of a record that does not move with the sweep and is exactly known.
                let ExprKind::Name(n) = &base.kind else {
                    return None;
                };
                let (d, de) = self.src.definition(n)?;
                if self.affected_by_name(d, de) {
                    return None;
                }
                let v = self.src.certain(&format!("{n}.{}", field.name))?;
                Some(self.push(Op::Const(v)))
            }
            ExprKind::Str(_) | ExprKind::List(_) | ExprKind::Error => None,
        }
    }

    fn call(&mut self, callee: &Expr, args: &[crate::ast::Arg], e: &Expr) -> Option<u32> {
        let path = callee.path()?;
        if args.iter().any(|a| a.name.is_some()) {
            return None;
        }
        if let Some(f) = self.src.function(&path) {
            if self.depth >= MAX_CALL_DEPTH || args.len() != f.params.len() {
                return None;
            }
            let regs = args
                .iter()
                .map(|a| self.expr(&a.value))
                .collect::<Option<Vec<_>>>()?;
            let saved = std::mem::replace(
                &mut self.locals,
                f.params.iter().cloned().zip(regs).collect(),
            );
            self.depth += 1;
            let r = self.expr(&f.body);
            self.depth -= 1;
            self.locals = saved;
            return r;
        }
        let regs = || -> Option<Vec<&Expr>> { Some(args.iter().map(|a| &a.value).collect()) };
        let a = regs()?;
        match (&*path, a.as_slice()) {
            ("sqrt", [x]) => {
                let r = self.expr(x)?;
                Some(self.push(Op::Sqrt(r)))
            }
            ("exp", [x]) => {
                let r = self.expr(x)?;
                Some(self.push(Op::Exp(r)))
            }
            ("ln", [x]) => {
                let r = self.expr(x)?;
                Some(self.push(Op::Ln(r)))
            }
            ("log10", [x]) => {
                let r = self.expr(x)?;
                Some(self.push(Op::Log10(r)))
            }
            ("abs", [x]) => {
                let r = self.expr(x)?;
                Some(self.push(Op::Abs(r)))
            }
            ("kelvin", [x]) => self.expr(x),
            ("min" | "max", [first, rest @ ..]) if !rest.is_empty() => {
                let mut acc = self.expr(first)?;
                for x in rest {
                    let r = self.expr(x)?;
                    acc = self.push(if path == "min" {
                        Op::Min(acc, r)
                    } else {
                        Op::Max(acc, r)
                    });
                }
                Some(acc)
            }
            ("tol", [x, lo, hi]) => {
                let b = self.expr(x)?;
                let l = self.spread(lo)?;
                let h = self.spread(hi)?;
                let d = self.site(e.span.start, l, h);
                if eval::is_relative_literal(lo) && eval::is_relative_literal(hi) {
                    let one = self.push(Op::Const(1.0));
                    let f = self.push(Op::Add(one, d));
                    Some(self.push(Op::Mul(b, f)))
                } else {
                    Some(self.push(Op::Add(b, d)))
                }
            }
            _ => None,
        }
    }
}

/// Per-point bounds of a tape's outputs over its tolerance inputs, with the swept inputs
/// fixed. Signs of the partial derivatives are proven over `sweep_box` (each swept input's
/// interval) and the whole tolerance box. Where an input's sign is not proven over its whole
/// range, its range is split into pieces on each of which the sign is proven (for every value
/// of the other inputs); the extremes then lie at piece ends. Each output's minimum and
/// maximum are therefore the least and greatest of a few runs at candidate points.
pub struct Bands<'t> {
    tape: &'t Tape,
    /// For each output: the candidate assignments (per tolerance input) of its min and of
    /// its max, or None when a sign could not be proven even piecewise.
    candidates: Vec<Option<Candidates>>,
}

/// Candidate tolerance assignments of an output's minimum and of its maximum.
type Candidates = (Vec<Vec<f64>>, Vec<Vec<f64>>);

/// Most candidate points per output and side.
const MAX_CANDIDATES: usize = 64;

#[derive(Clone, Copy, PartialEq, Debug)]
enum Sign {
    Zero,
    Up,
    Down,
}

fn sign_of(d: Interval) -> Option<Sign> {
    if d.lo == 0.0 && d.hi == 0.0 {
        Some(Sign::Zero)
    } else if d.lo >= 0.0 {
        Some(Sign::Up)
    } else if d.hi <= 0.0 {
        Some(Sign::Down)
    } else {
        None
    }
}

impl<'t> Bands<'t> {
    /// The derivative sign of output `o` with respect to tolerance input `k`, over the
    /// tolerance assignment `tol` (intervals; points where fixed) and the sweep box.
    fn sign(
        tape: &Tape,
        sweep_box: &[Interval],
        tol: &[Interval],
        k: usize,
        o: usize,
        regs: &mut Vec<Dual>,
    ) -> Option<Option<Sign>> {
        let mut inputs: Vec<Dual> = Vec::with_capacity(tape.inputs.len());
        for i in 0..tape.inputs.len() {
            let v = if i < tape.swept {
                *sweep_box.get(i)?
            } else {
                tol[i - tape.swept]
            };
            inputs.push(Dual::input(v, i == k));
        }
        tape.prepare(regs);
        tape.run(&inputs, regs);
        let x = regs[tape.outputs[o] as usize];
        if !x.is_finite() || !x.d.lo.is_finite() || !x.d.hi.is_finite() {
            return None;
        }
        Some(sign_of(x.d))
    }

    pub fn prove(tape: &'t Tape, sweep_box: &[Interval], regs: &mut Vec<Dual>) -> Option<Self> {
        let n = tape.inputs.len();
        let tols = &tape.inputs[tape.swept..];
        let full: Vec<Interval> = tols.iter().map(|t| Interval::new(t.lo, t.hi)).collect();
        let mut candidates = Vec::with_capacity(tape.outputs.len());
        for o in 0..tape.outputs.len() {
            // Signs over the whole box.
            let mut whole = Vec::with_capacity(tols.len());
            for k in (0..n).skip(tape.swept) {
                whole.push(Self::sign(tape, sweep_box, &full, k, o, regs)?);
            }
            let mut sides: Vec<Vec<Vec<f64>>> = Vec::with_capacity(2);
            for want_max in [false, true] {
                // Inputs of proven sign go to the end their sign asks for (a valid reduction
                // of the box); the others keep their range and are settled piecewise.
                let base: Vec<Interval> = tols
                    .iter()
                    .zip(&whole)
                    .map(|(t, s)| match (s, want_max) {
                        (Some(Sign::Up), false) | (Some(Sign::Down), true) => Interval::point(t.lo),
                        (Some(Sign::Up), true) | (Some(Sign::Down), false) => Interval::point(t.hi),
                        (Some(Sign::Zero), _) => Interval::point(t.nominal),
                        (None, _) => Interval::new(t.lo, t.hi),
                    })
                    .collect();
                let mut points: Vec<Vec<f64>> = vec![Vec::new()];
                let mut ok = true;
                for (j, t) in tols.iter().enumerate() {
                    let values: Vec<f64> = if base[j].is_point() {
                        vec![base[j].lo]
                    } else {
                        match Self::pieces(tape, sweep_box, &base, j, o, want_max, t, regs) {
                            Some(v) => v,
                            None => {
                                ok = false;
                                break;
                            }
                        }
                    };
                    points = product(&points, &values);
                    if points.len() > MAX_CANDIDATES {
                        ok = false;
                        break;
                    }
                }
                if !ok {
                    break;
                }
                sides.push(points);
            }
            candidates.push(if sides.len() == 2 {
                let maxs = sides.pop().unwrap_or_default();
                let mins = sides.pop().unwrap_or_default();
                Some((mins, maxs))
            } else {
                None
            });
        }
        Some(Bands { tape, candidates })
    }

    /// Candidate values of tolerance input `j` for the min (or max) of output `o`: its range
    /// split into pieces on each of which the derivative's sign is proven; the extreme on a
    /// piece is at the end its sign asks for. None when 16 pieces do not suffice.
    #[allow(clippy::too_many_arguments)]
    fn pieces(
        tape: &Tape,
        sweep_box: &[Interval],
        base: &[Interval],
        j: usize,
        o: usize,
        want_max: bool,
        t: &TapeInput,
        regs: &mut Vec<Dual>,
    ) -> Option<Vec<f64>> {
        'split: for p in [4usize, 16] {
            let w = (t.hi - t.lo) / p as f64;
            let mut signs: Vec<(f64, f64, Sign)> = Vec::with_capacity(p);
            let mut tol = base.to_vec();
            for piece in 0..p {
                let lo = t.lo + w * piece as f64;
                let hi = if piece + 1 == p { t.hi } else { lo + w };
                tol[j] = Interval::new(lo, hi);
                let mut sg = Self::sign(tape, sweep_box, &tol, tape.swept + j, o, regs)?;
                if sg.is_none() {
                    sg = Self::sign_across(tape, sweep_box, &tol, j, o, regs)?;
                }
                match sg {
                    Some(s) => signs.push((lo, hi, s)),
                    None => continue 'split,
                }
            }
            // Along the range, the extreme is at an end of a run of pieces of one sign: for
            // the minimum where a falling run meets a rising one (or at the ends).
            let mut values = Vec::with_capacity(2);
            let mut push = |v: f64| {
                if !values.contains(&v) {
                    values.push(v);
                }
            };
            let rising = |s: Sign| {
                if want_max {
                    s == Sign::Down
                } else {
                    s == Sign::Up
                }
            };
            for (k, &(lo, hi, s)) in signs.iter().enumerate() {
                let prev = k.checked_sub(1).map(|i| signs[i].2);
                let next = signs.get(k + 1).map(|x| x.2);
                if s == Sign::Zero {
                    push(lo);
                } else if rising(s) {
                    // The run's extreme is at its start.
                    if prev.is_none_or(|p| p != s) {
                        push(lo);
                    }
                } else if next.is_none_or(|n| n != s) {
                    push(hi);
                }
            }
            return Some(values);
        }
        None
    }

    /// The sign of output `o` in tolerance input `j` when the other inputs still over a
    /// range are split in turn into 16 pieces: proven when it is the same on every piece
    /// (the overestimate of interval arithmetic shrinks with the width of what varies).
    fn sign_across(
        tape: &Tape,
        sweep_box: &[Interval],
        tol: &[Interval],
        j: usize,
        o: usize,
        regs: &mut Vec<Dual>,
    ) -> Option<Option<Sign>> {
        const SPLIT: usize = 16;
        for (i, r) in tol.iter().enumerate() {
            if i == j || r.is_point() {
                continue;
            }
            let mut common: Option<Sign> = None;
            let mut proven = true;
            let mut sub = tol.to_vec();
            let w = r.width() / SPLIT as f64;
            for piece in 0..SPLIT {
                let lo = r.lo + w * piece as f64;
                let hi = if piece + 1 == SPLIT { r.hi } else { lo + w };
                sub[i] = Interval::new(lo, hi);
                match Self::sign(tape, sweep_box, &sub, tape.swept + j, o, regs)? {
                    Some(s) if common.is_none() || common == Some(s) || s == Sign::Zero => {
                        if s != Sign::Zero {
                            common = Some(s);
                        }
                    }
                    _ => {
                        proven = false;
                        break;
                    }
                }
            }
            if proven {
                return Some(Some(common.unwrap_or(Sign::Zero)));
            }
        }
        Some(None)
    }

    /// True when every output's extremes are proven.
    pub fn exact(&self) -> bool {
        self.candidates.iter().all(Option::is_some)
    }

    /// The minima and maxima of output `o` over a block of points (`swept`: the swept
    /// inputs' columns), into `lo` and `hi`; false where unproven.
    pub fn at_block(
        &self,
        o: usize,
        swept: &[Column<'_>],
        len: usize,
        regs: &mut [Vec<f64>],
        lo: &mut [f64],
        hi: &mut [f64],
    ) -> bool {
        let Some(Some((mins, maxs))) = self.candidates.get(o) else {
            return false;
        };
        let r = self.tape.outputs[o] as usize;
        let mut cols: Vec<Column<'_>> = Vec::with_capacity(self.tape.inputs.len());
        for (side, out, better) in [
            (mins, &mut *lo, f64::min as fn(f64, f64) -> f64),
            (maxs, &mut *hi, f64::max),
        ] {
            for (c, corner) in side.iter().enumerate() {
                cols.clear();
                cols.extend_from_slice(swept);
                cols.extend(corner.iter().map(|&v| Column::Same(v)));
                self.tape.run_block(&cols, len, regs);
                let vals = &regs[r][..len];
                if c == 0 {
                    out[..len].copy_from_slice(vals);
                } else {
                    for (d, v) in out[..len].iter_mut().zip(vals) {
                        *d = better(*d, *v);
                    }
                }
            }
        }
        // The sides may cross only by rounding; keep min ≤ max.
        for (a, b) in lo[..len].iter_mut().zip(hi[..len].iter_mut()) {
            if *a > *b {
                std::mem::swap(a, b);
            }
        }
        true
    }

    /// The (min, max) of output `o` at the swept values `at`; None where unproven.
    /// `regs` must come from `Tape::prepare`.
    pub fn at(
        &self,
        o: usize,
        at: &[f64],
        inputs: &mut Vec<f64>,
        regs: &mut [f64],
    ) -> Option<(f64, f64)> {
        let (mins, maxs) = self.candidates.get(o)?.as_ref()?;
        let r = self.tape.outputs[o] as usize;
        let mut run = |corner: &[f64]| {
            inputs.clear();
            inputs.extend_from_slice(at);
            inputs.extend_from_slice(corner);
            self.tape.run(inputs.as_slice(), regs);
            regs[r]
        };
        let lo = mins.iter().map(|c| run(c)).fold(f64::INFINITY, f64::min);
        let hi = maxs
            .iter()
            .map(|c| run(c))
            .fold(f64::NEG_INFINITY, f64::max);
        Some((lo.min(hi), hi.max(lo)))
    }
}

/// Every extension of the partial assignments in `acc` by one of `values`.
fn product(acc: &[Vec<f64>], values: &[f64]) -> Vec<Vec<f64>> {
    let mut out = Vec::with_capacity(acc.len() * values.len());
    for a in acc {
        for &v in values {
            let mut x = a.clone();
            x.push(v);
            out.push(x);
        }
    }
    out
}
