//! What one `execute_request` publishes, computed from the worksheet's `Execution` on the
//! evaluator thread, before anything is sent: an interrupted or failed run publishes only its
//! error, so every display stays as it was.

use crate::render;
use serde_json::{Map, Value};
use worksheet_lang::diagnostic;
use worksheet_lang::results::CellReport;
use worksheet_lang::Execution;

/// The display id of a cell's result block: stable for one cell key, so later runs of other
/// cells can update the block in place.
pub(crate) fn display_id(cell_key: &str) -> String {
    format!("headroom-{cell_key}")
}

/// The display id of the `index`-th sweep chart of a cell.
pub(crate) fn chart_id(cell_key: &str, index: usize) -> String {
    format!("headroom-{cell_key}-chart-{index}")
}

#[derive(Debug)]
pub(crate) struct Update {
    pub display_id: String,
    pub bundle: Map<String, Value>,
}

#[derive(Debug)]
pub(crate) enum Outcome {
    Failed {
        ename: String,
        evalue: String,
        traceback: Vec<String>,
    },
    Done {
        display_id: String,
        /// The result block (`display_data`), absent when the cell has nothing to show.
        block: Option<Map<String, Value>>,
        /// The cell's sweep charts, each a `display_data` of its own, with its display id.
        charts: Vec<Update>,
        /// The values of bare expressions (`execute_result`).
        shown: Option<Map<String, Value>>,
        /// The cell's warnings, also written to stderr for consoles.
        stderr: Option<String>,
        /// Blocks (and charts) of other cells whose results changed.
        updates: Vec<Update>,
    },
}

impl Outcome {
    pub fn of(ex: &Execution) -> Outcome {
        let report = &ex.report;
        // An interrupted run has no place in the source to point at.
        if ex.interrupted {
            let evalue = "the run was interrupted; the worksheet and its results are unchanged";
            return Outcome::Failed {
                ename: "Interrupted".into(),
                evalue: evalue.into(),
                traceback: vec![format!("Interrupted: {evalue}")],
            };
        }
        if let Some((ename, evalue, traceback)) = render::error_traceback(report) {
            return Outcome::Failed {
                ename,
                evalue,
                traceback,
            };
        }
        let block = render::bundle(report);
        let has_block = block
            .get("text/plain")
            .and_then(Value::as_str)
            .is_some_and(|t| !t.trim().is_empty());
        let mut updates = Vec::new();
        for u in &ex.updated {
            updates.push(Update {
                display_id: display_id(&u.report.cell),
                bundle: render::bundle(&u.report),
            });
            updates.extend(charts(&u.report));
        }
        Outcome::Done {
            display_id: display_id(&report.cell),
            block: has_block.then_some(block),
            charts: charts(report),
            shown: render::shown_bundle(report),
            stderr: stderr_text(report),
            updates,
        }
    }
}

fn charts(report: &CellReport) -> Vec<Update> {
    render::charts(report)
        .into_iter()
        .enumerate()
        .map(|(i, bundle)| Update {
            display_id: chart_id(&report.cell, i),
            bundle,
        })
        .collect()
}

/// The warnings of a cell as console text: the built-ins' warnings and warning diagnostics
/// (with their caret excerpt), one after another.
fn stderr_text(report: &CellReport) -> Option<String> {
    let mut out = String::new();
    for w in &report.warnings {
        out.push_str(&format!("warning: {}: {}\n", w.source, w.text));
    }
    for d in report.diagnostics.iter().filter(|d| !d.is_error()) {
        out.push_str(&diagnostic::render(&report.source, d));
        out.push('\n');
    }
    (!out.is_empty()).then_some(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use worksheet_lang::ast::Span;
    use worksheet_lang::results::WarningRow;
    use worksheet_lang::{DiagKind, Diagnostic};

    fn execution(report: CellReport) -> Execution {
        Execution {
            report,
            updated: Vec::new(),
            interrupted: false,
        }
    }

    #[test]
    fn an_error_publishes_only_the_error_with_its_caret() {
        let source = "x = 12 V + 3 A".to_string();
        let report = CellReport {
            cell: "c1".into(),
            diagnostics: vec![Diagnostic::error(
                DiagKind::DimensionMismatch,
                Span { start: 4, end: 14 },
                "a voltage plus a current",
            )],
            source,
            ..CellReport::default()
        };
        match Outcome::of(&execution(report)) {
            Outcome::Failed {
                ename, traceback, ..
            } => {
                assert_eq!(ename, "DimensionMismatch");
                // The excerpt underlines columns 5 to 14 of line 1.
                assert!(
                    traceback.iter().any(|l| l.ends_with("|     ^^^^^^^^^^")),
                    "{traceback:?}"
                );
            }
            other => panic!("expected a failure, got {other:?}"),
        }
    }

    #[test]
    fn an_interrupted_run_is_a_failure_even_without_a_diagnostic() {
        let mut ex = execution(CellReport::default());
        ex.interrupted = true;
        assert!(
            matches!(Outcome::of(&ex), Outcome::Failed { ename, .. } if ename == "Interrupted")
        );
    }

    #[test]
    fn warnings_go_to_stderr_and_an_empty_cell_has_no_block() {
        let report = CellReport {
            cell: "c7".into(),
            warnings: vec![WarningRow {
                source: "u1".into(),
                text: "in dropout at vin = 5 V".into(),
            }],
            ..CellReport::default()
        };
        match Outcome::of(&execution(report)) {
            Outcome::Done {
                display_id, stderr, ..
            } => {
                assert_eq!(display_id, "headroom-c7");
                assert_eq!(
                    stderr.as_deref(),
                    Some("warning: u1: in dropout at vin = 5 V\n")
                );
            }
            other => panic!("expected success, got {other:?}"),
        }
        match Outcome::of(&execution(CellReport::default())) {
            Outcome::Done {
                block,
                shown,
                stderr,
                ..
            } => {
                assert!(block.is_none() && shown.is_none() && stderr.is_none());
            }
            other => panic!("expected success, got {other:?}"),
        }
    }
}
