//! What one `execute_request` publishes, computed from the worksheet's `Execution` on the
//! evaluator thread, before anything is sent: an interrupted or failed run publishes only its
//! error, so every display stays as it was.

use crate::outputs::{cell_outputs, display_id, CellOutput};
use serde_json::{Map, Value};
use worksheet_lang::Execution;

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
    /// What to publish, from the one description of a cell's outputs that `headroom run`
    /// writes into notebooks too (`crate::outputs`).
    pub fn of(ex: &Execution) -> Outcome {
        let o = cell_outputs(ex);
        let id = display_id(&ex.report.cell);
        let mut block = None;
        let mut charts = Vec::new();
        let mut shown = None;
        let mut stderr = None;
        for out in o.outputs {
            match out {
                CellOutput::Error {
                    ename,
                    evalue,
                    traceback,
                } => {
                    return Outcome::Failed {
                        ename,
                        evalue,
                        traceback,
                    }
                }
                CellOutput::Display { display_id, data } if display_id == id => block = Some(data),
                CellOutput::Display { display_id, data } => charts.push(Update {
                    display_id,
                    bundle: data,
                }),
                CellOutput::Result { data } => shown = Some(data),
                CellOutput::Stderr { text } => stderr = Some(text),
            }
        }
        Outcome::Done {
            display_id: id,
            block,
            charts,
            shown,
            stderr,
            updates: o
                .updates
                .into_iter()
                .map(|u| Update {
                    display_id: u.display_id,
                    bundle: u.data,
                })
                .collect(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use worksheet_lang::ast::Span;
    use worksheet_lang::results::CellReport;
    use worksheet_lang::results::WarningRow;
    use worksheet_lang::{DiagKind, Diagnostic};

    fn execution(report: CellReport) -> Execution {
        Execution {
            report: report.into(),
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
