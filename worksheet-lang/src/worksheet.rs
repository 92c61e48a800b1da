//! A worksheet session: cells, their definitions, and the dependency graph between them.
//!
//! STUB: the API is the contract; the bodies will be replaced by the evaluator.

use crate::results::{CellReport, Change};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;

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
    pub report: CellReport,
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

#[derive(Debug, Clone, PartialEq, Default)]
pub struct Completion {
    pub matches: Vec<String>,
    /// Byte range of `source` the matches replace.
    pub start: usize,
    pub end: usize,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Inspection {
    /// Plain text (Markdown-flavoured) documentation.
    pub text: String,
}

/// One session. No global state: two `Worksheet`s never see each other.
#[derive(Debug, Default)]
pub struct Worksheet {}

impl Worksheet {
    pub fn new() -> Self {
        Self::default()
    }

    /// Runs a cell. `cell` is the front end's cell id if it sent one; otherwise the
    /// worksheet recognises the cell by the names it defines, or makes a new key.
    pub fn execute(&mut self, cell: Option<&str>, source: &str, interrupt: &Interrupt) -> Execution {
        let _ = interrupt;
        Execution {
            report: CellReport {
                cell: cell.unwrap_or("cell-1").to_string(),
                source: source.to_string(),
                ..CellReport::default()
            },
            updated: Vec::new(),
            interrupted: false,
        }
    }

    /// Overrides a `given` from outside (`--set NAME=VALUE`); `value` uses the language's
    /// literal syntax. Takes effect on the next run of the cell that defines it.
    pub fn set_override(&mut self, name: &str, value: &str) -> Result<(), crate::Diagnostic> {
        let _ = (name, value);
        Ok(())
    }

    pub fn complete(&self, source: &str, cursor: usize) -> Completion {
        let _ = (source, cursor);
        Completion::default()
    }

    pub fn inspect(&self, source: &str, cursor: usize) -> Option<Inspection> {
        let _ = (source, cursor);
        None
    }
}
