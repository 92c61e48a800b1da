//! What one cell run shows, as a list of outputs: the one description that the kernel
//! publishes on iopub and `headroom run` writes into the notebook, so both stay identical.
//!
//! Order (as the kernel publishes it): the result block (`display_data`, with the cell's
//! display id), one `display_data` per sweep chart (each with a display id of its own), the
//! bare-expression values (`execute_result`), the warnings (a `stderr` stream). A cell with an error, or an interrupted run, shows only the error. The blocks of
//! other cells that the run changed come as display updates.

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

/// The display id of a cell's `n`-th sweep chart (from 0), updated with its result block.
pub(crate) fn chart_display_id(cell_key: &str, n: usize) -> String {
    format!("headroom-{cell_key}-chart-{n}")
}

/// One output of a cell, in Jupyter's terms.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum CellOutput {
    /// `display_data` (with `transient.display_id` on the wire; nbformat has no transient).
    Display {
        display_id: String,
        data: Map<String, Value>,
    },
    /// `execute_result`: the values of bare expressions.
    Result { data: Map<String, Value> },
    /// A `stderr` stream with the cell's warnings.
    Stderr { text: String },
    /// `error`.
    Error {
        ename: String,
        evalue: String,
        traceback: Vec<String>,
    },
}

/// A new bundle for another cell's result block (`update_display_data`).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct DisplayUpdate {
    pub display_id: String,
    pub data: Map<String, Value>,
}

#[derive(Debug, Clone, PartialEq)]
pub(crate) struct CellOutputs {
    pub outputs: Vec<CellOutput>,
    pub updates: Vec<DisplayUpdate>,
}

/// The outputs of one cell run, in the order the kernel publishes them.
pub(crate) fn cell_outputs(ex: &Execution) -> CellOutputs {
    let report = &ex.report;
    let failed = |ename: String, evalue: String, traceback: Vec<String>| CellOutputs {
        outputs: vec![CellOutput::Error {
            ename,
            evalue,
            traceback,
        }],
        updates: Vec::new(),
    };
    // An interrupted run has no place in the source to point at.
    if ex.interrupted {
        let evalue = "the run was interrupted; the worksheet and its results are unchanged";
        return failed(
            "Interrupted".into(),
            evalue.into(),
            vec![format!("Interrupted: {evalue}")],
        );
    }
    if let Some((ename, evalue, traceback)) = render::error_traceback(report) {
        return failed(ename, evalue, traceback);
    }
    let mut outputs = Vec::new();
    let (block, charts) = render::bundle_and_charts(report);
    let has_block = block
        .get("text/plain")
        .and_then(Value::as_str)
        .is_some_and(|t| !t.trim().is_empty());
    if has_block {
        outputs.push(CellOutput::Display {
            display_id: display_id(&report.cell),
            data: block,
        });
    }
    for (n, data) in charts.into_iter().enumerate() {
        outputs.push(CellOutput::Display {
            display_id: chart_display_id(&report.cell, n),
            data,
        });
    }
    if let Some(data) = render::shown_bundle(report) {
        outputs.push(CellOutput::Result { data });
    }
    if let Some(text) = stderr_text(report) {
        outputs.push(CellOutput::Stderr { text });
    }
    let mut updates = Vec::new();
    for u in &ex.updated {
        let (block, charts) = render::bundle_and_charts(&u.report);
        updates.push(DisplayUpdate {
            display_id: display_id(&u.report.cell),
            data: block,
        });
        for (n, data) in charts.into_iter().enumerate() {
            updates.push(DisplayUpdate {
                display_id: chart_display_id(&u.report.cell, n),
                data,
            });
        }
    }
    CellOutputs { outputs, updates }
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

impl CellOutput {
    /// The output as nbformat 4 stores it. Keys are in the sorted order Jupyter writes, and
    /// text is split into lines as Jupyter writes it, so a notebook saved again by JupyterLab
    /// shows no spurious change.
    pub fn to_nbformat(&self, execution_count: Option<u64>) -> Value {
        let mut m = Map::new();
        match self {
            CellOutput::Display { data, .. } => {
                m.insert("data".into(), split_text(data));
                m.insert("metadata".into(), Value::Object(Map::new()));
                m.insert("output_type".into(), "display_data".into());
            }
            CellOutput::Result { data } => {
                m.insert("data".into(), split_text(data));
                m.insert("execution_count".into(), execution_count.into());
                m.insert("metadata".into(), Value::Object(Map::new()));
                m.insert("output_type".into(), "execute_result".into());
            }
            CellOutput::Stderr { text } => {
                m.insert("name".into(), "stderr".into());
                m.insert("output_type".into(), "stream".into());
                m.insert("text".into(), crate::notebook::ipynb::lines_value(text));
            }
            CellOutput::Error {
                ename,
                evalue,
                traceback,
            } => {
                m.insert("ename".into(), ename.clone().into());
                m.insert("evalue".into(), evalue.clone().into());
                m.insert("output_type".into(), "error".into());
                m.insert("traceback".into(), traceback.clone().into());
            }
        }
        Value::Object(m)
    }
}

/// A MIME bundle with its `text/*` and SVG strings as lists of lines, and every object's keys in
/// sorted order, as Jupyter saves a notebook (so saving it again there changes nothing).
fn split_text(data: &Map<String, Value>) -> Value {
    let mut keys: Vec<&String> = data.keys().collect();
    keys.sort();
    let mut out = Map::new();
    for k in keys {
        let v = match &data[k] {
            // nbformat also splits SVG (`_non_text_split_mimes`), not base64 images.
            Value::String(s) if k.starts_with("text/") || k == "image/svg+xml" => {
                crate::notebook::ipynb::lines_value(s)
            }
            other => sorted(other),
        };
        out.insert(k.clone(), v);
    }
    Value::Object(out)
}

/// A JSON value with the keys of every object in it sorted.
fn sorted(v: &Value) -> Value {
    match v {
        Value::Object(m) => {
            let mut keys: Vec<&String> = m.keys().collect();
            keys.sort();
            Value::Object(
                keys.into_iter()
                    .map(|k| (k.clone(), sorted(&m[k])))
                    .collect(),
            )
        }
        Value::Array(xs) => Value::Array(xs.iter().map(sorted).collect()),
        other => other.clone(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use worksheet_lang::{Interrupt, Worksheet};

    fn run(source: &str) -> CellOutputs {
        let mut ws = Worksheet::new();
        cell_outputs(&ws.execute(Some("c1"), source, &Interrupt::new()))
    }

    #[test]
    fn a_block_comes_before_the_shown_value() {
        let out = run("given v = 12 V\ni = v / 4 Ω\ni");
        let kinds: Vec<&str> = out
            .outputs
            .iter()
            .map(|o| match o {
                CellOutput::Display { .. } => "display",
                CellOutput::Result { .. } => "result",
                CellOutput::Stderr { .. } => "stderr",
                CellOutput::Error { .. } => "error",
            })
            .collect();
        assert_eq!(kinds, ["display", "result"]);
        let nb = out.outputs[1].to_nbformat(Some(3));
        assert_eq!(nb["execution_count"], 3);
        assert_eq!(nb["output_type"], "execute_result");
        // 12 V / 4 Ω = 3 A (Ohm's law).
        assert!(
            nb["data"]["text/plain"][0]
                .as_str()
                .is_some_and(|t| t.starts_with("3.00 A")),
            "{nb}"
        );
    }

    #[test]
    fn an_error_shows_only_the_error() {
        let out = run("given v = 12 V\nx = v + 3 A");
        assert_eq!(out.outputs.len(), 1);
        let nb = out.outputs[0].to_nbformat(Some(1));
        assert_eq!(nb["output_type"], "error");
        assert!(nb.get("execution_count").is_none());
    }

    #[test]
    fn display_data_in_nbformat_has_no_transient_and_split_text() {
        let out = run("given v = 12 V");
        let nb = out.outputs[0].to_nbformat(Some(1));
        assert_eq!(nb["output_type"], "display_data");
        assert!(nb.get("transient").is_none() && nb.get("execution_count").is_none());
        assert!(nb["data"]["text/plain"].is_array());
        assert!(nb["data"][render::RESULTS_MIME].is_object());
    }
}
