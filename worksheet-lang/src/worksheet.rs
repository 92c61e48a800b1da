//! A worksheet session: cells, their definitions, and the dependency graph between them.
//!
//! Every run of a cell rebuilds the model of the whole worksheet (all cells run so far),
//! evaluates it, and compares the results with the previous ones: that is how a changed
//! `given` reaches every dependent definition and check in every other cell. The
//! evaluation is done on a copy; only a run that completes without an error in the cell
//! itself replaces the worksheet, so an interrupted or failed run changes nothing.

use crate::analysis::{self, Passes, ScalarBounds};
use crate::ast::{CmpOp, Expr, ExprKind, Program, Span, Stmt, StmtKind};
use crate::diagnostic::{DiagKind, Diagnostic};
use crate::eval::{self, EvalError, Evaluator, Failed, Function, Mode, Names, Pass, Registry};
use crate::num::Interval;
use crate::parser;
use crate::results::{
    Bounds, CellReport, Change, CheckRow, Share, Shown, Spread, ValueRow, WarningRow, SIG,
};
use crate::units::{self, Unit};
use crate::value::{Num, Value};
use rustc_hash::FxHashMap as HashMap;
use std::borrow::Cow;
use std::ops::Range;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;

pub use crate::query::{Completion, Inspection};

/// Largest cell source a worksheet accepts (far beyond any real calculation; it keeps a
/// hostile cell from costing gigabytes).
pub const MAX_CELL_BYTES: usize = 1 << 20;

/// A flag another thread can raise to stop a long evaluation (a sweep) promptly.
#[derive(Debug, Clone, Default)]
pub struct Interrupt(Arc<AtomicBool>);

impl Interrupt {
    pub fn new() -> Self {
        Self::default()
    }
    pub fn raise(&self) {
        self.0.store(true, Ordering::SeqCst);
    }
    pub fn clear(&self) {
        self.0.store(false, Ordering::SeqCst);
    }
    pub fn is_raised(&self) -> bool {
        self.0.load(Ordering::Relaxed)
    }
}

/// The outcome of running one cell.
#[derive(Debug, Clone, PartialEq)]
pub struct Execution {
    /// The cell's report, shared with the worksheet (which keeps it for later runs).
    pub report: Arc<CellReport>,
    /// Other cells already run whose results changed because of this run.
    pub updated: Vec<CellUpdate>,
    /// True when the run was interrupted; nothing in the worksheet changed.
    pub interrupted: bool,
}

#[derive(Debug, Clone, PartialEq)]
pub struct CellUpdate {
    pub report: CellReport,
    /// The names whose change caused the update (`iload 180 mA → 250 mA`).
    pub changed_by: Vec<Change>,
}

#[derive(Debug, Clone)]
pub(crate) struct Cell {
    pub key: String,
    /// Shared: forgetting cells copies the others into a new list (kept as it was if that
    /// is interrupted), which must not copy their texts and syntax trees.
    pub source: Arc<str>,
    pub program: Arc<Program>,
    /// When it was last run (a counter), to settle a name defined in two cells.
    pub last_run: u64,
    /// What every run needs from the text alone, worked out once (shared like the tree).
    pub facts: Arc<[StmtFacts]>,
}

/// What a statement's text alone says, for building the model on every run.
#[derive(Debug)]
pub(crate) struct StmtFacts {
    /// The key its scalars are recorded under (`CELL:INDEX`; a definition's are under
    /// `d:NAME`), and a check's sides and their difference (`KEY:lhs`, …).
    pub key: String,
    pub def_key: Option<String>,
    pub side_keys: Option<[String; 3]>,
    /// The names its expressions read, before looking inside the functions it calls.
    pub reads: Vec<String>,
    /// One of its expressions did not parse (the parser has reported why).
    pub parse_failed: bool,
}

/// Per statement: the names it reads and whether it parsed.
type TextFacts = Vec<(Vec<String>, bool)>;

/// What each statement's syntax tree says on its own: the names it reads and whether it
/// parsed. Worked out with the parse (`Prepared::new`), like a compiler's table of free names.
fn text_facts(program: &Program) -> TextFacts {
    program
        .stmts
        .iter()
        .map(|st| {
            let mut reads = Vec::new();
            stmt_reads(st, &mut reads);
            let parse_failed = match &st.kind {
                StmtKind::Given(d) | StmtKind::Define(d) => eval::has_error(&d.value),
                StmtKind::Check { lhs, rhs, .. } => eval::has_error(lhs) || eval::has_error(rhs),
                StmtKind::Show { expr, .. } => eval::has_error(expr),
                _ => false,
            };
            (reads, parse_failed)
        })
        .collect()
}

impl Cell {
    #[cfg(test)]
    fn new(key: String, source: Arc<str>, program: Arc<Program>, last_run: u64) -> Cell {
        let text = text_facts(&program);
        Cell::with_facts(key, source, program, text, last_run)
    }

    /// A cell from its parsed text and `text_facts` of it.
    fn with_facts(
        key: String,
        source: Arc<str>,
        program: Arc<Program>,
        text: TextFacts,
        last_run: u64,
    ) -> Cell {
        let facts = program
            .stmts
            .iter()
            .zip(text)
            .enumerate()
            .map(|(si, (st, (reads, parse_failed)))| {
                let key = eval::join(&[&key, ":", itoa::Buffer::new().format(si)]);
                StmtFacts {
                    def_key: match &st.kind {
                        StmtKind::Given(d) | StmtKind::Define(d) => Some(def_key(&d.name.name)),
                        _ => None,
                    },
                    side_keys: matches!(st.kind, StmtKind::Check { .. })
                        .then(|| [":lhs", ":rhs", ":diff"].map(|side| eval::join(&[&key, side]))),
                    key,
                    reads,
                    parse_failed,
                }
            })
            .collect();
        Cell {
            key,
            source,
            program,
            last_run,
            facts,
        }
    }
}

/// A cell's text, its syntax tree and what the tree says on its own (`text_facts`); none
/// when the text is over the size limit, which `Worksheet::execute_prepared` then reports.
#[derive(Debug)]
pub struct Prepared<'s> {
    source: &'s str,
    program: Option<(Program, TextFacts)>,
}

impl<'s> Prepared<'s> {
    pub fn new(source: &'s str) -> Self {
        Prepared {
            source,
            program: (source.len() <= MAX_CELL_BYTES).then(|| {
                let program = parser::parse(source);
                let facts = text_facts(&program);
                (program, facts)
            }),
        }
    }
}

/// One session. No global state: two `Worksheet`s never see each other.
#[derive(Debug, Default)]
pub struct Worksheet {
    pub(crate) cells: Vec<Cell>,
    options: Options,
    reports: Vec<Arc<CellReport>>,
    overrides: Vec<Override>,
    runs: u64,
    anonymous: usize,
    /// Overrides or options changed since the last evaluation: the next one covers every
    /// cell.
    stale: bool,
}

/// How the worksheet evaluates (defaults are what users get).
#[derive(Debug, Clone)]
struct Options {
    fast_sweeps: bool,
    /// Work out how the inputs share each value's spread (`Worksheet::spread`).
    spreads: bool,
}

impl Default for Options {
    fn default() -> Self {
        Options {
            fast_sweeps: true,
            spreads: false,
        }
    }
}

#[derive(Debug, Clone)]
struct Override {
    name: String,
    text: String,
    expr: Expr,
}

/// A cell put in place for a run, and what undoes that: dropped without `keep` (the run
/// failed, was interrupted, or the evaluator panicked and the kernel carries on), it puts
/// the worksheet's cells back as they were.
struct Swap<'a> {
    cells: &'a mut Vec<Cell>,
    run: usize,
    undo: Undo,
}

enum Undo {
    /// Put back the cell that was replaced.
    Put(Cell),
    /// Remove the cell that was added (the last one).
    Pop,
    /// The run went through.
    Nothing,
}

impl Swap<'_> {
    fn keep(mut self) {
        self.undo = Undo::Nothing;
    }
}

impl Drop for Swap<'_> {
    fn drop(&mut self) {
        match std::mem::replace(&mut self.undo, Undo::Nothing) {
            Undo::Put(old) => self.cells[self.run] = old,
            Undo::Pop => {
                self.cells.pop();
            }
            Undo::Nothing => {}
        }
    }
}

impl Worksheet {
    pub fn new() -> Self {
        Self::default()
    }

    /// Runs a cell. `cell` is the front end's cell id if it sent one; otherwise the
    /// worksheet recognises the cell by the names it defines, or makes a new key.
    pub fn execute(
        &mut self,
        cell: Option<&str>,
        source: &str,
        interrupt: &Interrupt,
    ) -> Execution {
        self.execute_prepared(cell, Prepared::new(source), interrupt)
    }

    /// `execute` of a cell already parsed (`Prepared::new`): the kernel times evaluation
    /// apart from parsing.
    pub fn execute_prepared(
        &mut self,
        cell: Option<&str>,
        prepared: Prepared<'_>,
        interrupt: &Interrupt,
    ) -> Execution {
        let Prepared { source, program } = prepared;
        let Some((program, text)) = program else {
            let mut report = CellReport {
                cell: cell.unwrap_or("").to_string(),
                ..CellReport::default()
            };
            report.diagnostics.push(
                Diagnostic::error(
                    DiagKind::Limit,
                    0..0,
                    format!(
                        "this cell holds {} bytes; a cell may hold at most {} MiB",
                        source.len(),
                        MAX_CELL_BYTES >> 20
                    ),
                )
                .hint("split the worksheet into cells"),
            );
            return Execution {
                report: Arc::new(report),
                updated: Vec::new(),
                interrupted: false,
            };
        };
        let key = match cell {
            Some(k) => k.to_string(),
            None => self.key_by_names(&program),
        };
        self.runs += 1;
        let mut changed = defined_names(&program);
        let new_cell = Cell::with_facts(
            key.clone(),
            Arc::from(source),
            Arc::new(program),
            text,
            self.runs,
        );
        // The new cell takes its place among the worksheet's cells (no copy of the others);
        // `undo` puts back what was there unless the run goes through.
        let (run, undo) = match self.cells.iter().position(|c| c.key == key) {
            Some(i) => {
                changed.extend(defined_names(&self.cells[i].program));
                (
                    i,
                    Undo::Put(std::mem::replace(&mut self.cells[i], new_cell)),
                )
            }
            None => {
                self.cells.push(new_cell);
                (self.cells.len() - 1, Undo::Pop)
            }
        };
        let swap = Swap {
            cells: &mut self.cells,
            run,
            undo,
        };
        // Only the cells this run can change are evaluated, when the others' reports are
        // those of the same options (`stale`). With values set from outside, every cell is:
        // the first cell reports an override that names no given, whichever cell defines it.
        let focus = (swap.cells.len() > 1 && !self.stale && self.overrides.is_empty())
            .then_some(Focus { run, changed });
        let Some(mut reports) = evaluate(
            swap.cells,
            &self.overrides,
            &self.options,
            interrupt,
            focus.as_ref(),
        ) else {
            drop(swap);
            let mut report = self
                .reports
                .iter()
                .find(|r| r.cell == key)
                .map(|r| CellReport::clone(r))
                .unwrap_or_else(|| CellReport {
                    cell: key.clone(),
                    source: source.to_string(),
                    ..CellReport::default()
                });
            report.diagnostics.push(Diagnostic::error(
                DiagKind::Interrupted,
                0..0,
                "interrupted: the worksheet is as it was before this cell ran",
            ));
            return Execution {
                report: Arc::new(report),
                updated: Vec::new(),
                interrupted: true,
            };
        };
        if reports[run].as_ref().is_some_and(CellReport::has_errors) {
            drop(swap);
            return Execution {
                report: Arc::new(reports[run].take().unwrap_or_default()),
                updated: Vec::new(),
                interrupted: false,
            };
        }
        swap.keep();
        // A cell run for the first time has no old values to compare.
        let had_report = self.reports.iter().any(|r| r.cell == key);
        let updated = self.commit(reports, Some(&key), |before, new| {
            let old = if had_report {
                before.iter().find(|r| r.cell == key).map(|r| &**r)
            } else {
                None
            };
            match new.get(run).and_then(Option::as_ref) {
                Some(new) => changes(old, new),
                None => changes(old, &CellReport::default()),
            }
        });
        // The run cell's report, now the worksheet's, says which other cells it updated
        // (compared without that list on later runs: `CellReport::same_results`).
        let report = &mut self.reports[run];
        if !updated.is_empty() {
            Arc::make_mut(report).updated_cells =
                updated.iter().map(|u| u.report.summary()).collect();
        }
        Execution {
            report: report.clone(),
            updated,
            interrupted: false,
        }
    }

    /// Takes a new evaluation of the worksheet's cells as its reports and returns the other
    /// cells whose results changed, each marked with what `changes` makes of the reports as
    /// they were and the new ones (called only when some other cell changed).
    /// A report of None is a cell that was not evaluated: its report stands.
    fn commit(
        &mut self,
        reports: Vec<Option<CellReport>>,
        run: Option<&str>,
        changes: impl FnOnce(&[Arc<CellReport>], &[Option<CellReport>]) -> Vec<Change>,
    ) -> Vec<CellUpdate> {
        // The reports stay in the order of their cells; only when a cell came or went
        // are they put in that order again.
        let aligned = self.reports.len() == self.cells.len()
            && self
                .reports
                .iter()
                .zip(&self.cells)
                .all(|(r, c)| r.cell == c.key);
        if !aligned {
            let mut before = std::mem::take(&mut self.reports);
            let mut ordered = Vec::with_capacity(self.cells.len());
            for (i, c) in self.cells.iter().enumerate() {
                // Most stay where they were (a new cell comes last).
                let at = match before.get(i) {
                    Some(o) if o.cell == c.key => Some(i),
                    _ => before.iter().position(|o| o.cell == c.key),
                };
                ordered.push(match at {
                    Some(i) => std::mem::take(&mut before[i]),
                    // Not reported yet: only the cell being run, whose report follows.
                    None => Arc::new(CellReport {
                        cell: c.key.clone(),
                        ..CellReport::default()
                    }),
                });
            }
            self.reports = ordered;
        }
        // The other cells whose results changed.
        let changed: Vec<bool> = self
            .reports
            .iter()
            .zip(&reports)
            .map(|(old, r)| {
                r.as_ref()
                    .is_some_and(|r| Some(r.cell.as_str()) != run && !old.same_results(r))
            })
            .collect();
        let changes = if changed.contains(&true) {
            changes(&self.reports, &reports)
        } else {
            Vec::new()
        };
        let mut updated = Vec::new();
        // A report of None: not evaluated, the old one stands.
        for ((old, r), changed) in self.reports.iter_mut().zip(reports).zip(changed) {
            let Some(r) = r else {
                continue;
            };
            if changed {
                let mut report = r.clone();
                report.updated_by = changes.clone();
                updated.push(CellUpdate {
                    report,
                    changed_by: changes.clone(),
                });
            }
            *old = Arc::new(r);
        }
        self.stale = false;
        updated
    }

    /// Forgets cells that no longer exist in the notebook (a front end's deleted cells):
    /// their definitions are gone, and the cells that used them are returned updated.
    /// Unknown keys are ignored. Interrupted: nothing changes and None is returned.
    pub fn forget(&mut self, keys: &[&str], interrupt: &Interrupt) -> Option<Vec<CellUpdate>> {
        if !self.cells.iter().any(|c| keys.contains(&c.key.as_str())) {
            return Some(Vec::new());
        }
        let cells: Vec<Cell> = self
            .cells
            .iter()
            .filter(|c| !keys.contains(&c.key.as_str()))
            .cloned()
            .collect();
        let reports = evaluate(&cells, &self.overrides, &self.options, interrupt, None)?;
        self.cells = cells;
        let mut changes = Vec::new();
        for r in self
            .reports
            .iter()
            .filter(|r| keys.contains(&r.cell.as_str()))
        {
            changes.extend(crate::worksheet::changes(Some(r), &CellReport::default()));
        }
        Some(self.commit(reports, None, |_, _| changes))
    }

    /// A cell without an id is the earlier cell that defined the same names, if any.
    fn key_by_names(&mut self, program: &Program) -> String {
        let names = defined_names(program);
        if !names.is_empty() {
            if let Some(c) = self
                .cells
                .iter()
                .find(|c| defines(&c.program).any(|n| names.iter().any(|m| m == n)))
            {
                return c.key.clone();
            }
        }
        self.anonymous += 1;
        format!("cell-{}", self.anonymous)
    }

    /// Overrides a `given` from outside (`--set NAME=VALUE`); `value` uses the language's
    /// literal syntax. The whole value is replaced, tolerance included. Takes effect on
    /// the next run; a name that is no given of the worksheet is reported then.
    pub fn set_override(&mut self, name: &str, value: &str) -> Result<(), Diagnostic> {
        let program = parser::parse(value);
        if let Some(d) = program.diagnostics.into_iter().find(|d| d.is_error()) {
            return Err(d);
        }
        let expr = match program.stmts.as_slice() {
            [s] => match &s.kind {
                StmtKind::Show {
                    expr,
                    as_unit: None,
                } => expr.clone(),
                _ => {
                    return Err(Diagnostic::error(
                        DiagKind::UnexpectedToken,
                        s.span.clone(),
                        "an override is a value such as `250 mA` or `250 mA ± 20 %`",
                    ))
                }
            },
            _ => {
                return Err(Diagnostic::error(
                    DiagKind::UnexpectedToken,
                    0..value.len(),
                    "an override is one value such as `250 mA`",
                ))
            }
        };
        let mut free = Vec::new();
        eval::free_names(&expr, &[], &mut free);
        if let Some(n) = free.first() {
            return Err(Diagnostic::error(
                DiagKind::UnknownName,
                0..value.len(),
                format!("an override is a literal value; it cannot use the name `{n}`"),
            ));
        }
        self.stale = true;
        self.overrides.retain(|o| o.name != name);
        self.overrides.push(Override {
            name: name.to_string(),
            text: value.to_string(),
            expr,
        });
        Ok(())
    }

    /// Whether sweeps may run compiled (the default). Off, every point takes the general
    /// path; tests use this to check one against the other.
    pub fn set_fast_sweeps(&mut self, on: bool) {
        self.stale = true;
        self.options.fast_sweeps = on;
    }

    /// The reports of every cell as last run, in the order the cells were first run.
    pub fn reports(&self) -> &[Arc<CellReport>] {
        &self.reports
    }

    pub fn complete(&self, source: &str, cursor: usize) -> Completion {
        crate::query::complete(self, source, cursor)
    }

    /// What the name at `cursor` is: a built-in's documentation, or a definition with its
    /// value, worst case and the shares of its spread. Working out the spread evaluates the
    /// defining cell once more; `interrupt` stops that (the text then says so).
    pub fn inspect(
        &self,
        source: &str,
        cursor: usize,
        interrupt: &Interrupt,
    ) -> Option<Inspection> {
        crate::query::inspect(self, source, cursor, interrupt)
    }

    /// How the uncertain inputs share the spread of the value row `name` (`vin`,
    /// `u1.loss`): each input's one-at-a-time swing and the root-sum-square spread. A run
    /// leaves this out, as it takes evaluations of its own; this evaluates the worksheet as
    /// it stands once more, with them. None when the name has no uncertain value (or the
    /// worksheet no longer evaluates), or when `interrupt` stopped the evaluation.
    pub fn spread(&self, name: &str, interrupt: &Interrupt) -> Option<Spread> {
        // The cell that owns the name (the last that defines it) and what it reads are
        // evaluated, without sweeps.
        let defined = name.split('.').next().unwrap_or(name);
        let run = self
            .cells
            .iter()
            .rposition(|c| defines(&c.program).any(|n| n == defined))?;
        let options = Options {
            spreads: true,
            ..self.options.clone()
        };
        let focus = Focus {
            run,
            changed: Vec::new(),
        };
        let reports = evaluate(
            &self.cells,
            &self.overrides,
            &options,
            interrupt,
            Some(&focus),
        )?;
        let row = reports
            .get(run)?
            .as_ref()?
            .values
            .iter()
            .find(|v| v.name == name)?;
        match &row.shown {
            Shown::Number {
                bounds: Some(b), ..
            } => b.spread.clone(),
            _ => None,
        }
    }

    /// The definition of `name` as written, its cell, and its value row, if it is defined.
    pub(crate) fn definition_of(&self, name: &str) -> Option<(String, Option<&ValueRow>)> {
        for c in self.cells.iter().rev() {
            for s in &c.program.stmts {
                let def = match &s.kind {
                    StmtKind::Given(d) | StmtKind::Define(d) => Some(&d.name),
                    StmtKind::Function { name, .. } => Some(name),
                    _ => None,
                };
                if def.is_some_and(|d| d.name == name) {
                    let text = c.source.get(s.span.clone()).unwrap_or("").to_string();
                    let row = self
                        .reports
                        .iter()
                        .find(|r| r.cell == c.key)
                        .and_then(|r| r.values.iter().find(|v| v.name == name));
                    return Some((text, row));
                }
            }
        }
        None
    }

    /// Names defined anywhere in the worksheet.
    pub(crate) fn names(&self) -> Vec<String> {
        let mut out = Vec::new();
        for c in &self.cells {
            for n in defined_names(&c.program) {
                if !out.contains(&n) {
                    out.push(n);
                }
            }
            for s in &c.program.stmts {
                if let StmtKind::Function { name, .. } = &s.kind {
                    if !out.contains(&name.name) {
                        out.push(name.name.clone());
                    }
                }
            }
        }
        out
    }

    /// The names whose definitions use `name` directly.
    pub(crate) fn dependents_of(&self, name: &str) -> Vec<String> {
        let mut out = Vec::new();
        for c in &self.cells {
            for s in &c.program.stmts {
                if let StmtKind::Given(d) | StmtKind::Define(d) = &s.kind {
                    let mut free = Vec::new();
                    eval::free_names(&d.value, &[], &mut free);
                    if free.iter().any(|f| f == name) && !out.contains(&d.name.name) {
                        out.push(d.name.name.clone());
                    }
                }
            }
        }
        out
    }

    /// The record value of a definition in the last run (for completing its fields).
    pub(crate) fn record_fields(&self, name: &str) -> Vec<String> {
        let prefix = format!("{name}.");
        self.reports
            .iter()
            .flat_map(|r| r.values.iter())
            .filter_map(|v| v.name.strip_prefix(&prefix).map(str::to_string))
            .collect()
    }
}

fn defined_names(p: &Program) -> Vec<String> {
    defines(p).map(str::to_string).collect()
}

/// The names a program's statements define (values and functions), in order.
fn defines(p: &Program) -> impl Iterator<Item = &str> {
    p.stmts.iter().filter_map(|s| match &s.kind {
        StmtKind::Given(d) | StmtKind::Define(d) => Some(d.name.name.as_str()),
        StmtKind::Function { name, .. } => Some(name.name.as_str()),
        _ => None,
    })
}

fn changes(old: Option<&CellReport>, new: &CellReport) -> Vec<Change> {
    let mut out = Vec::new();
    let text = |v: &ValueRow| match v.range_text() {
        Some(r) => format!("{} ({r})", v.text()),
        None => v.text(),
    };
    // Same shown value: the same text and range.
    let same =
        |a: &ValueRow, b: &ValueRow| a.text() == b.text() && a.range_text() == b.range_text();
    for v in &new.values {
        let before = old.and_then(|o| o.values.iter().find(|x| x.name == v.name));
        match before {
            Some(b) if same(b, v) => {}
            Some(b) => out.push(Change {
                name: v.name.clone(),
                old: text(b),
                new: text(v),
            }),
            None if old.is_some() => out.push(Change {
                name: v.name.clone(),
                old: "(new)".into(),
                new: text(v),
            }),
            None => {}
        }
    }
    if let Some(o) = old {
        for v in &o.values {
            if !new.values.iter().any(|x| x.name == v.name) {
                out.push(Change {
                    name: v.name.clone(),
                    old: text(v),
                    new: "(removed)".into(),
                });
            }
        }
    }
    out
}

// ---------------------------------------------------------------------------------------
// The model: every statement of every cell, resolved into definitions and an order.

struct DefEntry<'c> {
    name: &'c str,
    /// The statement key ("d:NAME") its scalars and sites are recorded under.
    key: &'c str,
    cell: usize,
    expr: &'c Expr,
    /// The names its text reads (`StmtFacts::reads`; none for a value set from outside).
    reads: &'c [String],
    /// Where the value stands in the cell (errors in an override point here).
    value_span: Span,
    name_span: Span,
    unit: Option<Unit>,
    note: &'c str,
    given: bool,
    /// The expression as written in the cell, when an override replaced it.
    original: Option<&'c Expr>,
    overridden: bool,
    static_error: Option<EvalError>,
    /// The value did not parse (already reported by the parser).
    parse_failed: bool,
    /// A sizing result (`heat.sink_for` …) whose display leads with its worst-case minimum.
    leads_with_minimum: bool,
    /// Its value is exact in every pass: no tolerance, range or part reaches it
    /// (`eval::is_certain`). Set once the definitions are ordered.
    certain: bool,
}

struct CheckEntry<'c> {
    cell: usize,
    /// The names its two sides read (`StmtFacts::reads`).
    reads: &'c [String],
    key: &'c str,
    /// The keys its two sides and their difference are recorded under (`KEY:lhs`, …).
    side_keys: &'c [String; 3],
    lhs: &'c Expr,
    op: CmpOp,
    rhs: &'c Expr,
    note: String,
    text: String,
    span: Span,
}

struct ShowEntry<'c> {
    cell: usize,
    /// The names it reads (`StmtFacts::reads`).
    reads: &'c [String],
    key: &'c str,
    expr: &'c Expr,
    unit: Option<Unit>,
    unit_error: Option<EvalError>,
    text: String,
}

/// What each cell contains, in statement order, for the report.
enum Item {
    Def(usize),
    Check(usize),
    Show(usize),
    Sweep(usize),
}

struct SweepEntry<'c> {
    cell: usize,
    stmt: &'c Stmt,
}

/// Borrows the cells' syntax trees (and the overrides' values) it was built from.
struct Model<'c> {
    defs: Vec<DefEntry<'c>>,
    index: HashMap<&'c str, usize>,
    funcs: HashMap<String, Function>,
    order: Vec<usize>,
    /// The definitions each definition reads by name (also inside the functions it calls).
    deps: Vec<Vec<usize>>,
    /// The names behind `deps`, defined or not.
    reads: Vec<Cow<'c, [String]>>,
    /// The cells evaluated (None: all); `order` then holds only what they need.
    live: Option<Vec<bool>>,
    checks: Vec<CheckEntry<'c>>,
    shows: Vec<ShowEntry<'c>>,
    sweeps: Vec<SweepEntry<'c>>,
    items: Vec<Vec<Item>>,
    diags: Vec<Vec<Diagnostic>>,
}

fn resolve_unit(u: &crate::ast::UnitExpr) -> Result<Unit, EvalError> {
    if let Some(p) = &u.parsed {
        return Ok((**p).clone());
    }
    units::parse_unit(&u.text).map_err(|e| {
        let mut err = EvalError::new(DiagKind::UnknownUnit, &u.span, e.message);
        err.hint = e.hint;
        err
    })
}

/// The model of the worksheet's cells. With a focus, only the cells the run can change
/// (`cells_to_evaluate`) get their statements and diagnostics listed; every cell's
/// definitions are listed either way, since any of them may be read.
fn build_model<'c>(
    cells: &'c [Cell],
    overrides: &'c [Override],
    focus: Option<&Focus>,
) -> Model<'c> {
    let statements: usize = cells.iter().map(|c| c.program.stmts.len()).sum();
    let mut m = Model {
        defs: Vec::with_capacity(statements),
        index: HashMap::with_capacity_and_hasher(statements, Default::default()),
        funcs: HashMap::default(),
        order: Vec::new(),
        deps: Vec::new(),
        reads: Vec::new(),
        live: None,
        checks: Vec::new(),
        shows: Vec::new(),
        sweeps: Vec::new(),
        items: (0..cells.len()).map(|_| Vec::new()).collect(),
        // The parser's diagnostics go first, for the cells evaluated (below).
        diags: (0..cells.len()).map(|_| Vec::new()).collect(),
    };
    // Who owns each name: within a cell the first definition (a second is an error);
    // across cells the one run last.
    let mut owner: HashMap<&str, (usize, u64)> =
        HashMap::with_capacity_and_hasher(statements, Default::default());
    for (ci, c) in cells.iter().enumerate() {
        let mut seen: Vec<&str> = Vec::with_capacity(c.program.stmts.len());
        for s in &c.program.stmts {
            let name = match &s.kind {
                StmtKind::Given(d) | StmtKind::Define(d) => &d.name,
                StmtKind::Function { name, .. } => name,
                _ => continue,
            };
            if seen.contains(&name.name.as_str()) {
                m.diags[ci].push(
                    Diagnostic::error(
                        DiagKind::Redefinition,
                        name.span.clone(),
                        format!("`{}` is defined twice in this cell", name.name),
                    )
                    .hint("a name has one definition; give the second one another name"),
                );
                continue;
            }
            seen.push(&name.name);
            match owner.get(name.name.as_str()) {
                Some(&(_, run)) if run > c.last_run => {}
                _ => {
                    owner.insert(&name.name, (ci, c.last_run));
                }
            }
        }
    }
    for (ci, c) in cells.iter().enumerate() {
        let mut seen: Vec<&str> = Vec::with_capacity(c.program.stmts.len());
        for (si, s) in c.program.stmts.iter().enumerate() {
            let facts = &c.facts[si];
            match &s.kind {
                StmtKind::Given(d) | StmtKind::Define(d) => {
                    let given = matches!(s.kind, StmtKind::Given(_));
                    if seen.contains(&d.name.name.as_str()) {
                        continue;
                    }
                    seen.push(&d.name.name);
                    if owner.get(d.name.name.as_str()).map(|o| o.0) != Some(ci) {
                        m.diags[ci].push(Diagnostic::warning(
                            DiagKind::Redefinition,
                            d.name.span.clone(),
                            format!("`{}` is now defined by a cell run later; this definition is not used", d.name.name),
                        ));
                        continue;
                    }
                    let parse_failed = c.facts[si].parse_failed;
                    let (unit, mut static_error) = match d.unit.as_ref().map(resolve_unit) {
                        Some(Ok(u)) => (Some(u), None),
                        Some(Err(e)) => (None, Some(e)),
                        None => (None, None),
                    };
                    if parse_failed {
                        // The parser has reported why; dependents say that this failed.
                        static_error = Some(EvalError::new(
                            DiagKind::UnexpectedToken,
                            &d.value.span,
                            "its definition did not parse",
                        ));
                    }
                    let ov = if given {
                        overrides.iter().find(|o| o.name == d.name.name)
                    } else {
                        None
                    };
                    let idx = m.defs.len();
                    m.defs.push(DefEntry {
                        key: facts.def_key.as_deref().unwrap_or_default(),
                        name: &d.name.name,
                        cell: ci,
                        expr: ov.map_or(&d.value, |o| &o.expr),
                        // An override is a literal (`set_override` refuses names).
                        reads: if ov.is_some() {
                            &[]
                        } else {
                            &c.facts[si].reads
                        },
                        value_span: d.value.span.clone(),
                        name_span: d.name.span.clone(),
                        unit,
                        note: d.note.as_ref().map_or("", |n| n.text.as_str()),
                        given,
                        original: ov.map(|_| &d.value),
                        overridden: ov.is_some(),
                        static_error,
                        parse_failed,
                        leads_with_minimum: match &d.value.kind {
                            ExprKind::Call { callee, .. } => crate::builtins::lookup_expr(callee)
                                .is_some_and(|b| b.leads_with_minimum()),
                            _ => false,
                        },
                        certain: false,
                    });
                    m.index.insert(&d.name.name, idx);
                }
                StmtKind::Function {
                    name,
                    params,
                    unit,
                    body,
                } => {
                    if owner.get(name.name.as_str()).map(|o| o.0) != Some(ci)
                        || m.funcs.contains_key(&name.name)
                    {
                        continue;
                    }
                    let unit = match unit.as_ref().map(resolve_unit) {
                        Some(Ok(u)) => Some(u),
                        Some(Err(e)) => {
                            m.diags[ci].push(e.into_diagnostic());
                            None
                        }
                        None => None,
                    };
                    m.funcs.insert(
                        name.name.clone(),
                        Function {
                            params: params.iter().map(|p| p.name.clone()).collect(),
                            body: body.clone(),
                            unit,
                        },
                    );
                }
                _ => {}
            }
        }
    }
    for o in overrides {
        match m.index.get(o.name.as_str()) {
            Some(&i) if m.defs[i].given => {}
            Some(&i) => {
                let ci = m.defs[i].cell;
                m.diags[ci].push(
                    Diagnostic::error(
                        DiagKind::Argument,
                        m.defs[i].name_span.clone(),
                        format!(
                            "`--set {}={}`: `{}` is a derived value, not a given",
                            o.name, o.text, o.name
                        ),
                    )
                    .hint("only inputs declared with `given` can be set from outside"),
                );
            }
            None => {
                if let Some(ci) = (!cells.is_empty()).then_some(0) {
                    let mut names: Vec<String> = m
                        .defs
                        .iter()
                        .filter(|d| d.given)
                        .map(|d| d.name.to_string())
                        .collect();
                    names.sort();
                    let mut d = Diagnostic::error(
                        DiagKind::UnknownName,
                        0..0,
                        format!(
                            "`--set {}={}`: this worksheet has no given named `{}`",
                            o.name, o.text, o.name
                        ),
                    );
                    d.hint = Some(match eval::nearest(&o.name, &names) {
                        Some(b) => format!("did you mean `{b}`?"),
                        None => format!("its givens are: {}", names.join(", ")),
                    });
                    m.diags[ci].push(d);
                }
            }
        }
    }
    order_definitions(&mut m);
    let live = focus.and_then(|f| cells_to_evaluate(&m, cells, f.run, f.changed.as_slice()));
    for (ci, c) in cells.iter().enumerate() {
        if live.as_ref().is_some_and(|l| !l[ci]) {
            continue;
        }
        let mut diags = c.program.diagnostics.clone();
        diags.append(&mut m.diags[ci]);
        m.diags[ci] = diags;
        let mut seen: Vec<&str> = Vec::with_capacity(c.program.stmts.len());
        for (si, s) in c.program.stmts.iter().enumerate() {
            let facts = &c.facts[si];
            let key = facts.key.as_str();
            match &s.kind {
                StmtKind::Given(d) | StmtKind::Define(d) => {
                    // The cell's first definition of a name, if the cell owns that name.
                    let name = d.name.name.as_str();
                    if seen.contains(&name) {
                        continue;
                    }
                    seen.push(name);
                    if let Some(&idx) = m.index.get(name).filter(|&&i| m.defs[i].cell == ci) {
                        m.items[ci].push(Item::Def(idx));
                    }
                }
                StmtKind::Check { lhs, op, rhs, note } => {
                    if facts.parse_failed {
                        continue;
                    }
                    m.items[ci].push(Item::Check(m.checks.len()));
                    m.checks.push(CheckEntry {
                        cell: ci,
                        reads: &facts.reads,
                        side_keys: facts.side_keys.as_ref().unwrap_or(&NO_SIDES),
                        key,
                        lhs,
                        op: *op,
                        rhs,
                        note: note.as_ref().map(|n| n.text.clone()).unwrap_or_default(),
                        text: source_text(&c.source, lhs.span.start..rhs.span.end),
                        span: s.span.clone(),
                    });
                }
                StmtKind::Show { expr, as_unit } => {
                    if facts.parse_failed {
                        continue;
                    }
                    let (unit, unit_error) = match as_unit.as_ref().map(resolve_unit) {
                        Some(Ok(u)) => (Some(u), None),
                        Some(Err(e)) => (None, Some(e)),
                        None => (None, None),
                    };
                    m.items[ci].push(Item::Show(m.shows.len()));
                    m.shows.push(ShowEntry {
                        cell: ci,
                        reads: &facts.reads,
                        key,
                        expr,
                        unit,
                        unit_error,
                        text: source_text(&c.source, s.span.clone()),
                    });
                }
                StmtKind::Sweep { .. } => {
                    m.items[ci].push(Item::Sweep(m.sweeps.len()));
                    m.sweeps.push(SweepEntry { cell: ci, stmt: s });
                }
                StmtKind::Function { .. } | StmtKind::Error => {}
            }
        }
    }
    if let Some(live) = live {
        restrict(&mut m, live);
    }
    m
}

fn source_text(src: &str, span: Span) -> String {
    src.get(span).unwrap_or("").trim().to_string()
}

/// Topological order of the definitions; definitions on a cycle get an error naming it.
fn order_definitions<'c>(m: &mut Model<'c>) {
    let n = m.defs.len();
    let reads: Vec<Cow<'c, [String]>> =
        m.defs.iter().map(|d| expanded(&m.funcs, d.reads)).collect();
    let deps: Vec<Vec<usize>> = reads
        .iter()
        .map(|names| {
            names
                .iter()
                .filter_map(|x| m.index.get(x.as_str()).copied())
                .collect()
        })
        .collect();
    // Iterative depth-first search (colours: 0 new, 1 on the stack, 2 done).
    let mut colour = vec![0u8; n];
    let mut order = Vec::with_capacity(n);
    let mut on_cycle: Vec<(usize, String)> = Vec::new();
    for start in 0..n {
        if colour[start] != 0 {
            continue;
        }
        let mut stack: Vec<(usize, usize)> = vec![(start, 0)];
        colour[start] = 1;
        while let Some(&mut (v, ref mut next)) = stack.last_mut() {
            if *next < deps[v].len() {
                let w = deps[v][*next];
                *next += 1;
                if colour[w] == 0 {
                    colour[w] = 1;
                    stack.push((w, 0));
                } else if colour[w] == 1 {
                    // A cycle: w … v → w.
                    let pos = stack.iter().position(|(x, _)| *x == w).unwrap_or(0);
                    let mut path: Vec<&str> =
                        stack[pos..].iter().map(|(x, _)| m.defs[*x].name).collect();
                    path.push(m.defs[w].name);
                    let text = path.join(" → ");
                    for (x, _) in &stack[pos..] {
                        if !on_cycle.iter().any(|(y, _)| y == x) {
                            on_cycle.push((*x, text.clone()));
                        }
                    }
                }
            } else {
                colour[v] = 2;
                order.push(v);
                stack.pop();
            }
        }
    }
    for (i, path) in on_cycle {
        let d = &mut m.defs[i];
        d.static_error = Some(
            EvalError::new(
                DiagKind::Cycle,
                &d.name_span,
                format!("`{}` depends on itself: {path}", d.name),
            )
            .hint("break the loop: one of these must be a given or a fixed value"),
        );
    }
    // In dependency order, so a definition's names are settled before it.
    for &d in &order {
        let def = &m.defs[d];
        let certain = def.static_error.is_none()
            && eval::is_certain(def.expr, &|name| match m.index.get(name) {
                Some(&i) => m.defs[i].certain,
                None => crate::builtins::constant(name).is_some(),
            });
        m.defs[d].certain = certain;
    }
    m.order = order;
    m.deps = deps;
    m.reads = reads;
}

/// `names` with the names read inside the user functions among them (`through_functions`),
/// borrowed when there is no call to a user function.
fn expanded<'a>(funcs: &HashMap<String, Function>, names: &'a [String]) -> Cow<'a, [String]> {
    if names.iter().any(|n| funcs.contains_key(n)) {
        let mut all = names.to_vec();
        through_functions(funcs, &mut all);
        Cow::Owned(all)
    } else {
        Cow::Borrowed(names)
    }
}

/// Adds to `names` the names read inside the user functions among them, transitively: a
/// call reads what its function's body reads.
fn through_functions(funcs: &HashMap<String, Function>, names: &mut Vec<String>) {
    let mut k = 0;
    let mut visited: Vec<String> = Vec::new();
    while k < names.len() {
        let name = names[k].clone();
        k += 1;
        if let Some(f) = funcs.get(&name) {
            if visited.contains(&name) {
                continue;
            }
            visited.push(name);
            eval::free_names(&f.body, &f.params, names);
        }
    }
}

/// The names a statement reads, before looking inside the functions it calls.
fn stmt_reads(s: &Stmt, out: &mut Vec<String>) {
    match &s.kind {
        StmtKind::Given(d) | StmtKind::Define(d) => eval::free_names(&d.value, &[], out),
        StmtKind::Function { params, body, .. } => {
            let params: Vec<String> = params.iter().map(|p| p.name.clone()).collect();
            eval::free_names(body, &params, out);
        }
        StmtKind::Check { lhs, rhs, .. } => {
            eval::free_names(lhs, &[], out);
            eval::free_names(rhs, &[], out);
        }
        StmtKind::Show { expr, .. } => eval::free_names(expr, &[], out),
        StmtKind::Sweep { vars, exprs } => {
            for v in vars {
                if !out.contains(&v.name.name) {
                    out.push(v.name.name.clone());
                }
                eval::free_names(&v.from, &[], out);
                eval::free_names(&v.to, &[], out);
                match &v.step {
                    Some(crate::ast::SweepStep::Steps(e) | crate::ast::SweepStep::By(e)) => {
                        eval::free_names(e, &[], out)
                    }
                    None => {}
                }
            }
            for e in exprs {
                eval::free_names(e, &[], out);
            }
        }
        StmtKind::Error => {}
    }
}

/// The cells a run of cell `run` can change, given the names its old and new text define
/// (`changed`): the cell itself, every cell that defines one of those names (which cell owns
/// a name may have moved), and every cell whose statements read one of them, directly or
/// through the definitions and functions they use. Every other cell reads only what is
/// exactly as it was, so its report stands. None when every cell must be evaluated (a
/// sweep in a changed cell evaluates the worksheet its own way).
fn cells_to_evaluate(
    model: &Model,
    cells: &[Cell],
    run: usize,
    changed: &[String],
) -> Option<Vec<bool>> {
    let hit = |names: &[String]| names.iter().any(|n| changed.contains(n));
    // Definitions whose value may differ, settled along the dependencies (repeated until
    // nothing moves, so a cycle cannot hide one).
    let mut affected: Vec<bool> = model
        .defs
        .iter()
        .enumerate()
        .map(|(d, def)| {
            def.cell == run || changed.iter().any(|c| c == def.name) || hit(&model.reads[d])
        })
        .collect();
    loop {
        let mut moved = false;
        for &d in &model.order {
            if !affected[d] && model.deps[d].iter().any(|&x| affected[x]) {
                affected[d] = true;
                moved = true;
            }
        }
        if !moved {
            break;
        }
    }
    let mut live = vec![false; cells.len()];
    for (ci, c) in cells.iter().enumerate() {
        let mut dirty = ci == run;
        for (s, facts) in c.program.stmts.iter().zip(c.facts.iter()) {
            if dirty {
                break;
            }
            let defines = match &s.kind {
                StmtKind::Given(d) | StmtKind::Define(d) => Some(&d.name.name),
                StmtKind::Function { name, .. } => Some(&name.name),
                _ => None,
            };
            let names = expanded(&model.funcs, &facts.reads);
            dirty = defines.is_some_and(|n| changed.contains(n))
                || hit(&names)
                || names
                    .iter()
                    .any(|n| model.index.get(n.as_str()).is_some_and(|&d| affected[d]));
        }
        live[ci] = dirty;
    }
    let sweeps = |c: &Cell| {
        c.program
            .stmts
            .iter()
            .any(|s| matches!(s.kind, StmtKind::Sweep { .. }))
    };
    if cells.iter().zip(&live).any(|(c, &l)| l && sweeps(c)) {
        return None;
    }
    Some(live)
}

/// Calls `each` with every definition the model's checks and shown values read by name
/// (also inside the functions they call).
fn read_by_checks_and_shows(model: &Model<'_>, mut each: impl FnMut(usize)) {
    let reads = model
        .checks
        .iter()
        .map(|c| c.reads)
        .chain(model.shows.iter().map(|s| s.reads));
    for names in reads {
        definitions_named(model, names, &mut each);
    }
}

/// Calls `each` with the definition of every name in `names` (also of the names read inside
/// the functions they call).
fn definitions_named(model: &Model<'_>, names: &[String], mut each: impl FnMut(usize)) {
    for n in expanded(&model.funcs, names).iter() {
        if let Some(&d) = model.index.get(n.as_str()) {
            each(d);
        }
    }
}

/// Marks, besides the definitions marked in `need`, every definition they read.
fn with_what_they_read(model: &Model<'_>, need: &mut [bool]) {
    // Dependents come after what they read in `order`.
    for &d in model.order.iter().rev() {
        if need[d] {
            for &e in &model.deps[d] {
                need[e] = true;
            }
        }
    }
}

/// Narrows the model to the cells in `live`: their statements and the definitions those
/// read, in the same order.
fn restrict(model: &mut Model<'_>, live: Vec<bool>) {
    let mut needed = vec![false; model.defs.len()];
    let mut stack: Vec<usize> = Vec::new();
    for (d, def) in model.defs.iter().enumerate() {
        if live[def.cell] {
            stack.push(d);
        }
    }
    // The model lists the checks and shows of the cells in `live` only.
    read_by_checks_and_shows(model, |d| stack.push(d));
    while let Some(d) = stack.pop() {
        if !needed[d] {
            needed[d] = true;
            stack.extend(model.deps[d].iter().copied());
        }
    }
    model.order.retain(|&d| needed[d]);
    model.live = Some(live);
}

// ---------------------------------------------------------------------------------------
// Passes over the model.

struct Scope<'m> {
    model: &'m Model<'m>,
    values: &'m [Option<Result<Value, Failed>>],
}

impl Names for Scope<'_> {
    fn lookup(&self, name: &str) -> Option<Result<Value, Failed>> {
        let &i = self.model.index.get(name)?;
        Some(match &self.values[i] {
            Some(v) => v.clone(),
            None => Err(Failed {
                root: name.to_string(),
                message: "it is not computed yet".into(),
            }),
        })
    }
    fn function(&self, name: &str) -> Option<&Function> {
        self.model.funcs.get(name)
    }
    fn certain(&self, name: &str) -> bool {
        match self.model.index.get(name) {
            Some(&i) => self.model.defs[i].certain,
            None => crate::builtins::constant(name).is_some(),
        }
    }
    fn all_names(&self) -> Vec<String> {
        self.model
            .index
            .keys()
            .map(|k| k.to_string())
            .chain(self.model.funcs.keys().cloned())
            .collect()
    }
}

/// Which statement an error belongs to.
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
enum StmtId {
    Def(usize),
    Check(usize),
    Show(usize),
}

struct Runner<'m> {
    model: &'m Model<'m>,
    reg: Registry,
    interrupt: &'m Interrupt,
    errors: HashMap<StmtId, EvalError>,
    notes: Vec<(usize, Diagnostic)>,
    /// Pinned values of definitions (sweeps): (definition index, value).
    pins: Vec<(usize, Num)>,
    /// Extra expressions evaluated after the statements (a sweep's series): (key, expr).
    extra: Vec<(String, Expr)>,
    /// Values of the nominal pass: definitions, and shown expressions by index.
    nominal_values: Vec<Option<Result<Value, Failed>>>,
    shown: HashMap<usize, Value>,
    /// For each definition, the inputs its recorded scalars depend on (from box passes),
    /// and how many box passes it has completed.
    depends: Vec<Vec<usize>>,
    boxed: Vec<usize>,
    /// Definitions evaluated at points: (definition, its inputs' values) → value and scalars.
    /// Per definition, a short list searched in order (a definition is seen at a few
    /// points only, so this beats hashing a key built for every lookup).
    /// The key is a range of `cache_keys` (the bits of each input value, in the order of
    /// `depends`).
    cache: Vec<Vec<(Range<usize>, CachedDef)>>,
    cache_keys: Vec<u64>,
    /// The scalars each cached, boxed or nominal definition recorded (`CachedDef` holds a
    /// range of it): one list for the whole run instead of one allocation per definition
    /// and pass.
    recorded: Vec<(usize, Num)>,
    /// The scalar ids of each definition's numeric leaves, from the nominal pass.
    leaves: Vec<Option<Vec<usize>>>,
    /// The inputs each definition registered itself in the nominal pass (its tolerance
    /// sites and parts), and, once the box passes start, every input it can reach: its own
    /// and those of the definitions it reads (`reach`).
    own_inputs: Vec<std::ops::Range<usize>>,
    reach: Option<Vec<Vec<usize>>>,
    /// The definitions whose nominal evaluation succeeded.
    nominal_ok: Vec<bool>,
    /// Each definition's value and recorded scalars in the latest box pass.
    boxed_value: Vec<Option<CachedDef>>,
    /// Each definition's value and recorded scalars in the nominal pass: what a pass at a
    /// point gives where every input the definition depends on is at its nominal value.
    nominal_def: Vec<Option<CachedDef>>,
    /// The scalar ids of each check's two sides and their difference, from the nominal pass.
    check_ids: Vec<Option<[usize; 3]>>,
    /// Buffers of the last pass, reused by the next: the values of the definitions, and
    /// the order of the scalars set (which the analysis does not keep).
    spare_values: Vec<Option<Result<Value, Failed>>>,
    spare_touched: Vec<usize>,
    /// The statement that recorded each scalar in the nominal pass, found when a pass
    /// first asks for only some scalars (`needed_for`).
    owners: Option<Vec<Owner>>,
    /// The buffers of `needed_for`, reused from pass to pass.
    spare_only: Only,
}

/// The statement whose evaluation records a scalar.
#[derive(Clone, Copy, PartialEq, Debug)]
enum Owner {
    Def(usize),
    Check(usize),
    /// A shown value's or a sweep's, one recorded by several statements, or none.
    Other,
}

/// The statements a pass evaluates when it is asked for some scalars only.
#[derive(Default)]
struct Only {
    defs: Vec<bool>,
    checks: Vec<bool>,
}

/// A value with every derivative set to zero: what a definition that cannot reach an input
/// computes in the box pass that carries that input's derivative (the value's intervals do
/// not depend on which derivative is carried).
fn without_derivative(v: &Value) -> Value {
    match v {
        Value::Num(n) => Value::Num(flat(*n)),
        Value::Record(r) => Value::Record(std::sync::Arc::new(crate::value::Record {
            kind: r.kind,
            fields: r
                .fields
                .iter()
                .map(|f| crate::value::Field {
                    name: f.name,
                    value: without_derivative(&f.value),
                    display: f.display,
                })
                .collect(),
        })),
        Value::List(items) => Value::List(items.iter().map(without_derivative).collect()),
        Value::Str(_) | Value::Series(_) => v.clone(),
    }
}

fn flat(n: Num) -> Num {
    Num {
        x: crate::num::Dual {
            v: n.x.v,
            d: Interval::ZERO,
        },
        ..n
    }
}

/// Sets the numbers of a value, in the order `Evaluator::record_value` records them, under
/// the ids `ids` gives in turn.
fn set_leaves(v: &Value, ids: &mut std::slice::Iter<'_, usize>, pass: &mut Pass) {
    match v {
        Value::Num(n) => {
            if let Some(&id) = ids.next() {
                pass.set_scalar(id, *n);
            }
        }
        Value::Record(r) => r
            .fields
            .iter()
            .for_each(|f| set_leaves(&f.value, ids, pass)),
        _ => {}
    }
}

/// A definition's value, with the range of `Runner::recorded` that holds the scalars its
/// evaluation recorded.
type CachedDef = (Value, Range<usize>);

/// Side keys of a statement that is no check (never used).
static NO_SIDES: [String; 3] = [String::new(), String::new(), String::new()];

fn def_key(name: &str) -> String {
    eval::join(&["d:", name])
}

impl Runner<'_> {
    /// Appends the cache key of definition `d` in a pass at a point of the input box (the
    /// values of the inputs it depends on) to `cache_keys` and returns its range. None, with
    /// `cache_keys` as it was, until every box pass has shown those inputs (a derivative
    /// enclosure of exactly zero over the box proves independence), and for passes over
    /// intervals.
    fn push_cache_key(&mut self, d: usize, mode: &Mode) -> Option<Range<usize>> {
        let values = self.cacheable(d, mode)?;
        let start = self.cache_keys.len();
        for &k in &self.depends[d] {
            // `cacheable` saw every dependency's value.
            self.cache_keys.push(values[k].lo.to_bits());
        }
        Some(start..self.cache_keys.len())
    }

    /// The pass's input values when definition `d` may be looked up in the cache: a pass
    /// at a point for every input `d` depends on, all of them known.
    fn cacheable<'v>(&self, d: usize, mode: &'v Mode) -> Option<&'v [Interval]> {
        let Mode::Assign { values, seed: None } = mode else {
            return None;
        };
        if self.boxed.get(d).copied() != Some(self.reg.inputs.len()) || self.reg.inputs.is_empty() {
            return None;
        }
        self.depends[d]
            .iter()
            .all(|&k| values.get(k).is_some_and(|v| v.is_point()))
            .then_some(values.as_slice())
    }

    /// What definition `d` gave at this point of the inputs it depends on, if it was seen
    /// (in the nominal pass, or in an earlier pass at a point).
    fn cached(&self, d: usize, mode: &Mode) -> Option<&CachedDef> {
        let values = self.cacheable(d, mode)?;
        let deps = &self.depends[d];
        let at_nominal = deps
            .iter()
            .all(|&k| values[k].lo.to_bits() == self.reg.inputs[k].nominal.to_bits());
        if at_nominal {
            if let Some(hit) = &self.nominal_def[d] {
                return Some(hit);
            }
        }
        self.cache.get(d)?.iter().find_map(|(key, hit)| {
            deps.iter()
                .zip(&self.cache_keys[key.clone()])
                .all(|(&k, &bits)| values[k].lo.to_bits() == bits)
                .then_some(hit)
        })
    }

    /// Every input each definition can reach: the ones it registered in the nominal pass and
    /// those of the definitions it reads, in dependency order. A superset of what it depends
    /// on (a definition that failed in the nominal pass reaches every input).
    fn reachable_inputs(&self) -> Vec<Vec<usize>> {
        let model = self.model;
        let all: Vec<usize> = (0..self.reg.inputs.len()).collect();
        let mut reach: Vec<Option<Vec<usize>>> = vec![None; model.defs.len()];
        for &d in &model.order {
            let failed = !self.nominal_ok[d];
            let mut r: Vec<usize> = if failed {
                all.clone()
            } else {
                self.own_inputs[d].clone().collect()
            };
            for &dep in &model.deps[d] {
                // A dependency not settled before (a cycle) may reach anything.
                r.extend(reach[dep].as_deref().unwrap_or(&all));
            }
            r.sort_unstable();
            r.dedup();
            reach[d] = Some(r);
        }
        // Every definition is in the order; one that were not could reach anything.
        reach
            .into_iter()
            .map(|r| r.unwrap_or_else(|| all.clone()))
            .collect()
    }

    /// For the box pass of input `k`: the definitions it must evaluate, those that can reach
    /// `k` and everything they, the checks and the shown values read. None (evaluate every
    /// definition) when sweeps or pinned values take part.
    fn needed_in_box(&self, k: usize) -> Option<Vec<bool>> {
        if !self.extra.is_empty() || !self.pins.is_empty() {
            return None;
        }
        let reach = self.reach.as_ref()?;
        let model = self.model;
        let mut need: Vec<bool> = reach.iter().map(|r| r.contains(&k)).collect();
        read_by_checks_and_shows(model, |d| need[d] = true);
        with_what_they_read(model, &mut need);
        Some(need)
    }

    #[cold]
    fn fail(&mut self, id: StmtId, e: EvalError) {
        self.errors.entry(id).or_insert(e);
    }

    /// The scalars' owners (see `owners`): each definition's recorded scalars from the
    /// nominal pass, each check's sides and difference.
    fn scalar_owners(&self) -> Vec<Owner> {
        let mut owners = vec![None; self.reg.scalar_count()];
        let mut claim = |id: usize, who: Owner| {
            if let Some(o) = owners.get_mut(id) {
                *o = match *o {
                    None => Some(who),
                    Some(was) if was == who => Some(was),
                    Some(_) => Some(Owner::Other),
                };
            }
        };
        for (d, def) in self.nominal_def.iter().enumerate() {
            if let Some((_, recorded)) = def {
                for &(id, _) in &self.recorded[recorded.clone()] {
                    claim(id, Owner::Def(d));
                }
            }
        }
        for (i, ids) in self.check_ids.iter().enumerate() {
            for &id in ids.iter().flatten() {
                claim(id, Owner::Check(i));
            }
        }
        owners
            .into_iter()
            .map(|o| o.unwrap_or(Owner::Other))
            .collect()
    }

    /// Sets `only` to the definitions and checks a pass evaluates to make the scalars
    /// `need`: their owners and everything those read. False (evaluate everything) when a
    /// shown value, a sweep or a pinned value takes part, or a scalar's owner is not one
    /// statement.
    fn needed_for(&mut self, need: &[usize], only: &mut Only) -> bool {
        if !self.extra.is_empty() || !self.pins.is_empty() {
            return false;
        }
        if self.owners.is_none() {
            self.owners = Some(self.scalar_owners());
        }
        let Some(owners) = self.owners.as_deref() else {
            return false;
        };
        let model = self.model;
        only.defs.clear();
        only.defs.resize(model.defs.len(), false);
        only.checks.clear();
        only.checks.resize(model.checks.len(), false);
        for &s in need {
            let Some(&owner) = owners.get(s) else {
                return false;
            };
            match owner {
                Owner::Def(d) => only.defs[d] = true,
                Owner::Check(i) if !only.checks[i] => {
                    only.checks[i] = true;
                    definitions_named(model, model.checks[i].reads, |d| only.defs[d] = true);
                }
                Owner::Check(_) => {}
                Owner::Other => return false,
            }
        }
        with_what_they_read(model, &mut only.defs);
        true
    }

    fn run(&mut self, mode: Mode) -> Option<Pass> {
        self.run_only(mode, None)
    }

    /// A pass; with `only`, of those definitions and checks alone (a partial pass, with no
    /// shown values).
    fn run_only(&mut self, mode: Mode, only: Option<&Only>) -> Option<Pass> {
        if self.interrupt.is_raised() {
            return None;
        }
        let nominal = matches!(mode, Mode::Nominal);
        let model = self.model;
        let mut pass = Pass::new(mode, self.reg.scalar_count());
        pass.partial = only.is_some();
        pass.touched = std::mem::take(&mut self.spare_touched);
        let mut values = std::mem::take(&mut self.spare_values);
        values.clear();
        values.resize(model.defs.len(), None);
        let seed = match pass.mode {
            Mode::Box { seed } => seed,
            _ => None,
        };
        if seed.is_some() && self.reach.is_none() {
            self.reach = Some(self.reachable_inputs());
        }
        let needed = seed.and_then(|k| self.needed_in_box(k));
        for &d in &model.order {
            if only.is_some_and(|o| !o.defs[d]) {
                continue;
            }
            let def = &model.defs[d];
            // In the box pass that carries input k's derivative, a definition that cannot
            // reach k has the value it had in the previous box pass, with no derivative.
            if let (Some(k), Some(reach), Some((v, recorded))) =
                (seed, self.reach.as_ref(), self.boxed_value[d].as_ref())
            {
                if !reach[d].contains(&k) {
                    for &(id, n) in &self.recorded[recorded.clone()] {
                        pass.put_scalar(id, flat(n));
                    }
                    values[d] = Some(Ok(without_derivative(v)));
                    self.boxed[d] += 1;
                    continue;
                }
            }
            // A definition that reaches no input has its nominal value in every pass (with
            // no derivative); one that nothing in this pass needs gets it as a stand-in, its
            // derivative being zero all the same.
            if let (Some(need), Some((v, recorded))) = (needed.as_ref(), &self.nominal_def[d]) {
                let certain = self.reach.as_ref().is_some_and(|r| r[d].is_empty());
                if certain || !need[d] {
                    for &(id, n) in &self.recorded[recorded.clone()] {
                        pass.put_scalar(id, n);
                    }
                    values[d] = Some(Ok(v.clone()));
                    self.boxed[d] += 1;
                    continue;
                }
            }
            if let Some(e) = &def.static_error {
                if nominal {
                    self.fail(StmtId::Def(d), e.clone());
                }
                values[d] = Some(Err(Failed {
                    root: def.name.to_string(),
                    message: e.message.clone(),
                }));
                continue;
            }
            // At a point of the input box already seen for the inputs this definition
            // depends on, its value and everything it recorded are known.
            if let Some((v, recorded)) = self.cached(d, &pass.mode) {
                for &(id, n) in &self.recorded[recorded.clone()] {
                    pass.put_scalar(id, n);
                }
                values[d] = Some(Ok(v.clone()));
                continue;
            }
            let first_touched = pass.touched.len();
            let first_input = self.reg.inputs.len();
            let result = if let Some((_, pv)) = self.pins.iter().find(|(pd, _)| *pd == d) {
                // A sweep's point is finite unless its range overflows when stepped through;
                // names read their values unchecked (`Evaluator::eval`).
                if pv.x.is_finite() {
                    Ok(Value::Num(*pv))
                } else {
                    Err(eval::not_finite(&def.value_span))
                }
            } else {
                let scope = Scope {
                    model,
                    values: &values,
                };
                let mut ev = Evaluator {
                    names: &scope,
                    reg: &mut self.reg,
                    pass: &mut pass,
                    stmt_key: def.key,
                    stmt_label: def.name,
                    given: def.given,
                    locals: Vec::new(),
                    depth: 0,
                    calls: 0,
                    notes: Vec::new(),
                    nest: 0,
                };
                let r = ev.eval(def.expr).and_then(|v| {
                    if let Some(u) = &def.unit {
                        eval::check_declared(&v, u, &def.value_span)?;
                    }
                    Ok(v)
                });
                let notes = std::mem::take(&mut ev.notes);
                if nominal {
                    self.notes.extend(notes.into_iter().map(|n| (def.cell, n)));
                }
                match (r, &def.original) {
                    (Ok(v), Some(orig)) if nominal => same_kind(&scope, orig, &v, def).map(|()| v),
                    (r, _) => r,
                }
            };
            match result {
                Ok(v) => {
                    // The value's numbers are recorded under the ids the nominal pass gave
                    // them (the same leaves in the same order), without building keys.
                    let leaf_start = pass.touched.len();
                    match self.leaves.get(d).and_then(Option::as_ref) {
                        Some(ids) if !nominal => set_leaves(&v, &mut ids.iter(), &mut pass),
                        _ => {
                            let mut ev = Evaluator {
                                names: &NoNames,
                                reg: &mut self.reg,
                                pass: &mut pass,
                                stmt_key: def.key,
                                stmt_label: def.name,
                                given: def.given,
                                locals: Vec::new(),
                                depth: 0,
                                calls: 0,
                                notes: Vec::new(),
                                nest: 0,
                            };
                            ev.record_value(def.key, &v);
                            if nominal {
                                self.leaves[d] = Some(pass.touched[leaf_start..].to_vec());
                            }
                        }
                    }
                    if nominal {
                        self.own_inputs[d] = first_input..self.reg.inputs.len();
                        self.nominal_ok[d] = true;
                    }
                    // What it recorded, kept for reuse (a box pass's and a point's only
                    // where they can be reused).
                    let key = match pass.mode {
                        Mode::Assign { .. } => self.push_cache_key(d, &pass.mode),
                        _ => None,
                    };
                    let keep = nominal || key.is_some() || matches!(pass.mode, Mode::Box { .. });
                    let start = self.recorded.len();
                    if keep {
                        self.recorded.extend(
                            pass.touched[first_touched..]
                                .iter()
                                .filter_map(|&id| pass.scalars[id].map(|n| (id, n))),
                        );
                    }
                    let recorded = start..self.recorded.len();
                    if nominal {
                        self.nominal_def[d] = Some((v.clone(), recorded));
                    } else if let Mode::Box { seed } = pass.mode {
                        if let Some(k) = seed {
                            if self.recorded[recorded.clone()]
                                .iter()
                                .any(|(_, n)| n.x.d != Interval::ZERO)
                            {
                                self.depends[d].push(k);
                            }
                            self.boxed[d] += 1;
                        }
                        self.boxed_value[d] = Some((v.clone(), recorded));
                    } else if let Some(key) = key {
                        if self.cache.len() <= d {
                            self.cache.resize_with(d + 1, Vec::new);
                        }
                        self.cache[d].push((key, (v.clone(), recorded)));
                    }
                    values[d] = Some(Ok(v));
                }
                Err(mut e) => {
                    if def.overridden && e.kind != DiagKind::DependencyFailed {
                        e.message = format!(
                            "in the value set from outside for `{}`: {}",
                            def.name, e.message
                        );
                        e.span = def.value_span.clone();
                    }
                    // Dependents name the definition whose own evaluation failed.
                    let failed = match &e.cause {
                        Some(root) if e.kind == DiagKind::DependencyFailed => root.clone(),
                        _ => Failed {
                            root: def.name.to_string(),
                            message: e.message.clone(),
                        },
                    };
                    values[d] = Some(Err(failed));
                    self.fail(StmtId::Def(d), e);
                }
            }
        }
        let scope = Scope {
            model,
            values: &values,
        };
        // The model lists the checks and shows of the cells evaluated only.
        for (i, c) in model.checks.iter().enumerate() {
            if only.is_some_and(|o| !o.checks[i]) {
                continue;
            }
            let mut ev = Evaluator {
                names: &scope,
                reg: &mut self.reg,
                pass: &mut pass,
                stmt_key: c.key,
                stmt_label: "check",
                given: false,
                locals: Vec::new(),
                depth: 0,
                calls: 0,
                notes: Vec::new(),
                nest: 0,
            };
            let known_ids = self.check_ids.get(i).copied().flatten();
            let r = (|| {
                let a = ev.eval(c.lhs)?;
                let b = ev.eval(c.rhs)?;
                let (Value::Num(a), Value::Num(b)) = (a, b) else {
                    return Err(EvalError::new(
                        DiagKind::TypeMismatch,
                        &c.span,
                        "a check compares two numbers",
                    ));
                };
                let diff = eval::binary(crate::ast::BinOp::Sub, a, b, &c.span, &c.rhs.span)
                    .map_err(|mut e| {
                        e.message = format!("the two sides cannot be compared: {}", e.message);
                        e
                    })?;
                // The nominal pass registers the three scalars by key; later passes record
                // them under its ids. (Where the nominal pass failed, nothing was
                // registered, so there is nothing to record.)
                let ids = match known_ids {
                    _ if nominal => c.side_keys.each_ref().map(|k| ev.reg.scalar_id(k)),
                    Some(ids) => ids,
                    None => return Ok(None),
                };
                let [l, r, d] = ids;
                ev.pass.set_scalar(l, a);
                ev.pass.set_scalar(r, b);
                ev.pass.set_scalar(d, diff);
                Ok(nominal.then_some(ids))
            })();
            let notes = std::mem::take(&mut ev.notes);
            if nominal {
                self.notes.extend(notes.into_iter().map(|n| (c.cell, n)));
            }
            match r {
                Ok(Some(ids)) => self.check_ids[i] = Some(ids),
                Ok(None) => {}
                Err(e) => self.fail(StmtId::Check(i), e),
            }
        }
        for (i, s) in model.shows.iter().enumerate() {
            if only.is_some() {
                break;
            }
            if let Some(e) = &s.unit_error {
                if nominal {
                    self.fail(StmtId::Show(i), e.clone());
                }
                continue;
            }
            let mut ev = Evaluator {
                names: &scope,
                reg: &mut self.reg,
                pass: &mut pass,
                stmt_key: s.key,
                stmt_label: &s.text,
                given: false,
                locals: Vec::new(),
                depth: 0,
                calls: 0,
                notes: Vec::new(),
                nest: 0,
            };
            let r = ev.eval(s.expr).and_then(|v| {
                if let Some(u) = &s.unit {
                    eval::check_declared(&v, u, &s.expr.span)?;
                }
                Ok(v)
            });
            let r = r.inspect(|v| ev.record_value(s.key, v));
            let notes = std::mem::take(&mut ev.notes);
            if nominal {
                self.notes.extend(notes.into_iter().map(|n| (s.cell, n)));
            }
            match r {
                Ok(v) => {
                    if nominal {
                        self.shown.insert(i, v);
                    }
                }
                Err(e) => self.fail(StmtId::Show(i), e),
            }
        }
        for (key, e) in &self.extra {
            let mut ev = Evaluator {
                names: &scope,
                reg: &mut self.reg,
                pass: &mut pass,
                stmt_key: key,
                stmt_label: "sweep",
                given: false,
                locals: Vec::new(),
                depth: 0,
                calls: 0,
                notes: Vec::new(),
                nest: 0,
            };
            if let Ok(v) = ev.eval(e) {
                ev.record_value(key, &v);
            }
        }
        pass.touched.clear();
        self.spare_touched = std::mem::take(&mut pass.touched);
        if !nominal {
            self.spare_values = values;
        } else {
            self.nominal_values = values;
            // Room for what the later passes record and cache, so the lists grow once or
            // not at all (the reference cell records about six times its scalars). Without
            // uncertain inputs no pass follows.
            if !self.reg.inputs.is_empty() {
                let scalars = self.reg.scalar_count();
                self.recorded.reserve(8 * scalars);
                self.cache_keys.reserve(2 * scalars);
            }
        }
        Some(pass)
    }
}

/// An override must have the dimension of the value it replaces.
fn same_kind(
    scope: &Scope<'_>,
    original: &Expr,
    new: &Value,
    def: &DefEntry,
) -> Result<(), EvalError> {
    let mut pass = Pass::new(Mode::Nominal, 0);
    let mut scratch = Registry::default();
    let mut ev = Evaluator {
        names: scope,
        reg: &mut scratch,
        pass: &mut pass,
        stmt_key: "override",
        stmt_label: def.name,
        given: true,
        locals: Vec::new(),
        depth: 0,
        calls: 0,
        notes: Vec::new(),
        nest: 0,
    };
    let Ok(old) = ev.eval(original) else {
        return Ok(());
    };
    match (&old, new) {
        (Value::Num(a), Value::Num(b)) if a.dim != b.dim || a.abs != b.abs => Err(EvalError::new(
            DiagKind::DimensionMismatch,
            &def.value_span,
            format!(
                "`{}` is {} in the worksheet, but the value set from outside is {}",
                def.name,
                units::describe_quantity(a.dim, a.abs),
                units::describe_quantity(b.dim, b.abs)
            ),
        )),
        _ => Ok(()),
    }
}

struct NoNames;
impl Names for NoNames {
    fn lookup(&self, _: &str) -> Option<Result<Value, Failed>> {
        None
    }
    fn function(&self, _: &str) -> Option<&Function> {
        None
    }
    fn all_names(&self) -> Vec<String> {
        Vec::new()
    }
}

impl analysis::Evaluate for Runner<'_> {
    fn pass(&mut self, mode: Mode) -> Option<Pass> {
        self.run(mode)
    }
    fn pass_needing(&mut self, mode: Mode, need: &[usize]) -> Option<Pass> {
        let mut only = std::mem::take(&mut self.spare_only);
        let pass = if matches!(mode, Mode::Assign { .. }) && self.needed_for(need, &mut only) {
            self.run_only(mode, Some(&only))
        } else {
            self.run(mode)
        };
        self.spare_only = only;
        pass
    }
}

impl<'m> Runner<'m> {
    fn new(model: &'m Model<'m>, interrupt: &'m Interrupt) -> Self {
        Runner {
            model,
            reg: Registry::for_definitions(model.defs.len() + model.checks.len()),
            interrupt,
            errors: HashMap::default(),
            notes: Vec::new(),
            pins: Vec::new(),
            extra: Vec::new(),
            nominal_values: Vec::new(),
            shown: HashMap::default(),
            depends: vec![Vec::new(); model.defs.len()],
            boxed: vec![0; model.defs.len()],
            cache: Vec::new(),
            cache_keys: Vec::new(),
            recorded: Vec::new(),
            leaves: vec![None; model.defs.len()],
            own_inputs: vec![0..0; model.defs.len()],
            nominal_ok: vec![false; model.defs.len()],
            reach: None,
            boxed_value: vec![None; model.defs.len()],
            nominal_def: vec![None; model.defs.len()],
            check_ids: vec![None; model.checks.len()],
            spare_values: Vec::new(),
            spare_touched: Vec::new(),
            owners: None,
            spare_only: Only::default(),
        }
    }
}

/// The analysed state of one evaluation: the nominal pass, the bounds of every scalar,
/// and the memoised passes (to read other scalars at a deciding corner).
struct Analysed<'r, 'm> {
    nominal: Pass,
    bounds: Vec<Option<ScalarBounds>>,
    passes: Passes<'r, Runner<'m>>,
    /// The analysis worked out the swings, and the rows carry each value's spread.
    spreads: bool,
}

impl Analysed<'_, '_> {
    fn scalar_by_id(&self, id: usize) -> Option<(Num, Option<&ScalarBounds>)> {
        let n = self.nominal.scalars.get(id).copied().flatten()?;
        Some((n, self.bounds.get(id).and_then(Option::as_ref)))
    }

    fn scalar(&self, key: &str) -> Option<(Num, Option<&ScalarBounds>)> {
        self.scalar_by_id(self.passes.eval.reg.find_scalar(key)?)
    }

    /// Scalar `key` at the assignment `at`.
    fn at(&mut self, at: &[Interval], key: &str) -> Option<Num> {
        let id = self.passes.eval.reg.find_scalar(key)?;
        self.passes.at(at, id)
    }

    fn bounds_of(&self, b: &ScalarBounds) -> Bounds {
        Bounds {
            min: b.min,
            max: b.max,
            conservative: b.conservative,
            spread: self.spreads.then(|| self.spread_of(b)),
        }
    }

    fn spread_of(&self, b: &ScalarBounds) -> Spread {
        // Scaled by the largest swing, so sums and squares of swings near the largest
        // finite number stay finite.
        let largest = b.half_swings.iter().copied().fold(0.0, f64::max);
        let scaled = |h: f64| if largest > 0.0 { h / largest } else { 0.0 };
        let total: f64 = b.half_swings.iter().map(|&h| scaled(h)).sum();
        let mut shares: Vec<Share> = Vec::new();
        for (k, &h) in b.depends.iter().zip(&b.half_swings) {
            let label = self.passes.eval.reg.inputs[*k].label.text();
            let f = if total > 0.0 { scaled(h) / total } else { 0.0 };
            match shares.iter_mut().find(|x| x.input == label) {
                Some(x) => x.fraction += f,
                None => shares.push(Share {
                    input: label,
                    fraction: f,
                }),
            }
        }
        shares.sort_by(|a, b| b.fraction.total_cmp(&a.fraction));
        Spread {
            shares,
            // √Σ(swing/2)²; an RSS beyond the largest finite number is shown as that number.
            rss: (largest
                * b.half_swings
                    .iter()
                    .map(|&h| scaled(h).powi(2))
                    .sum::<f64>()
                    .sqrt())
            .min(f64::MAX),
        }
    }

    /// "vin = 10.8 V, iload = 216 mA": the inputs a value depends on at an assignment.
    fn describe_corner(&mut self, b: &ScalarBounds, at: &[Interval]) -> String {
        let mut parts: Vec<String> = Vec::new();
        for &k in &b.depends {
            let Some(&sid) = self.passes.eval.reg.input_scalars.get(k) else {
                continue;
            };
            if sid == usize::MAX {
                continue;
            }
            let label = self.passes.eval.reg.inputs[k].label.text();
            if let Some(v) = self.passes.at(at, sid) {
                let t = format!(
                    "{label} = {}",
                    units::format_si(v.x.value(), v.dim, v.abs, SIG)
                );
                if !parts.contains(&t) {
                    parts.push(t);
                }
            }
        }
        parts.join(", ")
    }

    /// The rows of a value: one per number, record fields as `name.field`. Its numbers are
    /// read under `leaves` (the scalar ids the nominal pass recorded them under, in order)
    /// where given, otherwise under their keys (`key`, `key.field`).
    #[allow(clippy::too_many_arguments)]
    fn value_rows(
        &mut self,
        key: &str,
        leaves: &mut Option<std::slice::Iter<'_, usize>>,
        name: String,
        v: &Value,
        unit: Option<&Unit>,
        display: Option<&'static str>,
        note: &str,
        given: bool,
        out: &mut Vec<ValueRow>,
    ) {
        let row = |name: String, shown: Shown| ValueRow {
            name,
            given,
            note: note.to_string(),
            shown,
            unit: unit.cloned(),
            preferred: None,
            leads_with_minimum: false,
        };
        match v {
            Value::Num(n) => {
                let preferred = display.and_then(|t| units::library_unit(t).ok());
                let found = match leaves.as_mut() {
                    Some(ids) => ids.next().and_then(|&id| self.scalar_by_id(id)),
                    None => self.scalar(key),
                };
                let (nom, b) = found.unwrap_or((*n, None));
                out.push(ValueRow {
                    preferred,
                    ..row(
                        name,
                        Shown::Number {
                            value: crate::results::Quantity {
                                si: nom.x.value(),
                                dim: nom.dim,
                                absolute: nom.abs,
                            },
                            bounds: b.map(|b| self.bounds_of(b)),
                        },
                    )
                });
            }
            Value::Record(r) => {
                for (i, f) in r.fields.iter().enumerate() {
                    // The key is only read without the leaves' ids.
                    let field_key = match leaves {
                        Some(_) => String::new(),
                        None => eval::join(&[key, ".", f.name]),
                    };
                    self.value_rows(
                        &field_key,
                        leaves,
                        eval::join(&[&name, ".", f.name]),
                        &f.value,
                        None,
                        f.display,
                        if i == 0 { note } else { "" },
                        given,
                        out,
                    );
                }
            }
            Value::Str(s) => out.push(row(name, Shown::Text(s.to_string()))),
            Value::List(_) | Value::Series(_) => out.push(row(name, Shown::Other(plain(v)))),
        }
    }
}

/// A value as text without bounds (lists, series).
fn plain(v: &Value) -> String {
    match v {
        Value::Num(n) => units::format_si(n.x.value(), n.dim, n.abs, SIG),
        Value::Str(s) => format!("\"{s}\""),
        Value::List(items) => format!(
            "[{}]",
            items.iter().map(plain).collect::<Vec<_>>().join(", ")
        ),
        Value::Record(r) => format!("({} result)", r.kind),
        Value::Series(s) => format!("{} ({} values per decade)", s.name, s.values.len()),
    }
}

fn cell_of_stmt(model: &Model<'_>, cells: &[Cell], key: &str) -> Option<usize> {
    if let Some(name) = key.strip_prefix("d:") {
        return model.index.get(name).map(|&i| model.defs[i].cell);
    }
    let (cell, _) = key.rsplit_once(':')?;
    cells.iter().position(|c| c.key == cell)
}

/// What a run changed: the cell run (its index) and the names its old and new text define.
struct Focus {
    run: usize,
    changed: Vec<String>,
}

/// Evaluates the worksheet: every cell, or with a focus only the cells the run can change
/// (`cells_to_evaluate`); the others' reports are None (they stand as they were). None
/// when interrupted.
fn evaluate(
    cells: &[Cell],
    overrides: &[Override],
    options: &Options,
    interrupt: &Interrupt,
    focus: Option<&Focus>,
) -> Option<Vec<Option<CellReport>>> {
    let model = build_model(cells, overrides, focus);
    let live = |ci: usize| model.live.as_ref().is_none_or(|l| l[ci]);
    // Choices that depend on their arguments' worst-case ranges (`res.led(rule: "worst")`)
    // take them from a box pass of an earlier round; repeat while they change.
    // A round whose nominal pass found every range it asked for is the worksheet's own
    // nominal pass.
    let mut known = HashMap::default();
    let mut settled = None;
    for _ in 0..3 {
        let mut probe = Runner::new(&model, interrupt);
        probe.reg.known = known.clone();
        let nominal = probe.run(Mode::Nominal)?;
        if !probe.reg.wanted_ranges.get() {
            settled = Some((probe, nominal));
            break;
        }
        probe.run(Mode::Box { seed: None })?;
        if probe.reg.observed == known {
            break;
        }
        known = std::mem::take(&mut probe.reg.observed);
    }
    let (mut runner, nominal) = match settled {
        Some(done) => done,
        None => {
            let mut runner = Runner::new(&model, interrupt);
            runner.reg.known = known;
            let nominal = runner.run(Mode::Nominal)?;
            (runner, nominal)
        }
    };
    let inputs = runner.reg.inputs.clone();
    let nominal_values = std::mem::take(&mut runner.nominal_values);
    let shown = std::mem::take(&mut runner.shown);
    let mut passes = Passes::new(&mut runner);
    let bounds = analysis::analyse(&inputs, &nominal, &mut passes, options.spreads)?;
    let mut an = Analysed {
        nominal,
        bounds,
        passes,
        spreads: options.spreads,
    };
    // None for the cells not evaluated (their reports stand).
    let mut reports: Vec<Option<CellReport>> = cells
        .iter()
        .enumerate()
        .map(|(ci, c)| {
            live(ci).then(|| CellReport {
                cell: c.key.clone(),
                source: c.source.to_string(),
                diagnostics: model.diags[ci].clone(),
                // A row per definition, and one per field of a record: room for a few.
                values: Vec::with_capacity(4 * c.program.stmts.len()),
                ..CellReport::default()
            })
        })
        .collect();
    for (ci, report) in reports.iter_mut().enumerate() {
        let Some(report) = report else {
            continue;
        };
        for item in &model.items[ci] {
            match item {
                Item::Def(d) => {
                    let def = &model.defs[*d];
                    if let Some(e) = an.passes.eval.errors.get(&StmtId::Def(*d)) {
                        if !def.parse_failed {
                            report.diagnostics.push(e.clone().into_diagnostic());
                        }
                        continue;
                    }
                    if let Some(Ok(v)) = &nominal_values[*d] {
                        // Lent out for the rows, and back for any pass they ask for.
                        let ids = an.passes.eval.leaves.get_mut(*d).and_then(Option::take);
                        let mut leaves = ids.as_deref().map(<[usize]>::iter);
                        an.value_rows(
                            def.key,
                            &mut leaves,
                            def.name.to_string(),
                            v,
                            def.unit.as_ref(),
                            None,
                            def.note,
                            def.given,
                            &mut report.values,
                        );
                        if let Some(slot) = an.passes.eval.leaves.get_mut(*d) {
                            *slot = ids;
                        }
                        // A sizing result is shown by the side the design must meet.
                        if let Some(row) = report.values.last_mut() {
                            row.leads_with_minimum = def.leads_with_minimum;
                        }
                    }
                }
                Item::Check(i) => {
                    if let Some(e) = an.passes.eval.errors.get(&StmtId::Check(*i)) {
                        report.diagnostics.push(e.clone().into_diagnostic());
                        continue;
                    }
                    if let Some(row) = check_row(&mut an, &model.checks[*i]) {
                        report.checks.push(row);
                    }
                }
                Item::Show(i) => {
                    if let Some(e) = an.passes.eval.errors.get(&StmtId::Show(*i)) {
                        report.diagnostics.push(e.clone().into_diagnostic());
                        continue;
                    }
                    let s = &model.shows[*i];
                    if let Some(v) = shown.get(i) {
                        an.value_rows(
                            s.key,
                            &mut None,
                            s.text.clone(),
                            v,
                            s.unit.as_ref(),
                            None,
                            "",
                            false,
                            &mut report.shown,
                        );
                    }
                }
                // Spreads are asked for the values alone.
                Item::Sweep(_) if options.spreads => {}
                Item::Sweep(i) => {
                    let s = &model.sweeps[*i];
                    match crate::sweep::run(
                        &SweepHost {
                            model: &model,
                            interrupt,
                            choices: &an.passes.eval.reg.choices,
                            known: &an.passes.eval.reg.known,
                            base: Some((&an.passes.eval.reg, &an.nominal, &an.bounds)),
                            fast: options.fast_sweeps,
                        },
                        s.stmt,
                        &cells[s.cell].source,
                    )? {
                        Ok(t) => report.sweeps.push(t),
                        Err(d) => report.diagnostics.push(d),
                    }
                }
            }
        }
    }
    // Warnings of the built-ins, judged at their worst case.
    let probes = std::mem::take(&mut an.passes.eval.reg.probes);
    let mut fired: Vec<(usize, String, f64, WarningRow)> = Vec::new();
    for p in &probes {
        let Some(ci) = cell_of_stmt(&model, cells, &p.stmt).filter(|&ci| reports[ci].is_some())
        else {
            continue;
        };
        let Some((nom, b)) = an.scalar_by_id(p.scalar) else {
            continue;
        };
        let (above, limit) = match p.rule.when {
            crate::builtins::WarnWhen::MaxAbove(l) => (true, l),
            crate::builtins::WarnWhen::MinBelow(l) => (false, l),
        };
        let v = match b {
            Some(b) if above => b.max,
            Some(b) => b.min,
            None => nom.x.value(),
        };
        if (above && v > limit) || (!above && v < limit) {
            let b = b.cloned();
            let at = match &b {
                Some(b) => {
                    let corner = if above {
                        b.max_at.clone()
                    } else {
                        b.min_at.clone()
                    };
                    let c = an.describe_corner(b, &corner);
                    if c.is_empty() {
                        String::new()
                    } else {
                        format!(" at {c}")
                    }
                }
                None => String::new(),
            };
            let text = format!(
                "{}: {} {} {} (limit {}){}",
                p.rule.message,
                p.rule.label,
                if b.is_some() {
                    if above {
                        "reaches"
                    } else {
                        "falls to"
                    }
                } else {
                    "is"
                },
                units::format_si(v, nom.dim, nom.abs, SIG),
                units::format_si(limit, nom.dim, nom.abs, SIG),
                at
            );
            let row = WarningRow {
                source: p.source.clone(),
                text,
            };
            // Of several rules on one value (same statement, same label), the most
            // severe one speaks: over tj_max, not also within 10 K of it.
            let id = eval::join(&[&p.stmt, "\u{0}", &p.rule.label]);
            let same = |f: &(usize, String, f64, WarningRow)| f.0 == ci && f.1 == id;
            match fired.iter_mut().find(|f| same(f)) {
                Some(f) if (above && limit > f.2) || (!above && limit < f.2) => {
                    *f = (ci, id, limit, row)
                }
                Some(_) => {}
                None => fired.push((ci, id, limit, row)),
            }
        }
    }
    // What lands in a cell not evaluated is dropped.
    for (ci, _, _, row) in fired {
        if let Some(r) = &mut reports[ci] {
            r.warnings.push(row);
        }
    }
    for (label, key, text) in &an.passes.eval.reg.warnings {
        if let Some(r) = cell_of_stmt(&model, cells, key).and_then(|ci| reports[ci].as_mut()) {
            r.warnings.push(WarningRow {
                source: label.clone(),
                text: text.clone(),
            });
        }
    }
    for (key, hazard) in &an.passes.eval.reg.hazards {
        if let Some(r) = cell_of_stmt(&model, cells, key).and_then(|ci| reports[ci].as_mut()) {
            if !r.hazards.contains(hazard) {
                r.hazards.push(*hazard);
            }
        }
    }
    let notes = std::mem::take(&mut an.passes.eval.notes);
    for (ci, n) in notes {
        if let Some(r) = &mut reports[ci] {
            if !r.diagnostics.contains(&n) {
                r.diagnostics.push(n);
            }
        }
    }
    Some(reports)
}

fn check_row(an: &mut Analysed<'_, '_>, c: &CheckEntry) -> Option<CheckRow> {
    let [lk, rk, dk] = &c.side_keys;
    let (lhs, _) = an.scalar(lk)?;
    let (rhs, _) = an.scalar(rk)?;
    let (diff, b) = an.scalar(dk)?;
    let conservative = b.is_some_and(|b| b.conservative);
    let le = matches!(c.op, CmpOp::Lt | CmpOp::Le);
    let (worst_diff, at) = match b {
        Some(b) if le => (b.max, Some(b.max_at.clone())),
        Some(b) => (b.min, Some(b.min_at.clone())),
        None => (diff.x.value(), None),
    };
    let passed = match c.op {
        CmpOp::Lt => worst_diff < 0.0,
        CmpOp::Le => worst_diff <= 0.0,
        CmpOp::Gt => worst_diff > 0.0,
        CmpOp::Ge => worst_diff >= 0.0,
    };
    let margin = if le { -worst_diff } else { worst_diff };
    let (worst, limit) = match at {
        Some(a) => (an.at(&a, lk).unwrap_or(lhs), an.at(&a, rk).unwrap_or(rhs)),
        None => (lhs, rhs),
    };
    Some(CheckRow {
        text: c.text.clone(),
        note: c.note.clone(),
        passed,
        worst: worst.x.value(),
        limit: limit.x.value(),
        margin,
        dim: diff.dim,
        conservative,
        worst_absolute: worst.abs,
        limit_absolute: limit.abs,
    })
}

/// What a sweep needs of the worksheet: re-running it with one definition pinned.
pub(crate) struct SweepHost<'a> {
    model: &'a Model<'a>,
    interrupt: &'a Interrupt,
    /// The parts the worksheet chose: a sweep shows how that design behaves, so it keeps
    /// them rather than choosing again at every point.
    choices: &'a HashMap<String, f64>,
    known: &'a HashMap<String, Vec<Option<Interval>>>,
    /// The worksheet's own evaluation, for values a sweep does not move.
    base: Option<(&'a Registry, &'a Pass, &'a [Option<ScalarBounds>])>,
    /// Whether compiled sweeps may be used (tests compare both paths).
    fast: bool,
}

impl crate::compile::TapeSource for SweepHost<'_> {
    fn definition(&self, name: &str) -> Option<(usize, &Expr)> {
        let &i = self.model.index.get(name)?;
        let d = &self.model.defs[i];
        if d.static_error.is_some() {
            return None;
        }
        Some((i, d.expr))
    }
    fn function(&self, name: &str) -> Option<&Function> {
        self.model.funcs.get(name)
    }
    fn certain(&self, key: &str) -> Option<f64> {
        let (reg, nominal, bounds) = self.base?;
        let id = reg.find_scalar(&def_key(key))?;
        if bounds.get(id).is_some_and(|b| b.is_some()) {
            return None;
        }
        nominal
            .scalars
            .get(id)
            .copied()
            .flatten()
            .map(|n| n.x.value())
    }
}

/// A sweep series' value at one point: nominal, and (min, max) when uncertain.
pub(crate) type PointValue = (Num, Option<(f64, f64)>);

/// One analysed evaluation of the worksheet with a definition pinned to a value.
pub(crate) struct SweepPoint {
    /// For each extra expression, if it evaluated.
    pub values: Vec<Option<PointValue>>,
}

impl SweepHost<'_> {
    /// The sweep compiled to a tape, when its expressions allow it.
    pub fn compile(&self, swept: &[usize], exprs: &[Expr]) -> Option<crate::compile::Tape> {
        if !self.fast {
            return None;
        }
        crate::compile::compile(self, swept, exprs)
    }

    pub fn interrupt(&self) -> &Interrupt {
        self.interrupt
    }

    /// The index of a definition, to pin it in `point`.
    pub fn definition_index(&self, name: &str) -> Option<usize> {
        self.model.index.get(name).copied()
    }

    /// The checks whose left side is exactly `name`: (their text, their right side).
    pub fn check_on(&self, name: &str) -> Vec<(String, Expr)> {
        self.model
            .checks
            .iter()
            .filter(|c| matches!(&c.lhs.kind, ExprKind::Name(n) if n == name))
            .map(|c| (c.text.clone(), c.rhs.clone()))
            .collect()
    }

    /// A known number written in the sweep (an end, a step count): literals only.
    pub fn constant(&self, e: &Expr) -> Result<Num, EvalError> {
        let mut pass = Pass::new(Mode::Nominal, 0);
        let mut scratch = Registry::default();
        let mut ev = Evaluator {
            names: &NoNames,
            reg: &mut scratch,
            pass: &mut pass,
            stmt_key: "sweep",
            stmt_label: "sweep",
            given: false,
            locals: Vec::new(),
            depth: 0,
            calls: 0,
            notes: Vec::new(),
            nest: 0,
        };
        match ev.eval(e)? {
            Value::Num(n) if scratch.inputs.is_empty() => Ok(n),
            Value::Num(_) => Err(EvalError::new(
                DiagKind::TypeMismatch,
                &e.span,
                "a sweep's ends and steps are exact numbers, without a tolerance",
            )),
            v => Err(EvalError::new(
                DiagKind::TypeMismatch,
                &e.span,
                format!("expected a number, found {}", v.type_name()),
            )),
        }
    }

    /// Evaluates `exprs` with the definitions in `pins` (indices from `definition`) set to
    /// the values given. None when interrupted; an error when an expression fails there.
    pub fn point(
        &self,
        pins: &[(usize, Num)],
        exprs: &[Expr],
    ) -> Option<Result<SweepPoint, EvalError>> {
        let mut r = Runner::new(self.model, self.interrupt);
        r.reg.choices = self.choices.clone();
        r.reg.known = self.known.clone();
        r.pins = pins.to_vec();
        r.extra = exprs
            .iter()
            .enumerate()
            .map(|(j, e)| (format!("sw:{j}"), e.clone()))
            .collect();
        let nominal = r.run(Mode::Nominal)?;
        // An expression that fails is evaluated once more alone to report why.
        let reg = r.reg.clone();
        for (j, e) in exprs.iter().enumerate() {
            if reg.find_scalar(&format!("sw:{j}")).is_none() {
                let model = self.model;
                let values = std::mem::take(&mut r.nominal_values);
                let scope = Scope {
                    model,
                    values: &values,
                };
                let mut pass = Pass::new(Mode::Nominal, 0);
                let mut scratch = Registry::default();
                let sweep_key = format!("sw:{j}");
                let mut ev = Evaluator {
                    names: &scope,
                    reg: &mut scratch,
                    pass: &mut pass,
                    stmt_key: &sweep_key,
                    stmt_label: "sweep",
                    given: false,
                    locals: Vec::new(),
                    depth: 0,
                    calls: 0,
                    notes: Vec::new(),
                    nest: 0,
                };
                return Some(match ev.eval(e) {
                    Err(err) => Err(err),
                    Ok(v) => Err(EvalError::new(
                        DiagKind::TypeMismatch,
                        &e.span,
                        format!("a sweep shows numbers; this is {}", v.type_name()),
                    )),
                });
            }
        }
        let inputs = reg.inputs.clone();
        let mut passes = Passes::new(&mut r);
        let bounds = analysis::analyse(&inputs, &nominal, &mut passes, false)?;
        let values = (0..exprs.len())
            .map(|j| {
                let id = reg.find_scalar(&format!("sw:{j}"))?;
                let n = nominal.scalars.get(id).copied().flatten()?;
                Some((n, bounds.get(id).cloned().flatten().map(|b| (b.min, b.max))))
            })
            .collect();
        Some(Ok(SweepPoint { values }))
    }
}

#[cfg(test)]
mod tests {
    //! A run evaluates only the cells it can change; these tests hold it to the evaluation
    //! of every cell.
    use super::*;
    use proptest::prelude::*;

    /// Every cell's report from an evaluation of the whole worksheet.
    fn everything(cells: &[Cell]) -> Vec<CellReport> {
        evaluate(cells, &[], &Options::default(), &Interrupt::new(), None)
            .expect("not interrupted")
            .into_iter()
            .map(Option::unwrap_or_default)
            .collect()
    }

    /// The cells as they will be once `source` runs as cell `key`.
    fn after(ws: &Worksheet, key: &str, source: &str) -> Vec<Cell> {
        let mut cells = ws.cells.clone();
        let cell = Cell::new(
            key.to_string(),
            Arc::from(source),
            Arc::new(parser::parse(source)),
            ws.runs + 1,
        );
        match cells.iter_mut().find(|c| c.key == key) {
            Some(c) => *c = cell,
            None => cells.push(cell),
        }
        cells
    }

    /// Runs `source` as `key` and checks the run's report and the worksheet's reports
    /// against an evaluation of every cell.
    fn run_and_compare(ws: &mut Worksheet, key: &str, source: &str) -> Execution {
        let expected = after(ws, key, source);
        let expected = everything(&expected);
        let ex = ws.execute(Some(key), source, &Interrupt::new());
        // What a run says of the other cells is news of that run, not a result.
        let results = |r: &CellReport| CellReport {
            updated_cells: Vec::new(),
            ..r.clone()
        };
        let want = expected
            .iter()
            .find(|r| r.cell == key)
            .cloned()
            .unwrap_or_default();
        assert_eq!(
            results(&ex.report),
            want,
            "the report of the cell run ({key}: {source:?})"
        );
        if !ex.report.has_errors() {
            let kept: Vec<CellReport> = ws.reports().iter().map(|r| results(r)).collect();
            assert_eq!(kept, expected, "after running {key}: {source:?}");
            // The worksheet keeps the report it returned.
            let run = ws.reports().iter().find(|r| r.cell == key);
            assert!(run.is_some_and(|r| Arc::ptr_eq(r, &ex.report)));
        }
        ex
    }

    #[test]
    fn a_cell_that_reads_nothing_changed_keeps_its_report_and_is_not_evaluated() {
        let mut ws = Worksheet::new();
        run_and_compare(
            &mut ws,
            "supply",
            "given vin = 10.8 V .. 13.2 V\nvout = 5 V",
        );
        run_and_compare(&mut ws, "load", "given iload = 180 mA ± 20 %");
        run_and_compare(&mut ws, "loss", "p = (vin - vout) * iload\ncheck p <= 2 W");
        run_and_compare(&mut ws, "other", "r = 2 kΩ ± 1 %\nr * 2");
        // The load changes: the loss follows, the supply and the other cell stand.
        let ex = run_and_compare(&mut ws, "load", "given iload = 250 mA ± 20 %");
        let updated: Vec<&str> = ex.updated.iter().map(|u| u.report.cell.as_str()).collect();
        assert_eq!(updated, ["loss"]);
        // Which cells the run evaluated: the one run and the one that reads what it defines.
        let model = build_model(&ws.cells, &[], None);
        let live = cells_to_evaluate(&model, &ws.cells, 1, &["iload".to_string()]);
        assert_eq!(live, Some(vec![false, true, true, false]));
        // A cell that reads nothing: only itself.
        let live = cells_to_evaluate(&model, &ws.cells, 3, &["r".to_string()]);
        assert_eq!(live, Some(vec![false, false, false, true]));
    }

    #[test]
    fn moving_a_name_to_another_cell_updates_both_and_their_readers() {
        let mut ws = Worksheet::new();
        run_and_compare(&mut ws, "a", "x = 2 V");
        run_and_compare(&mut ws, "b", "y = x * 3");
        run_and_compare(&mut ws, "c", "z = 1 A");
        // Cell c now also defines x, run later: it owns x; a's definition is unused.
        run_and_compare(&mut ws, "c", "z = 1 A\nx = 5 V");
        run_and_compare(&mut ws, "a", "w = 1 V");
        run_and_compare(&mut ws, "c", "z = 1 A");
        // A function used through another cell.
        run_and_compare(&mut ws, "f", "f(t) = t * x");
        run_and_compare(&mut ws, "g", "f(2)\ncheck f(1) <= 10 V");
        run_and_compare(&mut ws, "a", "w = 1 V\nx = 1 V");
    }

    #[test]
    fn a_change_reaches_a_cell_through_a_definition_in_a_third_cell() {
        let mut ws = Worksheet::new();
        run_and_compare(&mut ws, "given", "given b = 3 ± 5 %");
        run_and_compare(&mut ws, "middle", "a = b * 2");
        run_and_compare(&mut ws, "reader", "c = a + 1\ncheck c <= 8");
        let ex = run_and_compare(&mut ws, "given", "given b = 4 ± 5 %");
        let updated: Vec<&str> = ex.updated.iter().map(|u| u.report.cell.as_str()).collect();
        assert_eq!(updated, ["middle", "reader"]);
    }

    /// Every name the generated lines use, so that most runs succeed.
    const BASE: &str = "given a = 2 ± 5 %\ngiven b = 3 .. 4\nc = a * b\nd = c + 1\n\
                        g(t) = t * a\nu = reg.linear(12 V, vout: 5 V, iout: b * 10 mA)";

    /// Lines over a few shared names, mostly dimensionless so most runs succeed; a unit
    /// mismatch, a cycle or a parse error now and then.
    fn line() -> impl Strategy<Value = String> {
        let name = prop::sample::select(vec!["a", "b", "c", "d"]);
        let operand = prop_oneof![
            4 => name.clone().prop_map(str::to_string),
            2 => (1u32..9).prop_map(|n| n.to_string()),
            1 => name.clone().prop_map(|n| format!("g({n})")),
            1 => Just("u.loss / 1 W".to_string()),
        ];
        let expr = (
            operand.clone(),
            prop::sample::select(vec!["+", "-", "*", "/"]),
            operand,
        )
            .prop_map(|(l, op, r)| format!("{l} {op} {r}"));
        prop_oneof![
            4 => (name.clone(), expr.clone()).prop_map(|(n, e)| format!("{n} = {e}")),
            2 => (name.clone(), 1u32..9, 1u32..30)
                .prop_map(|(n, v, t)| format!("given {n} = {v} ± {t} %")),
            1 => (name.clone(), 1u32..5).prop_map(|(n, v)| format!("given {n} = {v} .. {}", v + 2)),
            1 => (expr.clone(), 1u32..20).prop_map(|(e, l)| format!("check {e} <= {l}")),
            1 => expr.clone(),
            1 => name.clone().prop_map(|n| format!("g(t) = t * {n}")),
            1 => (name.clone(), name.clone())
                .prop_map(|(x, y)| format!("sweep {x} over 1 .. 2 steps 3: {y}")),
            1 => name.clone().prop_map(|n| format!("u = reg.linear(12 V, vout: 5 V, iout: {n} * 10 mA)")),
            1 => Just("q = = 1".to_string()),
            1 => Just("h = 2 V + 1".to_string()),
        ]
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(300))]
        #[test]
        fn a_run_reports_what_evaluating_every_cell_reports(
            runs in prop::collection::vec(
                (0usize..4, prop::collection::vec(line(), 1..4)),
                1..10,
            )
        ) {
            let mut ws = Worksheet::new();
            run_and_compare(&mut ws, "base", BASE);
            for (key, lines) in runs {
                run_and_compare(&mut ws, &format!("k{key}"), &lines.join("\n"));
            }
        }
    }
}
